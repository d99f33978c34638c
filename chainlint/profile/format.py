"""The profile file: deterministic JSON (reading and checking it: `chainlint.profile.documents`).

Keys are sorted, numbers print as Python's shortest round-trip form, short lists stay on one
line and lists of pairs put one pair per line, so a re-profile of changed data reviews as a
small diff. Loading never evaluates anything (no pickle): it parses JSON and checks shape.
"""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime
from typing import Any

from chainlint.model import ChainlintError
from chainlint.version import __version__

FORMAT_NAME = "chainlint-profile"
FORMAT_VERSION = 2


class ProfileError(ChainlintError):
    """A profile file that cannot be used; the message names the file."""


def header(name: str, rows: int, source: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    """The fields every profile document starts with, whether profiled or merged from parts."""
    return {
        "format": FORMAT_NAME,
        "format_version": FORMAT_VERSION,
        "chainlint_version": __version__,
        "name": name,
        "created": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "rows": rows,
        "source": source,
        "settings": settings,
    }


def dumps(document: Any) -> str:
    return _emit(document, 0) + "\n"


def _scalar(value: Any) -> str:
    if isinstance(value, float) and not math.isfinite(value):
        raise ValueError("profiles hold finite numbers only")
    return json.dumps(value, ensure_ascii=False)


def _emit(value: Any, depth: int) -> str:
    pad = "  " * (depth + 1)
    if isinstance(value, dict):
        if not value:
            return "{}"
        items = [f"{pad}{json.dumps(str(k), ensure_ascii=False)}: {_emit(value[k], depth + 1)}" for k in sorted(value)]
        return "{\n" + ",\n".join(items) + "\n" + "  " * depth + "}"
    if isinstance(value, (list, tuple)):
        if not value:
            return "[]"
        if all(not isinstance(v, (dict, list, tuple)) for v in value):
            return "[" + ", ".join(_scalar(v) for v in value) + "]"
        items = [pad + _emit(v, depth + 1) for v in value]
        return "[\n" + ",\n".join(items) + "\n" + "  " * depth + "]"
    return _scalar(value)
