"""The law the tool rests on: a rewritten chain gives the same frame as the written one.

Random frames (int64, float with NaN, pandas 3 `str` with missing values, categoricals,
booleans, nullable Int64 with NA, duplicate index labels) and random chains in every form
(outer masks included, which are barriers) are rendered to source, permuted by the rewriter
within their segments, and both sources are executed
on the frame. pandas is the reference: `pandas.testing.assert_frame_equal`. (The test runs its
own generated code; chainlint itself never executes what it analyses.)
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from chainlint.analysis.run import analyse_source
from chainlint.parse.source import text_source
from chainlint.rewrite.permute import apply_edits, chain_edit
from chainlint.rewrite.verify import verify


@st.composite
def frames(draw):
    rows = draw(st.integers(0, 30))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    index = rng.integers(0, max(rows // 2, 1), rows) if draw(st.booleans()) else np.arange(rows)
    floats = rng.normal(0, 5, rows).round(1)
    floats[rng.random(rows) < 0.2] = np.nan
    words = np.array(["apple", "apricot", "banana", "cherry", "date"], dtype=object)[rng.integers(0, 5, rows)]
    words[rng.random(rows) < 0.2] = None
    nullable = pd.array(rng.integers(0, 6, rows), dtype="Int64")
    nullable[rng.random(rows) < 0.2] = pd.NA
    return pd.DataFrame(
        {
            "i": rng.integers(0, 10, rows),
            "f": floats,
            "s": pd.array(words, dtype="str"),
            "c": pd.Categorical(np.array(["x", "y", "z"], dtype=object)[rng.integers(0, 3, rows)]),
            "b": rng.random(rows) < 0.5,
            "n": nullable,
            "two words": rng.integers(0, 4, rows),
        },
        index=index,
    )


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
    )


QUERIES = st.sampled_from(["i > 3", "i <= 6 and f > -2", "s == 'apple' or i == 2", "`two words` in [1, 2]", "not (i == 4)", "c == 'z'"])


@st.composite
def chains(draw):
    """(source of a module computing `out` from `df`, number of steps)."""
    count = draw(st.integers(2, 5))
    form = draw(st.sampled_from(["method", "statements"]))
    steps = []
    for position in range(count):
        kind = draw(st.sampled_from(["lambda", "loc_lambda", "mask", "loc_mask", "query", "dropna"]))
        frame = "df" if form == "method" or position == 0 else "out"
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
            steps.append(f".dropna(subset={draw(st.sampled_from([['f'], ['s'], ['f', 's'], ['n']]))!r})")
    if form == "method":
        layout = draw(st.sampled_from(["inline", "lines"]))
        if layout == "inline":
            body = "out = df" + "".join(steps)
        else:
            body = "out = (\n    df\n" + "".join(f"    {step}  # note {k}\n" for k, step in enumerate(steps)) + ")"
    else:
        body = f"out = df{steps[0]}\n" + "".join(f"out = out{step}\n" for step in steps[1:])
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


@settings(max_examples=150, deadline=None)
@given(frames(), chains(), st.data())
def test_rewritten_chain_gives_the_same_frame(frame, case, data) -> None:
    source, count = case
    text = text_source("generated.py", source)
    (chain,) = analyse_source(text).chains
    assert len(chain.steps) == count, source
    order = list(range(count))
    for segment in chain.segments():  # any order the rewriter may choose: within segments
        for position, index in zip(segment, data.draw(st.permutations(segment))):
            order[position] = index
    order = tuple(order)
    assume(order != tuple(range(count)))
    edit = chain_edit(text, chain, order)
    rewritten = apply_edits(source, [edit])
    verify(text, rewritten, [(chain, order)])
    written, planned = _run(source, frame), _run(rewritten, frame)
    if isinstance(written, Exception):
        return  # a chain that fails as written proves nothing about the order
    assert not isinstance(planned, Exception), (rewritten, planned)
    pd.testing.assert_frame_equal(planned, written)
