"""Combine profiles of parts of one dataset into the profile of the whole.

Exact where the parts allow it: row and null counts always; value counts, distinct counts and
histograms when every part lists all its values (complete, nothing suppressed). Otherwise the
merge is an estimate with a stated bound: distinct counts from the merged HyperLogLog
registers, value counts with the sum of the parts' bounds, histograms from the parts' bounds
weighted by their rows (rank error grows by one bucket).
"""

from __future__ import annotations

import hashlib
from collections import defaultdict
from typing import Any

import numpy as np

from chainlint.profile.format import ProfileError, header
from chainlint.profile.histograms import equi_depth
from chainlint.profile.sketches import HyperLogLog, SketchKeyError, seal, unseal
from chainlint.profile.store import SKETCH_KEY


def merge_profiles(parts: list[dict[str, Any]], name: str, key: bytes) -> dict[str, Any]:
    """The profile of the whole; `key`: the store's sketch key, which sealed every part's
    distinct-count sketches (they are opened, merged and sealed again)."""
    if not parts:
        raise ProfileError("nothing to merge")
    settings = parts[0]["settings"]
    for part in parts[1:]:
        if part["settings"] != settings:
            raise ProfileError(f"profile {part['name']!r} was made with other settings than {parts[0]['name']!r}")
        if sorted(part["columns"]) != sorted(parts[0]["columns"]):
            raise ProfileError(f"profile {part['name']!r} has other columns than {parts[0]['name']!r}")
    fingerprint = hashlib.sha256("".join(p["source"]["fingerprint"] for p in parts).encode()).hexdigest()
    source = {
        "kind": parts[0]["source"]["kind"],
        "files": [f for p in parts for f in p["source"]["files"]],
        "fingerprint": "sha256:" + fingerprint,
        "merged_from": [p["name"] for p in parts],
    }
    document = header(name, sum(p["rows"] for p in parts), source, settings)
    document["columns"] = {c: _merge_column(c, [p["columns"][c] for p in parts], settings, parts, key) for c in parts[0]["columns"]}
    document["column_order"] = parts[0].get("column_order", sorted(parts[0]["columns"]))
    return document


def _is_full(column: dict[str, Any]) -> bool:
    top = column.get("top", {})
    return bool(top.get("exact") and top.get("complete") and column.get("suppressed", {}).get("values", 1) == 0)


def _part_error(column: dict[str, Any], min_count: int) -> int:
    """How far a value's count in this part may exceed what the part lists for it."""
    top = column.get("top")
    if top is None:
        return 0
    if top.get("exact") and top.get("complete"):
        return min_count - 1 if column.get("suppressed", {}).get("values", 0) else 0
    listed = [count for _, count in top["values"]]
    return int(top.get("error", 0)) + (min(listed) if listed else column["rows"] - column["nulls"])


def _merge_column(
    name: str, columns: list[dict[str, Any]], settings: dict[str, Any], parts: list[dict[str, Any]], key: bytes,
) -> dict[str, Any]:
    first = columns[0]
    merged: dict[str, Any] = {
        "type": next((c["type"] for c in columns if c["nulls"]), first["type"]),
        "arrow_type": first["arrow_type"],
        "rows": sum(c["rows"] for c in columns),
        "nulls": sum(c["nulls"] for c in columns),
    }
    if "top" not in first:
        return merged
    redacted = bool(first.get("redacted"))
    merged["redacted"] = redacted
    counts: dict[Any, int] = defaultdict(int)
    for column in columns:
        for value, count in column["top"]["values"]:
            counts[_key(value)] += count
    full = all(_is_full(c) for c in columns)
    ranked = sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))
    merged["top"] = {
        "values": [[value, count] for (_, value), count in ranked[: settings["top"]]],
        "exact": full,
        "complete": full and len(ranked) <= settings["top"],
        "error": 0 if full else sum(_part_error(c, settings["min_count"]) for c in columns),
    }
    merged["suppressed"] = {
        "values": sum(c.get("suppressed", {}).get("values", 0) for c in columns),
        "rows": sum(c.get("suppressed", {}).get("rows", 0) for c in columns),
    }
    sketch = HyperLogLog()
    for part, column in zip(parts, columns):
        sketch = sketch.merge(_open_sketch(part, name, column, key))
    merged["sketch"] = seal(sketch, key, name)
    if full and all(c["distinct"]["exact"] for c in columns):
        merged["distinct"] = {"value": len(counts), "exact": True}
    else:
        merged["distinct"] = {"value": int(round(sketch.estimate())), "exact": False, "standard_error": round(HyperLogLog.standard_error(), 6)}
    histograms = [c.get("histogram") for c in columns]
    if all(h is not None for h in histograms) and not redacted:
        merged["histogram"] = _merge_histograms(columns, counts if full else None, settings["buckets"])
        merged["min"], merged["max"] = merged["histogram"]["bounds"][0], merged["histogram"]["bounds"][-1]
    return merged


def _open_sketch(part: dict[str, Any], name: str, column: dict[str, Any], key: bytes) -> HyperLogLog:
    where = f"profile {part['name']!r}, column {name!r}"
    if "sketch" not in column:
        raise ProfileError("no distinct-count sketch to merge", path=str(where))
    if part.get("format_version", 1) < 2:
        raise ProfileError("format version 1 stored sketches anyone could read, which do not merge with sealed ones; profile the part again", path=str(where))
    if not key:
        raise ProfileError(f"merging needs the sketch key that profiled the parts ({SKETCH_KEY} in the store); this store has none", path=str(where))
    try:
        return unseal(column["sketch"], key, name)
    except SketchKeyError:
        raise ProfileError(f"its sketch was sealed with another key than this store's {SKETCH_KEY}; profile the parts with one store's key", path=str(where)) from None
    except ValueError as error:
        raise ProfileError(f"unreadable sketch: {error}", path=str(where)) from None


def _key(value: Any) -> tuple[str, Any]:
    return (type(value).__name__, value)


def _numeric(values: list[Any]) -> tuple[np.ndarray, bool]:
    if values and isinstance(values[0], str):
        return np.array(values, dtype="datetime64[ns]").astype(np.int64), True
    return np.array(values, dtype=np.float64), False


def _merge_histograms(columns: list[dict[str, Any]], counts: dict[Any, int] | None, buckets: int) -> dict[str, Any]:
    if counts is not None:
        pairs = sorted((value, count) for (_, value), count in counts.items())
        values, temporal = _numeric([v for v, _ in pairs])
        order = np.argsort(values, kind="stable")
        weights = np.array([c for _, c in pairs], dtype=np.float64)[order]
        bounds = equi_depth(values[order], weights, buckets)
        rank_error = 0.0
        exact = True
        originals = {float(n) if not temporal else int(n): v for n, (v, _) in zip(values, pairs)}
        out = [originals[float(b) if not temporal else int(b)] for b in bounds]
    else:
        points, weights, temporal = [], [], False
        for column in columns:
            bounds_of = column["histogram"]["bounds"]
            numeric, temporal = _numeric(bounds_of)
            share = (column["rows"] - column["nulls"]) / max(len(numeric), 1)
            points.append(numeric)
            weights.append(np.full(len(numeric), share))
        values = np.concatenate(points)
        order = np.argsort(values, kind="stable")
        merged_bounds = equi_depth(values[order], np.concatenate(weights)[order], buckets)
        merged_bounds[0] = min(float(p[0]) for p in points)
        merged_bounds[-1] = max(float(p[-1]) for p in points)
        if temporal:
            out = [str(np.datetime64(int(b), "ns")) for b in merged_bounds]
        else:
            out = [_plain_number(b) for b in merged_bounds]
        rank_error = max(c["histogram"]["rank_error"] for c in columns) + 1.0 / buckets
        exact = False
    return {"bounds": out, "exact": exact, "rank_error": round(rank_error, 6)}


def _plain_number(value: Any) -> Any:
    value = float(value)
    return int(value) if value.is_integer() else value
