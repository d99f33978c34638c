"""Open sample data as one stream of pyarrow tables of bounded length (batches), with a
description of its source.

Memory stays bounded by the batch size: every reader streams (Parquet by batch within each
row group, CSV by memory-mapped piece, JSON Lines by block, Arrow IPC by batch). Several DATA
arguments form one dataset; they must share a schema.
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Iterator, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field

import pyarrow as pa

from chainlint.profile.csv_reader import column_names, open_csv
from chainlint.profile.dtypes import data_columns, pandas_schema
from chainlint.profile.errors import DataError
from chainlint.profile.files import SourceFile, dataset_files, sha256_of
from chainlint.profile.formats import open_arrow, open_jsonl, open_parquet, open_parquet_dataset, table_batches
from chainlint.profile.read_options import CsvOptions

BATCH_ROWS = 262_144


@dataclass
class Dataset:
    """A schema, a way to stream its batches (tables: a CSV piece's columns come in several
    chunks), and its files (fingerprinted in the background)."""

    schema: pa.Schema
    files: list[SourceFile]
    kind: str
    batches: Iterator[pa.Table]
    _digests: list[Future[str]] = field(default_factory=list)
    expected_rows: int | None = None  # known, or estimated (CSV); sets the sampling stride

    def fingerprint(self) -> str:
        """sha256 over the files' own sha256 digests, in path order."""
        combined = hashlib.sha256()
        for digest in self._digests:
            combined.update(digest.result().encode())
        return "sha256:" + combined.hexdigest()


def open_dataset(arguments: Sequence[str], batch_rows: int = BATCH_ROWS, csv: CsvOptions | None = None) -> Dataset:
    """Open DATA arguments as one dataset (CSV as `pd.read_csv(path, ...)` with `csv`'s
    options reads it); raises DataError naming the file on bad input."""
    kind, paths, files, described = dataset_files(arguments)
    # Fingerprinting starts first: it reads every file once, alongside the parse.
    pool = ThreadPoolExecutor(max_workers=1)
    digests = [pool.submit(sha256_of, path) for path in files]
    pool.shutdown(wait=False)
    try:
        schema, batches, expected = _open_files(kind, paths, files, [d.bytes for d in described], batch_rows, csv or CsvOptions())
        _check_columns(schema, files[0])
    except DataError:
        for digest in digests:
            digest.cancel()
        raise
    return Dataset(schema, described, kind, (data_columns(b, schema) for b in batches), digests, expected)


def _open_files(
    kind: str, paths: Sequence[str], files: list[str], sizes: list[int], batch_rows: int, csv: CsvOptions,
) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    if kind == "parquet" and any(os.path.isdir(p) for p in paths):
        return open_parquet_dataset(paths, batch_rows)
    if kind == "csv":
        # Opening a CSV file parses its first piece: later files are opened only when reached,
        # so that memory stays bounded however many files are given.
        schema, first, rows = open_csv(files[0], csv)
        expected = None if rows is None else round(rows * sum(sizes) / max(sizes[0], 1))
        return schema, _chain_csv(files, schema, first, batch_rows, csv), expected
    opener = {"parquet": open_parquet, "arrow": open_arrow, "jsonl": open_jsonl}[kind]
    opened = [opener(path, batch_rows) for path in files]
    schema = opened[0][0]
    for path, (other, _, _) in zip(files, opened):
        if not other.equals(schema):
            raise _differs(path, files[0])
    counts = [rows for _, _, rows in opened]
    return schema, _chain(stream for _, stream, _ in opened), None if None in counts else sum(counts)  # type: ignore[arg-type]


def _differs(path: str, first: str) -> DataError:
    return DataError(f"its columns differ from {first}'s; profile them separately", path=str(path))


def _chain(streams: Iterator[Iterator[pa.Table]]) -> Iterator[pa.Table]:
    for stream in streams:
        yield from stream


def _chain_csv(files: list[str], schema: pa.Schema, first: Iterator[pa.Table], batch_rows: int,
               csv: CsvOptions) -> Iterator[pa.Table]:
    for table in first:
        yield from table_batches(table, batch_rows)
    for path in files[1:]:
        other, stream, _ = open_csv(path, csv)
        if not other.equals(schema):
            raise _differs(path, files[0])
        for table in stream:
            yield from table_batches(table, batch_rows)


def _check_columns(schema: pa.Schema, path: str) -> None:
    if len(schema) == 0:
        raise DataError("no columns", path=str(path))
    names = column_names(schema, path)
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        raise DataError(f"duplicate column names: {', '.join(repr(n) for n in duplicates)}", path=str(path))


def memory_dataset(table: pa.Table, batch_rows: int = BATCH_ROWS) -> Dataset:
    """A table already in memory as a dataset of no files (a live frame, loaded data, a piece of
    a larger dataset profiled on its own); its dtypes as pandas would read it (`pandas_schema`)."""
    schema = pandas_schema(table.schema)
    return Dataset(schema, [], "memory", table_batches(data_columns(table, schema), batch_rows), [], table.num_rows)
