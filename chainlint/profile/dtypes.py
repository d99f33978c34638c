"""What an Arrow type is to the profiler and to pandas: the kind of statistics it gets, the
dtype pandas 3 reads it as, and how its temporal values are counted and written."""

from __future__ import annotations

from typing import Any

import numpy as np
import pyarrow as pa

#: Kinds counted as numbers (times as their integer ticks).
NUMERIC = frozenset({"integer", "float", "temporal", "boolean"})


def value_kind(arrow_type: pa.DataType) -> str:
    if pa.types.is_dictionary(arrow_type):
        arrow_type = arrow_type.value_type
    if pa.types.is_string(arrow_type) or pa.types.is_large_string(arrow_type):
        return "string"
    if pa.types.is_boolean(arrow_type):
        return "boolean"
    if pa.types.is_integer(arrow_type):
        return "integer"
    if pa.types.is_floating(arrow_type):
        return "float"
    if pa.types.is_timestamp(arrow_type) or pa.types.is_date(arrow_type):
        return "temporal"
    return "other"


def pandas_type(arrow_type: pa.DataType, has_nulls: bool) -> str:
    """The dtype pandas 3 gives this column when it reads the file (default numpy backend)."""
    if pa.types.is_dictionary(arrow_type):
        return "category"
    kind = value_kind(arrow_type)
    if kind == "string":
        return "str"
    if kind == "integer":
        return "float64" if has_nulls else str(arrow_type.to_pandas_dtype().__name__)
    if kind == "boolean":
        return "object" if has_nulls else "bool"
    if kind == "float":
        return str(arrow_type.to_pandas_dtype().__name__)
    if pa.types.is_timestamp(arrow_type):
        zone = f", {arrow_type.tz}" if arrow_type.tz else ""
        return f"datetime64[{arrow_type.unit}{zone}]"
    if pa.types.is_duration(arrow_type):
        return f"timedelta64[{arrow_type.unit}]"
    return "object"


def temporal_ints(array: pa.Array) -> pa.Array:
    """Dates and timestamps as their integer ticks (a zone dropped: ticks are UTC)."""
    if pa.types.is_timestamp(array.type):
        return array.cast(pa.timestamp(array.type.unit)).cast(pa.int64())
    if pa.types.is_date32(array.type):
        return array.cast(pa.int32()).cast(pa.int64())
    return array.cast(pa.int64())


def unit_nanoseconds(arrow_type: pa.DataType) -> int:
    if pa.types.is_timestamp(arrow_type):
        return {"s": 10**9, "ms": 10**6, "us": 10**3, "ns": 1}[arrow_type.unit]
    if pa.types.is_date32(arrow_type):
        return 86_400 * 10**9
    return 10**6


def iso(value: int, arrow_type: pa.DataType) -> str:
    """Integer ticks of a temporal type as the ISO text a profile writes."""
    if pa.types.is_date32(arrow_type):
        return str(np.datetime64(int(value), "D"))
    if pa.types.is_date64(arrow_type):
        return str(np.datetime64(int(value), "ms").astype("datetime64[D]"))
    return str(np.datetime64(int(value), arrow_type.unit))


def plain(value: Any) -> Any:
    """A numpy scalar as the Python value JSON writes."""
    return value.item() if isinstance(value, np.generic) else value
