"""The one way chainlint writes a file: rewritten modules, reports, profiles, pictures.

A regular file is replaced atomically: the new bytes go to a temporary file beside it (named
`.NAME.PID-TOKEN.chainlint`, so that a killed run's leftovers are recognised and removed by
the next write in that folder), which takes the original's owner, permission bits (setgid
included) and extended attributes, and is renamed over it. A symbolic link is written through
to its target; a file with several hard links is refused (a rename would cut it off from its
other names); pipes, terminals and devices are written directly, never replaced.

When the caller read the file before (`expected`), the file is checked again (size, time and
content hash) right before the rename, and left alone if it changed: an edit saved meanwhile
is never lost.
"""

from __future__ import annotations

import errno
import hashlib
import os
import re
import secrets
import stat
import time
from dataclasses import dataclass

from chainlint.model import ChainlintError

_SUFFIX = ".chainlint"
#: `.NAME.PID-TOKEN.chainlint`, and `.NAME.XXXXXXXX.chainlint` of earlier versions.
_TEMPORARY = re.compile(r"^\.(?P<name>.+)\.(?:(?P<pid>\d+)-[0-9a-f]{8}|[a-z0-9_]{8})\.chainlint$")
#: Leftovers without a process id are removed only once they are this old (seconds).
_OLD_STYLE_AGE = 3600.0


class WriteError(ChainlintError):
    """A file that was not written, and why; nothing was changed."""

    path: str

    def __init__(self, path: str, reason: str) -> None:
        super().__init__(reason, path=path)


@dataclass(frozen=True)
class Snapshot:
    """What a file was when it was read: enough to tell that it changed since."""

    size: int
    mtime_ns: int
    digest: str


def read_snapshot(path: str | os.PathLike[str]) -> tuple[bytes, Snapshot]:
    """A file's bytes and its snapshot, read from one open handle."""
    with open(path, "rb") as handle:
        status = os.fstat(handle.fileno())
        data = handle.read()
    return data, Snapshot(len(data), status.st_mtime_ns, hashlib.sha256(data).hexdigest())


def write_file(path: str | os.PathLike[str], data: bytes, expected: Snapshot | None = None) -> None:
    """Write `data` to `path` as described in the module's docstring; WriteError if not."""
    shown = os.fspath(path)
    try:
        status: os.stat_result | None = os.stat(shown)
    except FileNotFoundError:
        status = None
    except OSError as error:
        raise WriteError(shown, f"cannot write: {error.strerror}") from None
    if status is None:
        if expected is not None:
            raise WriteError(shown, "the file no longer exists")
    elif stat.S_ISDIR(status.st_mode):
        raise WriteError(shown, "is a folder")
    elif not stat.S_ISREG(status.st_mode):
        if expected is not None:
            raise WriteError(shown, "not a regular file")
        _write_directly(shown, status, data)
        return
    elif status.st_nlink > 1:
        raise WriteError(shown, f"the file has {status.st_nlink} hard links, which replacing it would break")
    # A link (or a dangling one) is replaced at its target, so that it stays a link.
    _replace(shown, os.path.realpath(shown), status, data, expected)


def _write_directly(shown: str, status: os.stat_result, data: bytes) -> None:
    """Pipes and devices: open and write, never replace (a FIFO without a reader is refused)."""
    flags = os.O_WRONLY | (os.O_NONBLOCK if stat.S_ISFIFO(status.st_mode) else 0)
    try:
        handle = os.open(shown, flags)
    except OSError as error:
        if error.errno == errno.ENXIO:
            raise WriteError(shown, "a pipe with no reader") from None
        raise WriteError(shown, f"cannot write: {error.strerror}") from None
    try:
        os.set_blocking(handle, True)
        view = memoryview(data)
        while view:
            view = view[os.write(handle, view) :]
    except OSError as error:
        raise WriteError(shown, f"cannot write: {error.strerror}") from None
    finally:
        os.close(handle)


def _replace(shown: str, target: str, status: os.stat_result | None, data: bytes, expected: Snapshot | None) -> None:
    folder, name = os.path.split(os.path.abspath(target))
    remove_stale_temporaries(folder, name)
    temporary = os.path.join(folder, f".{name}.{os.getpid()}-{secrets.token_hex(4)}{_SUFFIX}")
    try:
        handle = os.open(temporary, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    except OSError as error:
        raise WriteError(shown, f"cannot write in {folder}: {error.strerror}") from None
    try:
        try:
            view = memoryview(data)
            while view:
                view = view[os.write(handle, view) :]
            _copy_metadata(shown, target, handle, status)
            os.fsync(handle)
        finally:
            os.close(handle)
        if expected is not None:
            _check_unchanged(shown, target, expected)
        os.replace(temporary, target)
    except OSError as error:
        _remove(temporary)
        raise WriteError(shown, f"cannot write: {error.strerror}") from None
    except WriteError:
        _remove(temporary)
        raise
    _sync_folder(folder)


def _copy_metadata(shown: str, target: str, handle: int, status: os.stat_result | None) -> None:
    """Owner, then mode (a change of owner clears setuid/setgid), then extended attributes."""
    if status is None:
        mask = os.umask(0)
        os.umask(mask)
        os.fchmod(handle, 0o666 & ~mask)
        return
    mode = stat.S_IMODE(status.st_mode)
    mine = os.fstat(handle)
    if hasattr(os, "fchown") and (mine.st_uid, mine.st_gid) != (status.st_uid, status.st_gid):
        try:
            os.fchown(handle, status.st_uid, status.st_gid)
        except PermissionError:
            raise WriteError(shown, f"cannot give the new file the original's owner ({status.st_uid}:{status.st_gid})") from None
    os.fchmod(handle, mode)
    if stat.S_IMODE(os.fstat(handle).st_mode) != mode:
        raise WriteError(shown, f"cannot keep the file's mode {mode:o}")
    if not hasattr(os, "listxattr"):
        return
    try:
        names = os.listxattr(target)
    except OSError:
        return  # a file system without extended attributes
    for attribute in names:
        try:
            os.setxattr(handle, attribute, os.getxattr(target, attribute))
        except OSError as error:
            raise WriteError(shown, f"cannot keep the extended attribute {attribute}: {error.strerror}") from None


def _check_unchanged(shown: str, target: str, expected: Snapshot) -> None:
    try:
        status = os.stat(target)
        changed = (status.st_size, status.st_mtime_ns) != (expected.size, expected.mtime_ns) or read_snapshot(target)[1] != expected
    except OSError:
        changed = True
    if changed:
        raise WriteError(shown, "the file changed on disk while it was being rewritten; left alone")


def remove_stale_temporaries(folder: str, name: str | None = None) -> list[str]:
    """Remove the writer's temporaries in `folder` (for target `name`, or all) whose process is
    gone; the names removed."""
    try:
        entries = os.listdir(folder)
    except OSError:
        return []
    removed = []
    for entry in entries:
        match = _TEMPORARY.match(entry)
        if match is None or (name is not None and match.group("name") != name):
            continue
        path = os.path.join(folder, entry)
        pid = match.group("pid")
        if pid is not None and _alive(int(pid)):
            continue
        if pid is None:
            try:
                if time.time() - os.lstat(path).st_mtime < _OLD_STYLE_AGE:
                    continue
            except OSError:
                continue
        if _remove(path):
            removed.append(entry)
    return removed


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError):
        return True
    return True


def _remove(path: str) -> bool:
    try:
        if stat.S_ISREG(os.lstat(path).st_mode):
            os.unlink(path)
            return True
    except OSError:
        pass
    return False


def _sync_folder(folder: str) -> None:
    """Make the rename durable where the platform allows opening a folder."""
    try:
        handle = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(handle)
    except OSError:
        pass
    finally:
        os.close(handle)
