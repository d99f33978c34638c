"""The store's JSON documents (profiles, `config.json`; `cost-model.json` with these checks, in
`chainlint.estimate.model_file`), read and checked against their documented format once, on
load, so that nothing later meets a wrong type.

Reading refuses what is not a regular file (a FIFO would block, `/dev/zero` never ends), files
over a size cap, NaN and Infinity (not JSON, though Python's parser takes them), integers of
more digits than any count holds, and nesting deeper than the format has. Each problem is one
message, `PATH: field F: what is wrong`, naming the first field that is wrong.
"""

from __future__ import annotations

import json
import math
import os
import re
import stat
from collections.abc import Callable
from pathlib import Path
from typing import Any

from chainlint.model import ChainlintError
from chainlint.profile.format import FORMAT_VERSION

#: Size caps. A profile of 2,000 columns with full sketches and top lists is about 20 MB.
PROFILE_BYTES = 64 * 1024 * 1024
SMALL_BYTES = 1024 * 1024
_MAX_DEPTH = 16
_MAX_DIGITS = 40  # uint64 counts and masks have 20; the rest is slack, not a 5,000-digit number
_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,199}")
_PATH = re.compile(r"[^\x00]{1,4096}")


class DocumentError(ChainlintError, ValueError):
    """A store document that cannot be used; the message names the file and the field."""


def _constant(text: str) -> Any:
    raise ValueError(f"{text} is not a number JSON allows")


def _integer(text: str) -> int:
    if len(text.lstrip("-")) > _MAX_DIGITS:
        raise ValueError(f"an integer of {len(text.lstrip('-'))} digits")
    return int(text)


def _float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(f"{text} does not fit a finite number")
    return value


def read_json(path: Path, limit: int) -> Any:
    """Parse a JSON file that must be a regular file of at most `limit` bytes."""
    where = str(path)
    try:
        descriptor = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except FileNotFoundError:
        raise
    except OSError as error:
        raise DocumentError(f"cannot read: {error.strerror or error}", path=where) from None
    with open(descriptor, "rb") as handle:
        info = os.fstat(descriptor)
        if not stat.S_ISREG(info.st_mode):
            raise DocumentError("not a regular file", path=where)
        if info.st_size > limit:
            raise DocumentError(f"{info.st_size:,} bytes, over the {limit:,}-byte limit", path=where)
        try:
            data = handle.read(limit + 1)
        except OSError as error:
            raise DocumentError(f"cannot read: {error.strerror or error}", path=where) from None
    if len(data) > limit:
        raise DocumentError(f"over the {limit:,}-byte limit", path=where)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as error:
        raise DocumentError(f"not UTF-8 text (byte {error.start})", path=where) from None
    try:
        document = json.loads(text, parse_constant=_constant, parse_int=_integer, parse_float=_float)
    except json.JSONDecodeError as error:
        raise DocumentError(f"not valid JSON: {error.msg}", path=where, line=error.lineno, column=error.colno) from None
    except ValueError as error:
        raise DocumentError(f"not valid JSON: {error}", path=where) from None
    except RecursionError:
        raise DocumentError("nested too deeply", path=where) from None
    if _depth(document) > _MAX_DEPTH:
        raise DocumentError(f"nested deeper than {_MAX_DEPTH} levels", path=where)
    return document


def _depth(document: Any) -> int:
    deepest, stack = 0, [(document, 1)]
    while stack:
        value, depth = stack.pop()
        deepest = max(deepest, depth)
        if depth > _MAX_DEPTH:
            break
        if isinstance(value, dict):
            stack.extend((v, depth + 1) for v in value.values())
        elif isinstance(value, list):
            stack.extend((v, depth + 1) for v in value)
    return deepest


class FieldProblem(Exception):
    """A field of a document that the format does not allow (raised by the checks below)."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(f"field {field}: {message}")


Check = Callable[[Any, str], None]


def _kind(value: Any) -> str:
    return {dict: "an object", list: "a list", str: "a string", bool: "true or false", type(None): "null"}.get(
        type(value), "a number")


def integer(low: int = 0) -> Check:
    def check(value: Any, field: str) -> None:
        if isinstance(value, bool) or not isinstance(value, int):
            raise FieldProblem(field, f"must be an integer, not {_kind(value)}")
        if value < low:
            raise FieldProblem(field, f"must be at least {low}, not {value}")
    return check


def number(low: float = -math.inf, high: float = math.inf) -> Check:
    def check(value: Any, field: str) -> None:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise FieldProblem(field, f"must be a number, not {_kind(value)}")
        if not low <= value <= high:
            raise FieldProblem(field, f"must lie in [{low:g}, {high:g}], not {value}")
    return check


def text(pattern: re.Pattern[str] | None = None, limit: int = 1 << 20) -> Check:
    def check(value: Any, field: str) -> None:
        if not isinstance(value, str):
            raise FieldProblem(field, f"must be a string, not {_kind(value)}")
        if len(value) > limit:
            raise FieldProblem(field, f"longer than {limit:,} characters")
        if pattern is not None and not pattern.fullmatch(value):
            raise FieldProblem(field, f"{value[:80]!r} is not of the form the format gives")
    return check


def flag(value: Any, field: str) -> None:
    if not isinstance(value, bool):
        raise FieldProblem(field, f"must be true or false, not {_kind(value)}")


def scalar(value: Any, field: str) -> None:
    if isinstance(value, (dict, list)):
        raise FieldProblem(field, f"must be a single value, not {_kind(value)}")


def constant(wanted: Any) -> Check:
    def check(value: Any, field: str) -> None:
        if value != wanted:
            raise FieldProblem(field, f"must be {json.dumps(wanted)}")
    return check


def listing(item: Check, least: int = 0) -> Check:
    def check(value: Any, field: str) -> None:
        if not isinstance(value, list):
            raise FieldProblem(field, f"must be a list, not {_kind(value)}")
        if len(value) < least:
            raise FieldProblem(field, f"must hold at least {least} item{'s' if least != 1 else ''}")
        for index, entry in enumerate(value):
            item(entry, f"{field}[{index}]")
    return check


def pair(first: Check, second: Check) -> Check:
    def check(value: Any, field: str) -> None:
        if not isinstance(value, list) or len(value) != 2:
            raise FieldProblem(field, "must be a [value, count] pair")
        first(value[0], f"{field}[0]")
        second(value[1], f"{field}[1]")
    return check


def either(*checks: Check) -> Check:
    def check(value: Any, field: str) -> None:
        problems = []
        for option in checks:
            try:
                option(value, field)
                return
            except FieldProblem as problem:
                problems.append(str(problem).split(": ", 1)[1])
        raise FieldProblem(field, " or ".join(problems))
    return check


def mapping(value_check: Check, key: re.Pattern[str] | None = None) -> Check:
    def check(value: Any, field: str) -> None:
        if not isinstance(value, dict):
            raise FieldProblem(field, f"must be an object, not {_kind(value)}")
        for name, entry in value.items():
            if key is not None and not key.fullmatch(name):
                raise FieldProblem(field, f"{name[:80]!r} is not a valid key")
            value_check(entry, f"{field}.{name}")
    return check


def record(required: dict[str, Check], optional: dict[str, Check] | None = None) -> Check:
    """An object with these keys; keys the format does not name are left alone."""
    def check(value: Any, field: str) -> None:
        if not isinstance(value, dict):
            raise FieldProblem(field or "(top level)", f"must be an object, not {_kind(value)}")
        for name, entry_check in required.items():
            if name not in value:
                raise FieldProblem(_join(field, name), "is missing")
            entry_check(value[name], _join(field, name))
        for name, entry_check in (optional or {}).items():
            if name in value:
                entry_check(value[name], _join(field, name))
    return check


def _join(field: str, name: str) -> str:
    return f"{field}.{name}" if field else name


def validated(document: Any, path: Path | str, check: Check) -> Any:
    """`document` when `check` passes; a DocumentError naming `path` and the field otherwise."""
    try:
        check(document, "")
    except FieldProblem as problem:
        raise DocumentError(str(problem), path=str(path)) from None
    return document


def _column(value: Any, field: str) -> None:
    record(
        {"type": text(limit=200), "arrow_type": text(limit=1000), "rows": integer(), "nulls": integer()},
        {
            "distinct": record({"value": number(0), "exact": flag}, {"standard_error": number(0)}),
            "top": record({"values": listing(pair(scalar, integer()))},
                          {"exact": flag, "complete": flag, "error": number(0)}),
            "suppressed": record({"values": integer(), "rows": integer()}),
            "histogram": record({"bounds": listing(either(number(), text(limit=100)))},
                                {"exact": flag, "rank_error": number(0, 1)}),
            "min": scalar,
            "max": scalar,
            "clustering": number(),
            "sketch": text(limit=1 << 16),
            "redacted": flag,
            "unsummarised": text(limit=1000),
        },
    )(value, field)
    if value["nulls"] > value["rows"]:
        raise FieldProblem(f"{field}.nulls", f"{value['nulls']} is more than the column's {value['rows']} rows")
    if ("min" in value) != ("max" in value):
        raise FieldProblem(f"{field}.{'max' if 'min' in value else 'min'}", "is missing (min and max come together)")
    distinct = value.get("distinct")
    if distinct is not None and not distinct["exact"] and "standard_error" not in distinct:
        raise FieldProblem(f"{field}.distinct.standard_error", "is missing (an estimated count states its error)")


_PROFILE = record(
    {
        "format": constant("chainlint-profile"),
        "format_version": integer(1),
        "name": text(_NAME),
        "rows": integer(),
        "columns": mapping(_column),
        "source": record(
            {"kind": text(limit=100), "files": listing(record({"path": text(_PATH)}, {"bytes": integer()})),
             "fingerprint": text(limit=200)},
            {"merged_from": listing(text(_NAME))},
        ),
        "settings": record({"min_count": integer(1), "distinct_cap": integer(1), "top": integer(1), "buckets": integer(1)},
                           {"redacted": listing(text())}),
        "created": text(limit=100),
        "chainlint_version": text(limit=100),
    },
    {
        "column_order": listing(text()),
        "joint": listing(record({"predicates": listing(text()),
                                 "subsets": listing(pair(integer(), either(integer(), constant("below"))))},
                                {"chains": listing(text())})),
    },
)


def check_profile(document: Any, path: Path | str) -> dict[str, Any]:
    """A parsed profile checked against docs/profile-format.md (versions 1 to FORMAT_VERSION)."""
    if not isinstance(document, dict) or document.get("format") != "chainlint-profile":
        raise DocumentError("not a chainlint profile (field format must be \"chainlint-profile\")", path=str(path))
    version = document.get("format_version")
    if isinstance(version, int) and not isinstance(version, bool) and version > FORMAT_VERSION:
        raise DocumentError(f"profile format version {version} is newer than this chainlint understands "
                            f"({FORMAT_VERSION}); upgrade chainlint", path=str(path))
    return validated(document, path, _PROFILE)


_STORE_CONFIG = record({}, {"redaction_key": text(re.compile(r"[0-9a-f]{64}"))})


def check_store_config(document: Any, path: Path | str) -> dict[str, Any]:
    """`.chainlint/config.json`: the store's settings (today the redaction key)."""
    return validated(document, path, _STORE_CONFIG)
