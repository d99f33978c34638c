"""CSV read as `pd.read_csv` reads it: `pandas.read_csv` itself is the ground truth of every
check here (the frame `measure` runs on, and the profile's null counts, values and dtypes), on
awkward files: empty fields, NA words, quoted line breaks, mixed columns, dates, two-row
headers, duplicate and blank names, and the reader options people pass."""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from chainlint.cli import main
from chainlint.measure.run import as_read_csv, load_table
from chainlint.profile import csv_reader
from chainlint.profile.read_options import CsvOptions

AWKWARD = {
    # A column almost all empty, empty text, NA words pandas reads as missing.
    "empty.csv": 'id,technician,events,score\n1,,3,\n2,Ana,,1.5\n3,,NA,2\n4,"",null,n/a\n5,,None,<NA>\n',
    "words.csv": "a,b,c\nNA,None,<NA>\nx,True,1\n#N/A,False,nan\n-nan,true,N/A\n",
    # Quoted values holding line breaks, separators and doubled quotes.
    "quoted.csv": 'id,note,v\n1,"line one\nline two",3\n2,"say ""hi""\n, there",4\n3,plain,5\n4,"a,b",\n',
    # Numbers and text in one column; integers with a missing value.
    "mixed.csv": "k,v,n\n1,a,1\nx,2,\n3,,3\n",
    # Dates stay text unless asked.
    "dates.csv": "day,at,hour\n2024-01-02,2024-01-02 10:00:00,12:30:00\n2024-02-03,2024-01-02 11:00:00,13:00:00\n",
    # A two-row header with a blank cell, as spreadsheets export merged cells.
    "twohead.csv": "temperature,,pressure\ndegC,min,hPa\n1.5,2,1000\n2.5,3,1001\n",
    "names.csv": "a,a,,a.1,a\n1,2,3,4,5\n",
    "semicolon.csv": "# exported 2024\n# by the depot\ncity;count;flag\nnorth;1;-\nsouth;-;yes\n",
}

CASES = [
    ("empty.csv", {}), ("words.csv", {}), ("quoted.csv", {}), ("mixed.csv", {}), ("dates.csv", {}),
    ("dates.csv", {"parse_dates": ["day", "at"]}), ("twohead.csv", {}), ("twohead.csv", {"header": [0, 1]}),
    ("twohead.csv", {"skiprows": [1]}), ("names.csv", {}), ("words.csv", {"na_values": ["x"]}),
    ("semicolon.csv", {"sep": ";", "skiprows": 2, "na_values": ["-"]}), ("mixed.csv", {"dtype": {"k": "str", "n": "float64"}}),
    ("empty.csv", {"header": None}),
    # dtypes pandas keeps whatever the values: a categorical, nullable integers and booleans,
    # `string` (missing values as NA) and `object`.
    ("mixed.csv", {"dtype": {"k": "category", "v": "string", "n": "Int64"}}),
    ("words.csv", {"dtype": {"a": "object", "b": "boolean", "c": "category"}}),
    ("empty.csv", {"dtype": {"id": "Int64", "events": "Int64", "technician": "category"}}),
]


def _options(given: dict) -> CsvOptions:
    """The same options in chainlint's form."""
    header = given.get("header", 0)
    skiprows = given.get("skiprows", 0)
    return CsvOptions(
        sep=given.get("sep"),
        header=None if header is None else tuple(header) if isinstance(header, list) else (header,),
        skiprows=tuple(skiprows) if isinstance(skiprows, list) else skiprows,
        na_values=tuple(given.get("na_values", ())),
        dtype=tuple(given.get("dtype", {}).items()),
        parse_dates=tuple(given.get("parse_dates", ())),
    )


def _pandas(path: Path, given: dict) -> pd.DataFrame:
    truth = pd.read_csv(path, **given)
    if isinstance(truth.columns, pd.MultiIndex):  # chainlint names a column by its tuple's text
        truth.columns = [str(c) for c in truth.columns]
    truth.columns = [str(c) for c in truth.columns]
    return truth


@pytest.fixture
def files(tmp_path: Path) -> Path:
    for name, text in AWKWARD.items():
        (tmp_path / name).write_text(text, encoding="utf-8")
    return tmp_path


@pytest.mark.parametrize(("name", "given"), CASES)
def test_the_frame_is_what_pandas_reads(files: Path, name: str, given: dict) -> None:
    frame = as_read_csv(load_table([str(files / name)], None, None, _options(given)))
    pd.testing.assert_frame_equal(frame, _pandas(files / name, given))


@pytest.mark.parametrize(("name", "given"), CASES)
def test_the_profile_counts_what_pandas_reads(files: Path, name: str, given: dict) -> None:
    store = files / "store"
    flags = {"sep": "--sep", "encoding": "--encoding"}
    args = ["profile", str(files / name), "--name", "p", "--store", str(store), "--min-count", "1"]
    for key, value in given.items():
        if key in flags:
            args += [flags[key], value]
        elif key == "header":
            args += ["--header", "none" if value is None else ",".join(map(str, value))]
        elif key == "skiprows":
            args += ["--skiprows", "".join(f"{v}," for v in value) if isinstance(value, list) else str(value)]
        elif key == "na_values":
            args += [a for v in value for a in ("--na-value", v)]
        elif key == "parse_dates":
            args += [a for v in value for a in ("--parse-dates", v)]
        elif key == "dtype":
            args += [a for c, t in value.items() for a in ("--dtype", f"{c}={t}")]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    document = json.loads((store / "profiles" / "p.json").read_text())
    truth = _pandas(files / name, given)
    assert document["column_order"] == list(truth.columns)
    for column in truth.columns:
        stats = document["columns"][column]
        assert stats["nulls"] == int(truth[column].isna().sum()), column
        assert stats["type"] == str(truth[column].dtype), column
        values = truth[column].dropna()
        if stats.get("top") and not str(values.dtype).startswith("datetime"):
            listed = {(str(v) if isinstance(v, str) else v): c for v, c in stats["top"]["values"]}
            expected = {(str(v) if isinstance(v, str) else v): int(c) for v, c in values.value_counts().items()}
            assert listed == expected, column


def test_an_empty_text_field_is_missing_as_pandas_reads_it(files: Path) -> None:
    """The case of a column 99% empty: no '' value, and the null share is pandas'."""
    path = files / "sparse.csv"
    path.write_text("technician,events\n" + "".join("Ana,1\n" if i % 100 == 0 else ",\n" for i in range(1000)))
    store = files / "store"
    result = CliRunner().invoke(main, ["profile", str(path), "--name", "s", "--store", str(store)])
    assert result.exit_code == 0, result.output
    document = json.loads((store / "profiles" / "s.json").read_text())
    truth = pd.read_csv(path)
    assert document["columns"]["technician"]["nulls"] == truth.technician.isna().sum() == 990
    assert [v for v, _ in document["columns"]["technician"]["top"]["values"]] == ["Ana"]
    assert document["columns"]["events"]["type"] == str(truth.events.dtype) == "float64"


@pytest.mark.parametrize("compressed", [False, True])
def test_quoted_line_breaks_across_many_pieces(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, compressed: bool) -> None:
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 50)  # pieces much shorter than a quoted value
    rows = ["id,note,n"]
    for i in range(200):
        note = f'"first {i}\nsecond, ""quoted""\n\nthird"' if i % 3 == 0 else ("" if i % 5 == 0 else f"plain {i}")
        rows.append(f"{i},{note},{'' if i % 7 == 0 else i % 4}")
    text = "\n".join(rows) + "\n"
    path = tmp_path / ("q.csv.gz" if compressed else "q.csv")
    path.write_bytes(gzip.compress(text.encode()) if compressed else text.encode())
    frame = as_read_csv(load_table([str(path)], None, None))
    pd.testing.assert_frame_equal(frame, pd.read_csv(path))


def test_reader_options_that_cannot_be_followed_say_so(files: Path) -> None:
    result = CliRunner().invoke(main, ["profile", str(files / "empty.csv"), "--name", "p", "--store", str(files / "s"),
                                       "--dtype", "id=decimal"])
    assert result.exit_code == 2 and "dtype 'decimal' is not supported" in result.output
    result = CliRunner().invoke(main, ["profile", str(files / "empty.csv"), "--name", "p", "--store", str(files / "s"),
                                       "--parse-dates", "nope"])
    assert result.exit_code == 2 and "no column 'nope'" in result.output


CODE = '''import pandas as pd


def depots():
    scans = pd.read_csv("data/scans.csv", sep=";", na_values=["-"], skiprows=[1], dtype={"code": "str"})
    return scans[scans.parcels > 1].loc[lambda d: d.city == "north"]
'''


def test_the_codes_own_read_csv_options_are_followed(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    (tmp_path / "data").mkdir()
    data = tmp_path / "data" / "scans.csv"
    data.write_text("city;parcels;code\n(text);(n);(id)\n" + "".join(f"{c};{n};{k}\n" for c, n, k in
                    [("north", 2, "007"), ("south", "-", "010"), ("north", 3, "-"), ("-", 1, "011")] * 3))
    (tmp_path / "jobs.py").write_text(CODE)
    monkeypatch.chdir(tmp_path)
    hint = CliRunner().invoke(main, ["check", "jobs.py"]).output.splitlines()[-1]
    assert hint == "  to profile their data: chainlint profile data/scans.csv --name scans --sep ';' --skiprows 1, --na-value - --dtype code=str"
    result = CliRunner().invoke(main, ["profile", "data/scans.csv", "--name", "scans", "--min-count", "1"])
    assert result.exit_code == 0, result.output
    document = json.loads((tmp_path / ".chainlint" / "profiles" / "scans.json").read_text())
    truth = pd.read_csv(data, sep=";", na_values=["-"], skiprows=[1], dtype={"code": "str"})  # pandas: the reference
    for column in truth.columns:
        assert document["columns"][column]["nulls"] == truth[column].isna().sum()
        assert document["columns"][column]["type"] == str(truth[column].dtype)
    assert sorted(v for v, _ in document["columns"]["code"]["top"]["values"]) == ["007", "010", "011"]
    (entry,) = document["joint"]
    assert dict(entry["subsets"])[3] == len(truth[(truth.parcels > 1) & (truth.city == "north")])
