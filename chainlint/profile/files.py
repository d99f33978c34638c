"""The files of a dataset: DATA arguments expanded (patterns, Parquet folders), each file's
format by its name, its size and time, its sha256 digest, and whether a profile's recorded
files still hold the data it was made from."""

from __future__ import annotations

import glob
import hashlib
import os
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from chainlint.profile.errors import DataError
from chainlint.profile.view import Profile


@dataclass(frozen=True)
class SourceFile:
    path: str
    bytes: int
    modified: str


def data_format(path: str) -> str:
    """`csv`, `parquet`, `arrow` or `jsonl`, by the name's ending (a folder holds Parquet)."""
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
    raise DataError("unknown data format (expected .csv, .csv.gz, .parquet, .feather/.arrow, .jsonl)", path=str(path))


def expand(arguments: Sequence[str]) -> list[str]:
    """Arguments as paths: patterns matched (sorted), each path checked to exist."""
    paths: list[str] = []
    for argument in arguments:
        if any(char in argument for char in "*?["):
            matched = sorted(glob.glob(argument, recursive=True))
            if not matched:
                raise DataError("no file matches this pattern", path=str(argument))
            paths.extend(matched)
        elif not os.path.exists(argument):
            raise DataError("no such file or folder", path=str(argument))
        else:
            paths.append(argument)
    return paths


def files_of(path: str) -> list[str]:
    """A path's data files: itself, or a folder's files in sorted order (hidden ones and
    `_`-prefixed ones, as Parquet writers make, left out)."""
    if os.path.isdir(path):
        found = []
        for folder, subfolders, names in os.walk(path):
            subfolders[:] = sorted(d for d in subfolders if not d.startswith((".", "_")))
            found.extend(os.path.join(folder, n) for n in sorted(names) if not n.startswith((".", "_")))
        return found
    return [path]


def dataset_files(arguments: Sequence[str]) -> tuple[str, list[str], list[str], list[SourceFile]]:
    """(the data format, the paths given with patterns expanded, every file, each described);
    DataError for missing, unreadable or mixed data."""
    paths = expand(arguments)
    if not paths:
        raise DataError("no data given")
    kinds = {data_format(p) for p in paths}
    if len(kinds) > 1:
        raise DataError(f"mixed data formats ({', '.join(sorted(kinds))}); profile one format at a time")
    found = [f for p in paths for f in files_of(p)]
    return kinds.pop(), paths, found, [describe(path) for path in found]


def describe(path: str) -> SourceFile:
    """A data file's size and modification time; DataError when it cannot be read."""
    try:
        stat = os.stat(path)
    except OSError as error:
        raise DataError(f"cannot read: {error.strerror}", path=str(path)) from None
    if not os.access(path, os.R_OK):
        raise DataError("cannot read: permission denied", path=str(path))
    modified = datetime.fromtimestamp(stat.st_mtime, UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return SourceFile(path, stat.st_size, modified)


def sha256_of(path: str) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def fingerprint_state(profile: Profile, store: Path) -> tuple[str, str]:
    """("up to date" | "out of date" | "data missing", detail) for a profile's recorded files.

    Recorded paths are as given when profiling; relative ones are looked up from here, then
    from the project folder that holds the store.
    """
    files = profile.source.files
    if not files or profile.source.merged_from is not None:
        return "data missing", "the profile records no single dataset to compare with"
    found = []
    for entry in files:
        candidates = [Path(entry.path), store.resolve().parent / entry.path]
        path = next((c for c in candidates if c.is_file()), None)
        if path is None:
            return "data missing", f"{entry.path} is not there"
        found.append(path)
    combined = hashlib.sha256()
    for path in found:
        combined.update(sha256_of(str(path)).encode())
    if "sha256:" + combined.hexdigest() == profile.source.fingerprint:
        return "up to date", ""
    changed = [str(p) for p, e in zip(found, files) if os.path.getsize(p) != e.bytes]
    return "out of date", ("changed: " + ", ".join(changed)) if changed else "the data's content changed"
