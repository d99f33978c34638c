"""Walk the given files and folders for `*.py` and `*.ipynb`, skipping what a repository would not lint.

Skipped: hidden folders, virtual environments (a folder holding `pyvenv.cfg`, or named like
one), `__pycache__` and `site-packages`, whatever the `.gitignore` files of the repository
ignore, and the user's `--exclude` globs (gitignore syntax, matched relative to each given
folder). Files named explicitly are always analysed; a folder named explicitly is walked even
when git ignores it, under the `.gitignore` files inside it. Symbolic links to folders are not
followed, so a link loop cannot trap the walk; in folders, only regular files are taken (a
FIFO named `x.py` would block the reader).
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import pathspec

_SKIPPED_NAMES = frozenset({"__pycache__", "site-packages", "node_modules"})


@dataclass(frozen=True)
class DiscoveryProblem:
    """A path given or met that cannot be walked, and why."""

    path: str
    message: str


@dataclass
class Discovered:
    files: list[str] = field(default_factory=list)
    errors: list[DiscoveryProblem] = field(default_factory=list)


def _is_virtualenv(path: str, name: str) -> bool:
    return os.path.isfile(os.path.join(path, "pyvenv.cfg")) or (
        name in ("venv", "env") and os.path.isdir(os.path.join(path, "lib"))
    )


def _repository_root(folder: str) -> str | None:
    current = os.path.abspath(folder)
    while True:
        if os.path.exists(os.path.join(current, ".git")):
            return current
        parent = os.path.dirname(current)
        if parent == current:
            return None
        current = parent


class _IgnoreRules:
    """The `.gitignore` files from the repository root down to the folder being walked."""

    def __init__(self) -> None:
        self._cache: dict[str, pathspec.PathSpec | None] = {}

    def _spec(self, folder: str) -> pathspec.PathSpec | None:
        if folder not in self._cache:
            spec = None
            path = os.path.join(folder, ".gitignore")
            try:
                with open(path, encoding="utf-8", errors="replace") as handle:
                    spec = pathspec.GitIgnoreSpec.from_lines(handle)
            except OSError:
                spec = None
            self._cache[folder] = spec
        return self._cache[folder]

    def ignored(self, path: str, is_dir: bool, root: str | None) -> bool:
        """Whether git would ignore `path`; the deepest `.gitignore` with a verdict decides."""
        if root is None:
            return False
        path = os.path.abspath(path)
        folders = []
        current = os.path.dirname(path)
        while True:
            folders.append(current)
            if current == root or os.path.dirname(current) == current:
                break
            current = os.path.dirname(current)
        verdict = False
        for folder in reversed(folders):
            spec = self._spec(folder)
            if spec is None:
                continue
            relative = os.path.relpath(path, folder).replace(os.sep, "/") + ("/" if is_dir else "")
            result = spec.check_file(relative)
            if result.include is not None:
                verdict = result.include
        return verdict


def pattern_problem(patterns: Iterable[str]) -> str | None:
    """Why an exclude pattern is not valid gitignore syntax (`!` alone, a trailing `\\`), or None."""
    for pattern in patterns:
        try:
            pathspec.GitIgnoreSpec.from_lines([pattern])
        except ValueError:  # pathspec's pattern error is a ValueError
            return f"{pattern!r} is not a valid gitignore pattern"
    return None


def discover(paths: Sequence[str], exclude: Iterable[str] = ()) -> Discovered:
    """The Python files and notebooks under `paths`, sorted and without duplicates; unreadable paths as errors."""
    excluded = pathspec.GitIgnoreSpec.from_lines(list(exclude))
    rules = _IgnoreRules()
    found = Discovered()
    seen: set[str] = set()

    def add(path: str) -> None:
        key = os.path.normpath(path)
        if key not in seen:
            seen.add(key)
            found.files.append(key)

    for given in paths:
        if os.path.isfile(given):
            add(given)
            continue
        if not os.path.isdir(given):
            message = "no such file or folder" if not os.path.lexists(given) else "cannot read this path"
            if os.path.islink(given) and not os.path.exists(given):
                message = "broken or looping symbolic link"
            try:
                os.stat(given)
            except PermissionError as error:  # a folder on the way that this user may not enter
                message = f"cannot read this path: {error.strerror}"
            except OSError:
                pass
            found.errors.append(DiscoveryProblem(given, message))
            continue
        root = _repository_root(given)
        if rules.ignored(given, True, root):
            # Named explicitly though ignored: honour only the `.gitignore` files inside it.
            root = os.path.abspath(given)

        def on_error(error: OSError, given: str = given) -> None:
            found.errors.append(DiscoveryProblem(error.filename or given, f"cannot list folder: {error.strerror}"))

        for folder, subfolders, files in os.walk(given, onerror=on_error):
            kept = []
            for name in sorted(subfolders):
                path = os.path.join(folder, name)
                relative = os.path.relpath(path, given).replace(os.sep, "/") + "/"
                if name.startswith(".") or name in _SKIPPED_NAMES or _is_virtualenv(path, name):
                    continue
                if excluded.match_file(relative) or rules.ignored(path, True, root):
                    continue
                kept.append(name)
            subfolders[:] = kept
            for name in sorted(files):
                if not name.endswith((".py", ".ipynb")):
                    continue
                path = os.path.join(folder, name)
                if not os.path.isfile(path):  # a FIFO, socket or device named *.py: reading could block
                    continue
                relative = os.path.relpath(path, given).replace(os.sep, "/")
                if excluded.match_file(relative) or rules.ignored(path, False, root):
                    continue
                add(path)
    found.files.sort()
    return found
