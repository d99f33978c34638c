"""The rewrite promise attacked end to end: `check --fix` on modules over frames whose data the
test controls, both the written and the fixed module executed by pandas (the reference for what
the code does) on the profiled data and on hostile variants of it, compared with
`pandas.testing.assert_frame_equal(check_exact=True)` and the type of any exception raised.

Each test is a case that once broke the promise (the module it names in its docstring is where
the fix lives). The test runs its own generated code; chainlint itself never executes it.
"""

from __future__ import annotations

import json
import re
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from chainlint.cli import main

#: Thresholds low enough that any plan estimated cheaper than the written order is written.
EAGER = ["--rows", "1000000000", "--min-gain", "1.001", "--min-saving-ms", "0", "--jobs", "1"]


def _project(root: Path, frame: pd.DataFrame, body: str) -> Path:
    """A project holding `frame` as Parquet, its profile, and a module computing `out` from `df`."""
    (root / "pyproject.toml").write_text("[project]\nname = 'hostile'\n")
    frame.to_parquet(root / "data.parquet")
    result = CliRunner().invoke(main, ["profile", str(root / "data.parquet"), "--name", "data", "--store", str(root / ".chainlint")])
    assert result.exit_code == 0, result.output
    path = root / "pipeline.py"
    path.write_text("import pandas as pd\n\n" + body)
    return path


def _fix(path: Path) -> str:
    result = CliRunner().invoke(main, ["check", *EAGER, "--fix", str(path)])
    assert result.exit_code in (0, 1), result.output
    return path.read_text()


def _run(source: str, frame: pd.DataFrame, **names: Any) -> Any:
    """`out` as the module computes it from `frame` (with `names` in scope too), or the exception it raises."""
    scope: dict[str, Any] = {"df": frame.copy(), **names}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            exec(compile(source, "<pipeline>", "exec"), scope)
        except Exception as error:  # noqa: BLE001 - the exception is what is compared
            return error
    return scope["out"]


def _same(written: Any, fixed: Any) -> None:
    if isinstance(written, Exception):
        return  # README: where the written code raises, the rewrite may raise or not
    assert not isinstance(fixed, Exception), f"the fix raises {type(fixed).__name__}: {fixed}"
    pd.testing.assert_frame_equal(fixed, written, check_exact=True, check_index_type="equiv", check_freq=False)


def _variants(frame: pd.DataFrame) -> dict[str, pd.DataFrame]:
    return {"as profiled": frame, "empty": frame.iloc[:0], "reversed": frame.iloc[::-1],
            "duplicate labels": frame.set_axis(np.arange(len(frame)) // 2)}


# -- columns named like DataFrame attributes ---------------------------------------------------


def _attribute_columns() -> pd.DataFrame:
    rng = np.random.default_rng(7)
    rows = 20_000
    return pd.DataFrame({
        "a": rng.integers(0, 100, rows),
        "count": rng.integers(0, 10, rows),
        "first": rng.integers(0, 10, rows),
        "s": rng.choice(["x", "y", "z"], rows),
    })


@pytest.mark.parametrize("body", [
    'out = df[(df.a > 1) & (df.s == "x") & (df.count == 3)]\n',
    'out = df.loc[lambda d: (d.a > 1) & (d.s == "x") & (d.count == 3)]\n',
    'out = df.loc[lambda d: d.a > 1].loc[lambda d: (d.s == "x") & (d.count == 3)].loc[lambda d: d.a != 4]\n',
])
def test_an_attribute_named_like_a_column_is_not_that_column(tmp_path: Path, body: str) -> None:
    """`d.count` is DataFrame.count, a method, even when the frame has a column `count`:
    `d.count == 3` is False, and `False & mask` keeps no row where the split step alone raises
    KeyError (pandas 3.1). find/predicates.py: attributes of every DataFrame are not columns."""
    frame = _attribute_columns()
    path = _project(tmp_path, frame, body)
    written = path.read_text()
    fixed = _fix(path)
    for variant in _variants(frame).values():
        _same(_run(written, variant), _run(fixed, variant))
    assert fixed == written  # the step reads an attribute chainlint does not model: it stays


def test_a_column_named_like_an_attribute_moves_when_subscripted(tmp_path: Path) -> None:
    frame = _attribute_columns()
    body = 'out = df[(df.a > 1) & (df.s == "x") & (df["count"] == 3)]\n'
    path = _project(tmp_path, frame, body)
    fixed = _fix(path)
    assert '][lambda d: ' in fixed  # split: `df["count"]` is the column
    for variant in _variants(frame).values():
        _same(_run("import pandas as pd\n\n" + body, variant), _run(fixed, variant))


def test_every_public_dataframe_attribute_is_known_not_to_be_a_column() -> None:
    """pandas' own list of DataFrame attributes (`dir(pd.DataFrame)`, the reference) against
    chainlint's, which the finder uses without importing pandas."""
    from chainlint.find.barriers import DATAFRAME_ATTRIBUTES

    public = {name for name in dir(pd.DataFrame) if not name.startswith("_")}
    assert public <= DATAFRAME_ATTRIBUTES, sorted(public - DATAFRAME_ATTRIBUTES)


# -- class bodies ------------------------------------------------------------------------------


def _class_frame() -> pd.DataFrame:
    rng = np.random.default_rng(11)
    rows = 20_000
    return pd.DataFrame({
        "b": np.where(rng.random(rows) < 0.9, 99, rng.integers(0, 50, rows)),
        "s": pd.array(rng.choice(["A", "B", "b", "c"], rows, p=[0.5, 0.48, 0.01, 0.01]), dtype="str"),
    })


def _class_case(tmp_path: Path, body: str) -> None:
    """The module `body` fixed, then run beside the code as written on `_class_frame` and its
    variants (pandas executes both: the judge of the rows)."""
    frame = _class_frame()
    path = _project(tmp_path, frame, body)
    written = path.read_text()
    fixed = _fix(path)
    for variant in [*_variants(frame).values(), frame.assign(b=1)]:
        _same(_run(written, variant), _run(fixed, variant))


def test_a_lambda_in_a_class_body_reads_the_module_name_not_the_class_one(tmp_path: Path) -> None:
    """A lambda does not see the class body's names: its `X` is the module's 5, which `str`
    values raise against on any row (pandas 3.1), so the step may not move before a filter
    that leaves no row. find/chains.py: a lambda's names resolve as a nested scope's."""
    _class_case(tmp_path, 'X = 5\n\n\nclass K:\n    X = "a"\n    out = df.loc[lambda d: d.b == 99].loc[lambda d: d.s > X]\n\n\nout = K.out\n')


@pytest.mark.parametrize("chain", [
    'next(df.loc[lambda d: d.b == 99].query("s > @X") for _ in [0])',
    '[df.query("b == 99").query("s > @X") for _ in [0]][0]',
    '{0: df.loc[lambda d: d.b == 99].loc[lambda d: d.s > X] for _ in [0]}[0]',
])
def test_a_comprehension_in_a_class_body_reads_the_module_name(tmp_path: Path, chain: str) -> None:
    """A comprehension or generator runs as a nested function: in a class body it sees the
    module's `X = 5`, not the class's `X = "a"` (a query's `@X` too: pandas reads the
    generator's frame). find/chains.py: its names resolve past the class."""
    _class_case(tmp_path, f'X = 5\n\n\nclass K:\n    X = "a"\n    out = {chain}\n\n\nout = K.out\n')


@pytest.mark.parametrize("inner", [
    '    g = lambda e: e.query("b == 99").query("s > @X")\n',
    '    def g(e):\n        return e.query("b == 99").query("s > @X")\n',
])
def test_a_query_does_not_see_an_enclosing_functions_names(tmp_path: Path, inner: str) -> None:
    """pandas resolves `@X` in the frame that calls `query`: a nested function's frame holds
    the enclosing `X = "a"` only where its code mentions `X`, so here `@X` is the module's 5
    (pandas 3.1). find/bindings.py: such a name is not proven single; the step stays."""
    _class_case(tmp_path, f'X = 5\n\n\ndef f(df):\n    X = "a"\n{inner}    return g(df)\n\n\nout = f(df)\n')


@pytest.mark.parametrize("body", [
    "class K:\n    LIMIT = 99\n    out = df[df.b == LIMIT].loc[lambda d: d.s > 'a']\n\n\nout = K.out\n",
    "LIMIT = 98\n\n\nclass K:\n    LIMIT = 99\n    out = df[df.b == LIMIT].loc[lambda d: d.s > 'a']\n\n\nout = K.out\n",
])
def test_a_mask_in_a_class_body_never_becomes_a_lambda(tmp_path: Path, body: str) -> None:
    """Fused with a lambda (`df[lambda d: (d.b == LIMIT) & ...]`) or split into one, a mask
    naming the class's `LIMIT` would read the module's (NameError, or another value).
    rewrite/fuse.py: refused in a class body, as rewrite/permute.py refuses it."""
    frame = _class_frame()
    path = _project(tmp_path, frame, body)
    written = path.read_text()
    fixed = _fix(path)
    assert "lambda d: d.b" not in fixed and "(d.b == LIMIT)" not in fixed
    for variant in _variants(frame).values():
        _same(_run(written, variant), _run(fixed, variant))
    result = CliRunner().invoke(main, ["check", *EAGER, "--format", "json", str(path)])
    reorders = [f for f in json.loads(result.output)["findings"] if f["rule"] == "reorder"]
    assert all(f["fix"] is None and "class body" in f["fix_error"] for f in reorders)


def test_a_written_mask_in_a_class_body_is_not_split_into_lambdas() -> None:
    """The split's later groups are lambdas: `df[df.s > 'a'][lambda d: d.b == LIMIT]` would
    not see the class's `LIMIT` (rewrite/fuse.py refuses it, whichever plan is asked for)."""
    from chainlint.engine.run import analyse_source
    from chainlint.parse.source import text_source
    from chainlint.rewrite.permute import RewriteError
    from chainlint.rewrite.plans import plan_edit

    source = "class K:\n    LIMIT = 99\n    out = df[(df.b == LIMIT) & (df.s > 'a')]\n"
    text = text_source("pipeline.py", source)
    (chain,) = analyse_source(text).chains
    with pytest.raises(RewriteError, match="class body"):
        plan_edit(text, chain, [(1,), (0,)])
    outside = text_source("pipeline.py", "LIMIT = 99\nout = df[(df.b == LIMIT) & (df.s > 'a')]\n")
    (chain,) = analyse_source(outside).chains
    assert plan_edit(outside, chain, [(1,), (0,)]).text == "[df.s > 'a'][lambda d: d.b == LIMIT]"


# -- integer division by zero ------------------------------------------------------------------


@pytest.mark.parametrize("predicate", ["d.a // d.b > 1152921504606846976", "d.a % d.b > 1152921504606846976"])
def test_integer_floor_division_stays_where_a_zero_divisor_changes_every_row(tmp_path: Path, predicate: str) -> None:
    """pandas 3.1 computes `a // b` and `a % b` of int64 columns as int64, unless some divisor
    of the rows it sees is zero: then every row is float64, which rounds 2**60 + 1 to 2**60.
    Moved before `b != 0` (or beside it in one mask), the step drops rows the written chain
    keeps. plan/totality.py: such a step stays."""
    rng = np.random.default_rng(5)
    rows = 20_000
    a, b = rng.integers(0, 1000, rows), rng.integers(1, 5, rows)
    a[:50], b[50:60] = 2**60 + 1, 0
    b[:50] = 2**60 + 2 if "%" in predicate else 1  # the quotient or the remainder is 2**60 + 1
    frame = pd.DataFrame({"a": a, "b": b, "c": rng.integers(0, 100, rows)})
    body = f"out = df.loc[lambda d: d.b != 0].loc[lambda d: d.c >= 0].loc[lambda d: {predicate}]\n"
    path = _project(tmp_path, frame, body)
    written = path.read_text()
    assert len(_run(written, frame)) == 50
    fixed = _fix(path)
    for variant in _variants(frame).values():
        _same(_run(written, variant), _run(fixed, variant))
    assert fixed.index("d.b != 0") < fixed.index(predicate) and f"& ({predicate})" not in fixed


# -- regular expressions pyarrow refuses -------------------------------------------------------


@pytest.mark.parametrize("pattern", ["a{1001}", "an*+a", "an++a", "(an)?+a"])
def test_a_pattern_pyarrow_refuses_does_not_move_earlier(tmp_path: Path, pattern: str) -> None:
    """Python's `re` reads these (a repetition over 1,000, possessive quantifiers), pyarrow's
    RE2 engine refuses them, and pandas 3.1 asks it only when the column holds a row: before a
    filter that keeps none, the moved step raises ArrowInvalid. plan/totality.py: a pattern
    moves earlier only where pyarrow compiles it."""
    rng = np.random.default_rng(9)
    rows = 20_000
    frame = pd.DataFrame({"a": rng.integers(0, 100, rows),
                          "s": pd.array(rng.choice(["apple", "banana", "cherry"], rows), dtype="str")})
    body = f'out = df.loc[lambda d: d.a >= 0].loc[lambda d: d.s.str.contains("{pattern}")]\n'
    path = _project(tmp_path, frame, body)
    written = path.read_text()
    fixed = _fix(path)
    for variant in [*_variants(frame).values(), frame.assign(a=-1)]:
        _same(_run(written, variant), _run(fixed, variant))


# -- the cases above, generated ----------------------------------------------------------------
# Frames and chains drawn around what once broke the promise (attribute names, class bodies,
# integer floor division by zero with integers beyond 2**53, patterns RE2 refuses), each
# rewritten into any plan the planner may choose for the frame's dtypes and run by pandas;
# tests/test_rewrite_property.py covers the wider space of dtypes and forms.

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402
from test_rewrite_property import _planner_groups  # noqa: E402

from chainlint.engine.run import analyse_source  # noqa: E402
from chainlint.parse.source import text_source  # noqa: E402
from chainlint.rewrite.permute import RewriteError, apply_edits  # noqa: E402
from chainlint.rewrite.plans import plan_edit  # noqa: E402
from chainlint.rewrite.verify import verify  # noqa: E402


@st.composite
def _hostile_frames(draw):  # type: ignore[no-untyped-def]
    rows = draw(st.integers(0, 12))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    big = np.where(rng.random(rows) < 0.5, 2**60 + 1, rng.integers(0, 9, rows))
    frame = pd.DataFrame({
        "count": rng.integers(0, 4, rows),
        "big": big,
        "z": rng.integers(0, 3, rows),
        "s": pd.array(rng.choice(["apple", "banana", "an", "naan"], rows), dtype="str"),
    })
    if draw(st.booleans()):
        frame.index = rng.integers(0, 3, rows)
    return frame


_PREDICATES = [
    "{d}.count == 2", "{d}['count'] == 2", "{d}.first == 2", "{d}.z != 0", "{d}.big // {d}.z > 1152921504606846976",
    "{d}.big % {d}.z > 1152921504606846976", "{d}.big > 5", "{d}.s.str.contains('an++a')", "{d}.s.str.contains('a{{1001}}')",
    "{d}.s == 'an'", "{d}.s.str.startswith('b')", "{d}.z > X",
]


@st.composite
def _hostile_chains(draw):  # type: ignore[no-untyped-def]
    count = draw(st.integers(2, 4))
    picks = [draw(st.sampled_from(_PREDICATES)) for _ in range(count)]
    form = draw(st.sampled_from(["lambdas", "masks", "written mask"]))
    if form == "lambdas":
        chain = "df" + "".join(f".loc[lambda d: {p.format(d='d')}]" for p in picks)
    elif form == "masks":
        chain = f"df[{picks[0].format(d='df')}]" + "".join(f"[lambda d: {p.format(d='d')}]" for p in picks[1:])
    else:
        chain = "df[" + " & ".join(f"({p.format(d='df')})" for p in picks) + "]"
    scope = draw(st.sampled_from(["module", "class", "function"]))
    if scope == "module":
        body = f"X = 1\nout = {chain}\n"
    elif scope == "class":
        body = f"X = 1\n\n\nclass K:\n    X = 'a'\n    out = {chain}\n\n\nout = K.out\n"
    else:
        body = f"X = 'a'\n\n\ndef f(df, X=1):\n    return {chain}\n\n\nout = f(df)\n"
    return "import pandas as pd\n\n" + body


@settings(max_examples=150, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(_hostile_frames(), _hostile_chains(), st.data())
def test_hostile_chains_keep_the_promise_in_any_plan(frame: pd.DataFrame, source: str, data: st.DataObject) -> None:
    text = text_source("generated.py", source)
    chains = analyse_source(text).chains
    if len(chains) != 1:
        return  # a written mask with a part that may not move is no chain
    (chain,) = chains
    dtypes = {name: str(dtype) for name, dtype in frame.dtypes.items()}
    groups = _planner_groups(chain, dtypes, data)
    steps = range(len(chain.steps))
    if groups == ((tuple(steps),) if chain.form.value == "mask" else tuple((i,) for i in steps)):
        return  # the plan as written
    try:
        edit = plan_edit(text, chain, groups)
    except RewriteError:
        return  # refused, with its reason: the code stays as written
    rewritten = apply_edits(source, [edit])
    verify(text, rewritten, [(chain, groups)])
    _same(_run(source, frame), _run(rewritten, frame))


# -- names read through computed text -----------------------------------------------------------


def _text_frame() -> pd.DataFrame:
    rng = np.random.default_rng(13)
    rows = 20_000
    return pd.DataFrame({"a": rng.integers(0, 100, rows),
                         "s": pd.array(rng.choice(["an", "apple", "banana"], rows, p=[0.01, 0.49, 0.5]), dtype="str")})


_COMPUTED_TEXT = {
    "a query's text held by a name": ("Q = 'a in @{frame}.a'\n", "other.query(Q)"),
    "a query's text joined from parts": ("", "other.query('a in @' + '{frame}.a')"),
    "a query's text formatted": ("", "other.query('a in @{{}}.a'.format('{frame}'))"),
    "an f-string placeholder naming the frame": ("k = '{frame}'\n", "other.query(f'a in @{{k}}.a')"),
    "a query's text as a keyword": ("Q = 'a in @{frame}.a'\n", "other.query(expr=Q)"),
    "a pd.eval text held by a name": ("E = '{frame}.a.sum() + other.a'\n", "other.assign(a=pd.eval(E))"),
    "a frame's eval text held by a name": ("E = 'a + @{frame}.a.sum()'\n", "other.assign(a=other.eval(E))"),
}


def _both_runs(tmp_path: Path, body: str) -> Iterator[tuple[Any, Any]]:
    """`out` of the module `body` as written and as fixed, on each variant of `_text_frame`
    with `other`, a second frame, in scope; neither may raise (pandas runs both: the judge)."""
    frame = _text_frame()
    path = _project(tmp_path, frame, body)
    written = path.read_text()
    fixed = _fix(path)
    for variant in _variants(frame).values():
        other = variant.iloc[::3].copy()  # a second frame
        before, after = _run(written, variant, other=other), _run(fixed, variant, other=other)
        assert not isinstance(before, Exception), before
        assert not isinstance(after, Exception), f"the fix raises {type(after).__name__}: {after}\n{fixed}"
        yield before, after


@pytest.mark.parametrize("name", sorted(_COMPUTED_TEXT))
@pytest.mark.parametrize("where", ["stepped over", "after a renamed run"])
def test_a_frame_read_through_computed_text_keeps_its_statement(tmp_path: Path, name: str, where: str) -> None:
    """pandas resolves a query's `@name` (and a `pd.eval` text's names) among the caller's
    variables whatever code built the text (pandas docs, DataFrame.query, pandas.eval): text
    held by a name, joined, formatted or an f-string may read the run's frame as the statement
    between its filters sees it, or a name the joined run stops binding. find/runs.py: such a
    call may read any name."""
    setup, call = _COMPUTED_TEXT[name]
    if where == "stepped over":
        body = (setup.format(frame="out") + "out = df[df.a > 1]\nextra = " + call.format(frame="out")
                + "\nout = out[out.s == 'an']\nout = (out, extra)\n")
    else:
        body = (setup.format(frame="north") + "north = df[df.a > 1]\nlate = north[north.s == 'an']\nextra = "
                + call.format(frame="north") + "\nout = (late, extra)\n")
    for before, after in _both_runs(tmp_path, body):
        for old, new in zip(before, after):
            pd.testing.assert_frame_equal(new, old, check_exact=True, check_index_type="equiv", check_freq=False)


@pytest.mark.parametrize(("code", "any_name"), [
    ("other.query('a in @north.a')", False),
    ("model.eval()", False),  # no text: not pandas' eval
    ("other.query(Q)", True),
    ("pd.eval(f'{x} + 1')", True),
    ("other.query(**options)", True),
    ("other.query(expr='a > 1')", False),
])
def test_which_text_calls_may_read_any_name(code: str, any_name: bool) -> None:
    import ast

    from chainlint.find.name_walk import ANY_NAME, count_names

    assert (ANY_NAME in count_names(ast.parse(code)).text) is any_name


# -- the dtypes the code's own read call gives ---------------------------------------------------


def _csv_project(root: Path, body: str) -> tuple[Path, pd.DataFrame]:
    """A CSV whose text column is missing only where `a <= 1`, profiled as `pd.read_csv` reads
    it by default (`s` as `str`), and a module reading it with its own options."""
    rng = np.random.default_rng(17)
    rows = 5_000
    a = rng.integers(0, 100, rows)
    s = np.where(rng.random(rows) < 0.02, "an", rng.choice(["apple", "banana"], rows)).astype(object)
    s[a <= 1] = None
    frame = pd.DataFrame({"a": a, "s": s})
    (root / "pyproject.toml").write_text("[project]\nname = 'hostile'\n")
    frame.to_csv(root / "data.csv", index=False)
    result = CliRunner().invoke(main, ["profile", str(root / "data.csv"), "--name", "data", "--store", str(root / ".chainlint")])
    assert result.exit_code == 0, result.output
    path = root / "pipeline.py"
    path.write_text(f"import numpy as np\nimport pandas as pd\n\nOPTIONS = {{'dtype': {{'s': object}}}}\nT = {{'s': 'object'}}\n{body}")
    return path, frame


@pytest.mark.parametrize("read", [
    "pd.read_csv(PATH, dtype={'s': object})",
    "pd.read_csv(PATH, dtype={'s': 'object'})",
    "pd.read_csv(PATH, dtype={'s': 'O'})",
    "pd.read_csv(PATH, dtype={'s': np.object_})",
    "pd.read_csv(PATH, dtype={'a': 'int64', 's': object})",
    "pd.read_csv(PATH, dtype=T)",
    "pd.read_csv(PATH, **OPTIONS)",
])
def test_the_code_reading_other_dtypes_than_profiled_keeps_the_promise(tmp_path: Path, read: str) -> None:
    """`.str.startswith` of an `object` column gives None for a missing value, which pandas
    refuses as a mask (ValueError, pandas 3.1), while a `str` column's gives False: the profile
    says `str`, the code reads `object`. Moved before `a > 1`, which removes the missing rows,
    the step raises. find/origins.py reads the call's `dtype=`; bind/dtypes.py gives the frame
    the code's dtypes, and none where the call passes options chainlint does not follow."""
    body = f"df = {read.replace('PATH', repr(str(tmp_path / 'data.csv')))}\nout = df.loc[lambda d: d.a > 1].loc[lambda d: d.s.str.startswith('an')]\n"
    path, frame = _csv_project(tmp_path, body)
    written = path.read_text()
    fixed = _fix(path)
    before, after = _run(written, frame), _run(fixed, frame)
    assert not isinstance(before, Exception), before
    _same(before, after)


@pytest.mark.parametrize(("read", "expected"), [
    ("pd.read_csv('d.csv', dtype={'s': object, 'a': 'Int64'})", {"a": "Int64", "s": "object", "x": "float32"}),
    ("pd.read_csv('d.csv', dtype='O')", {"a": "object", "s": "object", "x": "object"}),
    ("pd.read_csv('d.csv', dtype={'s': str})", {"a": "int64", "s": "str", "x": "float32"}),
    ("pd.read_csv('d.csv', sep=';')", {"a": "int64", "s": "str", "x": "float32"}),
    ("pd.read_csv('d.csv', converters={'x': float})", {}),
    ("pd.read_csv('d.csv', dtype_backend='pyarrow')", {}),
    ("pd.read_csv('d.csv', dtype=TYPES)", {}),
    ("pd.read_parquet('d.parquet', **options)", {}),
    ("pd.read_parquet('d.parquet').astype({'s': object})", {"a": "int64", "s": "str", "x": "float32"}),  # README: assumed
])
def test_the_dtypes_a_read_call_gives(read: str, expected: dict[str, str]) -> None:
    from chainlint.bind.dtypes import frame_dtypes

    source = f"import pandas as pd\ndf = {read}\nout = df[df.a > 1][lambda d: d.s == 'x']\n"
    (chain,) = analyse_source(text_source("pipeline.py", source)).chains
    assert frame_dtypes(chain.origin, {"a": "int64", "s": "str", "x": "float32"}) == expected


@pytest.mark.parametrize(("read", "named"), [
    ("pd.read_csv('d.csv', converters={'x': float})", "`converters=`"),
    ("pd.read_parquet('d.parquet', dtype_backend='pyarrow', **options)", "`dtype_backend=`, `**`"),
])
def test_explain_names_the_read_options_that_leave_the_dtypes_unknown(read: str, named: str) -> None:
    from chainlint.bind.dtypes import frame_dtypes, unknown_because
    from chainlint.plan.totality import judge

    source = f"import pandas as pd\ndf = {read}\nout = df[df.a > 1][lambda d: d.s == 'x']\n"
    (chain,) = analyse_source(text_source("pipeline.py", source)).chains
    reason = unknown_because(chain.origin)
    assert reason is not None and f"with {named}, which may change" in reason
    limit = judge(chain.steps[0].predicate, frame_dtypes(chain.origin, {"a": "int64"}), "p", reason)
    assert (limit.moves, limit.reason) == ("stays", reason)


# -- a grouped run assigns its last name where its first statement was ---------------------------


@pytest.mark.parametrize("between", [
    "log = [late]",  # the old value read
    "log = [other.query('a in @late.a')]",  # read through a query's text
    "late = 5",  # bound: the run's value would be overwritten
    "del late",
])
@pytest.mark.parametrize("scope", ["module", "function"])
def test_a_statement_between_a_run_s_filters_naming_its_last_name_stays_after_it(tmp_path: Path, between: str, scope: str) -> None:
    """A run's group is one statement at the place of its first statement, under the name its
    last statement assigns: a statement stepped over between them that reads that name (its
    earlier value) or binds it would see, or overwrite, the run's result. find/runs.py: such
    statements do not become one."""
    lines = ["late = df.iloc[:3]", "north = df[df.a > 1]", between, "late = north[north.s != 'an']"]
    if scope == "module":
        body = "\n".join(lines) + "\nout = (late, log if 'log' in dir() else [])\n"
    else:
        body = "def f(df, other):\n    log = []\n" + "".join(f"    {line}\n" for line in lines) + "    return late, log\n\n\nout = f(df, other)\n"
    for before, after in _both_runs(tmp_path, body):
        pd.testing.assert_frame_equal(after[0], before[0], check_exact=True, check_index_type="equiv", check_freq=False)
        assert len(after[1]) == len(before[1])
        for old, new in zip(before[1], after[1]):
            pd.testing.assert_frame_equal(new, old, check_exact=True, check_index_type="equiv", check_freq=False)


# -- check --diff in the file's own encoding --------------------------------------------------------


@pytest.mark.parametrize(("head", "encoding"), [
    ("# -*- coding: latin-1 -*-\n", "latin-1"),
    ("", "utf-8-sig"),  # a byte order mark, which Python reads as the file's encoding
    ("# -*- coding: utf-8 -*-\n", "utf-8-sig"),
    ("", "utf-8"),
])
@pytest.mark.parametrize("tool", ["patch", "git"])
def test_the_diff_applies_to_a_file_in_its_own_encoding(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, head: str,
                                                         encoding: str, tool: str) -> None:
    """`patch -p1` and `git apply` match a diff's lines against the file's bytes (GNU patch and
    git documentation): the diff of a Latin-1 module or one with a byte order mark must carry
    its lines as the file holds them, and applied give the bytes `--fix` writes.
    report/diff.py: each file's lines in its own encoding."""
    import shutil
    import subprocess

    if shutil.which(tool) is None:
        pytest.skip(f"{tool} is not installed")
    body = "out = df[df.a > 1][lambda d: d.s == 'an']  # café\n"
    path = _project(tmp_path, _text_frame(), body)
    path.write_bytes((head + path.read_text()).encode(encoding))
    original = path.read_bytes()
    monkeypatch.chdir(tmp_path)
    diff = CliRunner().invoke(main, ["check", *EAGER, "--diff", "pipeline.py"]).stdout_bytes
    assert b"+++ b/pipeline.py" in diff
    assert CliRunner().invoke(main, ["check", *EAGER, "--fix", "pipeline.py"]).exit_code in (0, 1)
    fixed = path.read_bytes()
    assert fixed != original
    path.write_bytes(original)
    (tmp_path / "fix.diff").write_bytes(diff)
    command = ["patch", "-p1", "--quiet", "-i", "fix.diff"] if tool == "patch" else ["git", "apply", "fix.diff"]
    subprocess.run(command, cwd=tmp_path, check=True, timeout=60, capture_output=True)
    assert path.read_bytes() == fixed


# -- code defined in the module that reads a run's frame when called ------------------------------


@pytest.mark.parametrize("case", [
    "def show():\n    LOG.append(out)\n\n\n{run}",
    "show = lambda: LOG.append(out)\n{run}",
    "class Report:\n    def show(self):\n        LOG.append(out)\n\n\nshow = Report().show\n{run}",
    "def peek():\n    LOG.append(globals()['out'])\n\n\ndef show():\n    peek()\n\n\n{run}",
    "def f(df):\n    def show():\n        LOG.append(out)\n{indented}    return out\n\n\nout = f(df)\n",
    "show = (LOG.append(out) for _ in range(3)).__next__\n{run}",  # a generator reads its names as it runs
])
@pytest.mark.parametrize("operator", ["==", "!="])  # planned as a reorder, and as one mask
def test_a_run_does_not_step_over_a_call_of_code_that_reads_its_frame(tmp_path: Path, case: str, operator: str) -> None:
    """`show()` between two filters of `out` runs a function of the module that reads `out`
    (Python resolves its global, or its closure, when it runs): moved across it, a filter
    changes what it sees. find/chains.py: where code the scope defines reads a frame of the
    run, the run steps over only statements that run no code (names bound to literals)."""
    run = f"out = df[df.a > 1]\nnote = 'kept'\nshow()\nout = out[out.s {operator} 'an']\n"
    body = "LOG = []\n" + case.format(run=run, indented="".join(f"    {line}\n" for line in run.splitlines()))
    body += "out = (out, LOG)\n"
    for before, after in _both_runs(tmp_path, body):
        for old, new in zip([before[0], *before[1]], [after[0], *after[1]]):
            pd.testing.assert_frame_equal(new, old, check_exact=True, check_index_type="equiv", check_freq=False)
    if "globals" not in case:
        plain = re.sub(r"^ *show\(\)\n", "", body, flags=re.M)  # with no call between, the filters still move
        path = tmp_path / "pipeline.py"  # the module _both_runs wrote
        path.write_text("import pandas as pd\n\n" + plain)
        assert _fix(path) != "import pandas as pd\n\n" + plain


def test_a_run_steps_over_a_statement_that_runs_no_code(tmp_path: Path) -> None:
    body = "def show():\n    return out\n\n\nout = df[df.a > 1]\nnote = 'kept'\nout = out[out.s == 'an']\n"
    path = _project(tmp_path, _text_frame(), body)
    assert "note = 'kept'" in _fix(path) and "out = df[df.a > 1]" not in path.read_text()


# -- runs with statements between their filters, generated ----------------------------------------
# Statement runs (one name or renamed, at module level or in a function) with statements drawn
# around what once broke the promise between their filters: code the module defines that reads
# a frame when called, the earlier value of a name the run assigns, query text (literal or
# computed) naming a frame, plain bindings. Each is rewritten into any plan the planner may
# choose and both versions run by pandas, what every statement between saw compared too.

_BETWEEN = [
    "note = 'kept'", "show()", "show()", "LOG.append(len(other))", "LOG.append(other.query('a in @{prev}.a'))",
    "LOG.append(other.query(Q))", "LOG.append({old})", "LOG.append({old})", "{old} = 5", "LOG.append(other.query('a in @{old}.a'))",
]


@st.composite
def _runs_with_statements_between(draw):  # type: ignore[no-untyped-def]
    count = draw(st.integers(2, 4))
    renamed = draw(st.booleans())
    targets = [f"s{k}" for k in range(count - 1)] + ["out"] if renamed else ["out"] * count
    predicates = ["{f}.a > 1", "{f}.s != 'an'", "{f}.a != 50", "{f}.s == 'apple'", "{f}.a < 90"]
    lines = [f"{t} = out.iloc[:0]" for t in sorted(set(targets))]  # every name bound before the run
    for position in range(count):
        frame = "df" if position == 0 else targets[position - 1]
        if position:
            old = draw(st.sampled_from(targets[position:]))
            between = draw(st.lists(st.sampled_from(_BETWEEN), min_size=1, max_size=2))
            lines += [b.format(prev=targets[position - 1], old=old) for b in between]
        predicate = draw(st.sampled_from(predicates)).format(f=frame)
        lines.append(f"{targets[position]} = {frame}[{predicate}]")
    shown = draw(st.sampled_from(targets[1:]))  # the first frame read elsewhere is a barrier already
    head = f"Q = 'a in @{shown}.a'\nLOG = []\n"
    if draw(st.booleans()):
        body = (head + "out = df\n\n\ndef run(df):\n    out = df\n    def show():\n        LOG.append(" + shown + ")\n"
                + "".join(f"    {line}\n" for line in lines) + "    return out\n\n\nout = (run(df), LOG)\n")
    else:
        body = head + f"out = df\n\n\ndef show():\n    LOG.append({shown})\n\n\n" + "\n".join(lines) + "\nout = (out, LOG)\n"
    return "import pandas as pd\n\n" + body


def _outcome(source: str, frame: pd.DataFrame) -> Any:
    result = _run(source, frame, other=frame.iloc[::3].copy())
    return result if isinstance(result, Exception) else [result[0], *result[1]]


@settings(max_examples=200, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(_runs_with_statements_between(), st.data())
def test_runs_with_statements_between_keep_the_promise_in_any_plan(source: str, data: st.DataObject) -> None:
    frame = _text_frame().iloc[::50]
    text = text_source("generated.py", source)
    runs = [c for c in analyse_source(text).chains if c.form.value == "statements"]
    if not runs:
        return
    chain = data.draw(st.sampled_from(runs))
    dtypes = {name: str(dtype) for name, dtype in frame.dtypes.items()}
    groups = _planner_groups(chain, dtypes, data)
    if groups == tuple((i,) for i in range(len(chain.steps))):
        return
    try:
        rewritten = apply_edits(source, [plan_edit(text, chain, groups)])
        verify(text, rewritten, [(chain, groups)])
    except RewriteError:
        return  # refused, with its reason: the code stays as written
    written, fixed = _outcome(source, frame), _outcome(rewritten, frame)
    if isinstance(written, Exception):
        return
    assert not isinstance(fixed, Exception), (rewritten, fixed)
    assert len(fixed) == len(written), rewritten
    for old, new in zip(written, fixed):
        if isinstance(old, pd.DataFrame):
            pd.testing.assert_frame_equal(new, old, check_exact=True, check_index_type="equiv", check_freq=False)
        else:
            assert repr(new) == repr(old), rewritten
