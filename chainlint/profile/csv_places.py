"""Where in a CSV file a parse error is, for its message: the line of a byte offset, the line
where a record starts, and the first line of a piece whose values do not convert (only on the
error path)."""

from __future__ import annotations

import csv
import io
from collections.abc import Callable

import numpy as np
import pyarrow as pa

from chainlint.profile.remote import input_stream


def line_at(path: str, offset: int) -> int:
    """The line number of the byte at `offset` of the decompressed text (a path or a URL)."""
    lines = 1
    with input_stream(path) as source:
        while offset > 0:
            block = source.read(min(offset, 1 << 20))
            if not block:
                break
            lines += block.count(b"\n")
            offset -= len(block)
    return lines


def record_line(piece: pa.Buffer, number: int, encoding: str, delimiter: str) -> int:
    """How many lines of the piece come before its `number`th record (1-based, counted as
    pyarrow counts rows: empty lines left out), a quoted value's line breaks included."""
    text = piece.to_pybytes().decode(encoding, errors="replace")
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    lines = records = 0
    for record in reader:
        if record:
            records += 1
            if records == number:
                return lines
        lines = reader.line_num
    return lines


def _fails(run: Callable[[bool, pa.Buffer], pa.Table], data: pa.Buffer) -> bool:
    try:
        run(False, data)
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        return True
    return False


def first_failing_line(piece: pa.Buffer, run: Callable[[bool, pa.Buffer], pa.Table]) -> int:
    """The index of the piece's first line whose values do not convert when parsed by `run`
    (single-threaded): the shortest prefix of whole lines that fails, found by bisection."""
    ends = np.flatnonzero(np.frombuffer(piece, dtype=np.uint8) == 10) + 1
    if not ends.size or ends[-1] != len(piece):
        ends = np.append(ends, len(piece))
    low, high = 0, len(ends) - 1
    while low < high:
        middle = (low + high) // 2
        if _fails(run, piece.slice(0, int(ends[middle]))):
            high = middle
        else:
            low = middle + 1
    return low
