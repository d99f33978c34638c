"""CSV columns of numbers (and booleans) typed as `pd.read_csv` types them, where pyarrow's
reading differs.

pandas' C parser (pandas 3.1; `tests/test_csv_dtypes_property.py` holds this module to
`pd.read_csv` itself) types a column by scanning its fields in order:
- int64 first: the first field that is no integer sends the column to float64 (floats,
  exponents, `inf` and `Infinity` words, spaces around numbers but not around words), then to
  text; the first integer beyond int64 sends it on to uint64 (one followed by spaces is no
  integer at all). Integers with a missing value are float64;
- uint64 next, over every field: a field that is no integer sends the column back to float64;
  an integer beyond uint64 to Python ints; a negative field is only noted. A missing value or
  a negative beside an integer beyond int64 then leaves every field as its text (missing
  spellings included); negatives alone give Python ints; else uint64;
- Python ints (object dtype, NaN where missing): every field that is not missing must read as
  Python's `int()` reads it (underscores too), else every field is its text.

pyarrow differs: it reads integers beyond int64, integers with a sign or trailing spaces as
float64, `inf ` with spaces as a float, `0x10` as an integer, and `tRuE` as text where pandas
reads `true` and `false` in any case as booleans. The first piece's columns where
that may be are decided here from their text; a decision pyarrow's type does not carry is marked
in the schema as profiled (`NUMBERS_KEY`), so that later pieces, read on their own, are read
alike, and a later field that would change pandas' dtype is an error naming its line.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

INT64_MIN, INT64_MAX, UINT64_MAX = -(2**63), 2**63 - 1, 2**64 - 1

#: Decisions: pandas' dtype, and for text whether missing spellings stay text (`signs`, `text`);
#: `empty`: every field of the first piece missing (float64 NaN) and pandas' scan still open.
INT64, FLOAT64, STR, UINT64, OBJECT, SIGNS, TEXT, BOOL = "int64", "float64", "str", "uint64", "object", "signs", "text", "bool"
EMPTY = "empty"

_SPACE = "[ \t\n\v\f\r]*"
_INTEGER = re.compile(f"{_SPACE}([+-]?[0-9]+)({_SPACE})")
_FLOAT = re.compile(f"{_SPACE}[+-]?([0-9]+[.]?[0-9]*|[.][0-9]+)([eE][+-]?[0-9]+)?{_SPACE}")
_INFINITY = re.compile("[+-]?(inf|infinity)", re.IGNORECASE)
# The same for pyarrow's regular-expression engine (RE2), over whole columns.
_ARROW_SPACE = r"[ \t\n\x0b\x0c\r]*"
#: pandas reads `true` and `false` in any case as booleans (pyarrow: only the words it is given).
ARROW_BOOLEAN, _ARROW_TRUE = "^(?i:true|false)$", "^(?i:true)$"
_ARROW_SHORT = f"^{_ARROW_SPACE}[+-]?0*[0-9]{{1,18}}{_ARROW_SPACE}$"  # within int64 whatever its digits
_ARROW_INTEGER = f"^{_ARROW_SPACE}[+-]?[0-9]+{_ARROW_SPACE}$"
_ARROW_FLOAT = f"^{_ARROW_SPACE}[+-]?([0-9]+[.]?[0-9]*|[.][0-9]+)([eE][+-]?[0-9]+)?{_ARROW_SPACE}$|^[+-]?(?i:inf|infinity)$"


def holds_hex(piece: pa.Buffer) -> bool:
    """Whether a piece may hold a hexadecimal number, which pyarrow reads and pandas does not."""
    codes = np.frombuffer(piece, dtype=np.uint8)
    after = np.flatnonzero((codes[1:] | 0x20) == ord("x"))  # an x or X, at index + 1
    return bool(np.any(codes[after] == ord("0")))


def doubtful(column: pa.ChunkedArray, hex_words: bool) -> bool:
    """Whether pyarrow's reading of a numeric column may differ from pandas': floats that are
    all whole (integers with a sign or trailing spaces), beyond int64 or infinite (integers
    beyond int64, `inf` with spaces), NaN (`nan` with spaces), hexadecimal numbers."""
    if pa.types.is_integer(column.type):
        return hex_words
    if not pa.types.is_floating(column.type) or column.null_count == len(column):
        return False
    return (hex_words or bool(pc.any(pc.is_nan(column)).as_py()) or (pc.max(pc.abs(column)).as_py() or 0) >= 2**63
            or bool(pc.all(pc.equal(pc.floor(column), column)).as_py()))


def booleans(column: pa.ChunkedArray) -> bool:
    """Whether a column pyarrow reads as text holds only `true` and `false` in any case, which
    pandas reads as booleans (its first value is looked at first)."""
    if not pa.types.is_string(column.type) or column.null_count == len(column):
        return False
    values = column.drop_null()
    first = pc.match_substring_regex(values.slice(0, 1), ARROW_BOOLEAN)
    return bool(pc.all(first).as_py()) and bool(pc.all(pc.match_substring_regex(values, ARROW_BOOLEAN)).as_py())


def missing_pattern(words: Sequence[str]) -> str:
    """A pattern matching exactly the missing-value spellings."""
    return "^(?:" + "|".join(re.escape(w) for w in words) + ")$"


def decide(raw: pa.Array, missing: pa.Array) -> str:
    """pandas' dtype for a column of these fields (`missing`: which are missing spellings)."""
    present = raw.filter(pc.invert(missing))
    has_missing = len(present) < len(raw)
    if _all(present, _ARROW_SHORT):
        return FLOAT64 if has_missing else INT64
    big = pc.and_(pc.match_substring_regex(present, _ARROW_INTEGER), pc.invert(pc.match_substring_regex(present, _ARROW_SHORT)))
    if not pc.any(big).as_py():
        # No integer beyond int64: the int64 scan ends at a field that is no integer.
        return FLOAT64 if _all(present, _ARROW_FLOAT) else STR
    fields = raw.to_pylist()
    return read_as([None if m else t for t, m in zip(fields, missing.to_pylist())])


def _all(values: pa.Array, pattern: str) -> bool:
    return len(values) == 0 or bool(pc.all(pc.match_substring_regex(values, pattern)).as_py())


def _parsed(text: str, low: int, high: int) -> int | str:
    """The integer, or `invalid`, or `overflow` (one beyond the range followed by spaces is
    invalid to pandas)."""
    match = _INTEGER.fullmatch(text)
    if not match:
        return "invalid"
    value = int(match.group(1))
    if low <= value <= high:
        return value
    return "invalid" if match.group(2) else "overflow"


def read_as(fields: Sequence[str | None]) -> str:
    """pandas' dtype for a column of these fields (None: a missing spelling), by its scans."""
    for text in fields:
        if text is None:
            continue
        value = _parsed(text, INT64_MIN, INT64_MAX)
        if value == "invalid":
            return _floats(fields)
        if value == "overflow":
            break
    else:
        return FLOAT64 if None in fields else INT64
    negative = missing = beyond = False
    for text in fields:
        if text is None:
            missing = True
        elif text.lstrip(" \t\n\v\f\r").startswith("-"):
            negative = True  # pandas notes the sign and reads no further
        else:
            value = _parsed(text, 0, UINT64_MAX)
            if value == "invalid":
                return _floats(fields)
            if value == "overflow":
                return _pythons(fields)
            beyond = beyond or value > INT64_MAX  # type: ignore[operator]
    if beyond and (negative or missing):
        return SIGNS
    return _pythons(fields) if negative else UINT64


def _floats(fields: Sequence[str | None]) -> str:
    numbers = all(t is None or _FLOAT.fullmatch(t) or _INFINITY.fullmatch(t) for t in fields)
    return FLOAT64 if numbers else STR


def _pythons(fields: Sequence[str | None]) -> str:
    return OBJECT if all(text is None or _python_int(text) is not None for text in fields) else TEXT


def _python_int(text: str) -> int | None:
    try:
        return int(text)
    except ValueError:
        return None


def dtype_of(decision: str) -> str:
    return STR if decision in (SIGNS, TEXT) else decision


def fits(text: str | None, decision: str) -> bool:
    """Whether a later field leaves the first piece's decision as it is (else pandas, reading
    the whole column, would type it otherwise)."""
    if decision == TEXT:
        return True
    if decision == BOOL:
        return text is None or text.lower() in ("true", "false")
    if decision == OBJECT:
        return text is None or _python_int(text) is not None
    if decision == INT64:
        return text is not None and isinstance(_parsed(text, INT64_MIN, INT64_MAX), int)
    if text is None or text.lstrip(" \t\n\v\f\r").startswith("-"):
        return decision == SIGNS
    return isinstance(_parsed(text, 0, UINT64_MAX), int)


def column(raw: pa.Array, missing: pa.Array, decision: str) -> pa.Array:
    """The column's values as pandas holds them, for the profile: text (with or without its
    missing spellings), int64, uint64, or Python ints (counted as float64)."""
    if decision in (SIGNS, TEXT):
        return raw  # pandas keeps every field's text, missing spellings too
    valid = pc.invert(missing)
    nulls = len(raw) - len(raw.filter(valid))
    if decision == STR:
        return pa.StringArray.from_buffers(len(raw), raw.buffers()[1], raw.buffers()[2], valid.buffers()[1], nulls)
    if decision == BOOL:
        values = pc.match_substring_regex(raw, _ARROW_TRUE)
        return pa.Array.from_buffers(pa.bool_(), len(raw), [valid.buffers()[1] if nulls else None, values.buffers()[1]], nulls)
    fields = [None if m else t for t, m in zip(raw.to_pylist(), missing.to_pylist())]
    if decision in (INT64, UINT64):
        numbers = [None if t is None else _INTEGER.fullmatch(t).group(1) for t in fields]  # type: ignore[union-attr]
        return _arrow([None if n is None else int(n) for n in numbers], np.int64 if decision == INT64 else np.uint64,
                      pa.int64() if decision == INT64 else pa.uint64())
    if decision == FLOAT64:
        return _arrow([None if t is None else float(t) for t in fields], np.float64, pa.float64())
    return _arrow([None if t is None else _float(_python_int(t)) for t in fields], np.float64, pa.float64())  # type: ignore[arg-type]


def _float(value: int) -> float:
    try:
        return float(value)
    except OverflowError:  # beyond float64: counted as an infinity of its sign
        return math.copysign(math.inf, value)


def _arrow(values: Sequence[int | float | None], dtype: type, arrow_type: pa.DataType) -> pa.Array:
    """An Arrow array from its buffers (pyarrow's `pa.array` of Python values imports pandas)."""
    valid = np.array([v is not None for v in values], dtype=bool)
    data = np.array([0 if v is None else v for v in values], dtype=dtype)
    nulls = int(len(values) - valid.sum())
    validity = pa.py_buffer(np.packbits(valid, bitorder="little")) if nulls else None
    return pa.Array.from_buffers(arrow_type, len(values), [validity, pa.py_buffer(data)], null_count=nulls)
