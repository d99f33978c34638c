"""The promise the tool rests on: where the written chain returns, the rewritten one returns the
same frame; where the written chain raises, the rewritten one may raise or not.

Random frames (int64, float with NaN, pandas 3 `str` and nullable strings with missing values,
categoricals ordered and not, booleans, nullable Int64 with NA, naive and tz-aware datetimes,
object columns of Decimal values with zeros, of mixed types and of mixed tz-aware and naive
timestamps; a unique, duplicate, unsorted or MultiIndex row index) and random chains in every
form (outer masks included, which are barriers; guards and the steps they guard, which may
raise) are rendered to source, rewritten into any plan the planner may choose for the frame's
dtypes (`chainlint.plan.totality`): an order, with neighbours fused into one mask where the
planner lets them join (`&` in a lambda, `and` in a query; in a statement run, one statement),
and both sources are executed on the frame. pandas is the reference: `pandas.testing.assert_frame_equal` with strict dtypes; the
index's class and `freq` are the documented exception (README: the index after a reorder).
Inputs on which the written chain raises are kept: they show the rewrite may raise there
(the test runs its own generated code; chainlint itself never executes what it analyses).
"""

from __future__ import annotations

import decimal
import warnings

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chainlint.engine.run import analyse_source
from chainlint.model import ChainForm
from chainlint.parse.source import text_source
from chainlint.plan.chains import may_join, plan_segments, precedence
from chainlint.plan.totality import ANY, judge
from chainlint.rewrite.plans import plan_edit
from chainlint.rewrite.permute import apply_edits
from chainlint.rewrite.verify import verify

_TIMES = pd.Timestamp("2026-01-01") + pd.to_timedelta(np.arange(10), unit="D")
_MIXED = np.array([1, "a", None, 2.5, True, decimal.Decimal("1.5")], dtype=object)
_TZMIX = np.array([pd.Timestamp("2026-01-03"), pd.Timestamp("2026-01-09", tz="UTC"), None], dtype=object)


@st.composite
def frames(draw):
    rows = draw(st.integers(0, 30))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))

    def holes(values, share=0.2):  # type: ignore[no-untyped-def]
        values = np.array(values, dtype=object)
        values[rng.random(rows) < share] = None
        return values

    floats = rng.normal(0, 5, rows).round(1)
    floats[rng.random(rows) < 0.2] = np.nan
    words = np.array(["apple", "apricot", "banana", "cherry", "date"], dtype=object)[rng.integers(0, 5, rows)]
    nullable = pd.array(rng.integers(0, 6, rows), dtype="Int64")
    nullable[rng.random(rows) < 0.2] = pd.NA
    times = _TIMES[rng.integers(0, 10, rows)]
    objects = holes(words)
    objects[rng.random(rows) < 0.1] = np.nan
    frame = pd.DataFrame(
        {
            "i": rng.integers(0, 10, rows),
            "f": floats,
            "s": pd.array(holes(words), dtype="str"),
            "ns": pd.array(holes(words), dtype=draw(st.sampled_from(["string", pd.StringDtype("pyarrow")]))),
            "c": pd.Categorical(np.array(["x", "y", "z"], dtype=object)[rng.integers(0, 3, rows)]),
            "oc": pd.Categorical(holes(np.array(["x", "y", "z"], dtype=object)[rng.integers(0, 3, rows)]), ordered=True),
            "b": rng.random(rows) < 0.5,
            "n": nullable,
            "two words": rng.integers(0, 4, rows),
            "t": times,
            "tz": times.tz_localize("UTC"),
            "qty": np.array([decimal.Decimal(int(v)) for v in rng.integers(0, 3, rows)], dtype=object),
            "amount": np.array([decimal.Decimal(int(v)) / 4 for v in rng.integers(0, 40, rows)], dtype=object),
            "mixed": _MIXED[rng.integers(0, len(_MIXED), rows)],
            "o": pd.Series(objects, dtype=object),
            "tzmix": _TZMIX[rng.integers(0, len(_TZMIX), rows)],
            "e": rng.integers(-2, 3, rows),
        }
    )
    index = draw(st.sampled_from(["range", "duplicate", "unsorted", "multi"]))
    if index == "duplicate":
        frame.index = rng.integers(0, max(rows // 2, 1), rows)
    elif index == "unsorted":
        frame.index = rng.permutation(rows) * 3
    elif index == "multi":
        frame.index = pd.MultiIndex.from_arrays([rng.integers(0, 3, rows), np.arange(rows)], names=["k", "pos"])
    return frame


def _masks(d: str) -> st.SearchStrategy[str]:
    """Row-wise masks over the frame named `d`, as a user would write them."""
    return st.one_of(
        st.builds(lambda op, v: f"{d}.i {op} {v}", st.sampled_from(["==", "!=", "<", ">=", ">"]), st.integers(0, 9)),
        st.builds(lambda op, v: f"{d}['f'] {op} {v}", st.sampled_from(["<", ">", "<=", "!="]), st.integers(-5, 5)),
        st.builds(lambda v: f"{d}.s == {v!r}", st.sampled_from(["apple", "banana", "kiwi"])),
        st.builds(lambda v: f"{d}.s.str.startswith({v!r})", st.sampled_from(["a", "b", "ch"])),
        st.builds(lambda v: f"~{d}.s.isin({v!r})", st.lists(st.sampled_from(["apple", "date"]), min_size=1, max_size=2)),
        st.just(f"{d}.f.isna()"),
        st.just(f"{d}.s.notna()"),
        st.builds(lambda v: f"{d}.c == {v!r}", st.sampled_from(["x", "y"])),
        st.just(f"{d}.b == True"),
        st.builds(lambda v: f"{d}.n.isin({v!r})", st.lists(st.integers(0, 5), min_size=1, max_size=3)),
        st.builds(lambda lo, hi: f"{d}['two words'].between({lo}, {hi})", st.integers(0, 2), st.integers(1, 3)),
        st.builds(lambda a, b: f"({d}.i > {a}) | ({d}.f < {b})", st.integers(0, 9), st.integers(-3, 3)),
        # Guards and what they guard (issue 12, class A): each may raise without its guard.
        st.sampled_from([
            f"{d}.qty != 0", f"{d}.amount / {d}.qty > 2", f"{d}.mixed > 1", f"{d}.mixed.notna()",
            f"{d}.o.notna()", f"{d}.o.str.contains('ap')", f"{d}.o.str.startswith('b', na=False)",
            f"{d}.e >= 0", f"{d}.i ** {d}.e > 1", f"{d}.c < 'y'", f"{d}.oc > 'x'", f"{d}.tzmix > '2026-01-05'",
            f"{d}.tzmix.notna()", f"{d}.tz > '2026-01-05'", f"{d}.t.between('2026-01-03', '2026-01-08')",
            f"{d}.ns.str.contains('ap')", f"{d}.ns == 'apple'", f"{d}.oc.notna()", f"{d}.i / {d}.e > 1",
        ]),
        # Values parsed as numbers (issue 14): movable on text, numbers and datetimes; never on objects.
        st.sampled_from([
            f"pd.to_numeric({d}.s, errors='coerce').notna()", f"pd.to_numeric({d}['ns'], errors='coerce').isna()",
            f"pd.to_numeric({d}.mixed, errors='coerce').notna()", f"pd.to_numeric({d}.o, errors='coerce').isna()",
            f"pd.to_numeric({d}.t, errors='coerce').notna()", f"pd.to_numeric({d}.f, errors='coerce').notna()",
        ]),
    )


QUERIES = st.sampled_from([
    "i > 3", "i <= 6 and f > -2", "s == 'apple' or i == 2", "`two words` in [1, 2]", "not (i == 4)", "c == 'z'",
    "qty != 0", "amount / qty > 2", "mixed > 1", "e >= 0", "i ** e > 1", "c < 'y'", "t > '2026-01-04'",
])


@st.composite
def chains(draw):
    """(source of a module computing `out` from `df`, number of steps). Statement runs come
    under one name (`out = out[...]`) or renamed (`s0 = df[...]`, `s1 = s0[...]`), with comments
    their statements own, a statement the run steps over, at module level or in a function:
    the planner may join their steps into one statement."""
    count = draw(st.integers(2, 5))
    form = draw(st.sampled_from(["method", "statements"]))
    renamed = form == "statements" and draw(st.booleans())
    targets = [f"s{k}" for k in range(count - 1)] + ["out"] if renamed else ["out"] * count
    steps = []
    for position in range(count):
        kind = draw(st.sampled_from(["lambda", "loc_lambda", "mask", "loc_mask", "query", "dropna"]))
        frame = "df" if form == "method" or position == 0 else targets[position - 1]
        if kind == "lambda":
            steps.append(f"[lambda t: {draw(_masks('t'))}]")
        elif kind == "loc_lambda":
            steps.append(f".loc[lambda t: {draw(_masks('t'))}]")
        elif kind == "mask":
            steps.append(f"[{draw(_masks(frame))}]")
        elif kind == "loc_mask":
            steps.append(f".loc[{draw(_masks(frame))}, :]" if draw(st.booleans()) else f".loc[{draw(_masks(frame))}]")
        elif kind == "query":
            steps.append(f".query({draw(QUERIES)!r})")
        else:
            steps.append(f".dropna(subset={draw(st.sampled_from([['f'], ['s'], ['f', 's'], ['n'], ['o'], ['qty', 'mixed']]))!r})")
    if form == "method":
        layout = draw(st.sampled_from(["inline", "lines"]))
        if layout == "inline":
            body = "out = df" + "".join(steps)
        else:
            body = "out = (\n    df\n" + "".join(f"    {step}  # note {k}\n" for k, step in enumerate(steps)) + ")"
    else:
        lines = []
        for position, step in enumerate(steps):
            frame = "df" if position == 0 else targets[position - 1]
            extra = draw(st.sampled_from(["", "above", "after", "between"]))
            if extra == "above":
                lines.append(f"# about step {position}")
            elif extra == "between" and position > 0:
                lines.append("note = 'stepped over'")
            lines.append(f"{targets[position]} = {frame}{step}" + (f"  # step {position}" if extra == "after" else ""))
        if draw(st.booleans()):
            body = "def run(df):\n" + "".join(f"    {line}\n" for line in lines) + "    return out\n\n\nout = run(df)"
        else:
            body = "\n".join(lines)
    return "import pandas as pd\n" + body + "\n", count


def _run(source: str, frame: pd.DataFrame) -> pd.DataFrame | Exception:
    scope = {"df": frame.copy()}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            exec(compile(source, "<generated>", "exec"), scope)
        except Exception as error:  # noqa: BLE001 - the comparison is the point
            return error
    return scope["out"]


def _planner_groups(chain, dtypes, data) -> tuple[tuple[int, ...], ...]:  # type: ignore[no-untyped-def]
    """Any plan the planner may choose for these dtypes: runs between the steps that stay,
    each step in a group after the groups holding the steps its precedence limit keeps in front
    of it, and steps joined into one mask only where the planner lets them join."""
    limits = tuple(judge(step.predicate, dtypes, "frame") if step.movable else None for step in chain.steps)
    if chain.form is ChainForm.MASK and any(limit is None or limit.moves != ANY for limit in limits):
        return (tuple(range(len(chain.steps))),)  # the planner keeps such a mask whole
    joinable = may_join(chain, limits, dtypes)
    groups: list[tuple[int, ...]] = []
    done = 0
    for segment in plan_segments(limits):
        before = precedence(segment, limits, chain)
        remaining = list(segment)
        while remaining:
            ready = [s for s in remaining if not before.get(s, 0) & ~done]
            group = [data.draw(st.sampled_from(ready))]
            for other in ready:
                if other not in group and joinable(sum(1 << s for s in [*group, other])) and data.draw(st.booleans()):
                    group.append(other)
            group.sort()
            for step in group:
                remaining.remove(step)
                done |= 1 << step
            groups.append(tuple(group))
    return tuple(groups)


@settings(max_examples=500, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(frames(), chains(), st.data())
def test_rewritten_chain_keeps_the_promise(frame, case, data) -> None:
    source, count = case
    text = text_source("generated.py", source)
    (chain,) = analyse_source(text).chains
    assert len(chain.steps) == count, source
    dtypes = {name: str(dtype) for name, dtype in frame.dtypes.items()}
    groups = _planner_groups(chain, dtypes, data)
    written = _run(source, frame)
    if groups == tuple((i,) for i in range(count)):
        return
    edit = plan_edit(text, chain, groups)
    rewritten = apply_edits(source, [edit])
    verify(text, rewritten, [(chain, groups)])
    planned = _run(rewritten, frame)
    if isinstance(written, Exception):
        return  # where the written code raises, the rewrite may raise or not
    assert not isinstance(planned, Exception), (rewritten, type(planned).__name__, planned)
    pd.testing.assert_frame_equal(planned, written, check_index_type="equiv", check_freq=False)


@st.composite
def written_masks(draw):
    """(source of a module filtering `df` with one mask written whole, number of conjuncts)."""
    count = draw(st.integers(2, 4))
    form = draw(st.sampled_from(["mask", "loc_lambda", "query"]))
    if form == "query":
        parts = draw(st.lists(st.sampled_from(["i > 3", "f > -2", "s == 'apple'", "`two words` in [1, 2]", "c == 'z'",
                                               "qty != 0", "amount / qty > 2", "mixed > 1", "e >= 0", "t > '2026-01-04'"]),
                              min_size=count, max_size=count, unique=True))
        return f"import pandas as pd\nout = df.query({' and '.join(parts)!r})\n", count
    name = "df" if form == "mask" else "t"
    parts = [draw(_masks(name)) for _ in range(count)]
    body = " & ".join(f"({p})" for p in parts)
    key = body if form == "mask" else f"lambda t: {body}"
    return f"import pandas as pd\nout = df.loc[{key}]\n", count


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(frames(), written_masks(), st.data())
def test_a_split_mask_keeps_the_promise(frame, case, data) -> None:
    """A mask written whole, split by the rewriter into any plan the planner may choose."""
    source, count = case
    text = text_source("generated.py", source)
    chains = analyse_source(text).chains
    if len(chains) != 1 or chains[0].form is not ChainForm.MASK:
        return  # a mask with a conjunct that may not move stays one step, no chain
    (chain,) = chains
    assert len(chain.steps) == count, source
    dtypes = {name: str(dtype) for name, dtype in frame.dtypes.items()}
    groups = _planner_groups(chain, dtypes, data)
    written = _run(source, frame)
    if groups == (tuple(range(count)),):
        return
    edit = plan_edit(text, chain, groups)
    rewritten = apply_edits(source, [edit])
    verify(text, rewritten, [(chain, groups)])
    planned = _run(rewritten, frame)
    if isinstance(written, Exception):
        return  # where the written code raises, the rewrite may raise or not
    assert not isinstance(planned, Exception), (rewritten, type(planned).__name__, planned)
    pd.testing.assert_frame_equal(planned, written, check_index_type="equiv", check_freq=False)
