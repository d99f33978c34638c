"""Parquet, Arrow IPC (Feather) and JSON Lines as streams of tables of bounded length (CSV:
`csv_reader.py`). Each opener gives the schema, the stream and the row count where the file
states it; a file it cannot read is a DataError naming it."""

from __future__ import annotations

import os
from collections.abc import Iterator, Sequence
from typing import Any

import pyarrow as pa
import pyarrow.ipc as paipc
import pyarrow.json as pajson
import pyarrow.parquet as pq

from chainlint.profile.dtypes import pandas_schema
from chainlint.profile.errors import DataError

_JSON_BLOCK = 32 << 20


def table_batches(part: pa.Table | pa.RecordBatch, rows: int) -> Iterator[pa.Table]:
    """Tables of at most `rows` rows (zero-copy slices)."""
    table = part if isinstance(part, pa.Table) else pa.Table.from_batches([part])
    for start in range(0, table.num_rows, rows):
        yield table.slice(start, rows)


def parquet_file(source: str, filesystem: Any = None) -> tuple[pq.ParquetFile, pa.Schema]:
    """A Parquet file opened with its strings read as dictionaries (counted from their indices),
    and its schema as pandas reads it (`dtypes.pandas_schema`: taken before, since reading
    strings as dictionaries would make every one a categorical)."""
    handle = pq.ParquetFile(source, filesystem=filesystem)
    schema = pandas_schema(handle.schema_arrow)
    strings = [f.name for f in handle.schema_arrow if pa.types.is_string(f.type) or pa.types.is_large_string(f.type)]
    if strings:
        handle = pq.ParquetFile(source, read_dictionary=strings, filesystem=filesystem)
    return handle, schema


def open_parquet(path: str, batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    try:
        handle, schema = parquet_file(path)
    except (pa.ArrowInvalid, OSError) as error:
        raise DataError(f"not a readable Parquet file ({str(error).splitlines()[0]})", path=str(path)) from None

    def stream() -> Iterator[pa.Table]:
        try:
            # A reader per row group: one reader over all of them keeps memory for each group
            # it has passed (measured: +90 MB per row group of 1M rows x 40 columns).
            for group in range(handle.metadata.num_row_groups):
                for batch in handle.iter_batches(batch_size=batch_rows, row_groups=[group]):
                    yield pa.Table.from_batches([batch])
        except (pa.ArrowInvalid, OSError) as error:
            raise DataError(str(error).splitlines()[0], path=str(path)) from None

    return schema, stream(), handle.metadata.num_rows


def hive_dataset(path: str) -> Any:
    """A folder of Parquet files as pandas' `read_parquet` opens it: its `key=value` folders
    are columns read as categoricals."""
    import pyarrow.dataset as pads  # imports pandas: loaded only for folders of Parquet files

    return pads.dataset(path, format="parquet", partitioning=pads.HivePartitioning.discover(infer_dictionary=True))


def open_parquet_dataset(paths: Sequence[str], batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    import pyarrow.dataset as pads  # imports pandas: loaded only for folders of Parquet files

    try:
        parts = [hive_dataset(p) for p in paths]
        dataset = parts[0] if len(parts) == 1 else pads.dataset(parts)
        rows = dataset.count_rows()  # reads every part's footer: a corrupt part fails here
    except (pa.ArrowInvalid, OSError) as error:  # pyarrow's message names the part
        raise DataError(f"not a readable Parquet dataset ({str(error).splitlines()[0]})", path=str(paths[0])) from None

    def stream() -> Iterator[pa.Table]:
        try:
            for batch in dataset.to_batches(batch_size=batch_rows, use_threads=True):
                yield pa.Table.from_batches([batch])
        except (pa.ArrowInvalid, OSError) as error:
            raise DataError(str(error).splitlines()[0], path=str(paths[0])) from None

    return pandas_schema(dataset.schema), stream(), rows


def open_arrow(path: str, batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    try:
        source = pa.memory_map(path)
        try:
            reader = paipc.open_file(source)
            schema = reader.schema

            def stream() -> Iterator[pa.Table]:
                for index in range(reader.num_record_batches):
                    yield from table_batches(reader.get_batch(index), batch_rows)
        except pa.ArrowInvalid:
            source = pa.memory_map(path)
            stream_reader = paipc.open_stream(source)
            schema = stream_reader.schema

            def stream() -> Iterator[pa.Table]:
                for batch in stream_reader:
                    yield from table_batches(batch, batch_rows)
    except (pa.ArrowInvalid, OSError) as error:
        raise DataError(f"not a readable Arrow/Feather file ({str(error).splitlines()[0]})", path=str(path)) from None
    return pandas_schema(schema), stream(), None


def open_jsonl(path: str, batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    if os.path.getsize(path) == 0:
        raise DataError("empty file", path=str(path))
    try:
        reader = pajson.open_json(path, read_options=pajson.ReadOptions(block_size=_JSON_BLOCK, use_threads=False))
    except (pa.ArrowInvalid, OSError) as error:
        raise DataError(str(error).splitlines()[0], path=str(path)) from None

    def stream() -> Iterator[pa.Table]:
        try:
            for batch in reader:
                yield from table_batches(batch, batch_rows)
        except pa.ArrowInvalid as error:
            raise DataError(str(error).splitlines()[0], path=str(path)) from None

    return reader.schema, stream(), None
