"""Hostile data for `profile`: types pyarrow cannot sort or count, infinities, a corrupt part of
a Parquet folder. Each ends in a located error naming the file, or the column profiled as not
summarised with the reason; never a traceback."""

from __future__ import annotations

import decimal
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.feather as feather
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner

from chainlint.cli import main
from chainlint.profile.store import load_document


def _profile(tmp_path: Path, data: Path) -> tuple[int, str]:
    result = CliRunner().invoke(main, ["profile", str(data), "--name", "p", "--store", str(tmp_path / "store")])
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    return result.exit_code, result.output


def _column(tmp_path: Path, name: str) -> dict:
    return load_document(tmp_path / "store" / "profiles" / "p.json")["columns"][name]


@pytest.mark.parametrize(("name", "array", "reason"), [
    ("half", pa.array(np.arange(12, dtype=np.float16)), "pyarrow cannot order halffloat values"),
    ("decimal", pa.array([decimal.Decimal(i) for i in range(12)], pa.decimal128(20, 2)), "no statistics for Arrow type decimal128(20, 2)"),
    ("lists", pa.array([[i] for i in range(12)]), "no statistics for Arrow type list<item: int64>"),
    ("structs", pa.array([{"x": i} for i in range(12)]), "no statistics for Arrow type struct<x: int64>"),
])
def test_column_of_a_type_without_statistics_is_not_summarised(tmp_path: Path, name: str, array: pa.Array,
                                                               reason: str) -> None:
    data = tmp_path / "d.arrow"
    feather.write_feather(pa.table({name: array, "a": list(range(12))}), str(data))
    code, output = _profile(tmp_path, data)
    assert code == 0, output
    column = _column(tmp_path, name)
    assert column["rows"] == 12 and column["unsummarised"].startswith(reason) and "top" not in column
    assert _column(tmp_path, "a")["distinct"]["value"] == 12  # the other columns are profiled
    shown = CliRunner().invoke(main, ["profiles", "--store", str(tmp_path / "store"), "show", "p"]).output
    assert f"not summarised ({reason}" in shown


def test_infinities_in_csv(tmp_path: Path) -> None:
    data = tmp_path / "d.csv"
    data.write_text("a,b\n" + "inf,1\n-inf,2\n1.5,3\n" * 5)
    code, output = _profile(tmp_path, data)
    assert code == 0, output
    column = _column(tmp_path, "a")
    assert column["unsummarised"] == "it holds infinite values, which a profile cannot state"
    assert column["rows"] == 15 and column["nulls"] == 0  # pandas: inf is a value, not missing
    assert _column(tmp_path, "b")["distinct"]["value"] == 3


def test_corrupt_part_of_a_parquet_folder_is_named(tmp_path: Path) -> None:
    folder = tmp_path / "parts"
    folder.mkdir()
    pq.write_table(pa.table({"a": [1, 2, 3]}), folder / "p0.parquet")
    (folder / "p1.parquet").write_bytes(b"PAR1" + b"\0" * 64 + b"PAR1")
    pq.write_table(pa.table({"a": [4, 5, 6]}), folder / "p2.parquet")
    code, output = _profile(tmp_path, folder)
    assert code == 2 and output.startswith(f"chainlint: error: {folder}: ") and "p1.parquet" in output
    assert not (tmp_path / "store" / "profiles" / "p.json").exists()


def test_column_names_with_line_breaks_cannot_forge_summary_lines(tmp_path: Path) -> None:
    data = tmp_path / "d.parquet"
    pq.write_table(pa.table({"a\nforged: line": [1, 2, 3] * 5}), data)
    assert _profile(tmp_path, data)[0] == 0
    shown = CliRunner().invoke(main, ["profiles", "--store", str(tmp_path / "store"), "show", "p"]).output
    assert "a\\nforged: line  (int64)" in shown and not any(line.startswith("forged") for line in shown.splitlines())
