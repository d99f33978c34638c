"""CSV columns holding integers beyond int64, typed as `pd.read_csv` types them.

pyarrow reads such a column as float64; pandas' C parser (pandas 3.1, checked against
`pd.read_csv` in tests/test_csv_integers.py) reads it by scanning the column's fields in order:
- int64 first: the first field that is no integer (a float, a word) sends the column to
  float64, as pyarrow reads it; the first integer beyond int64 sends it on to uint64;
- uint64 next, over every field: a field that is no integer sends the column back to float64;
  an integer beyond uint64 (or below int64) to Python ints; a negative field is only noted.
  Then a missing value or a negative beside an integer beyond int64 leaves every field as its
  text (`str`, missing spellings included, as pandas keeps them); negatives alone give Python
  ints; else uint64;
- Python ints (object dtype, missing values NaN): every field that is not missing must read as
  Python's `int()` reads it (spaces and underscores allowed), else every field is text.

A column so typed keeps its decision in the schema as profiled (`INTEGERS_KEY`), so that later
pieces of the file, read on their own, are read the same way; a later field that would change
the decision is an error naming the line, not a silent difference.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence

import numpy as np
import pyarrow as pa

INT64_MIN, INT64_MAX, UINT64_MAX = -(2**63), 2**63 - 1, 2**64 - 1


#: An integer as pandas' C parser reads one (ASCII spaces around, a sign, digits).
_INTEGER = re.compile(r"[ \t\n\v\f\r]*([+-]?)([0-9]+)[ \t\n\v\f\r]*")
FLOAT, UINT64, OBJECT, SIGNS, TEXT = "float64", "uint64", "object", "signs", "text"


def _integer(text: str) -> int | None:
    match = _INTEGER.fullmatch(text)
    return int(match.group(1) + match.group(2)) if match else None


def _python_int(text: str) -> int | None:
    try:
        return int(text)
    except ValueError:
        return None


def read_as(fields: Sequence[str | None]) -> str:
    """How pandas types a column of these fields (None: a missing-value spelling): `float64`
    (pyarrow's reading stands), `uint64`, `object` (Python ints), or text: `signs` (a missing
    value or a negative beside an integer beyond int64) or `text` (a field no Python int)."""
    for text in fields:
        if text is None:
            continue
        value = _integer(text)
        if value is None:
            return FLOAT
        if not INT64_MIN <= value <= INT64_MAX:
            break
    else:
        return FLOAT
    negative = missing = beyond = False
    for text in fields:
        if text is None:
            missing = True
        elif _negative(text):
            negative = True  # pandas notes the sign and reads no further
        else:
            value = _integer(text)
            if value is None:
                return FLOAT
            if value > UINT64_MAX:
                return _pythons(fields)
            beyond = beyond or value > INT64_MAX
    if beyond and (negative or missing):
        return SIGNS
    return _pythons(fields) if negative else UINT64


def dtype_of(decision: str) -> str:
    """The dtype pandas gives a column so decided."""
    return {SIGNS: "str", TEXT: "str"}.get(decision, decision)


def _negative(text: str) -> bool:
    return text.lstrip(" \t\n\v\f\r").startswith("-")


def _pythons(fields: Sequence[str | None]) -> str:
    return OBJECT if all(text is None or _python_int(text) is not None for text in fields) else TEXT


def fits(text: str | None, decision: str) -> bool:
    """Whether a later field leaves the decision the first piece made as it is (else pandas,
    reading the whole column, would type it otherwise)."""
    if decision == TEXT:
        return True
    if decision == OBJECT:
        return text is None or _python_int(text) is not None
    if text is None or _negative(text):
        return decision == SIGNS
    value = _integer(text)
    return value is not None and 0 <= value <= UINT64_MAX


def column(fields: Sequence[str | None], raw: pa.Array, decision: str) -> pa.Array:
    """The column's values as pandas holds them, for the profile: the text (`raw`), uint64, or
    Python ints (counted as float64; missing where pandas holds NaN)."""
    if decision in (SIGNS, TEXT):
        return raw  # pandas keeps every field's text, missing spellings too
    if decision == UINT64:
        return _arrow([_integer(text) for text in fields], np.uint64, pa.uint64())  # type: ignore[arg-type]
    return _arrow([None if text is None else _float(_python_int(text)) for text in fields], np.float64, pa.float64())  # type: ignore[arg-type]


def _arrow(values: Sequence[int | float | None], dtype: type, arrow_type: pa.DataType) -> pa.Array:
    """An Arrow array from its buffers (pyarrow's `pa.array` of Python values imports pandas)."""
    valid = np.array([v is not None for v in values], dtype=bool)
    data = np.array([0 if v is None else v for v in values], dtype=dtype)
    nulls = int(len(values) - valid.sum())
    validity = pa.py_buffer(np.packbits(valid, bitorder="little")) if nulls else None
    return pa.Array.from_buffers(arrow_type, len(values), [validity, pa.py_buffer(data)], null_count=nulls)


def _float(value: int) -> float:
    try:
        return float(value)
    except OverflowError:  # beyond float64: counted as an infinity of its sign
        return math.copysign(math.inf, value)
