"""Data behind fsspec URLs (`s3://`, `gs://`, `https://`, `file://`, `memory://`, ...), for the
pieces of a dataset: listing, a file's sha256, and a local copy for the readers that take a
path. fsspec comes with the `chainlint[dask]` extra; each URL scheme's implementation (s3fs,
gcsfs, ...) is installed as the data needs."""

from __future__ import annotations

import hashlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import UTC, datetime
from typing import Any

from chainlint.profile.errors import DataError
from chainlint.profile.files import SourceFile


def is_url(path: str) -> bool:
    return "://" in path


def filesystem(url: str) -> tuple[Any, str]:
    """The fsspec filesystem of a URL and the path within it."""
    try:
        import fsspec  # installed with the dask extra; other implementations (s3fs, ...) as the data needs
    except ImportError:
        raise DataError("reading URLs needs fsspec (pip install 'chainlint[dask]')", path=url) from None
    try:
        return fsspec.core.url_to_fs(url)
    except (ImportError, ValueError) as error:
        raise DataError(f"no fsspec implementation for this URL ({error})", path=url) from None


def listed(argument: str) -> tuple[Any, list[str]]:
    """The filesystem and the files of a URL argument (a file, a glob, or a folder of files,
    sorted), as fsspec paths."""
    fs, inner = filesystem(argument)
    try:
        pattern = any(c in inner for c in "*?[")
        if not pattern and not fs.exists(inner):
            raise DataError("no such file or folder", path=argument)
        found = sorted(fs.glob(inner)) if pattern else [inner]
        found = [f for path in found for f in (sorted(fs.find(path)) if fs.isdir(path) else [path])]
    except OSError as error:
        raise DataError(f"cannot list: {error}", path=argument) from None
    if not found:
        raise DataError("no file matches this pattern", path=argument)
    return fs, found


def described(fs: Any, path: str) -> SourceFile:
    """A file's URL, size and modification time, as the profile's `source` records them."""
    try:
        info = fs.info(path)
    except OSError as error:
        raise DataError(f"cannot read: {error}", path=fs.unstrip_protocol(path)) from None
    stamp = info.get("mtime") or info.get("LastModified") or info.get("created") or 0
    if isinstance(stamp, datetime):
        stamp = stamp.timestamp()
    modified = datetime.fromtimestamp(float(stamp), UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return SourceFile(fs.unstrip_protocol(path), int(info["size"]), modified)


def url_digest(url: str) -> str:
    fs, inner = filesystem(url)
    digest = hashlib.sha256()
    with fs.open(inner, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


@contextmanager
def local_copy(url: str) -> Iterator[str]:
    """A temporary local copy of the file at `url` (its name kept, so that its format and
    compression are told as from the URL), removed on leaving; errors name the URL, never
    the copy."""
    fs, inner = filesystem(url)
    folder = tempfile.mkdtemp(prefix="chainlint-")
    path = os.path.join(folder, os.path.basename(inner.rstrip("/")) or "data")
    try:
        try:
            with fs.open(inner, "rb") as source, open(path, "wb") as target:
                shutil.copyfileobj(source, target, 1 << 20)
        except OSError as error:
            raise DataError(f"cannot read: {error}", path=url) from None
        try:
            yield path
        except DataError as error:
            if error.path != path:
                raise
            raise DataError(error.reason, path=url, line=error.line, column=error.column) from None
    finally:
        shutil.rmtree(folder, ignore_errors=True)
