"""A CSV file's header as pandas reads it: the column names (made unique, blank ones named as
pandas names them, several header rows joined) and the rows to skip before the data."""

from __future__ import annotations

import codecs
import csv
import io
import itertools
from dataclasses import dataclass

import pyarrow as pa

from chainlint.profile.errors import DataError
from chainlint.profile.read_options import CsvOptions
from chainlint.profile.remote import input_stream


@dataclass(frozen=True)
class CsvLayout:
    names: list[str]
    skip: int  # rows before the data (header rows included)
    skip_after: int  # rows skipped right after the header


def _unique_names(names: list[str]) -> list[str]:
    """Duplicate names suffixed `.1`, `.2`, ... skipping names the header already holds, as
    pandas does."""
    taken = set(names)
    used: set[str] = set()
    counts: dict[str, int] = {}
    out = []
    for name in names:
        candidate = name
        if name in used:
            k = counts.get(name, 1)
            while f"{name}.{k}" in taken or f"{name}.{k}" in used:
                k += 1
            candidate = f"{name}.{k}"
            counts[name] = k + 1
        used.add(candidate)
        out.append(candidate)
    return out


def csv_layout(path: str, options: CsvOptions, delimiter: str) -> CsvLayout:
    """Column names and rows to skip, from the header rows read with Python's csv module."""
    skiprows = options.skiprows
    lead, skip_after = (skiprows, 0) if isinstance(skiprows, int) else (0, 0)
    header = options.header
    levels = 0 if header is None else len(header)
    if isinstance(skiprows, tuple) and skiprows:
        rows = sorted(set(skiprows))
        after = (header[-1] + 1) if header is not None else 0
        if rows == list(range(len(rows))) and (header is None or header[0] >= len(rows)):
            lead = len(rows)
        elif rows == list(range(after, after + len(rows))):
            skip_after = len(rows)
        else:
            raise DataError(f"skiprows {list(skiprows)}: only leading lines or lines right after the header are supported", path=str(path))
        if lead and header is not None:
            header = tuple(h - lead for h in header)
    first = lead + (header[0] if header is not None else 0)
    encoding = "utf-8-sig" if codecs.lookup(options.encoding).name == "utf-8" else options.encoding
    try:
        with input_stream(path) as raw:
            text = io.TextIOWrapper(raw, encoding=encoding, newline="")  # type: ignore[arg-type]
            records = list(itertools.islice(csv.reader(text, delimiter=delimiter), first + max(levels, 1)))
    except UnicodeDecodeError as error:
        shown = "UTF-8" if encoding == "utf-8-sig" else options.encoding
        raise DataError(f"not valid {shown} text ({error}); give its encoding", path=str(path)) from None
    except (csv.Error, OSError, pa.ArrowInvalid) as error:
        raise DataError(f"cannot read the header: {error}", path=str(path)) from None
    wanted = records[first:]
    if len(wanted) < max(levels, 1):
        raise DataError(f"no header row at line {first + 1}", path=str(path))
    width = max(len(r) for r in wanted)
    if levels == 0:
        return CsvLayout([str(i) for i in range(width)], first, skip_after)
    rows = [r + [""] * (width - len(r)) for r in wanted]
    if levels == 1:
        names = [n if n.strip() else f"Unnamed: {i}" for i, n in enumerate(rows[0])]
    else:
        tuples = [tuple(r[i] if r[i].strip() else f"Unnamed: {i}_level_{lvl}" for lvl, r in enumerate(rows)) for i in range(width)]
        names = [str(t) for t in tuples]
    return CsvLayout(_unique_names(names), first + levels, skip_after)
