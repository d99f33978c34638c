"""`[tool.chainlint]` in the nearest pyproject.toml. For now: `bindings`, frame or parameter
name globs mapped to profile names."""

from __future__ import annotations

import tomllib
from functools import lru_cache
from pathlib import Path


class ConfigError(Exception):
    """A configuration file that cannot be used; the message names the file."""


def nearest_pyproject(start: Path) -> Path | None:
    folder = start.resolve()
    if folder.is_file():
        folder = folder.parent
    for candidate in (folder, *folder.parents):
        if (candidate / "pyproject.toml").is_file():
            return candidate / "pyproject.toml"
    return None


@lru_cache(maxsize=64)
def bindings(pyproject: Path | None) -> tuple[tuple[str, str], ...]:
    if pyproject is None:
        return ()
    try:
        document = tomllib.loads(pyproject.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as error:
        raise ConfigError(f"{pyproject}: cannot read: {error}") from None
    table = document.get("tool", {}).get("chainlint", {}).get("bindings", {})
    if not isinstance(table, dict) or not all(isinstance(v, str) for v in table.values()):
        raise ConfigError(f"{pyproject}: [tool.chainlint.bindings] must map name globs to profile names")
    return tuple(table.items())
