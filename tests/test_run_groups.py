"""Statement runs whose steps join one mask, written as one statement: hostile cases by hand.

Each case is rewritten into a plan of groups, verified (`chainlint.rewrite.verify`), compared
with the text expected, and both versions are executed on a frame of awkward dtypes (missing
values, pandas 3 `str` with missing values, a categorical, duplicate index labels): pandas is the
judge that the rows, order, columns, dtypes and index labels are the same. The test runs its own
generated code; chainlint itself never executes what it analyses.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from chainlint.engine.run import analyse_source
from chainlint.model import ChainForm
from chainlint.parse.source import text_source
from chainlint.plan.chains import may_join
from chainlint.plan.totality import judge
from chainlint.rewrite.permute import RewriteError, apply_edits
from chainlint.rewrite.plans import plan_edit
from chainlint.rewrite.verify import verify


def _frame() -> pd.DataFrame:
    rng = np.random.default_rng(7)
    rows = 40
    words = np.array(["apple", "banana", None, "cherry"], dtype=object)[rng.integers(0, 4, rows)]
    floats = rng.normal(0, 3, rows).round(1)
    floats[rng.random(rows) < 0.2] = np.nan
    frame = pd.DataFrame({
        "a": rng.integers(0, 5, rows), "b": floats, "s": pd.array(words, dtype="str"),
        "c": pd.Categorical(np.array(["x", "y", "z"], dtype=object)[rng.integers(0, 3, rows)]),
    })
    frame.index = rng.integers(0, 10, rows)  # duplicate, unsorted labels
    return frame


def _run(source: str) -> pd.DataFrame:
    scope = {"df": _frame()}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        exec(compile(source, "<case>", "exec"), scope)
    return scope["out"]


def _rewrite(source: str, groups, which: int = 0) -> str:  # type: ignore[no-untyped-def]
    text = text_source("case.py", source)
    chain = analyse_source(text).chains[which]
    assert chain.form is ChainForm.STATEMENTS
    new = apply_edits(source, [plan_edit(text, chain, groups)])
    verify(text, new, [(chain, groups)])
    return new


CASES = {
    "one name: masks stay masks over the frame filtered, comments follow their predicates": (
        "import pandas as pd\n"
        "df = df[df.a > 1]  # common\n"
        "# the rare one\n"
        "df = df[df.s == 'apple']  # rare\n"
        "df = df.loc[lambda d: d.b < 2]\n"
        "out = df\n",
        ((0, 1), (2,)),
        "import pandas as pd\n"
        "df = df[(df.a > 1)  # common\n"
        "    # the rare one\n"
        "    & (df.s == 'apple')]  # rare\n"
        "df = df.loc[lambda d: d.b < 2]\n"
        "out = df\n",
    ),
    "renamed run in a function: the name in between stops being bound": (
        "import pandas as pd\n"
        "def f(df):\n"
        "    north = df[df.a > 1]\n"
        "    late = north[north.b < 2]\n"
        "    return late\n"
        "out = f(df)\n",
        ((0, 1),),
        "import pandas as pd\n"
        "def f(df):\n"
        "    late = df[lambda d: (d.a > 1) & (d.b < 2)]\n"
        "    return late\n"
        "out = f(df)\n",
    ),
    "masks of another frame become one lambda over the one name they read": (
        "import pandas as pd\n"
        "out = df.query('a > 0')\n"
        "out = out[out.a > 1]\n"
        "out = out[out.b < 2]\n",
        ((1, 2), (0,)),
        "import pandas as pd\n"
        "out = df[lambda out: (out.a > 1) & (out.b < 2)]\n"
        "out = out.query('a > 0')\n",
    ),
    "queries join with `and`, a statement stepped over stays after": (
        "import pandas as pd\n"
        "out = df.query('a > 1')\n"
        "note = 'kept'\n"
        "out = out.query('b < 2 or b > 3')\n"
        "out = out.dropna(subset=['s'])\n",
        ((0, 1), (2,)),
        "import pandas as pd\n"
        "out = df.query(\"a > 1 and (b < 2 or b > 3)\")\n"
        "note = 'kept'\n"
        "out = out.dropna(subset=['s'])\n",
    ),
    "a query that is itself a conjunction joins the others into one statement": (
        "import pandas as pd\nout = df.query('a > 0')\nout = out.query('a <= 3 and b > -2')\n",
        ((0, 1),),
        "import pandas as pd\nout = df.query(\"a > 0 and a <= 3 and b > -2\")\n",
    ),
    "the last line of the file without a line break": (
        "import pandas as pd\nout = df[df.a > 1]\nout = out[out.c == 'x']",
        ((0, 1),),
        "import pandas as pd\nout = df[lambda d: (d.a > 1) & (d.c == 'x')]",
    ),
    "CRLF line breaks": (
        "import pandas as pd\r\nout = df[df.a > 1]  # one\r\nout = out[out.b < 2]\r\n",
        ((0, 1),),
        "import pandas as pd\r\nout = df[lambda d: (d.a > 1)  # one\r\n    & (d.b < 2)]\r\n",
    ),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_a_run_grouped_is_one_statement_with_the_same_result(name: str) -> None:
    source, groups, expected = CASES[name]
    new = _rewrite(source, groups)
    assert new == expected
    # pandas is the judge: the same rows, order, columns, dtypes and index labels.
    pd.testing.assert_frame_equal(_run(new.replace("\r\n", "\n")), _run(source.replace("\r\n", "\n")))


def _joinable(source: str) -> bool:
    runs = [c for c in analyse_source(text_source("case.py", source)).chains if c.form is ChainForm.STATEMENTS]
    if not runs:
        return False
    (chain,) = runs
    dtypes = {name: str(dtype) for name, dtype in _frame().dtypes.items()}
    limits = tuple(judge(step.predicate, dtypes, "frame") if step.movable else None for step in chain.steps)
    joinable = may_join(chain, limits, dtypes)
    return joinable(0b11)


@pytest.mark.parametrize(("source", "joins"), [
    ("def f(df):\n    north = df[df.a > 1]\n    late = north[north.b < 2]\n    return late\n", True),
    # `north` is read after the run: its step is a barrier, nothing joins across it.
    ("def f(df):\n    north = df[df.a > 1]\n    late = north[north.b < 2]\n    return late, north\n", False),
    # The frame read between the statements: no run at all.
    ("def f(df):\n    out = df[df.a > 1]\n    n = len(out)\n    out = out[out.b < 2]\n    return out, n\n", False),
    # A name a filter reads assigned between them: the filter after it stays where it is.
    ("def f(df, g):\n    out = df[df.a > 1]\n    lim = 2\n    out = out[out.b < lim]\n    return out\n", False),
    # A statement that touches neither is stepped over, and stays.
    ("def f(df, log):\n    out = df[df.a > 1]\n    log('x')\n    out = out[out.b < 2]\n    return out\n", True),
    # Deleted after the run: removing its statement would make `del` raise.
    ("def f(df):\n    north = df[df.a > 1]\n    late = north[north.b < 2]\n    del north\n    return late\n", False),
    ("def f(df):\n    global north\n    north = df[df.a > 1]\n    late = north[north.b < 2]\n    return late\n", False),
    # A class body's names are its attributes.
    ("class C:\n    north = df[df.a > 1]\n    late = north[north.b < 2]\n", False),
    # Masks over two names in a class body would become one lambda, which cannot see the
    # class's names: `--fix` refuses that, so the planner does not join them.
    ("class C:\n    late = df[df.a > 1]\n    late = late[late.b < 2]\n", False),
    ("class C:\n    late = late[late.a > 1]\n    late = late[late.b < 2]\n", True),
    # Statements carrying more than the filter.
    ("def f(df):\n    out = df[df.a > 1]; n = 1\n    out = out[out.b < 2]\n    return out\n", False),
    ("def f(df):\n    out = (df[df.a > 1])\n    out = out[out.b < 2]\n    return out\n", False),
    ("def f(df):\n    out = df[df.a > 1][df.b < 2]\n    out = out[out.s == 'x']\n    return out\n", False),
    ("def f(df):\n    out = df[(m := df.a > 1)]\n    out = out[out.b < 2]\n    return out, m\n", False),
])
def test_which_statements_of_a_run_may_become_one(source: str, joins: bool) -> None:
    assert _joinable(source) is joins


_THROUGH_TEXT = "def f(df, other, log):\n    north = df[df.a > 1]\n    {between}late = north[north.b < 2]\n    return late{after}\n"


@pytest.mark.parametrize(("between", "after"), [
    # pandas resolves `@north` in a query among the caller's variables (pandas docs, DataFrame.query).
    ("", ", other.query('a in @north.a')"),
    # `pd.eval` reads the caller's variables by their bare names (pandas docs, pandas.eval).
    ("", ", pd.eval('north.a + 1')"),
    # `eval`, `locals()`: any name may be read.
    ("", ", eval('north')"),
    ("", ", locals()"),
    ("log(other.query('a in @north.a'))\n    ", ""),
    ("log(eval('len(north)'))\n    ", ""),
])
def test_a_frame_read_through_text_keeps_its_statement(between: str, after: str) -> None:
    source = _THROUGH_TEXT.format(between=between, after=after)
    runs = [c for c in analyse_source(text_source("case.py", source)).chains if c.form is ChainForm.STATEMENTS]
    assert not runs or not runs[0].steps[1].movable, source
    assert not _joinable(source)


def test_statements_with_a_type_annotation_or_two_targets_are_no_run_members() -> None:
    for source in ("out: pd.DataFrame = df[df.a > 1]\nout = out[out.b < 2]\n",
                   "out = other = df[df.a > 1]\nout = out[out.b < 2]\n"):
        assert not [c for c in analyse_source(text_source("case.py", source)).chains if c.form is ChainForm.STATEMENTS]


def test_a_directive_among_the_statements_to_join_is_refused() -> None:
    source = "out = df[df.a > 1]\n# chainlint: keep never-matches\nout = out[out.b < 2]\n"
    with pytest.raises(RewriteError, match="chainlint"):
        _rewrite(source, ((0, 1),))


def test_check_fix_joins_a_run_in_a_notebook_cell_and_never_across_cells(tmp_path: Path) -> None:
    """A run never spans two cells, so nothing is joined across them; inside one cell the run is
    written as one statement and the notebook stays valid (nbformat's own validator)."""
    import nbformat

    (tmp_path / "pyproject.toml").write_text("[tool.chainlint]\n")
    cells = [
        "import pandas as pd\nscans = pd.read_parquet('scans.parquet')  # chainlint: profile=scans",
        "out = scans[scans.kind == 'x']\nout = out[out.weight > 5]",
        "late = out[out.hour > 20]",
        "late = late[late.kind == 'y']",
    ]
    book = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(c) for c in cells])
    book.metadata["kernelspec"] = {"name": "python3", "language": "python", "display_name": "Python 3"}
    path = tmp_path / "review.ipynb"
    nbformat.write(book, str(path))
    text = path.read_text()
    from chainlint.parse.notebooks import notebook_from_text

    chains = analyse_source(notebook_from_text(str(path), text).source).chains
    runs = [c for c in chains if c.form is ChainForm.STATEMENTS]
    assert len(runs) == 1 and len(runs[0].steps) == 2  # cells 3 and 4 are no run
    notebook = notebook_from_text(str(path), text)
    edit = plan_edit(notebook.source, runs[0], ((0, 1),))
    verify(notebook.source, apply_edits(notebook.source.text, [edit]), [(runs[0], ((0, 1),))])
    from chainlint.rewrite.cells import rewrite_cells

    new = rewrite_cells(notebook, [edit])
    nbformat.validate(nbformat.reads(new, as_version=4))
    sources = ["".join(cell["source"]) for cell in json.loads(new)["cells"]]
    assert sources == [cells[0], "out = scans[lambda d: (d.kind == 'x') & (d.weight > 5)]", *cells[2:]]


def test_masks_are_not_joined_into_a_lambda_in_a_class_body() -> None:
    """A lambda in a class body cannot see the class's names (Python's scoping rules): the
    written masks run, the lambda would raise NameError."""
    source = "import pandas as pd\nclass C:\n    LIMIT = 1\n    out = df[df.a > LIMIT]\n    out = out[out.b < 2]\n"
    with pytest.raises(RewriteError, match="class body"):
        _rewrite(source, ((0, 1),))
    method = "import pandas as pd\nclass C:\n    LIMIT = 1\n    out = df[df.a > LIMIT].loc[lambda d: d.b < 2]\n"
    text = text_source("case.py", method)
    with pytest.raises(RewriteError, match="class body"):
        plan_edit(text, analyse_source(text).chains[0], ((0, 1),))
