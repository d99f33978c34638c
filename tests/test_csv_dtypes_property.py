"""Random small CSV texts: the dtype the profile gives each column against `pd.read_csv(path)`,
the ground truth (pandas 3.1's C parser, with pandas' defaults, which are chainlint's when no
reader option is given: `cli_csv.py`). The fields are drawn to meet every way pandas types a
column: integers of every size (beyond int64 and uint64, negative, leading zeros, signs,
spaces), floats and exponents, infinities, empty fields, the NA spellings pandas recognises,
boolean words, quoted fields, words, and columns that mix them."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chainlint.profile.build import profile_dataset
from chainlint.profile.csv_reader import PANDAS_NA
from chainlint.profile.readers import open_dataset
from chainlint.profile.settings import Settings

B, U = 2**63, 2**64

_INTEGERS = st.one_of(
    st.integers(-1000, 1000),
    st.integers(B - 3, B + 3), st.integers(U - 3, U + 3), st.integers(-B - 3, -B + 3),
    st.integers(-(10**30), 10**30),
).map(str)
_PADDED = st.tuples(st.sampled_from(["", "+", "0", "00", " "]), st.integers(0, U + 5), st.sampled_from(["", " "])).map(
    lambda t: f"{t[0]}{t[1]}{t[2]}")
_FLOATS = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False, width=64).map(repr),
    st.sampled_from(["1.5", "-0.0", "1e3", "1E-2", "2.", ".5", "1e400", "inf", "-inf", "Infinity", "-0", "9223372036854775808.0",
                     "1.5 ", " 2.5e3", "+.5", "1e", "."]),
)
_WORDS = st.sampled_from(["True", "False", "true", "false", "TRUE", "FALSE", "tRuE", " True", "False ", "x", "yes", "0x10",
                          "0X1a", "-0x5", "1_000", "- 5", "T", "1.#INF", "NAN", "+nan", "nan ", " inf", "Inf", "-Infinity"])
_MISSING = st.sampled_from(sorted(PANDAS_NA))
_KINDS = {"integers": _INTEGERS, "padded": _PADDED, "floats": _FLOATS, "words": _WORDS, "missing": _MISSING}


def _quoted(text: str) -> str:
    return '"' + text.replace('"', '""') + '"'


@st.composite
def _columns(draw):  # type: ignore[no-untyped-def]
    """A column: its fields drawn from one to three kinds (most columns mostly one kind), some
    quoted."""
    kinds = draw(st.lists(st.sampled_from(sorted(_KINDS)), min_size=1, max_size=3, unique=True))
    rows = draw(st.integers(1, 8))
    fields = []
    for _ in range(rows):
        text = draw(st.one_of(*(_KINDS[k] for k in kinds)))
        fields.append(_quoted(text) if draw(st.integers(0, 5)) == 0 or "," in text else text)
    return fields


@st.composite
def _texts(draw):  # type: ignore[no-untyped-def]
    columns = draw(st.lists(_columns(), min_size=1, max_size=3))
    rows = max(len(c) for c in columns)
    # A short column is padded with empty fields (missing, as pandas reads them); a last column
    # of digits keeps every line non-blank (pandas skips blank lines).
    padded = [c + [""] * (rows - len(c)) for c in columns] + [[str(i) for i in range(rows)]]
    names = [f"c{i}" for i in range(len(padded))]
    return ",".join(names) + "\n" + "".join(",".join(col[r] for col in padded) + "\n" for r in range(rows))


@settings(max_examples=300, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.function_scoped_fixture])
@given(text=_texts())
def test_the_profiles_dtypes_are_what_read_csv_reads(tmp_path: Path, text: str) -> None:
    path = tmp_path / "random.csv"
    path.write_text(text)
    truth = pd.read_csv(path)  # pandas: the reference
    document = profile_dataset(open_dataset([str(path)]), "random", Settings(min_count=1))
    profiled = {name: entry["type"] for name, entry in document["columns"].items()}
    assert profiled == {name: str(dtype) for name, dtype in truth.dtypes.items()}, text


def test_columns_decided_from_their_fields_are_read_alike_in_every_piece(tmp_path: Path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    """Integers with a sign (pyarrow: float64), booleans in any case (pyarrow: text) and
    integers beyond int64 decided by the first piece and read so in every later piece: the
    profile's dtypes and `measure`'s frame are what `pd.read_csv` reads; a hexadecimal number
    in a later piece, which pandas reads as text and pyarrow as a number, is an error naming
    its line."""
    from chainlint.measure.run import as_read_csv, load_table
    from chainlint.profile import csv_reader
    from chainlint.profile.errors import DataError

    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 100)  # a piece of a few lines
    lines = [f"+{i},{'tRuE' if i % 2 else 'false'},{B + i},{i}" for i in range(60)]
    path = tmp_path / "pieces.csv"
    path.write_text("signed,flag,big,n\n" + "\n".join(lines) + "\n")
    truth = pd.read_csv(path)  # pandas: the reference
    assert [str(t) for t in truth.dtypes] == ["int64", "bool", "uint64", "int64"]
    document = profile_dataset(open_dataset([str(path)]), "pieces", Settings(min_count=1))
    assert {name: entry["type"] for name, entry in document["columns"].items()} == {n: str(t) for n, t in truth.dtypes.items()}
    pd.testing.assert_frame_equal(as_read_csv(load_table([str(path)], None, None)), truth, check_exact=True)

    path.write_text("signed,flag,big,n\n" + "\n".join(lines[:40] + ["+1,true,5,0x10"] + lines[40:]) + "\n")
    assert str(pd.read_csv(path)["n"].dtype) == "str"
    try:
        profile_dataset(open_dataset([str(path)]), "pieces", Settings(min_count=1))
    except DataError as error:
        assert error.line == 42 and "'n'" in str(error) and "0x10" in str(error)
    else:
        raise AssertionError("a later hexadecimal number was not refused")

    # Missing throughout the first piece, then an integer beyond int64: pandas reads text.
    path.write_text("late,n\n" + "".join(f",{i}\n" for i in range(40)) + f"{B},40\n")
    assert str(pd.read_csv(path)["late"].dtype) == "str"
    try:
        profile_dataset(open_dataset([str(path)]), "pieces", Settings(min_count=1))
    except DataError as error:
        assert error.line == 42 and "'late'" in str(error)
    else:
        raise AssertionError("an integer beyond int64 after missing values was not refused")
