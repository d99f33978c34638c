"""The profile file: deterministic JSON, and a loader that validates before anything is used.

Keys are sorted, numbers print as Python's shortest round-trip form, short lists stay on one
line and lists of pairs put one pair per line, so a re-profile of changed data reviews as a
small diff. Loading never evaluates anything (no pickle): it parses JSON and checks shape.
"""

from __future__ import annotations

import json
import math
from typing import Any

FORMAT_NAME = "chainlint-profile"
FORMAT_VERSION = 2


class ProfileError(Exception):
    """A profile file that cannot be used; the message names the file."""


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


_COLUMN_REQUIRED = {"type": str, "arrow_type": str, "rows": int, "nulls": int}


def validate(document: Any, path: str) -> dict[str, Any]:
    """Check a parsed profile's structure and version; raise ProfileError naming `path`."""
    def fail(message: str) -> ProfileError:
        return ProfileError(f"{path}: {message}")

    if not isinstance(document, dict) or document.get("format") != FORMAT_NAME:
        raise fail("not a chainlint profile")
    version = document.get("format_version")
    if not isinstance(version, int):
        raise fail("format_version is missing")
    if version > FORMAT_VERSION:
        raise fail(f"profile format version {version} is newer than this chainlint understands ({FORMAT_VERSION}); upgrade chainlint")
    if version < 1:
        raise fail(f"unknown profile format version {version}")
    for key, kind in (("name", str), ("rows", int), ("columns", dict), ("source", dict), ("settings", dict)):
        if not isinstance(document.get(key), kind):
            raise fail(f"`{key}` is missing or not a {kind.__name__}")
    for name, column in document["columns"].items():
        if not isinstance(column, dict):
            raise fail(f"column {name!r} is not an object")
        for key, kind in _COLUMN_REQUIRED.items():
            if not isinstance(column.get(key), kind):
                raise fail(f"column {name!r}: `{key}` is missing or not a {kind.__name__}")
        top = column.get("top")
        if top is not None:
            values = top.get("values") if isinstance(top, dict) else None
            if not isinstance(values, list) or not all(
                isinstance(v, list) and len(v) == 2 and isinstance(v[1], int) for v in values
            ):
                raise fail(f"column {name!r}: `top.values` must be a list of [value, count] pairs")
        histogram = column.get("histogram")
        if histogram is not None and not (isinstance(histogram, dict) and isinstance(histogram.get("bounds"), list)):
            raise fail(f"column {name!r}: `histogram.bounds` must be a list")
    joint = document.get("joint", [])
    if not isinstance(joint, list) or not all(
        isinstance(e, dict) and isinstance(e.get("predicates"), list) and isinstance(e.get("subsets"), list) for e in joint
    ):
        raise fail("`joint` must be a list of {predicates, subsets} entries")
    return document


def loads(text: str, path: str) -> dict[str, Any]:
    try:
        document = json.loads(text)
    except json.JSONDecodeError as error:
        raise ProfileError(f"{path}:{error.lineno}:{error.colno}: not valid JSON: {error.msg}") from None
    return validate(document, path)
