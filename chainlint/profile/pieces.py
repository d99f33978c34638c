"""A dataset cut into pieces that can be counted apart: Parquet row groups, CSV byte ranges that
end on record boundaries, runs of an Arrow IPC file's record batches, whole JSON Lines, Arrow
streams and compressed CSV files; behind fsspec URLs the same (a CSV file's ranges read as
ranges of the URL, a JSON Lines file from a local copy).

Each piece is read with the local path's own readers, so that its batches are the rows the
local profile counts, in the same order; `count_piece` counts them with the local path's
own loop. Nothing here knows how pieces are scheduled (see `chainlint.cluster`).
"""

from __future__ import annotations

import mmap
import os
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, replace
from typing import Any

import pyarrow as pa
import pyarrow.ipc as paipc
import pyarrow.parquet as pq

from chainlint.profile import formats, readers
from chainlint.profile.files import data_format, dataset_files, sha256_of
from chainlint.profile.csv_reader import CsvFile, _compressed, _csv_pieces as _cut_csv, open_csv
from chainlint.profile.dtypes import data_columns, pandas_schema
from chainlint.profile.errors import DataError
from chainlint.profile.read_options import CsvOptions
from chainlint.profile.remote import described as described_url
from chainlint.profile.remote import file_size, filesystem, is_url, listed, local_copy, url_digest
from chainlint.profile.files import SourceFile
from chainlint.profile.formats import table_batches
from chainlint.profile.readers import BATCH_ROWS

_ARROW_ERRORS = (pa.ArrowException, OSError)


@dataclass(frozen=True)
class Piece:
    """One task's share of the data. `path` is absolute (workers may start elsewhere)."""

    kind: str
    path: str
    group: int | None = None  # a Parquet row group, the first of `groups` in a row
    groups: int = 1
    start: int = 0  # a CSV byte range [start, end) of whole records; end 0: the whole file
    end: int = 0
    quoted: bool = False  # the range holds a quote (values may hold line breaks)
    fragment: Any = None  # a row group of a Parquet folder (pyarrow dataset fragment)
    batches: tuple[int, int] | None = None  # record batches [first, last) of an Arrow IPC file
    number: int = 0  # the piece's place in row order (set by `Plan`): seeds where its samples start
    hashes: bool = False  # the file's first piece (set by `Plan`): its task also takes the file's sha256

    def part(self) -> str | None:
        """The piece within its file, as an error message names it; None for a whole file."""
        if self.group is not None:
            return f"row group {self.group}" if self.groups == 1 else f"row groups {self.group}-{self.group + self.groups - 1}"
        if self.batches is not None:
            return f"record batches {self.batches[0]}-{self.batches[1] - 1}"
        if self.end:
            return f"bytes {self.start}-{self.end}"
        return None

    def where(self) -> str:
        """The piece and its file, as a progress or time-limit message names it."""
        part = self.part()
        return self.path if part is None else f"{part} of {self.path}"


@dataclass(frozen=True)
class Layout:
    """What every piece's reader needs besides its piece: the dataset's schema as profiled, the
    schema a Parquet folder is scanned with, the reader options and the batch length."""

    schema: pa.Schema
    scan_schema: pa.Schema | None
    csv: CsvOptions
    batch_rows: int
    first_path: str


@dataclass
class Plan:
    """A dataset's schema, files (as given, for the profile's `source`), and pieces in row order."""

    layout: Layout
    kind: str
    files: list[SourceFile]
    pieces: list[Piece]
    expected_rows: int | None

    def __post_init__(self) -> None:
        firsts = {piece.path: index for index, piece in reversed(list(enumerate(self.pieces)))}
        self.pieces = [replace(piece, number=index, hashes=firsts[piece.path] == index) for index, piece in enumerate(self.pieces)]

    @property
    def schema(self) -> pa.Schema:
        return self.layout.schema

    def locations(self) -> list[str]:
        """Where a worker reads each file: absolute paths (workers may start in another folder)
        or URLs."""
        return [f.path if is_url(f.path) else os.path.abspath(f.path) for f in self.files]


def plan_pieces(arguments: Sequence[str], batch_rows: int = BATCH_ROWS, csv: CsvOptions | None = None) -> Plan:
    """Cut DATA arguments into pieces, reading only what the cut needs: Parquet footers, the
    first CSV piece (it decides the types) and the CSV files' quote parity, the first JSON
    Lines block, Arrow files' batch lengths (behind a URL, each CSV file is read once as a
    stream to cut it, and the first JSON Lines file is read whole). Raises DataError naming the
    file, as the local path does."""
    csv = csv or CsvOptions()
    if any(is_url(argument) for argument in arguments):
        return _url_plan(arguments, batch_rows, csv)
    kind, paths, files, described = dataset_files(arguments)
    scan_schema = None
    if kind == "parquet" and any(os.path.isdir(p) for p in paths):
        schema, scan_schema, pieces, expected = _folder_pieces(paths)
    elif kind == "parquet":
        schema, pieces, expected = _parquet_pieces(files)
    elif kind == "csv":
        schema, first, rows = open_csv(files[0], csv)
        first.close()
        sizes = [d.bytes for d in described]
        expected = None if rows is None else round(rows * sum(sizes) / max(sizes[0], 1))
        pieces = [piece for path in files for piece in _csv_pieces(path)]
    elif kind == "arrow":
        schema, _, expected = formats.open_arrow(files[0], batch_rows)
        pieces = [piece for path in files for piece in _arrow_pieces(os.path.abspath(path), pa.memory_map(path))[1]]
    else:
        schema, _, expected = formats.open_jsonl(files[0], batch_rows)
        pieces = [Piece(kind, os.path.abspath(path)) for path in files]
    readers._check_columns(schema, files[0])
    return Plan(Layout(schema, scan_schema, csv, batch_rows, files[0]), kind, described, pieces, expected)


def _url_plan(arguments: Sequence[str], batch_rows: int, csv: CsvOptions) -> Plan:
    """Files behind fsspec URLs (a file, a glob, or a folder of files), read where the task
    runs: a piece per Parquet row group, run of Arrow record batches or CSV byte range, a JSON
    Lines file whole."""
    described: list[SourceFile] = []
    pieces: list[Piece] = []
    for argument in arguments:
        if not is_url(argument):
            raise DataError(f"give every DATA as a URL or none (mixed with {arguments[0]})", path=argument)
        fs, found = listed(argument)
        for path in found:
            file = described_url(fs, path)
            if described and data_format(file.path) != data_format(described[0].path):
                raise DataError(f"mixed data formats ({data_format(described[0].path)}, {data_format(file.path)}); "
                                "profile one format at a time")
            described.append(file)
    kind, urls = data_format(described[0].path), [d.path for d in described]
    schema, expected = None, None
    if kind == "parquet":
        rows = 0
        for url in urls:
            fs, inner = filesystem(url)
            handle, other = _parquet_handle(inner, fs, url)
            if schema is None:
                schema = other
            elif not other.equals(schema):
                raise readers._differs(url, urls[0])
            pieces.extend(Piece("parquet", url, first, count) for first, count in _group_runs(handle.metadata))
            rows += handle.metadata.num_rows
        expected = rows
    elif kind == "arrow":
        for url in urls:
            fs, inner = filesystem(url)
            try:
                with fs.open(inner, "rb") as handle:
                    other, cut = _arrow_pieces(url, handle)
            except (pa.ArrowInvalid, OSError) as error:
                raise DataError(f"not a readable Arrow/Feather file ({str(error).splitlines()[0]})", path=url) from None
            schema = schema or pandas_schema(other)
            pieces.extend(cut)
    elif kind == "csv":
        schema, first, rows_seen = open_csv(urls[0], csv)  # reads the first piece only
        first.close()
        sizes = [d.bytes for d in described]
        expected = None if rows_seen is None else round(rows_seen * sum(sizes) / max(sizes[0], 1))
        pieces = [piece for url in urls for piece in _csv_pieces(url)]
    else:
        with _opened(Piece(kind, urls[0])) as path:
            schema, _, expected = formats.open_jsonl(path, batch_rows)
        pieces = [Piece(kind, url) for url in urls]
    assert schema is not None
    readers._check_columns(schema, urls[0])
    return Plan(Layout(schema, None, csv, batch_rows, urls[0]), kind, described, pieces, expected)


def file_digest(path: str) -> str:
    """A file's sha256 (a path or an fsspec URL), for the profile's fingerprint."""
    return url_digest(path) if is_url(path) else sha256_of(path)


#: Rows a Parquet file's piece holds at least (whole row groups in a row), where the file has them.
PARQUET_PIECE_ROWS = 1_000_000


def _group_runs(metadata: pq.FileMetaData) -> list[tuple[int, int]]:
    """(first row group, how many) of each piece of a Parquet file: row groups in a row until
    the piece holds PARQUET_PIECE_ROWS rows. A task per small row group would pay a task's
    fixed costs (a partial to build and merge, a file to open, reading not overlapped with
    counting) for little counting; a row group of that many rows is a piece alone."""
    runs: list[tuple[int, int]] = []
    first, rows = 0, 0
    for group in range(metadata.num_row_groups):
        rows += metadata.row_group(group).num_rows
        if rows >= PARQUET_PIECE_ROWS:
            runs.append((first, group + 1 - first))
            first, rows = group + 1, 0
    if first < metadata.num_row_groups:
        runs.append((first, metadata.num_row_groups - first))
    return runs


#: Rows an Arrow IPC file's piece holds at least (whole record batches), where the file has them.
ARROW_PIECE_ROWS = 1 << 20


def _arrow_pieces(path: str, source: Any) -> tuple[pa.Schema, list[Piece]]:
    """The schema and runs of an Arrow IPC file's record batches of about ARROW_PIECE_ROWS rows
    (sized by its first batch, the only one read here); an Arrow stream (no footer to seek by)
    is one piece."""
    try:
        reader = paipc.open_file(source)
    except pa.ArrowInvalid:
        source.seek(0)
        return paipc.open_stream(source).schema, [Piece("arrow", path)]
    count = reader.num_record_batches
    if count <= 1:
        return reader.schema, [Piece("arrow", path)]
    per = max(1, -(-ARROW_PIECE_ROWS // max(reader.get_batch(0).num_rows, 1)))
    return reader.schema, [Piece("arrow", path, batches=(first, min(first + per, count))) for first in range(0, count, per)]


def _parquet_pieces(files: list[str]) -> tuple[pa.Schema, list[Piece], int]:
    schema = None
    pieces, rows = [], 0
    for path in files:
        other, _, count = formats.open_parquet(path, 1)
        if schema is None:
            schema = other
        elif not other.equals(schema):
            raise readers._differs(path, files[0])
        runs = _group_runs(pq.ParquetFile(path).metadata)
        pieces.extend(Piece("parquet", os.path.abspath(path), first, count) for first, count in runs)
        rows += count or 0
    assert schema is not None
    return schema, pieces, rows


def _folder_pieces(paths: Sequence[str]) -> tuple[pa.Schema, pa.Schema, list[Piece], int]:
    import pyarrow.dataset as pads  # imports pandas: loaded only for folders of Parquet files

    try:
        parts = [formats.hive_dataset(os.path.abspath(p)) for p in paths]
        dataset = parts[0] if len(parts) == 1 else pads.dataset(parts)
        rows = dataset.count_rows()
        fragments = [group for fragment in dataset.get_fragments() for group in fragment.split_by_row_group()]
    except _ARROW_ERRORS as error:
        raise DataError(f"not a readable Parquet dataset ({str(error).splitlines()[0]})", path=str(paths[0])) from None
    pieces = [Piece("parquet", f.path, f.row_groups[0].id, fragment=f) for f in fragments]
    return pandas_schema(dataset.schema), dataset.schema, pieces, rows


def _csv_pieces(path: str) -> list[Piece]:
    """The CSV reader's own cut: pieces of whole records, at line ends outside quotes (a file
    behind a URL read once as a stream to find them)."""
    absolute = path if is_url(path) else os.path.abspath(path)
    if _compressed(path):
        return [Piece("csv", absolute)]
    if file_size(path) == 0:
        raise DataError("empty file", path=path)
    return [Piece("csv", absolute, start=start, end=start + len(buffer), quoted=quoted)
            for buffer, start, quoted in _cut_csv(path)]


def piece_batches(piece: Piece, layout: Layout) -> Iterator[pa.Table]:
    """The piece's rows as the local path's batches; an error names the file as its `path` (and
    the line where the reader knows it) and the piece in its reason."""
    part = piece.part()
    within = "" if part is None else f" (in {part})"
    try:
        for table in _batches(piece, layout):
            yield data_columns(table, layout.schema)
    except DataError as error:
        raise DataError(error.reason + within, path=error.path or piece.path, line=error.line, column=error.column) from None
    except _ARROW_ERRORS as error:
        raise DataError(str(error).splitlines()[0] + within, path=piece.path) from None


def _batches(piece: Piece, layout: Layout) -> Iterator[pa.Table]:
    rows = layout.batch_rows
    if piece.fragment is not None:
        for batch in piece.fragment.to_batches(schema=layout.scan_schema, batch_size=rows, use_threads=False):
            yield pa.Table.from_batches([batch])
        return
    if piece.group is not None:
        yield from _row_groups(piece.path, piece.group, piece.groups, rows)
        return
    if piece.kind == "csv" and piece.end:
        yield from _csv_range(piece, layout)
        return
    if piece.batches is not None:
        yield from _arrow_batches(piece, layout)
        return
    if piece.kind == "csv":  # a compressed file, from its path or URL as a stream
        schema, stream, _ = open_csv(piece.path, layout.csv)
        _same_schema(schema, piece.path, layout)
        for table in stream:
            yield from table_batches(table, rows)
        return
    opener = {"arrow": formats.open_arrow, "jsonl": formats.open_jsonl}[piece.kind]
    with _opened(piece) as path:
        schema, stream, _ = opener(path, rows)
        _same_schema(schema, piece.path, layout)
        for table in stream:
            yield from table_batches(table, rows)


@contextmanager
def _opened(piece: Piece) -> Iterator[str]:
    """A path the local readers can open: the piece's own, or a local copy of its URL."""
    if not is_url(piece.path):
        yield piece.path
        return
    with local_copy(piece.path) as path:
        yield path


def _arrow_batches(piece: Piece, layout: Layout) -> Iterator[pa.Table]:
    assert piece.batches is not None
    if is_url(piece.path):
        fs, inner = filesystem(piece.path)
        source = fs.open(inner, "rb")
    else:
        source = pa.memory_map(piece.path)
    with source:
        reader = paipc.open_file(source)
        _same_schema(reader.schema, piece.path, layout)
        for index in range(*piece.batches):
            yield from table_batches(reader.get_batch(index), layout.batch_rows)


def _parquet_handle(inner: str, fs: Any, shown: str) -> tuple[pq.ParquetFile, pa.Schema]:
    """A Parquet file opened as the local reader opens it (strings as dictionaries), and its
    schema as profiled."""
    try:
        return formats.parquet_file(inner, fs)
    except _ARROW_ERRORS as error:
        raise DataError(f"not a readable Parquet file ({str(error).splitlines()[0]})", path=shown) from None


def _row_groups(path: str, first: int, count: int, rows: int) -> Iterator[pa.Table]:
    """Row groups in a row, a reader per group as the local path reads them."""
    fs, inner = filesystem(path) if is_url(path) else (None, path)
    handle, _ = _parquet_handle(inner, fs, path)
    for group in range(first, first + count):
        for batch in handle.iter_batches(batch_size=rows, row_groups=[group]):
            yield pa.Table.from_batches([batch])


def _csv_range(piece: Piece, layout: Layout) -> Iterator[pa.Table]:
    reader = CsvFile(piece.path, layout.csv)
    buffer = _byte_range(piece)
    if piece.start == 0:
        table = reader.parse_first(buffer, piece.quoted)
        _same_schema(table.schema, piece.path, layout)
    else:
        table = reader.parse_later(buffer, piece.start, piece.quoted, layout.schema)
    yield from table_batches(table, layout.batch_rows)


def _byte_range(piece: Piece) -> pa.Buffer:
    """A CSV piece's bytes: a slice of the memory-mapped file, or a range read from its URL."""
    if not is_url(piece.path):
        with open(piece.path, "rb") as handle:
            mapped = mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)
        return pa.py_buffer(mapped).slice(piece.start, piece.end - piece.start)
    fs, inner = filesystem(piece.path)
    try:
        data = fs.cat_file(inner, start=piece.start, end=piece.end)
    except OSError as error:
        raise DataError(f"cannot read: {error}", path=piece.path) from None
    if len(data) != piece.end - piece.start:
        raise DataError(f"the file is shorter than when the run began ({len(data)} of {piece.end - piece.start} bytes read)",
                        path=piece.path)
    return pa.py_buffer(data)


def _same_schema(schema: pa.Schema, path: str, layout: Layout) -> None:
    """Whether a piece's file has the columns of the dataset's first file (types as profiled)."""
    if not pandas_schema(schema).equals(layout.schema):
        raise readers._differs(path, layout.first_path)
