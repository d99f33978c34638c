"""The profile store: `.chainlint/` beside the project, holding `profiles/NAME.json`.

Writes go through `chainlint.writer`: a temporary file in the same folder renamed into place,
so a profile is either the old one or the new one, never half of each.
"""

from __future__ import annotations

import json
import os
import re
import secrets
from pathlib import Path
from typing import Any

from chainlint.discover.upward import STORE_FOLDER, folders_upward, is_project_root
from chainlint.model import ChainlintError
from chainlint.profile.documents import (
    PROFILE_BYTES,
    SMALL_BYTES,
    DocumentError,
    check_profile,
    check_store_config,
    read_json,
)
from chainlint.profile.format import ProfileError, dumps
from chainlint.profile.view import Profile
from chainlint.writer import WriteError, write_file

_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,199}")


class StoreError(ChainlintError):
    """The store cannot be found, read or written."""


def find_store(start: str | os.PathLike[str] = ".") -> Path:
    """`.chainlint/` in the project root `project_root` finds from `start`."""
    return project_root(start) / STORE_FOLDER


def project_root(start: str | os.PathLike[str] = ".") -> Path:
    """The nearest folder upward from `start` holding `.chainlint/`, `pyproject.toml`,
    `chainlint.toml` or `.git`, else `start`'s folder: the project whose code and data go
    together. The climb stops at the first such folder, so a store above a project's root is
    never the project's, and it never enters a folder every user may write (`/tmp`): a store
    or marker there may be anyone's."""
    start_path = Path(os.path.abspath(start))  # a linked module belongs to the project it is linked into
    # os.path's tests answer False where this user may not look; Path's raise PermissionError.
    if os.path.isfile(start_path):
        start_path = start_path.parent
    for folder in folders_upward(start_path):
        if is_project_root(folder):
            return folder
    return start_path


def check_name(name: str) -> str:
    if not _NAME.fullmatch(name):
        raise StoreError(f"profile name {name!r} must be 1 to 200 letters, digits, '_', '-' or '.', starting with a letter or digit")
    return name


def profile_path(store: Path, name: str) -> Path:
    return store / "profiles" / f"{check_name(name)}.json"


def write_atomic(path: Path, text: str) -> None:
    """Write `text` to `path` through chainlint's one writer (atomic for regular files)."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise StoreError(f"cannot write: {error.strerror}", path=str(path.parent)) from None
    try:
        write_file(path, text.encode("utf-8"))
    except WriteError as error:
        raise StoreError(error.reason, path=error.path) from None


def load_document(path: Path) -> dict[str, Any]:
    """A profile document checked against its documented format (`chainlint.profile.documents`),
    for merging and rewriting; reading it is `load_profile`."""
    try:
        return check_profile(read_json(path, PROFILE_BYTES), path)
    except FileNotFoundError:
        raise ProfileError("no such profile", path=str(path)) from None
    except DocumentError as error:
        raise ProfileError(error.reason, path=error.path, line=error.line, column=error.column) from None


def load_profile(path: Path) -> Profile:
    """A profile, checked and read into its typed view."""
    return Profile.from_document(load_document(path))


def save_profile(store: Path, document: dict[str, Any]) -> tuple[Path, bool]:
    """Write a profile; returns its path and whether the file changed.

    When only the creation time would differ, the existing file is kept byte for byte, so that
    re-profiling unchanged data changes nothing in the repository.
    """
    path = profile_path(store, document["name"])
    if path.exists():
        try:
            old = load_document(path)
        except ProfileError:
            old = None
        if old is not None and {**old, "created": None} == {**json.loads(dumps(document)), "created": None}:
            return path, False
    write_atomic(path, dumps(document))
    return path, True


def list_profiles(store: Path) -> list[Path]:
    """The store's profile files; a folder that cannot be listed is an error, not an empty store
    (`Path.glob` says nothing when it is denied)."""
    folder = store / "profiles"
    if not os.path.isdir(folder):
        return []
    try:
        names = os.listdir(folder)
    except OSError as error:
        raise StoreError(f"cannot list the profiles: {error.strerror or error}", path=str(folder)) from None
    return sorted(folder / name for name in names if name.endswith(".json") and not name.startswith("."))


def redaction_key(store: Path, create: bool) -> bytes:
    """The store's key for redacted values (`.chainlint/config.json`), made on first use."""
    config_path = store / "config.json"
    config: dict[str, Any] = {}
    if config_path.exists():
        try:
            config = check_store_config(read_json(config_path, SMALL_BYTES), config_path)
        except (OSError, DocumentError) as error:
            detail = error.detail if isinstance(error, DocumentError) else str(error)
            raise StoreError(f"cannot read the store configuration: {detail}", path=str(config_path)) from None
    key = config.get("redaction_key")
    if isinstance(key, str) and re.fullmatch(r"[0-9a-f]{64}", key):
        return bytes.fromhex(key)
    if not create:
        return b""
    config["redaction_key"] = secrets.token_hex(32)
    write_atomic(config_path, dumps(config))
    return bytes.fromhex(config["redaction_key"])


SKETCH_KEY = Path("private") / "sketch-key"


def sketch_key(store: Path, create: bool) -> bytes:
    """The store's key for sealing distinct-count sketches (`.chainlint/private/sketch-key`),
    made on first use. The folder ignores itself (its `.gitignore` holds `*`): the key must
    never be committed, and only profiling and merging need it."""
    path = store / SKETCH_KEY
    try:
        text = path.read_text(encoding="ascii").strip()
    except (FileNotFoundError, NotADirectoryError):
        text = ""
    except (OSError, UnicodeDecodeError) as error:
        raise StoreError(f"cannot read the sketch key: {getattr(error, 'strerror', None) or error}", path=str(path)) from None
    if re.fullmatch(r"[0-9a-f]{64}", text):
        return bytes.fromhex(text)
    if text:
        raise StoreError("not a sketch key (64 hexadecimal digits expected)", path=str(path))
    if not create:
        return b""
    key = secrets.token_hex(32)
    write_atomic(path.parent / ".gitignore", "*\n")
    try:  # an empty file of the owner's only, which the write then replaces keeping its mode
        os.close(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600))
    except FileExistsError:
        pass
    except OSError as error:
        raise StoreError(f"cannot write: {error.strerror}", path=str(path)) from None
    write_atomic(path, key + "\n")
    return bytes.fromhex(key)
