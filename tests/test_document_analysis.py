"""The editor's incremental analysis equals a whole analysis of the same text, edit after edit."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from chainlint.engine.options import Options
from chainlint.rules import BY_NAME as RULES
from chainlint.engine.document import DocumentAnalyser, analyse_text
from chainlint.report.explain import explain_text

DEMO = Path(__file__).parent.parent / "examples"
CHAIN = 'scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]'
PIECES = [
    "import pandas as pd\n",
    "import pandas\n",
    "\n",
    'SCANS = "data/parcel_scans.parquet"\n',
    'SCANS = "elsewhere.parquet"\n',
    "scans = pd.read_parquet(SCANS)\n",
    "scans = load()\n",
    "scans = load()  # chainlint: profile=parcel_scans\n",
    "if ready:\n    scans = pd.read_parquet(SCANS)\n",
    "# chainlint: keep\n",
    "# chainlint: keep reorder\n",
    "# chainlint: profile=parcel_scans\n",
    f"out = {CHAIN}\n",
    f"def f(scans):\n    return {CHAIN}\n",
    f"@cache\ndef g():\n    return {CHAIN}\n",
    f"def h():\n    scans = pd.read_parquet(SCANS)\n    return {CHAIN}\n",
    'bad = scans.query("parcel_size == \'XXL\'").query("attempts >= 3")\n',
    "review = scans[scans.weight_kg > 1]\n",
    'review = review[review.status == "lost"]\n',
    'review = review.query("depot == \'WEST\'")\n',
    'a = 1; two = scans[scans.attempts > 2][scans.status == "lost"]\n',
    "z = frame[frame.a == 1][frame.b == 2]\n",
    "class K:\n    x = scans[scans.attempts > 2][scans.depot == 'WEST']\n",
    "LIMIT = 3\n",
    "LIMIT = LOW + 1\n",
    "LOW = 2\n",
    "LIMIT = compute()\n",
    "def bump():\n    global LIMIT\n    LIMIT = 4\n",
    "def free(scans):\n    return scans[scans.attempts > LIMIT][scans.status == 'lost']\n",
    "def local(scans):\n    limit = LIMIT * 2\n    return scans[scans.attempts > limit].query('depot == @LIMIT')\n",
    "import numpy as np\n",
    "import math as np\n",
    "def circle(scans):\n    return scans[scans.weight_kg > np.pi][scans.status == 'lost']\n",
    "def broken(:\n",
    'text = """\n',
    # Statements that join or split statement runs across top-level statements.
    'print(review)\n',
    'log("step")\n',
    'late = review[review.attempts > 2]\n',
    'review.dropna(subset=["depot"], inplace=True)\n',
    "m = scans.weight_kg > 1\n",
    'out = scans[scans.status == "lost"][m]\n',
    "[x for x in y]\n",
    # A function reading the module's frames, names and masks.
    "def g():\n    return scans[scans.weight_kg > 1][scans.status == 'lost']\n",
    'def bump2():\n    global SCANS\n    SCANS = "x.parquet"\n',
    "def k(x=scans[scans.attempts > 1][m]):\n    return x\n",
    "@register(scans[scans.attempts > 1][scans.depot == 'WEST'])\ndef q():\n    return 1\n",
    # Masks written whole: each step's conjunct has a span of its own.
    "def fm(scans):\n    return scans[(scans.weight_kg > 1) & (scans.status == 'lost')]\n",
    'fused = scans[(scans.weight_kg > 1) & (scans.status == "lost")]\n',
]
#: The pieces of statement runs, drawn as often as all the others: runs joined and split by an
#: edit, across other top-level statements, are where reuse by a statement's text goes wrong.
RUN_PIECES = [
    "import pandas as pd\n",
    "review = scans[scans.weight_kg > 1]\n",
    'review = review[review.status == "lost"]\n',
    'late = review[review.attempts > 2]\n',
    'print(review)\n',
    'log("step")\n',
    "# chainlint: keep\n",
    'review.dropna(subset=["depot"], inplace=True)\n',
]
#: The pieces of a script (a notebook turned into a module): chains at the top level, reading
#: the frames, names and masks assigned above them, a chain starting on a statement's first
#: line and one below it, frames reassigned, masks rebound, directives on the line above.
SCRIPT_PIECES = [
    'report = (\n    scans\n    .loc[lambda d: d["weight_kg"] > 0.5]\n    .loc[lambda d: d["depot"] == "WEST"]\n)\n',
    'late = scans.loc[lambda d: d.attempts > LIMIT].loc[lambda d: d.status == "lost"]\n',
    'west = scans.query("depot == @LIMIT").query("attempts >= 3")\n',
    'fused = scans[(scans.weight_kg > LIMIT) & (scans.status == "lost")]\n',
    "def fl(scans):\n    return scans[(scans.weight_kg > LIMIT) & (scans.status == 'lost')]\n",
    "scans = pd.read_parquet(SCANS)  # chainlint: profile=parcel_scans\n",
    "scans = scans.copy()\n",
    "LIMIT = 3\n",
    "LIMIT = compute()\n",
    "m = 3\n",
    "m = scans.attempts > LIMIT\n",
    'kept = scans[m][scans.depot == "WEST"]\n',
    "m = scans.attempts > 2; kept = scans[m][scans.depot == 'WEST']\n",
    "review = scans[scans.weight_kg > 1]; review = review[m]\n",
    "review = review.loc[lambda d: d.attempts > 1].loc[lambda d: d.depot == 'WEST']\n",
    'scans.dropna(subset=["depot"], inplace=True)\n',
    "for day in days:\n    review = review[review.attempts > day]\n",
    "# chainlint: keep\n",
    "# chainlint: profile=parcel_scans\n",
]
PIECE = st.one_of(st.sampled_from(RUN_PIECES), st.sampled_from(SCRIPT_PIECES), st.sampled_from(PIECES))

#: Names a rename edit swaps in a piece (the frames and names the pieces share).
RENAMES = [("review", "late"), ("scans", "review"), ("LIMIT", "LOW"), ("m", "n"), ("SCANS", "PATH"), ("report", "review"),
           ("LIMIT", "m")]
#: What a swap edit changes in a piece, either way: a name's value, what a frame was read from,
#: a mask made a number, a statement that stops a run made one it steps over.
SWAPS = [("m = 3", "m = scans.attempts > 2"), ("LIMIT = compute()", "LIMIT = 3"), ("= load()", "= pd.read_parquet(SCANS)"),
         ("print(review)", "log(1)"), ('"data/parcel_scans.parquet"', '"elsewhere.parquet"'), ("keep", "keep reorder")]

#: What typing adds inside a line: brackets and strings left open, continuations, comments.
TYPED = [")", "(", "[", '"""', "'", "#", "\\\n", "\n", "    ", "x", ";", ":", "@d\n", "\n\n", "from __future__ import annotations\n"]

#: Where an edit lands: often at the top, which moves every statement below it.
WHERE = st.one_of(st.just(0), st.integers(0, 40))


def edits(piece: st.SearchStrategy[str]) -> st.SearchStrategy[list[tuple[str, int, object]]]:
    """Edits of a list of pieces: a piece inserted, deleted or replaced, text typed into one, a
    name renamed in one, a swap in every piece (what the unchanged pieces read changes)."""
    return st.lists(st.one_of(
        st.tuples(st.sampled_from(["insert", "delete", "replace"]), WHERE, piece),
        st.tuples(st.just("type"), st.integers(0, 10_000), st.sampled_from(TYPED)),
        st.tuples(st.just("rename"), WHERE, st.sampled_from(RENAMES)),
        st.tuples(st.just("swap"), WHERE, st.sampled_from(SWAPS + [(new, old) for old, new in SWAPS])),
    ), min_size=1, max_size=10)


@pytest.fixture(scope="module")
def project(demo_store: Path) -> Path:
    # The name the property test below reads: its examples are derived from its own text.
    return demo_store


@settings(max_examples=250, derandomize=True, deadline=None)
@given(start=st.lists(PIECE, max_size=14), steps=edits(PIECE))
def test_incremental_analysis_equals_a_whole_analysis(project: Path, start: list[str], steps) -> None:
    _replay(project, start, steps)


SCRIPT_PIECE = st.one_of(st.sampled_from(RUN_PIECES), st.sampled_from(SCRIPT_PIECES))


@settings(max_examples=150, derandomize=True, deadline=None)
@given(start=st.lists(SCRIPT_PIECE, max_size=14), steps=edits(SCRIPT_PIECE))
def test_incremental_analysis_of_a_script_equals_a_whole_analysis(project: Path, start: list[str], steps) -> None:
    _replay(project, start, steps)


def _replay(project: Path, start: list[str], steps: list[tuple[str, int, object]]) -> None:
    """Analyse the pieces joined after each edit, incrementally and whole: the same results."""
    options = Options(rules=frozenset(RULES))
    path = str(project / "m.py")
    analyser = DocumentAnalyser(path)
    pieces = list(start)
    for operation, where, piece in [("insert", 0, "")] + list(steps):
        index = where % (len(pieces) + 1)
        if operation == "rename":
            if pieces:
                old, new = piece
                pieces[where % len(pieces)] = re.sub(rf"\b{old}\b", new, pieces[where % len(pieces)])
        elif operation == "swap":
            old, new = piece
            pieces = [p.replace(old, new) for p in pieces]
        elif operation == "type" and pieces:
            index = where % len(pieces)
            at = where % (len(pieces[index]) + 1)
            pieces[index] = pieces[index][:at] + piece + pieces[index][at:]
        elif operation == "insert":
            pieces.insert(index, piece)
        elif pieces and index < len(pieces):
            if operation == "delete":
                del pieces[index]
            else:
                pieces[index] = piece
        text = "".join(pieces)
        got, want = analyser.analyse(text, options), analyse_text(path, text, options)
        assert got.planned == want.planned, text
        assert got.findings == want.findings, text
        assert explain_text(got.planned) == explain_text(want.planned)
        assert [e.message for e in got.errors] == [e.message for e in want.errors]
        assert got.refusal == want.refusal


def test_a_document_over_the_limit_is_not_analysed(project: Path) -> None:
    analysis = DocumentAnalyser(str(project / "m.py"), max_bytes=100).analyse(f"out = {CHAIN}\n" * 3, Options())
    assert not analysis.planned and "over the 0.0 MB limit" in analysis.refusal and "--max-file-size" in analysis.refusal


FAR = "\n\ndef unrelated():\n    return 1\n\n\n"
#: (text before, text after): the edit changes what a chain far below it means.
CONTEXT_EDITS = [
    ('SCANS = "data/parcel_scans.parquet"\nscans = pd.read_parquet(SCANS)\n' + FAR + f"def f():\n    return {CHAIN}\n",
     'SCANS = "elsewhere.parquet"\nscans = pd.read_parquet(SCANS)\n' + FAR + f"def f():\n    return {CHAIN}\n"),
    ("scans = load()  # chainlint: profile=parcel_scans\n" + FAR + f"out = {CHAIN}\n",
     "scans = load()\n" + FAR + f"out = {CHAIN}\n"),
    ("LIMIT = 3\n" + FAR + "def free(scans):\n    return scans[scans.attempts > LIMIT][scans.status == 'lost']\n",
     "LIMIT = 300\n" + FAR + "def free(scans):\n    return scans[scans.attempts > LIMIT][scans.status == 'lost']\n"),
    ("LIMIT = 3\n" + FAR + "def free(scans):\n    return scans[scans.attempts > LIMIT][scans.status == 'lost']\n",
     "LIMIT = 3\ndef bump():\n    global LIMIT\n    LIMIT = 4\n" + FAR + "def free(scans):\n    return scans[scans.attempts > LIMIT][scans.status == 'lost']\n"),
    ("LOW = 2\nLIMIT = LOW + 1\n" + FAR + "def local(scans):\n    limit = LIMIT * 2\n    return scans[scans.attempts > limit][scans.status == 'lost']\n",
     "LOW = 200\nLIMIT = LOW + 1\n" + FAR + "def local(scans):\n    limit = LIMIT * 2\n    return scans[scans.attempts > limit][scans.status == 'lost']\n"),
    ("import numpy as np\n" + FAR + "def circle(scans):\n    return scans[scans.weight_kg > np.pi][scans.status == 'lost']\n",
     "import os as np\n" + FAR + "def circle(scans):\n    return scans[scans.weight_kg > np.pi][scans.status == 'lost']\n"),
    # Whether a mask written whole splits depends on what a name holds: a function without chains
    # gains one.
    ("LIMIT = compute()\n" + FAR + "def fl(scans):\n    return scans[(scans.weight_kg > LIMIT) & (scans.status == 'lost')]\n",
     "LIMIT = 3\n" + FAR + "def fl(scans):\n    return scans[(scans.weight_kg > LIMIT) & (scans.status == 'lost')]\n"),
    # The same at the top level, and a top-level chain reading a name, a frame, a mask.
    ("LIMIT = compute()\n" + FAR + 'fused = scans[(scans.weight_kg > LIMIT) & (scans.status == "lost")]\n',
     "LIMIT = 3\n" + FAR + 'fused = scans[(scans.weight_kg > LIMIT) & (scans.status == "lost")]\n'),
    ("LIMIT = 3\n" + FAR + 'late = scans.loc[lambda d: d.attempts > LIMIT].loc[lambda d: d.status == "lost"]\n',
     "LIMIT = 30\n" + FAR + 'late = scans.loc[lambda d: d.attempts > LIMIT].loc[lambda d: d.status == "lost"]\n'),
    ('SCANS = "data/parcel_scans.parquet"\nscans = pd.read_parquet(SCANS)\n' + FAR + f"out = {CHAIN}\n",
     'SCANS = "elsewhere.parquet"\nscans = pd.read_parquet(SCANS)\n' + FAR + f"out = {CHAIN}\n"),
    ("m = 3\n" + FAR + 'kept = scans[m][scans.depot == "WEST"]\n',
     "m = scans.attempts > 2\n" + FAR + 'kept = scans[m][scans.depot == "WEST"]\n'),
    # A mask bound on a chain's own line, bound a second time further down: no longer a mask.
    (FAR + "m = scans.attempts > 2; kept = scans[m][scans.depot == 'WEST']\n",
     FAR + "m = scans.attempts > 2; kept = scans[m][scans.depot == 'WEST']\nm = 3\n"),
    ('SCANS = "data/parcel_scans.parquet"\nif ready:\n    scans = pd.read_parquet(SCANS)\n' + FAR + f"out = {CHAIN}\n",
     # A seam from the block's last line into the next statement: the finder now walks the block.
     'SCANS = "data/parcel_scans.parquet"\nif ready:\n    scans = pd.read_parquet(SCANS)\nx = x[x.a > 1]\n' + FAR + f"out = {CHAIN}\n"),
]


@pytest.mark.parametrize("before, after", CONTEXT_EDITS)
def test_an_edit_far_above_a_chain_reaches_it(project: Path, before: str, after: str) -> None:
    options = Options(rules=frozenset(RULES))
    path = str(project / "m.py")
    analyser = DocumentAnalyser(path)
    header = "import pandas as pd\n"
    first = analyser.analyse(header + before, options)
    assert first.planned == analyse_text(path, header + before, options).planned
    got, want = analyser.analyse(header + after, options), analyse_text(path, header + after, options)
    assert got.planned == want.planned and got.findings == want.findings
    assert want.planned[-1:] != analyse_text(path, header + before, options).planned[-1:]  # the edit matters


#: (text before, text after): an edit that joins or splits a statement run across top-level
#: statements, or moves statements the run reaches.
MOVING_EDITS = [
    # A function reused below a line added at the top: its mask written whole moves with it.
    ("import pandas as pd\ndef fm(scans):\n    return scans[(scans.weight_kg > 1) & (scans.status == 'lost')]\n",
     "x = 1\nimport pandas as pd\ndef fm(scans):\n    return scans[(scans.weight_kg > 1) & (scans.status == 'lost')]\n"),
    # A run's first statement inserted at the top: the run now spans the imports to a statement
    # the edit moved.
    ('import pandas as pd\nimport pandas as pd\nreview = review[review.status == "lost"]\n',
     'review = scans[scans.weight_kg > 1]\nimport pandas as pd\nimport pandas as pd\nreview = review[review.status == "lost"]\n'),
    # A statement reading the frame inserted between the run's filters splits it.
    ('review = scans[scans.weight_kg > 1]\nlog("x")\nreview = review[review.status == "lost"]\n',
     'review = scans[scans.weight_kg > 1]\nprint(review)\nreview = review[review.status == "lost"]\n'),
    # The run's last statement edited: its first statement's unit is unchanged.
    ('# chainlint: keep\nreview = scans[scans.weight_kg > 1]\nlog("x")\nreview = review[review.status == "lost"]\n',
     '# chainlint: keep\nreview = scans[scans.weight_kg > 1]\nlog("x")\nreview = review[review.depot == "WEST"]\n'),
]


@pytest.mark.parametrize("before, after", MOVING_EDITS)
def test_an_edit_that_joins_splits_or_moves_a_chain(project: Path, before: str, after: str) -> None:
    options = Options(rules=frozenset(RULES))
    path = str(project / "m.py")
    analyser = DocumentAnalyser(path)
    analyser.analyse(before, options)
    got, want = analyser.analyse(after, options), analyse_text(path, after, options)
    assert got.planned == want.planned and got.findings == want.findings
