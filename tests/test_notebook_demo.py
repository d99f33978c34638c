"""The demo notebook (examples/parcel_review.ipynb): `check` locates its chains in cells, `--fix`
rewrites it into a notebook that nbformat's validator accepts, and the fixed notebook runs in
a real kernel (nbclient) on the demo data, the extension included."""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

import nbformat
import pandas as pd
from click.testing import CliRunner
from nbclient import NotebookClient

from chainlint.cli import main

DEMO = Path(__file__).parent.parent / "examples"
ROWS = 20_000


def _check(*args: str):
    return CliRunner().invoke(main, ["check", "--jobs", "1", *args])


def test_check_reports_the_demo_notebook_by_cell() -> None:
    result = _check(str(DEMO))
    lines = [line for line in result.stdout.splitlines() if "parcel_review.ipynb" in line]
    assert [line.split(": ")[0:3] for line in lines] == [
        [f"{DEMO}/parcel_review.ipynb:2:5", "reorder", "cell 4"],
        [f"{DEMO}/parcel_review.ipynb:1:1", "reorder", "cell 6"],
        [f"{DEMO}/parcel_review.ipynb:3:5", "reorder", "cell 9"],
    ]


def test_fixed_demo_notebook_validates_and_runs(tmp_path: Path) -> None:
    shutil.copytree(DEMO / ".chainlint", tmp_path / ".chainlint")
    shutil.copy(DEMO / "parcel_review.ipynb", tmp_path)
    sys.path.insert(0, str(DEMO))
    try:
        from make_parcels import make_parcels
    finally:
        sys.path.remove(str(DEMO))
    (tmp_path / "data").mkdir()
    make_parcels(ROWS).to_parquet(tmp_path / "data" / "parcel_scans.parquet")
    path = tmp_path / "parcel_review.ipynb"
    before = nbformat.read(str(path), as_version=nbformat.NO_CONVERT)
    result = _check("--fix", str(path))
    assert result.stdout.count("fixed: reorder") == 3, result.output
    book = nbformat.read(str(path), as_version=nbformat.NO_CONVERT)
    nbformat.validate(book)  # nbformat's validator, against the schema it ships
    changed = [i for i, (a, b) in enumerate(zip(before.cells, book.cells)) if a != b]
    assert changed == [3, 5, 8]
    NotebookClient(book, timeout=300, kernel_name="python3", resources={"metadata": {"path": str(tmp_path)}}).execute()
    errors = [o for cell in book.cells for o in cell.get("outputs", []) if o.output_type == "error"]
    assert errors == []
    streams = ["".join(o.get("text", "") for o in cell.get("outputs", []) if o.output_type == "stream") for cell in book.cells]
    # pandas on the same data: the rows the planned chain in cell 9 keeps.
    scans = pd.read_parquet(tmp_path / "data" / "parcel_scans.parquet")
    failed = len(scans[(scans.attempts >= 1) & (scans.status == "failed_attempt")])
    # The fix fused cell 9's two steps into one mask: one filter, which the magic does not time
    # as a chain until masks written whole are read as chains of their parts.
    assert '(d["attempts"] >= 1) & (d["status"] == "failed_attempt")' in "".join(book.cells[8].source)
    assert (f"-> {failed:,}" in streams[8] and "return the same frame" in streams[8]) or "no chain of row filters" in streams[8]
    assert streams[9].startswith(f"profile parcel_scans: {ROWS:,} rows, 25 columns -> ")
    review = book.cells[5].outputs[0]["data"]["text/plain"]
    expected = scans[scans.service_level.isin(["standard", "economy", "express"]) & (scans.vehicle_type != "bike")
                     & scans.cod_amount.notna() & (scans.attempts >= 3)]
    assert review == str(len(expected))
