"""CSV read as `pd.read_csv(path, ...)` reads it, by pyarrow's threaded parser.

pandas' defaults are kept: its NA strings (an empty field is missing, in text columns too),
its boolean words, no date parsing unless `parse_dates` asks, header names made unique and
blank ones named as pandas names them. `tests/test_csv_like_pandas.py` holds the reader to
`pd.read_csv` itself on awkward files. The file is cut into memory-mapped pieces at line ends
outside quoted values (a quoted value may hold line breaks); the first piece decides the types.
A file behind an fsspec URL is read as a stream and cut in the same places.
"""

from __future__ import annotations

import mmap
from collections.abc import Callable, Iterator

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from chainlint.arrays import filled_numpy
from chainlint.profile import csv_numbers
from chainlint.profile.csv_layout import csv_layout
from chainlint.profile.csv_places import first_failing_line, line_at, record_line
from chainlint.profile.dtypes import NUMBERS_KEY, pandas_schema, pandas_type, with_dtype
from chainlint.profile.errors import DataError
from chainlint.profile.read_options import CsvOptions
from chainlint.profile.remote import file_size, input_stream, is_url, named_codec

_CSV_BLOCK = 32 << 20
_CSV_PARSE_BLOCK = 1 << 20  # pyarrow's default; measured the quickest here

#: pandas' default NA strings (`pandas._libs.parsers.STR_NA_VALUES`, pandas 3.1).
PANDAS_NA = ("", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND", "1.#QNAN",
             "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null")
#: The words pandas' C parser reads as booleans.
PANDAS_TRUE, PANDAS_FALSE = ("True", "TRUE", "true"), ("False", "FALSE", "false")

_DTYPES = {
    "str": pa.string(), "string": pa.string(), "object": pa.string(),
    "int64": pa.int64(), "int": pa.int64(), "Int64": pa.int64(), "int32": pa.int32(),
    "float64": pa.float64(), "float": pa.float64(), "float32": pa.float32(),
    "bool": pa.bool_(), "boolean": pa.bool_(),
}
#: The `dtype=` names whose dtype pandas gives the column whatever its values (the others
#: follow the Arrow type and the column's nulls, as without the option).
_FIXED = frozenset({"Int64", "string", "boolean", "category", "object"})


class CsvFile:
    """One CSV file: its layout, the parse options, and its pieces parsed as tables."""

    def __init__(self, path: str, options: CsvOptions) -> None:
        options.check()
        self.path = path
        self.options = options
        self.delimiter = options.sep or ("\t" if path.lower().endswith((".tsv", ".tsv.gz")) else ",")
        self.layout = csv_layout(path, options, self.delimiter)
        # A categorical's values are read as the column's would be without the option: pandas
        # converts its categories as `read_csv` converts values (numbers, booleans, text).
        self.types = {name: _DTYPES[d] for name, d in options.dtype if d != "category"}
        for name in options.parse_dates:
            self.types[name] = pa.timestamp("us")
        self.numbers: dict[str, str] = {}  # columns of numbers pyarrow reads otherwise: how pandas reads them
        missing = sorted({name for name, _ in options.dtype} - set(self.layout.names) | set(self.types) - set(self.layout.names))
        if missing:
            raise DataError(f"no column {missing[0]!r} (named by dtype or parse_dates)", path=str(path))

    def profiled(self, schema: pa.Schema) -> pa.Schema:
        """The parsed schema as profiled: each column given a `dtype=` pandas keeps whatever
        its values marked with it."""
        fixed = {name: d for name, d in self.options.dtype if d in _FIXED}
        fixed.update({name: "object" for name, decision in self.numbers.items() if decision == csv_numbers.OBJECT})
        marked = [f.with_metadata({NUMBERS_KEY: self.numbers[f.name].encode()}) if f.name in self.numbers else f for f in schema]
        return pandas_schema(pa.schema([with_dtype(f, fixed[f.name]) if f.name in fixed else f for f in marked]))

    def convert(self, types: dict[str, pa.DataType]) -> pacsv.ConvertOptions:
        return pacsv.ConvertOptions(
            column_types=types, null_values=list(dict.fromkeys(PANDAS_NA + self.options.na_values)),
            strings_can_be_null=True, quoted_strings_can_be_null=True,
            true_values=list(PANDAS_TRUE), false_values=list(PANDAS_FALSE),
        )

    def parse_first(self, piece: pa.Buffer, quoted: bool) -> pa.Table:
        """The first piece; it decides the types. Columns pyarrow would read as dates or times
        stay text, as pandas leaves them without `parse_dates`."""
        table = self.parse(piece, 0, quoted, self.types, first=True)
        temporal = {f.name: pa.string() for f in table.schema if f.name not in self.types and (
            pa.types.is_temporal(f.type))}
        if temporal:
            table = self.parse(piece, 0, quoted, {**self.types, **temporal}, first=True)
        for index, field in enumerate(table.schema):
            if pa.types.is_null(field.type):  # every value missing: pandas reads float64 NaN
                table = table.set_column(index, field.name, pa.nulls(table.num_rows, pa.float64()))
                self.numbers[field.name] = csv_numbers.EMPTY
        # Where pyarrow's reading of numbers may differ from pandas', the fields decide.
        hex_words = csv_numbers.holds_hex(piece)
        doubtful = [f.name for f in table.schema if f.name not in self.types and csv_numbers.doubtful(table.column(f.name), hex_words)]
        for name, (raw, missing) in self._texts(piece, quoted, doubtful, first=True).items():
            decision = csv_numbers.decide(raw, missing)
            arrow_type = table.schema.field(name).type
            if decision == csv_numbers.dtype_of(decision) and pandas_type(arrow_type, table.column(name).null_count > 0) == decision:
                continue  # pyarrow's reading stands
            if decision != csv_numbers.STR:
                self.numbers[name] = decision
            table = table.set_column(table.schema.get_field_index(name), name, csv_numbers.column(raw, missing, decision))
        words = [f.name for f in table.schema if f.name not in self.types and csv_numbers.booleans(table.column(f.name))]
        for name, (raw, missing) in self._texts(piece, quoted, words, first=True).items():
            self.numbers[name] = csv_numbers.BOOL
            table = table.set_column(table.schema.get_field_index(name), name, csv_numbers.column(raw, missing, csv_numbers.BOOL))
        return table

    def parse_later(self, piece: pa.Buffer, offset: int, quoted: bool, schema: pa.Schema) -> pa.Table:
        """A piece after the first, read in the types of the schema as profiled, and each column
        the first piece decided from its fields (`csv_numbers.py`) as decided: a field that would
        change pandas' dtype is an error (pandas types the whole column)."""
        marked = {f.name: f.metadata[NUMBERS_KEY].decode() for f in schema if NUMBERS_KEY in (f.metadata or {})}
        self.numbers = {name: decision for name, decision in marked.items() if decision != csv_numbers.EMPTY}
        table = self.parse(piece, offset, quoted, {f.name: pa.string() if f.name in self.numbers else f.type for f in schema})
        for name in sorted(set(marked) - set(self.numbers)):
            # Missing throughout the first piece: pandas' scan for integers is still open, and an
            # integer beyond int64 (pyarrow: a float) would make the column uint64 or text.
            beyond = np.flatnonzero(np.abs(filled_numpy(table.column(name).combine_chunks(), 0.0)) >= 2.0**63)
            if beyond.size:
                raise self._changes(name, table.column(name).combine_chunks(), int(beyond[0]), offset)
        hexed = [f.name for f in schema if f.name not in self.numbers and f.name not in self.types
                 and (pa.types.is_integer(f.type) or pa.types.is_floating(f.type))] if csv_numbers.holds_hex(piece) else []
        texts = self._texts(piece, quoted, list(self.numbers) + hexed)
        for name in hexed:
            decision = csv_numbers.decide(*texts[name])
            if decision == csv_numbers.STR:
                hexes = pc.match_substring_regex(texts[name][0], "0[xX]").to_pylist()
                raise self._changes(name, texts[name][0], hexes.index(True) if True in hexes else 0, offset)
        for name, decision in self.numbers.items():
            raw, missing = texts[name]
            misfit = next((i for i, (text, m) in enumerate(zip(raw.to_pylist(), missing.to_pylist()))
                           if not csv_numbers.fits(None if m else text, decision)), None)
            if misfit is not None:
                raise self._changes(name, raw, misfit, offset)
            table = table.set_column(table.schema.get_field_index(name), name, csv_numbers.column(raw, missing, decision))
        return table

    def _changes(self, name: str, raw: pa.Array, row: int, offset: int) -> DataError:
        return DataError(f"column {name!r}: the field {raw[row].as_py()!r} after the file's first part changes the type pandas "
                         "gives the column; name its dtype, e.g. `str`, to read it", path=str(self.path), line=line_at(self.path, offset) + row)

    def _texts(self, piece: pa.Buffer, quoted: bool, names: list[str], first: bool = False) -> dict[str, tuple[pa.Array, pa.Array]]:
        """Each named column's fields as text, as pandas' parser sees them, and which are missing
        spellings."""
        if not names:
            return {}
        table = pacsv.read_csv(piece, read_options=self._read_options(first, threads=True),
                               parse_options=pacsv.ParseOptions(delimiter=self.delimiter, newlines_in_values=quoted),
                               convert_options=pacsv.ConvertOptions(
                                   include_columns=names, column_types={n: pa.string() for n in names}, null_values=[],
                                   strings_can_be_null=False, quoted_strings_can_be_null=False))
        pattern = csv_numbers.missing_pattern(PANDAS_NA + self.options.na_values)
        texts = {name: table.column(name).combine_chunks() for name in names}
        return {name: (raw, pc.match_substring_regex(raw, pattern)) for name, raw in texts.items()}

    def _read_options(self, first: bool, threads: bool) -> pacsv.ReadOptions:
        layout = self.layout
        return pacsv.ReadOptions(
            use_threads=threads, block_size=_CSV_PARSE_BLOCK, column_names=layout.names,
            skip_rows=layout.skip if first else 0, skip_rows_after_names=layout.skip_after if first else 0,
            encoding=self.options.encoding)

    def parse(self, piece: pa.Buffer, offset: int, quoted: bool, types: dict[str, pa.DataType],
              first: bool = False) -> pa.Table:
        invalid: list[tuple[int | None, str]] = []

        def on_invalid(row: pacsv.InvalidRow) -> str:
            invalid.append((row.number, f"expected {row.expected_columns} fields, found {row.actual_columns}"))
            return "error"

        def run(threads: bool, data: pa.Buffer = piece) -> pa.Table:
            return pacsv.read_csv(
                data,
                read_options=self._read_options(first, threads),
                parse_options=pacsv.ParseOptions(delimiter=self.delimiter, invalid_row_handler=on_invalid,
                                                 newlines_in_values=quoted),
                convert_options=self.convert(types),
            )

        try:
            return run(True)
        except (pa.ArrowInvalid, pa.ArrowTypeError) as error:
            raise self._error(error, invalid, run, piece, offset) from None

    def _error(self, error: Exception, invalid: list, run: Callable, piece: pa.Buffer, offset: int) -> DataError:  # type: ignore[type-arg]
        path = self.path
        message = str(error).splitlines()[0]
        if invalid:
            # Row numbers are known only to a single-threaded parse: re-parse to name the line.
            invalid.clear()
            try:
                run(False)
            except (pa.ArrowInvalid, pa.ArrowTypeError):
                pass
        if invalid:
            number, what = invalid[-1]
            line = None if number is None else line_at(path, offset) + record_line(piece, number, self.options.encoding, self.delimiter)
            return DataError(f"malformed CSV row ({what})", path=str(path), line=line)
        if "utf8" in message.lower() or "utf-8" in message.lower():
            return DataError(f"not valid UTF-8 text ({message}); give its encoding", path=str(path))
        if "conversion error" in message.lower():
            line = line_at(path, offset) + first_failing_line(piece, run)
            return DataError(f"{message} (the file's first part decided this column's type; "
                             "name its dtype, e.g. `str`, to read it otherwise)", path=str(path), line=line)
        return DataError(message, path=str(path))


def column_names(schema: pa.Schema, path: str) -> list[str]:
    """The column names; a header that is not UTF-8 is an error, not a failure to show a name."""
    try:
        return schema.names
    except UnicodeDecodeError as error:
        raise DataError(f"a column name is not valid UTF-8 (byte 0x{error.object[error.start]:02x})", path=str(path)) from None


def open_csv(path: str, options: CsvOptions) -> tuple[pa.Schema, Iterator[pa.Table], int | None]:
    """(schema, tables of the file's pieces, estimated row count)."""
    size = file_size(path)
    if size == 0:
        raise DataError("empty file", path=str(path))
    reader = CsvFile(path, options)
    pieces = _csv_pieces(path)
    try:
        first, _, quoted = next(pieces)
    except StopIteration:
        raise DataError("empty file", path=str(path)) from None
    table = reader.parse_first(first, quoted)
    column_names(table.schema, path)
    binary = [f.name for f in table.schema if pa.types.is_binary(f.type) or pa.types.is_large_binary(f.type)]
    if binary:
        raise DataError(f"column {binary[0]!r} is not valid UTF-8 text", path=str(path))
    schema = reader.profiled(table.schema)
    # The row count, estimated from the first piece, sets the summaries' sampling stride.
    expected = None if _compressed(path) or not len(first) else round(table.num_rows * size / len(first))

    def stream() -> Iterator[pa.Table]:
        yield table
        for piece, offset, quoted_piece in pieces:
            yield reader.parse_later(piece, offset, quoted_piece, schema)

    return schema, stream(), expected


def _compressed(path: str) -> bool:
    if is_url(path):
        return named_codec(path) is not None
    with pa.input_stream(path, compression="detect") as source:
        return isinstance(source, pa.CompressedInputStream)


def _piece_end(data, codes: np.ndarray, start: int, limit: int, size: int) -> tuple[int, bool]:  # type: ignore[no-untyped-def]
    """(where the piece starting at `start` ends: after a line end outside quoted values, near
    `limit`; whether the piece holds a quote). A quote count of even parity before a line end
    means the line end is outside quotes (quotes inside values are doubled)."""
    if limit >= size:
        return size, data.find(b'"', start, size) >= 0
    cut = data.rfind(b"\n", start, limit)
    if data.find(b'"', start, limit) < 0:
        if cut >= 0:
            return cut + 1, False
        cut = data.find(b"\n", limit)
        return (size, data.find(b'"', start, size) >= 0) if cut < 0 else (cut + 1, data.find(b'"', start, cut) >= 0)
    if cut >= 0:
        quotes = int(np.count_nonzero(codes[start:cut] == 34))
        while quotes % 2 and cut > start:
            previous = data.rfind(b"\n", start, cut)
            if previous < 0:
                break
            quotes -= int(np.count_nonzero(codes[previous:cut] == 34))
            cut = previous
        if quotes % 2 == 0:
            return cut + 1, True
    # A quoted value longer than a piece: go forward to the first line end outside quotes.
    cut = limit if cut < 0 else cut
    quotes = int(np.count_nonzero(codes[start:cut] == 34))
    while True:
        following = data.find(b"\n", cut + 1)
        if following < 0:
            return size, True
        quotes += int(np.count_nonzero(codes[cut:following] == 34))
        cut = following
        if quotes % 2 == 0:
            return cut + 1, True


def _csv_pieces(path: str) -> Iterator[tuple[pa.Buffer, int, bool]]:
    """(a piece of whole records, its byte offset in the decompressed text, whether it holds a
    quote)."""
    try:
        source = input_stream(path)
    except (pa.ArrowInvalid, OSError) as error:
        raise DataError(f"cannot read: {str(error).splitlines()[0]}", path=str(path)) from None
    if not isinstance(source, pa.CompressedInputStream):
        if is_url(path):
            with source:
                yield from _streamed_pieces(source, path)
            return
        source.close()
        yield from _mapped_pieces(path)
        return
    with source:
        carry = b""
        offset = 0
        while True:
            try:
                block = source.read(_CSV_BLOCK)
            except (pa.ArrowInvalid, OSError) as error:
                raise DataError(f"cannot read: {str(error).splitlines()[0]}", path=str(path)) from None
            data = carry + block
            if not block:
                if data:
                    yield pa.py_buffer(data), offset, data.find(b'"') >= 0
                return
            codes = np.frombuffer(data, dtype=np.uint8)
            cut = data.rfind(b"\n") + 1
            quoted = data.find(b'"', 0, cut) >= 0
            if quoted and cut:
                end = cut - 1
                quotes = int(np.count_nonzero(codes[:end] == 34))
                while quotes % 2 and end > 0:
                    previous = data.rfind(b"\n", 0, end)
                    quotes -= int(np.count_nonzero(codes[max(previous, 0):end] == 34))
                    end = previous
                cut = end + 1 if end > 0 and quotes % 2 == 0 else 0
            if cut > 0:
                yield pa.py_buffer(data[:cut]), offset, quoted
                offset += cut
            carry = data[cut:]


def _mapped_pieces(path: str) -> Iterator[tuple[pa.Buffer, int, bool]]:
    """Pieces of a memory-mapped file, without copies. A piece's pages are let go once it has
    been parsed (the parsed table holds copies), so resident memory stays bounded. (As with any
    memory map, a file truncated by another program while it is read ends the process.)"""
    with open(path, "rb") as handle:
        # Not closed here: pyarrow's views keep the map alive, and it unmaps when the last goes.
        mapped = mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)
    whole = pa.py_buffer(mapped)
    codes = np.frombuffer(whole, dtype=np.uint8)
    size = len(mapped)
    start = 0
    while start < size:
        end, quoted = _piece_end(mapped, codes, start, min(size, start + _CSV_BLOCK), size)
        yield whole.slice(start, end - start), start, quoted
        if hasattr(mapped, "madvise"):
            low = start // mmap.PAGESIZE * mmap.PAGESIZE
            mapped.madvise(mmap.MADV_DONTNEED, low, end // mmap.PAGESIZE * mmap.PAGESIZE - low)
        start = end


def _streamed_pieces(source: pa.NativeFile, path: str) -> Iterator[tuple[pa.Buffer, int, bool]]:
    """The pieces `_mapped_pieces` cuts, from a stream read once from the front (a file behind a
    URL): each piece is cut by `_piece_end` over the bytes from its start, read on until the cut
    is known (a line end outside quotes before the bytes read end, or the stream's end)."""

    def more() -> bytes:
        try:
            return source.read(_CSV_BLOCK)
        except (pa.ArrowInvalid, OSError) as error:
            raise DataError(f"cannot read: {str(error).splitlines()[0]}", path=str(path)) from None

    data, start, ended = b"", 0, False
    while True:
        while not ended and len(data) <= _CSV_BLOCK:  # past one block, so that the cut looks back from it
            block = more()
            data, ended = data + block, not block
        if not data:
            return
        while True:
            end, quoted = _piece_end(data, np.frombuffer(data, dtype=np.uint8), 0, min(len(data), _CSV_BLOCK), len(data))
            if end < len(data) or ended:
                break
            block = more()  # no cut within what was read (a long quoted value): read on
            data, ended = data + block, not block
        yield pa.py_buffer(data[:end]), start, quoted
        data, start = data[end:], start + end
