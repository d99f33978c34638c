"""The folders a search for a project's files climbs: from a start folder upward to the project's
root, never into a folder every user may write (`/tmp`), where a store or configuration may be
anyone's."""

from __future__ import annotations

import os
import stat
from collections.abc import Iterator
from pathlib import Path


STORE_FOLDER = ".chainlint"
PROJECT_MARKERS = (STORE_FOLDER, "pyproject.toml", "chainlint.toml", ".git")


def folders_upward(start: Path) -> Iterator[Path]:
    """`start` (a folder, absolute), then its parents, up to and including the first that is a
    project root, and never into a folder every user may create files in; `start` itself is
    always given."""
    for folder in (start, *start.parents):
        if folder != start and _shared(folder):
            return
        yield folder
        if is_project_root(folder):
            return


def is_project_root(folder: Path) -> bool:
    """Whether `folder` holds `.chainlint/`, `pyproject.toml`, `chainlint.toml` or `.git`."""
    # os.path's tests answer False where this user may not look; Path's raise PermissionError.
    return any(os.path.isdir(folder / marker) if marker == STORE_FOLDER else os.path.exists(folder / marker)
               for marker in PROJECT_MARKERS)


def _shared(folder: Path) -> bool:
    try:
        return bool(os.stat(folder).st_mode & stat.S_IWOTH)
    except OSError:  # a folder this user may not look into holds nothing the search can read
        return False
