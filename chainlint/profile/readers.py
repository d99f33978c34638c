"""Open sample data as one stream of pyarrow tables of bounded length (batches), with a
description of its source.

Memory stays bounded by the batch size: every reader streams (Parquet by batch within each
row group, CSV by memory-mapped piece, JSON Lines by block, Arrow IPC by batch). Several DATA
arguments form one dataset; they must share a schema.
"""

from __future__ import annotations

import glob
import hashlib
import os
from collections.abc import Iterator, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import pyarrow as pa
import pyarrow.ipc as paipc
import pyarrow.json as pajson
import pyarrow.parquet as pq

from chainlint.profile.csv_reader import column_names, open_csv
from chainlint.profile.read_options import CsvOptions
from chainlint.profile.errors import DataError

__all__ = ["BATCH_ROWS", "CsvOptions", "DataError", "Dataset", "open_dataset"]

BATCH_ROWS = 262_144
_JSON_BLOCK = 32 << 20


@dataclass(frozen=True)
class SourceFile:
    path: str
    bytes: int
    modified: str


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


def _kind(path: str) -> str:
    lower = path.lower()
    if os.path.isdir(path):
        return "parquet"
    for suffix, kind in (
        (".csv", "csv"), (".csv.gz", "csv"), (".csv.bz2", "csv"), (".tsv", "csv"), (".tsv.gz", "csv"),
        (".parquet", "parquet"), (".pq", "parquet"),
        (".feather", "arrow"), (".arrow", "arrow"), (".ipc", "arrow"),
        (".jsonl", "jsonl"), (".ndjson", "jsonl"), (".jsonl.gz", "jsonl"),
    ):
        if lower.endswith(suffix):
            return kind
    raise DataError(f"{path}: unknown data format (expected .csv, .csv.gz, .parquet, .feather/.arrow, .jsonl)")


def _expand(arguments: Sequence[str]) -> list[str]:
    paths: list[str] = []
    for argument in arguments:
        if any(char in argument for char in "*?["):
            matched = sorted(glob.glob(argument, recursive=True))
            if not matched:
                raise DataError(f"{argument}: no file matches this pattern")
            paths.extend(matched)
        elif not os.path.exists(argument):
            raise DataError(f"{argument}: no such file or folder")
        else:
            paths.append(argument)
    return paths


def _sha256(path: str) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def fingerprint_state(document: dict, store: Path) -> tuple[str, str]:
    """("up to date" | "out of date" | "data missing", detail) for a profile's recorded files.

    Recorded paths are as given when profiling; relative ones are looked up from here, then
    from the project folder that holds the store.
    """
    files = document.get("source", {}).get("files", [])
    if not files or "merged_from" in document.get("source", {}):
        return "data missing", "the profile records no single dataset to compare with"
    found = []
    for entry in files:
        candidates = [Path(entry["path"]), store.resolve().parent / entry["path"]]
        path = next((c for c in candidates if c.is_file()), None)
        if path is None:
            return "data missing", f"{entry['path']} is not there"
        found.append(path)
    combined = hashlib.sha256()
    for path in found:
        combined.update(_sha256(str(path)).encode())
    if "sha256:" + combined.hexdigest() == document["source"].get("fingerprint"):
        return "up to date", ""
    changed = [str(p) for p, e in zip(found, files) if os.path.getsize(p) != e.get("bytes")]
    return "out of date", ("changed: " + ", ".join(changed)) if changed else "the data's content changed"


def _files_of(path: str) -> list[str]:
    if os.path.isdir(path):
        found = []
        for folder, subfolders, names in os.walk(path):
            subfolders[:] = sorted(d for d in subfolders if not d.startswith((".", "_")))
            found.extend(os.path.join(folder, n) for n in sorted(names) if not n.startswith((".", "_")))
        return found
    return [path]


def open_dataset(arguments: Sequence[str], batch_rows: int = BATCH_ROWS, csv: CsvOptions | None = None) -> Dataset:
    """Open DATA arguments as one dataset (CSV as `pd.read_csv(path, ...)` with `csv`'s
    options reads it); raises DataError naming the file on bad input."""
    paths = _expand(arguments)
    if not paths:
        raise DataError("no data given")
    kinds = {_kind(p) for p in paths}
    if len(kinds) > 1:
        raise DataError(f"mixed data formats ({', '.join(sorted(kinds))}); profile one format at a time")
    kind = kinds.pop()
    files: list[str] = [f for p in paths for f in _files_of(p)]
    described = []
    for path in files:
        try:
            stat = os.stat(path)
        except OSError as error:
            raise DataError(f"{path}: cannot read: {error.strerror}") from None
        if not os.access(path, os.R_OK):
            raise DataError(f"{path}: cannot read: permission denied")
        modified = datetime.fromtimestamp(stat.st_mtime, UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        described.append(SourceFile(path, stat.st_size, modified))
    # Fingerprinting starts first: it reads every file once, alongside the parse.
    pool = ThreadPoolExecutor(max_workers=1)
    digests = [pool.submit(_sha256, path) for path in files]
    pool.shutdown(wait=False)
    try:
        schema, batches, expected = _open_files(kind, paths, files, [d.bytes for d in described], batch_rows, csv or CsvOptions())
        _check_columns(schema, files[0])
    except DataError:
        for digest in digests:
            digest.cancel()
        raise
    return Dataset(schema, described, kind, batches, digests, expected)


def _open_files(
    kind: str, paths: Sequence[str], files: list[str], sizes: list[int], batch_rows: int, csv: CsvOptions,
) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    if kind == "parquet" and any(os.path.isdir(p) for p in paths):
        return _open_parquet_dataset(paths, batch_rows)
    if kind == "csv":
        # Opening a CSV file parses its first piece: later files are opened only when reached,
        # so that memory stays bounded however many files are given.
        schema, first, rows = open_csv(files[0], csv)
        expected = None if rows is None else round(rows * sum(sizes) / max(sizes[0], 1))
        return schema, _chain_csv(files, schema, first, batch_rows, csv), expected
    opener = {"parquet": _open_parquet, "arrow": _open_arrow, "jsonl": _open_jsonl}[kind]
    opened = [opener(path, batch_rows) for path in files]
    schema = opened[0][0]
    for path, (other, _, _) in zip(files, opened):
        if not other.equals(schema):
            raise DataError(_differs(path, files[0]))
    counts = [rows for _, _, rows in opened]
    return schema, _chain(stream for _, stream, _ in opened), None if None in counts else sum(counts)  # type: ignore[arg-type]


def _differs(path: str, first: str) -> str:
    return f"{path}: its columns differ from {first}'s; profile them separately"


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
            raise DataError(_differs(path, files[0]))
        for table in stream:
            yield from table_batches(table, batch_rows)


def _check_columns(schema: pa.Schema, path: str) -> None:
    if len(schema) == 0:
        raise DataError(f"{path}: no columns")
    names = column_names(schema, path)
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        raise DataError(f"{path}: duplicate column names: {', '.join(repr(n) for n in duplicates)}")


def table_batches(part: pa.Table | pa.RecordBatch, rows: int) -> Iterator[pa.Table]:
    """Tables of at most `rows` rows (zero-copy slices)."""
    table = part if isinstance(part, pa.Table) else pa.Table.from_batches([part])
    for start in range(0, table.num_rows, rows):
        yield table.slice(start, rows)


def _open_parquet(path: str, batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    try:
        handle = pq.ParquetFile(path)
        strings = [f.name for f in handle.schema_arrow if pa.types.is_string(f.type) or pa.types.is_large_string(f.type)]
        if strings:
            handle = pq.ParquetFile(path, read_dictionary=strings)
    except (pa.ArrowInvalid, OSError) as error:
        raise DataError(f"{path}: not a readable Parquet file ({str(error).splitlines()[0]})") from None

    def stream() -> Iterator[pa.Table]:
        try:
            # A reader per row group: one reader over all of them keeps memory for each group
            # it has passed (measured: +90 MB per row group of 1M rows x 40 columns).
            for group in range(handle.metadata.num_row_groups):
                for batch in handle.iter_batches(batch_size=batch_rows, row_groups=[group]):
                    yield pa.Table.from_batches([batch])
        except (pa.ArrowInvalid, OSError) as error:
            raise DataError(f"{path}: {str(error).splitlines()[0]}") from None

    return _plain_schema(handle.schema_arrow), stream(), handle.metadata.num_rows


def _plain_schema(schema: pa.Schema) -> pa.Schema:
    """The schema with dictionary-encoded columns shown as their value type."""
    return pa.schema([pa.field(f.name, f.type.value_type if pa.types.is_dictionary(f.type) else f.type) for f in schema])


def _open_parquet_dataset(paths: Sequence[str], batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    import pyarrow.dataset as pads  # imports pandas: loaded only for folders of Parquet files

    try:
        parts = [pads.dataset(p, format="parquet", partitioning="hive") for p in paths]
        dataset = parts[0] if len(parts) == 1 else pads.dataset(parts)
        rows = dataset.count_rows()  # reads every part's footer: a corrupt part fails here
    except (pa.ArrowInvalid, OSError) as error:  # pyarrow's message names the part
        raise DataError(f"{paths[0]}: not a readable Parquet dataset ({str(error).splitlines()[0]})") from None

    def stream() -> Iterator[pa.Table]:
        try:
            for batch in dataset.to_batches(batch_size=batch_rows, use_threads=True):
                yield pa.Table.from_batches([batch])
        except (pa.ArrowInvalid, OSError) as error:
            raise DataError(f"{paths[0]}: {str(error).splitlines()[0]}") from None

    return _plain_schema(dataset.schema), stream(), rows


def _open_arrow(path: str, batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
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
        raise DataError(f"{path}: not a readable Arrow/Feather file ({str(error).splitlines()[0]})") from None
    return schema, stream(), None


def _open_jsonl(path: str, batch_rows: int) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    if os.path.getsize(path) == 0:
        raise DataError(f"{path}: empty file")
    try:
        reader = pajson.open_json(path, read_options=pajson.ReadOptions(block_size=_JSON_BLOCK, use_threads=False))
    except (pa.ArrowInvalid, OSError) as error:
        raise DataError(f"{path}: {str(error).splitlines()[0]}") from None

    def stream() -> Iterator[pa.Table]:
        try:
            for batch in reader:
                yield from table_batches(batch, batch_rows)
        except pa.ArrowInvalid as error:
            raise DataError(f"{path}: {str(error).splitlines()[0]}") from None

    return reader.schema, stream(), None
