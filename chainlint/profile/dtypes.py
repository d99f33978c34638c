"""What an Arrow type is to the profiler and to pandas: the kind of statistics it gets, the
dtype pandas 3 reads it as, and how its temporal values are counted and written."""

from __future__ import annotations

import json
import re
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


#: Field metadata of a schema as profiled: the dtype pandas gives the column whatever its
#: values (a categorical, a nullable or pyarrow-backed dtype, a `read_csv` dtype); a field
#: without it gets the dtype its Arrow type and its nulls give (`pandas_type`).
DTYPE_KEY = b"chainlint.dtype"
#: Field metadata of a CSV column of numbers pyarrow reads otherwise: how pandas reads it
#: (`profile/csv_numbers.py`), so that every piece of the file is read alike.
NUMBERS_KEY = b"chainlint.csv-numbers"

#: The extension dtypes pyarrow's `Table.to_pandas` restores from the `numpy_type` the pandas
#: metadata records (pandas' own names: nullable numbers and booleans, `string`, `str`, and
#: pyarrow-backed `...[pyarrow]`); other recorded names are numpy dtypes, which follow the
#: Arrow type.
_RECORDED = re.compile(r"U?Int(8|16|32|64)|Float(32|64)|boolean|str|string(\[(python|pyarrow)\])?|.+\[pyarrow\]")


def pandas_schema(schema: pa.Schema) -> pa.Schema:
    """The schema as the profiler counts it: dictionary columns as their value type, and each
    column whose dtype pandas fixes whatever its values marked with it (`DTYPE_KEY`).

    `schema` is what pyarrow reads for `pd.read_parquet`/`pd.read_feather`, with the pandas
    metadata (`b"pandas"`) a file written by pandas carries, less the columns that metadata names
    as the frame's index (pandas reads them as the index, not as columns); a field already marked keeps its
    mark (a `read_csv` dtype), so that a schema as profiled is its own. The dtype follows pyarrow's
    `Table.to_pandas` as pandas 3 calls it: an extension dtype the metadata records, except a
    string dtype over a dictionary column; else a dictionary column is a categorical."""
    recorded = _recorded_dtypes(schema.metadata or {})
    index = index_columns(schema.metadata or {})
    fields = []
    for field in schema:
        if field.name in index:
            continue
        dtype = fixed_dtype(field) or _fixed_dtype(field.type, recorded.get(field.name))
        value_type = field.type.value_type if pa.types.is_dictionary(field.type) else field.type
        marks = {k: v for k, v in (field.metadata or {}).items() if k == NUMBERS_KEY}
        if dtype:
            marks[DTYPE_KEY] = dtype.encode()
        fields.append(pa.field(field.name, value_type, metadata=marks or None))
    return pa.schema(fields)


def with_dtype(field: pa.Field, dtype: str) -> pa.Field:
    """The field marked with the dtype pandas gives it whatever its values."""
    return field.with_metadata({**(field.metadata or {}), DTYPE_KEY: dtype.encode()})


def fixed_dtype(field: pa.Field) -> str | None:
    """The dtype a schema as profiled fixes for the field, or None (it follows its nulls)."""
    value = (field.metadata or {}).get(DTYPE_KEY)
    return value.decode() if value is not None else None


def index_columns(metadata: dict[bytes, bytes]) -> frozenset[str]:
    """The stored columns pandas' metadata names as the frame's index (`__index_level_0__`, or
    the index's own name); a range index is stored as numbers only, not as a column."""
    try:
        return frozenset(c for c in json.loads(metadata[b"pandas"])["index_columns"] if isinstance(c, str))
    except (KeyError, TypeError, AttributeError, ValueError):
        return frozenset()


def data_columns(table: pa.Table, schema: pa.Schema) -> pa.Table:
    """A table read from a file as its schema as profiled has it: the index columns left out."""
    return table if table.num_columns == len(schema) else table.select(schema.names)


def _recorded_dtypes(metadata: dict[bytes, bytes]) -> dict[str, str]:
    """Column name -> the `numpy_type` pandas recorded for it; nothing from metadata that is
    not pandas' (a file written by other tools may carry anything)."""
    try:
        columns = json.loads(metadata[b"pandas"])["columns"]
        return {str(c.get("field_name", c.get("name"))): c["numpy_type"] for c in columns if isinstance(c.get("numpy_type"), str)}
    except (KeyError, TypeError, AttributeError, ValueError):
        return {}


def _fixed_dtype(arrow_type: pa.DataType, recorded: str | None) -> str | None:
    if recorded is not None and _RECORDED.fullmatch(recorded):
        name = "string" if recorded.startswith("string") else recorded  # pandas 3 reads either storage as `string`
        if not (name in ("str", "string") and pa.types.is_dictionary(arrow_type)):
            return name
    return "category" if pa.types.is_dictionary(arrow_type) else None


def pandas_type(arrow_type: pa.DataType, has_nulls: bool) -> str:
    """The dtype pandas 3 gives this column when it reads the file (default numpy backend), for
    a column whose dtype the file does not fix (`fixed_dtype`)."""
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
