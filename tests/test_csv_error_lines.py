"""A malformed CSV row is named by its physical line in the file, counted as an editor counts
lines: a quoted value holding line breaks before it moves it down, and empty lines count. The
reference is the file's own text (the line the test wrote the bad row on); pandas refuses the
same row (`pd.read_csv` raises ParserError)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from chainlint.cli import main
from chainlint.profile import csv_reader


@pytest.mark.parametrize("block", [None, 40])
def test_a_bad_row_after_quoted_line_breaks_names_its_line(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, block: int | None) -> None:
    if block is not None:
        monkeypatch.setattr(csv_reader, "_CSV_BLOCK", block)  # the bad row in a later piece
    lines = ["id,note,n", '1,"first\nsecond\nthird",3', "", '2,"a, ""b""\nc",4'] + [f"{i},plain,{i}" for i in range(3, 8)]
    lines.append("8,too,many,fields")
    path = tmp_path / "notes.csv"
    path.write_text("\n".join(lines) + "\n9,after,9\n")
    bad = path.read_text().splitlines().index("8,too,many,fields") + 1
    with pytest.raises(pd.errors.ParserError):
        pd.read_csv(path)  # pandas refuses the same row
    result = CliRunner().invoke(main, ["profile", str(path), "--name", "p", "--store", str(tmp_path / "s")])
    assert result.exit_code != 0
    assert f"notes.csv:{bad}:" in result.output and "malformed CSV row" in result.output, result.output
