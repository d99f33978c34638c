"""Integers beyond int64 in a CSV file, end to end: `chainlint profile` of the file, `check --fix`
of a module reading it with `pd.read_csv`, then both the written and the fixed module executed
in a subprocess over the file. pandas is the ground truth twice over: `pd.read_csv` decides the
columns' dtypes (uint64, object of Python ints, or text), and pandas running the module decides
what the code does (`assert_frame_equal(check_exact=True)`, and the type of any exception).

The test runs its own generated module; chainlint itself never executes it."""

from __future__ import annotations

import json
import pickle
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from chainlint.cli import main

#: Thresholds low enough that any plan estimated cheaper than the written order is written.
EAGER = ["--rows", "1000000000", "--min-gain", "1.001", "--min-saving-ms", "0", "--jobs", "1"]

B = 2**63  # the first integer beyond int64

_RUNNER = """
import pickle, sys, warnings
warnings.simplefilter("ignore")
scope = {}
try:
    exec(compile(open(sys.argv[1]).read(), sys.argv[1], "exec"), scope)
    result = ("frame", scope["out"])
except Exception as error:
    result = ("raised", type(error).__name__)
with open(sys.argv[2], "wb") as handle:
    pickle.dump(result, handle)
"""


def _project(root: Path, rows: list[tuple[object, ...]], header: str, chain: str) -> Path:
    """A project holding `data.csv`, its profile, and a module computing `out` from the file."""
    (root / "pyproject.toml").write_text("[project]\nname = 'integers'\n")
    (root / "data.csv").write_text(header + "\n" + "".join(",".join(map(str, row)) + "\n" for row in rows))
    result = CliRunner().invoke(main, ["profile", str(root / "data.csv"), "--name", "data", "--store", str(root / ".chainlint")])
    assert result.exit_code == 0, result.output
    path = root / "pipeline.py"
    path.write_text(f'import pandas as pd\n\ndf = pd.read_csv("{root / "data.csv"}")\nout = {chain}\n')
    return path


def _execute(module: Path) -> tuple[str, object]:
    """("frame", out) or ("raised", the exception's type name), from a fresh interpreter."""
    result = module.with_suffix(".pickle")
    subprocess.run([sys.executable, "-c", _RUNNER, str(module), str(result)], check=True, timeout=120)
    with open(result, "rb") as handle:
        return pickle.load(handle)  # noqa: S301 - the test's own file


def _profiled_type(root: Path, column: str) -> str:
    return json.loads((root / ".chainlint" / "profiles" / "data.json").read_text())["columns"][column]["type"]


def _check_fix(module: Path) -> str:
    result = CliRunner().invoke(main, ["check", *EAGER, "--fix", str(module)])
    assert result.exit_code in (0, 1), result.output
    return module.read_text()


def _same_behaviour(module: Path) -> str:
    written = _execute(module)
    fixed_text = _check_fix(module)
    fixed = _execute(module)
    assert written[0] == "frame", written
    assert fixed[0] == "frame", f"the fixed module raises {fixed[1]} where the written one returns"
    pd.testing.assert_frame_equal(fixed[1], written[1], check_exact=True)
    return fixed_text


def _rows_uint64() -> list[tuple[object, ...]]:
    """`big` and `c` beyond int64 and never negative: pandas reads both as uint64, and uint64 //
    uint64 gives float64 for every row once a divisor is zero (rounding B + 1 to B)."""
    rows: list[tuple[object, ...]] = [(B + 1, 1, i) for i in range(5)]
    rows += [(i, 0 if i % 50 == 0 else 1 + i % 7, i) for i in range(3000)]
    rows.append((7, B + 5, 9))
    return rows


def _rows_object() -> list[tuple[object, ...]]:
    """`big` beyond uint64 and negative: pandas reads Python ints (object), and Python's
    `int // 0` raises ZeroDivisionError."""
    rows: list[tuple[object, ...]] = [(2**64 + i, 1, i) for i in range(5)]
    rows += [(-i, 0 if i % 50 == 0 else 1 + i % 7, i) for i in range(3000)]
    return rows


@pytest.mark.parametrize(("rows", "dtype", "chain"), [
    (_rows_uint64, "uint64", "df.loc[lambda d: d.c != 0].loc[lambda d: d.big // d.c == 9223372036854775809]"),
    (_rows_object, "object", "df.loc[lambda d: d.c != 0].loc[lambda d: d.big // d.c > 18446744073709551615]"),
    (_rows_object, "object", "df.loc[lambda d: d.c != 0].loc[lambda d: d.big % d.c > 0]"),
])
def test_integers_beyond_int64_keep_the_promise(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, rows, dtype: str, chain: str) -> None:  # type: ignore[no-untyped-def]
    monkeypatch.chdir(tmp_path)
    module = _project(tmp_path, rows(), "big,c,n", chain)
    assert str(pd.read_csv(tmp_path / "data.csv")["big"].dtype) == dtype  # pandas: the reference
    _same_behaviour(module)
    assert _profiled_type(tmp_path, "big") == dtype


def test_totality_of_integers_beyond_int64_against_pandas() -> None:
    """plan/totality.py on the dtypes pandas reads: uint64 floor division and remainder stay
    (a zero divisor turns every row to float64, as the test above shows), a comparison of uint64
    with a negative literal answers row by row and never raises (pandas 3.1 with numpy 2, checked
    here on the full and the empty column), and arithmetic on Python ints may raise."""
    from chainlint.ir.text import parse_predicate as parse
    from chainlint.plan.totality import ANY, LATER, STAYS, judge

    big = pd.Series([B + 1, 3, 0], dtype="uint64")
    for rows in (big, big.iloc[:0]):
        assert list(rows > -1) == [True] * len(rows) and list(rows.between(-5, 10)) == [v <= 10 for v in rows]
    uint64 = {"big": "uint64", "c": "uint64"}
    assert judge(parse("big > -1"), uint64).moves == ANY
    assert judge(parse("big between -5 and 10"), uint64).moves == ANY
    assert judge(parse("big // c == 1"), uint64).moves == STAYS
    assert judge(parse("big % c > 0"), uint64).moves == STAYS
    objects = {"big": "object", "c": "int64"}
    assert judge(parse("big // c > 1"), objects).moves in (LATER, STAYS)
    assert judge(parse("big > 5"), objects).moves in (LATER, STAYS)


def test_a_later_piece_that_changes_pandas_type_is_an_error(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The first piece decides a column's type; pandas reads the whole column, so a later field
    that would change its dtype (here a missing value beside uint64 integers: pandas then keeps
    the text) is an error naming the line, never a profile that says otherwise."""
    from chainlint.profile import csv_reader

    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 64)
    rows = [f"{B + i},{i}" for i in range(40)]
    path = tmp_path / "late.csv"
    path.write_text("big,n\n" + "\n".join(rows[:30] + [",30"] + rows[31:]) + "\n")
    assert str(pd.read_csv(path)["big"].dtype) == "str"  # pandas: the reference
    result = CliRunner().invoke(main, ["profile", str(path), "--name", "p", "--store", str(tmp_path / "s")])
    assert result.exit_code != 0
    assert "late.csv:32" in result.output and "'big'" in result.output, result.output
    fits = tmp_path / "fits.csv"
    fits.write_text("big,n\n" + "\n".join(rows) + "\n")
    result = CliRunner().invoke(main, ["profile", str(fits), "--name", "p", "--store", str(tmp_path / "s")])
    assert result.exit_code == 0, result.output
    column = json.loads((tmp_path / "s" / "profiles" / "p.json").read_text())["columns"]["big"]
    assert column["type"] == str(pd.read_csv(fits)["big"].dtype) == "uint64"
    assert column["nulls"] == 0


@pytest.mark.parametrize("values", [[B + 1, 3], [2**64, -5, ""], [B, -1], [B, ""], [-(2**63) - 1, 7]])
def test_measures_frame_holds_what_pandas_reads(tmp_path: Path, values: list[object]) -> None:
    """`measure`'s frame in pandas' dtype, values equal (exact below 2**53, where the profiler's
    float64 count of Python ints holds them)."""
    from chainlint.measure.run import as_read_csv, load_table

    path = tmp_path / "m.csv"
    path.write_text("big,n\n" + "".join(f"{v},{i}\n" for i, v in enumerate(values)))
    frame = as_read_csv(load_table([str(path)], None, None))
    truth = pd.read_csv(path)  # pandas: the reference
    if truth["big"].dtype != object:
        pd.testing.assert_series_equal(frame["big"], truth["big"], check_exact=True)
        return
    rounded = [int(float(v)) if isinstance(v, int) else v for v in truth["big"]]
    pd.testing.assert_series_equal(frame["big"], pd.Series(rounded, dtype=object, name="big"), check_exact=True)
