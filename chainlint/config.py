"""Configuration: `[tool.chainlint]` in pyproject.toml, or the top level of chainlint.toml.

The nearest file upward from the first path analysed, up to its project's root, is used (a
`chainlint.toml` wins over a `pyproject.toml` in the same folder). Command-line options override it; `chainlint config`
prints every effective value and where it came from. Unknown keys are errors naming the key
and the file, with the closest known key suggested.
"""

from __future__ import annotations

import json

import difflib
import math
import re
import os
import tomllib
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any

from chainlint.discover import pattern_problem
from chainlint.discover.upward import folders_upward
from chainlint.model import ChainlintError


class ConfigError(ChainlintError):
    """A configuration file that cannot be used; the message names the file."""


@dataclass(frozen=True)
class Config:
    store: str | None = None
    bindings: tuple[tuple[str, str], ...] = ()
    min_gain: float = 1.25
    min_saving_ms: float = 5.0
    rows: tuple[tuple[str, int], ...] = ()
    rules: tuple[str, ...] | None = None
    skip: tuple[str, ...] = ()
    exclude: tuple[str, ...] = ()
    fail_rules: tuple[str, ...] | None = None
    source: str | None = None
    origins: dict[str, str] = field(default_factory=dict, compare=False)


_KEYS = {f.name for f in fields(Config)} - {"source", "origins"}


def find_config(start: Path) -> tuple[Path, dict[str, Any]] | None:
    """The nearest configuration file upward from `start` within its project (up to the project
    root the store is found in: `chainlint.discover.upward`), with its chainlint table."""
    try:
        folder = start.resolve()
    except (OSError, RuntimeError):  # a symbolic link loop: look upward from where it lies
        folder = Path(os.path.abspath(start))
    # os.path's tests answer False where this user may not look; Path's raise PermissionError.
    if not os.path.isdir(folder):
        folder = folder.parent
    for candidate in folders_upward(folder):
        dedicated = candidate / "chainlint.toml"
        if os.path.isfile(dedicated):
            return dedicated, _read(dedicated)
        pyproject = candidate / "pyproject.toml"
        if os.path.isfile(pyproject):
            tool = _read(pyproject).get("tool", {})
            if not isinstance(tool, dict):
                raise ConfigError("`tool` must be a table", path=str(pyproject))
            table = tool.get("chainlint")
            if table is not None:
                if not isinstance(table, dict):
                    raise ConfigError("[tool.chainlint] must be a table", path=str(pyproject))
                return pyproject, table
    return None


def _read(path: Path) -> dict[str, Any]:
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as error:
        raise ConfigError(f"cannot read: {error}", path=str(path)) from None
    except tomllib.TOMLDecodeError as error:
        # tomllib states the place only inside its message: "... (at line 2, column 5)".
        place = re.search(r"\s*\(at line (\d+), column (\d+)\)$", str(error))
        reason = str(error)[:place.start()] if place else str(error)
        line, column = (int(place[1]), int(place[2])) if place else (None, None)
        raise ConfigError(f"not valid TOML: {reason}", path=str(path), line=line, column=column) from None


def _strings(path: Path, key: str, value: Any) -> tuple[str, ...]:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise ConfigError(f"`{key}` must be a list of strings", path=str(path))
    return tuple(value)


def _number(path: Path, key: str, value: Any, low: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not low <= value < math.inf:
        raise ConfigError(f"`{key}` must be a finite number of at least {low:g}", path=str(path))
    return float(value)


def parse_config(path: Path, table: dict[str, Any], known_rules: set[str]) -> Config:
    """Validate a chainlint table; every problem is an error naming the file and the key."""
    values: dict[str, Any] = {}
    for key, value in table.items():
        if key not in _KEYS:
            close = difflib.get_close_matches(key, sorted(_KEYS), n=1)
            hint = f"; did you mean `{close[0]}`?" if close else f"; known keys: {', '.join(sorted(_KEYS))}"
            raise ConfigError(f"unknown key `{key}`{hint}", path=str(path))
        if key == "store":
            if not isinstance(value, str):
                raise ConfigError("`store` must be a path", path=str(path))
            values[key] = str((path.parent / value).resolve())
        elif key in ("bindings", "rows"):
            if not isinstance(value, dict):
                raise ConfigError(f"`{key}` must be a table", path=str(path))
            kind = str if key == "bindings" else int
            if not all(isinstance(v, kind) and not isinstance(v, bool) and (kind is str or v >= 1) for v in value.values()):
                what = "profile names" if key == "bindings" else "row counts of at least 1"
                raise ConfigError(f"`{key}` must map names to {what}", path=str(path))
            values[key] = tuple(value.items())
        elif key in ("min_gain", "min_saving_ms"):
            values[key] = _number(path, key, value, 1.0 if key == "min_gain" else 0.0)
        else:
            items = _strings(path, key, value)
            if key == "exclude":
                problem = pattern_problem(items)
                if problem:
                    raise ConfigError(f"`exclude`: {problem}", path=str(path))
            if key in ("rules", "skip", "fail_rules"):
                unknown = [r for r in items if r not in known_rules]
                if unknown:
                    raise ConfigError(f"`{key}` names unknown rules: {', '.join(unknown)} (known: {', '.join(sorted(known_rules))})", path=str(path))
            values[key] = items
    origins = {key: str(path) for key in values}
    return Config(**values, source=str(path), origins=origins)


def load_config(start: Path, known_rules: set[str]) -> Config:
    found = find_config(start)
    if found is None:
        return Config()
    return parse_config(found[0], found[1], known_rules)


def override(config: Config, **given: Any) -> Config:
    """Command-line values (those not None) over the configuration."""
    chosen = {key: value for key, value in given.items() if value is not None}
    origins = dict(config.origins)
    origins.update({key: "command line" for key in chosen})
    return replace(config, **chosen, origins=origins)


def describe(config: Config) -> list[tuple[str, Any, str]]:
    """(key, effective value, where it came from) for every key."""
    rows = []
    for key in sorted(_KEYS):
        rows.append((key, getattr(config, key), config.origins.get(key, "default")))
    return rows


def _toml_value(value: Any) -> str:
    """A TOML literal: strings as basic strings (JSON's escapes are TOML's), lists inline."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return json.dumps(str(value), ensure_ascii=False)


#: What an unset key means, shown where TOML has no value to print.
_UNSET = {"store": "the nearest .chainlint/ upward of each file", "rules": "every rule but unbound",
          "fail_rules": "every rule that runs"}


def as_toml(config: Config) -> str:
    """The effective configuration as a `[tool.chainlint]` table that TOML readers accept, each
    value followed by where it came from (a file, the command line, or `default`)."""
    lines = [f"# from {config.source or 'defaults only (no chainlint.toml or [tool.chainlint] found)'}",
             "[tool.chainlint]"]
    tables = []
    for key, value, origin in describe(config):
        if key in ("bindings", "rows"):
            body = [f"{json.dumps(name, ensure_ascii=False)} = {_toml_value(target)}" for name, target in value]
            tables.append([f"[tool.chainlint.{key}]  # {origin}", *(body or ["# (none)"])])
        elif value is None:
            lines.append(f"# {key}: not set ({_UNSET.get(key, 'no value')})  # {origin}")
        else:
            lines.append(f"{key} = {_toml_value(value)}  # {origin}")
    for table in tables:
        lines += ["", *table]
    return "\n".join(lines) + "\n"
