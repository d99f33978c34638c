"""The IPython extension in a real kernel: a notebook executed by nbclient (an ipykernel
started for the test), with pandas computing, in this process, the row counts the plan shows."""

from __future__ import annotations

import json
from pathlib import Path

import nbformat
import pytest
from click.testing import CliRunner
from nbclient import NotebookClient
from nbformat.v4 import new_code_cell, new_notebook

from chainlint.cli import main
from chainlint.profile.store import load_document

DEMO = Path(__file__).parent.parent / "examples"
ROWS = 20_000
CHAIN = "late = (\n    scans\n    .loc[lambda d: d.weight_kg > 0.5]\n    .loc[lambda d: d.status == 'damaged']\n)"
PLANNED = "late = (\n    scans\n    .loc[lambda d: (d.weight_kg > 0.5) & (d.status == 'damaged')]\n)"


@pytest.fixture(scope="module")
def executed(tmp_path_factory: pytest.TempPathFactory) -> tuple[list[str], list[dict], Path]:
    folder = tmp_path_factory.mktemp("kernel")
    (folder / ".chainlint").mkdir()
    # The magic keeps the written order unless the plan clears the project's thresholds, as
    # `check` does: a 20,000-row frame saves less than the default 5 ms, so this project asks
    # for any saving.
    (folder / "chainlint.toml").write_text("min_saving_ms = 0\n")
    book = new_notebook(metadata={"kernelspec": {"name": "python3", "language": "python", "display_name": "Python 3"}})
    book.cells = [
        new_code_cell(f"import sys\nsys.path.insert(0, {str(DEMO)!r})\nfrom make_parcels import make_parcels\nscans = make_parcels({ROWS})\nhub = [1, 2]"),
        new_code_cell("%load_ext chainlint"),
        new_code_cell("%%chainlint --time --repeat 2\n" + CHAIN),
        new_code_cell("print('late' in dir())"),
        new_code_cell("%%chainlint --replace\n" + CHAIN),
        new_code_cell("%%chainlint\nother = missing[missing.a > 1].query('b == 2')\nx = hub[hub.a > 1].query('b == 2')"),
        new_code_cell("%chainlint profile scans --name live_scans"),
        new_code_cell("%chainlint profile hub --name nope"),
    ]
    replies: list[dict] = []

    def collect(cell, cell_index, execute_reply):  # type: ignore[no-untyped-def]
        replies.append(execute_reply["content"])

    client = NotebookClient(book, timeout=300, kernel_name="python3", resources={"metadata": {"path": str(folder)}},
                            on_cell_executed=collect)
    client.execute()
    outputs = ["".join(o.get("text", "") for o in cell.outputs if o.output_type == "stream") for cell in book.cells]
    for cell in book.cells:
        assert not [o for o in cell.outputs if o.output_type == "error"], cell.outputs
    return outputs, replies, folder


def _truth() -> tuple[int, int, int]:
    import sys

    sys.path.insert(0, str(DEMO))
    try:
        from make_parcels import make_parcels
    finally:
        sys.path.remove(str(DEMO))
    scans = make_parcels(ROWS)
    heavy = scans[scans.weight_kg > 0.5]
    return len(heavy), len(heavy[heavy.status == "damaged"]), len(scans[scans.status == "damaged"])


def test_the_plan_counts_rows_on_the_live_frame_exactly(executed) -> None:
    outputs, _, _ = executed
    heavy, both, damaged = _truth()  # pandas on the same seeded frame, in this process
    plan = outputs[2]
    assert plan.startswith("cell:3:5: method chain on `scans`, 2 steps, 2 movable")
    written = next(line for line in plan.splitlines() if line.strip().startswith("step 1") and f"{ROWS:,}" in line)
    assert f"{heavy:,}" in written and "joint (exact)" in written
    # Planned as one mask of both steps; timed beside the written form and the single order.
    planned = next(line for line in plan.splitlines() if line.strip().startswith("steps 1 & 2") and f"{ROWS:,}" in line)
    assert f"{both:,}" in planned
    assert f"rows: {heavy:,} -> {both:,}" in plan and f"rows: {both:,}" in plan and f"rows: {damaged:,} -> {both:,}" in plan
    assert "return the same frame" in plan


def test_the_cell_code_is_never_run(executed) -> None:
    outputs, _, _ = executed
    assert outputs[3].strip() == "False"


def test_replace_puts_the_planned_form_into_the_cell(executed) -> None:
    outputs, replies, _ = executed
    payloads = [p for p in replies[4].get("payload", []) if p.get("source") == "set_next_input"]
    assert payloads == [{"source": "set_next_input", "text": PLANNED, "replace": True}]
    assert "the cell now holds the planned form" in outputs[4]


def test_unbound_frames_are_reported(executed) -> None:
    outputs, _, _ = executed
    assert "chain on `missing` not planned: the frame `missing` is not defined in the kernel" in outputs[5]
    assert "line 3: chain on `hub` not planned: `hub` is a list, not a pandas DataFrame" in outputs[5]
    assert outputs[7].strip() == "chainlint: `hub` is a list, not a pandas DataFrame"


def test_profile_of_a_live_frame_serves_check(executed, tmp_path: Path) -> None:
    outputs, _, folder = executed
    path = folder / ".chainlint" / "profiles" / "live_scans.json"
    assert outputs[6].startswith(f"profile live_scans: {ROWS:,} rows, 25 columns -> ")
    document = load_document(path)  # the store's own validation of the profile format
    assert document["rows"] == ROWS and document["name"] == "live_scans"
    (folder / "report.py").write_text(f"# chainlint: profile=live_scans\n{CHAIN.replace(chr(10), ' ')}\n")
    # At a production row count, so that the planned order clears the thresholds (below them the
    # written order stays the plan).
    result = CliRunner().invoke(main, ["explain", "--format", "json", "--rows", "10000000", str(folder / "report.py")])
    (chain,) = json.loads(result.stdout)["chains"]
    assert chain["binding"] == {"profile": "live_scans", "how": "comment"} and chain["groups"] in ([[1], [0]], [[0, 1]])


def test_the_extension_loads_without_nbformat_in_the_core() -> None:
    # The core never imports IPython or nbformat: only the extension and the rewriter do.
    import subprocess
    import sys

    code = "import chainlint.cli, chainlint.engine.run, sys; print(any(m in sys.modules for m in ('IPython', 'nbformat')))"
    assert subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip() == "False"
    assert nbformat.__version__
