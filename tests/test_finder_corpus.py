"""The finder over a fixture corpus of every step form and every non-chain.

Each chain in the files of `fixtures/finder/` is announced by a `# expect:` comment on the line
above it; `non_chains.py` must yield nothing.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from chainlint.engine.run import analyse_file
from chainlint.find.chains import find_chains
from chainlint.find.screen import Seams
from chainlint.model import OriginKind
from chainlint.parse.source import parse_tree, read_source, text_source

FIXTURES = Path(__file__).parent / "fixtures" / "finder"


def _expectations(path: Path) -> dict[int, list[tuple[str, bool]]]:
    expected = {}
    for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        stripped = line.strip()
        if stripped.startswith("# expect:"):
            steps = []
            for part in stripped[len("# expect:"):].split(" ;; "):
                part = part.strip()
                steps.append((part.lstrip("!"), not part.startswith("!")))
            expected[number + 1] = steps
    return expected


@pytest.mark.parametrize("name", sorted(p.name for p in FIXTURES.glob("*.py") if p.name != "non_chains.py"))
def test_every_form_is_found_with_its_predicates_and_barriers(name: str) -> None:
    path = FIXTURES / name
    expected = _expectations(path)
    result = analyse_file(str(path))
    assert result.errors == ()
    found = {
        chain.span.line: [(step.predicate.canonical(), step.movable) for step in chain.steps]
        for chain in result.chains
    }
    assert sorted(found) == sorted(expected)
    for line, steps in expected.items():
        assert found[line] == steps, f"chain at line {line}"


def test_non_chains_are_not_reported() -> None:
    result = analyse_file(str(FIXTURES / "non_chains.py"))
    assert result.errors == ()
    assert [(c.span.line, c.frame) for c in result.chains] == []


@pytest.mark.parametrize(
    ("source", "kinds", "mask_frames"),
    [
        ('df[df.a == 1][df.b == 2]\n', ["getitem_mask", "getitem_mask"], ["own", "outer"]),
        ('df.loc[df.a == 1].loc[lambda d: d.b == 2]\n', ["loc_mask", "loc_lambda"], ["own", None]),
        ('df[df.a == 1][other.b == 2]\n', ["getitem_mask", "getitem_mask"], ["own", "foreign"]),
        ('x = df.query("a == 1")\nx = x.dropna(subset=["b"])\n', ["query", "dropna"], [None, None]),
    ],
)
def test_step_kinds_and_mask_frames(tmp_path: Path, source: str, kinds: list[str], mask_frames: list[str | None]) -> None:
    path = tmp_path / "m.py"
    path.write_text(source, encoding="utf-8")
    (chain,) = analyse_file(str(path)).chains
    # The names are the JSON contract's (`explain --format json`), which the enums' values keep.
    assert [s.kind.value for s in chain.steps] == kinds
    assert [s.mask_frame.value if s.mask_frame else None for s in chain.steps] == mask_frames


def test_positions_are_one_based_code_point_columns(tmp_path: Path) -> None:
    # Three two-byte letters before the chain: `ast` reports byte offsets, we report characters.
    path = tmp_path / "m.py"
    path.write_text('ééé = 1; out = df[df.a == 1].loc[lambda d: d.b > 2]\n', encoding="utf-8")
    (chain,) = analyse_file(str(path)).chains
    line = path.read_text(encoding="utf-8").splitlines()[0]
    assert (chain.span.line, chain.span.column) == (1, line.index("df[") + 1)
    assert chain.span.end_column == len(line) + 1
    assert [s.span.column for s in chain.steps] == [line.index("[df") + 1, line.index(".loc") + 1]


def test_barrier_reason_is_specific() -> None:
    result = analyse_file(str(FIXTURES / "forms.py"))
    reasons = {s.barrier.reason for c in result.chains for s in c.steps if s.barrier}
    assert "reads the mean of `weight` over the rows it receives" in reasons
    assert "ranks `b` among the rows it receives" in reasons
    assert "reads the index" in reasons
    assert "calls `tidy`, which chainlint does not know" in reasons


def test_segments_split_at_barriers() -> None:
    result = analyse_file(str(FIXTURES / "forms.py"))
    chain = next(c for c in result.chains if len(c.steps) == 3 and not c.steps[1].movable)
    assert chain.segments() == ((0,), (2,))


@pytest.mark.parametrize("name", sorted(p.name for p in FIXTURES.glob("*.py")))
def test_the_screen_hides_no_chain_of_the_corpus(name: str) -> None:
    # The corpus holds every form the finder knows: the screened finder must see what a finder
    # walking every statement sees.
    source = read_source(str(FIXTURES / name))
    unscreened = find_chains(source, parse_tree(source), Seams(None))
    assert list(analyse_file(str(FIXTURES / name)).chains) == unscreened


def test_a_path_bound_to_a_local_constant_binds_the_frame(tmp_path: Path) -> None:
    path = tmp_path / "m.py"
    path.write_text(
        'import pandas as pd\n\n\ndef load():\n    where = "data/scans.parquet"\n    frame = pd.read_parquet(where)\n'
        '    return frame[frame.a > 1].query("b == 2")\n',
        encoding="utf-8",
    )
    (chain,) = analyse_file(str(path)).chains
    assert chain.origin is not None and (chain.origin.kind, chain.origin.path) == (OriginKind.READ, "data/scans.parquet")


def test_a_run_never_steps_over_into_the_next_cell(tmp_path: Path) -> None:
    nbformat = pytest.importorskip("nbformat")
    notebook = nbformat.v4.new_notebook()
    notebook.cells = [nbformat.v4.new_code_cell("t = df[df.a > 1]\nnote = 'first cell'"),
                      nbformat.v4.new_code_cell("t = t[t.b > 2]")]
    nbformat.write(notebook, str(tmp_path / "two.ipynb"))
    assert analyse_file(str(tmp_path / "two.ipynb")).chains == ()


def test_a_long_run_of_boolean_columns_is_one_chain() -> None:
    # Each later step finds the chain's frame under the steps before it: one walk per step.
    source = "out = df[df.a > 1]" + "".join(f"[df.flag{i}]" for i in range(60)) + "\n"
    text = text_source("long.py", source)
    chains = find_chains(text, parse_tree(text), Seams(None))
    assert [len(c.steps) for c in chains] == [61]
