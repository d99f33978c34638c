"""Data behind fsspec URLs (`s3://`, `gs://`, `https://`, `file://`, `memory://`, ...), for the
pieces of a dataset: listing, a file's sha256, its bytes as a stream (beside a local path's), and
a local copy for the readers that take a path. fsspec comes with the `chainlint[dask]` extra; each URL scheme's implementation (s3fs,
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

import pyarrow as pa

from chainlint.profile.errors import DataError
from chainlint.profile.files import SourceFile


def is_url(path: str) -> bool:
    return "://" in path


def named_codec(path: str) -> str | None:
    """The compression a file name tells (`.gz`, `.bz2`, `.zst`, ...), as pyarrow detects it."""
    try:
        return pa.Codec.detect(path).name
    except (ValueError, TypeError):
        return None


def input_stream(path: str) -> pa.NativeFile:
    """The decompressed bytes of a local file or of the file at a URL, read as a stream."""
    if not is_url(path):
        return pa.input_stream(path, compression="detect")
    fs, inner = filesystem(path)
    try:
        handle = fs.open(inner, "rb")
    except OSError as error:
        raise DataError(f"cannot read: {error}", path=path) from None
    codec = named_codec(path)
    return pa.input_stream(handle, compression=codec) if codec else pa.input_stream(handle)


def file_size(path: str) -> int:
    """The size in bytes of a local file or of the file at a URL."""
    if not is_url(path):
        return os.path.getsize(path)
    fs, inner = filesystem(path)
    try:
        return int(fs.size(inner))
    except OSError as error:
        raise DataError(f"cannot read: {error}", path=path) from None


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


#: Bytes a file's digest reads at a time.
_DIGEST_BLOCK = 8 << 20


def url_digest(url: str) -> str:
    """The sha256 of the file at `url`, read in ranges: no open handle to share with the task
    reading the file beside it (fsspec's memory filesystem hands every opener the same one)."""
    fs, inner = filesystem(url)
    digest = hashlib.sha256()
    try:
        size = int(fs.size(inner))
        for start in range(0, size, _DIGEST_BLOCK):
            digest.update(fs.cat_file(inner, start=start, end=min(size, start + _DIGEST_BLOCK)))
    except OSError as error:
        raise DataError(f"cannot read: {error}", path=url) from None
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
