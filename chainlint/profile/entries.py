"""A column's entry in the profile, from its profiler's counts or summaries.

Privacy: a value with fewer than `min_count` rows is never listed, nor told by the complement
of the listed ones; bounds follow `privacy.safe_bounds`; strings get no bounds at all.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from chainlint.arrays import to_numpy
from chainlint.profile.columns import ColumnProfiler
from chainlint.profile.dtypes import iso, plain, unit_nanoseconds
from chainlint.profile.privacy import fold_rare, safe_bounds
from chainlint.profile.sketches import HyperLogLog, seal
from chainlint.redaction import redact_value

_ARROW_ERRORS = ColumnProfiler.ARROW_ERRORS


def finished_entry(profiler: ColumnProfiler) -> dict[str, Any]:
    """The column's entry, or rows and nulls with `unsummarised` saying why there is no more:
    a type without statistics, one pyarrow cannot sort, or infinities (JSON holds no infinity)."""
    reason = profiler.unsummarised
    if reason is None:
        try:
            entry = column_entry(profiler)
        except _ARROW_ERRORS as error:
            reason = f"pyarrow cannot order {profiler.arrow_type} values ({str(error).splitlines()[0]})"
        else:
            if "distinct" not in entry:
                entry["unsummarised"] = f"no statistics for Arrow type {profiler.arrow_type}"
                return entry
            if not _finite(entry):
                reason = "it holds infinite values, which a profile cannot state"
            else:
                return entry
    return {"type": profiler.dtype(), "arrow_type": str(profiler.arrow_type),
            "rows": profiler.rows, "nulls": profiler.nulls, "unsummarised": reason}


def column_entry(profiler: ColumnProfiler) -> dict[str, Any]:
    """The column's entry in the profile (may raise pyarrow's errors for values it cannot sort)."""
    settings = profiler.settings
    entry: dict[str, Any] = {
        "type": profiler.dtype(),
        "arrow_type": str(profiler.arrow_type),
        "rows": profiler.rows,
        "nulls": profiler.nulls,
    }
    if profiler.kind == "other":
        return entry
    if profiler.exact:
        counted, counts = profiler.counter.table()
        profiler.hll.add_hashes(profiler.hash(counted))
        values = to_numpy(counted)
        counts = fold_rare(counts, settings.min_count)
        values, counts = values[counts > 0], counts[counts > 0]
        entry["distinct"] = {"value": int(len(values)), "exact": True}
        frequent = counts >= settings.min_count
        entry["top"] = _top_exact(profiler, values, counts)
        entry["suppressed"] = {"values": int((~frequent).sum()), "rows": int(counts[~frequent].sum())}
        bounds = _bounds(profiler, values, counts.astype(np.float64), counts, frequent)
        rank_error = 0.0
        entry["clustering"] = profiler.clustering(counts / max(counts.sum(), 1))
    else:
        assert profiler.sample is not None
        points, weights = profiler.sample.points()
        entry["distinct"] = {
            "value": int(round(profiler.hll.estimate())),
            "exact": False,
            "standard_error": round(HyperLogLog.standard_error(), 6),
        }
        entry["top"] = _top_sampled(profiler, points, weights)
        bounds = None
        if points.size:
            starts = np.concatenate([[0], np.flatnonzero(points[1:] != points[:-1]) + 1])
            sums = np.add.reduceat(weights, starts)
            sizes = np.diff(np.append(starts, points.size))
            frequent = (sizes >= profiler.sampled_rows_needed()) & (sums >= settings.min_count)
            bounds = _bounds(profiler, points[starts], sums, sizes, frequent)
        rank_error = profiler.sample.rank_error
        listed = np.array([c for _, c in entry["top"]["values"]], dtype=np.float64)
        entry["clustering"] = profiler.clustering(listed / max(profiler.rows - profiler.nulls, 1))
    if settings.sketch_key:
        entry["sketch"] = seal(profiler.hll, settings.sketch_key, profiler.name)
    redacted = profiler.name in settings.redact
    entry["redacted"] = redacted
    if redacted:
        entry["top"]["values"] = sorted([redact_value(settings.redaction_key, v), c] for v, c in entry["top"]["values"])
        return entry
    entry["top"]["values"] = [[_output(profiler, v), c] for v, c in entry["top"]["values"]]
    if bounds is not None:
        entry["histogram"] = {"bounds": bounds, "exact": profiler.exact, "rank_error": round(rank_error, 6)}
        entry["min"], entry["max"] = bounds[0], bounds[-1]
    return entry


def _top_exact(profiler: ColumnProfiler, values: np.ndarray, counts: np.ndarray) -> dict[str, Any]:
    frequent = np.flatnonzero(counts >= profiler.settings.min_count)
    # `values` is sorted; a stable sort by descending count breaks ties by value.
    order = frequent[np.argsort(-counts[frequent], kind="stable")]
    listed = order[: profiler.settings.top].tolist()
    return {
        "values": [[plain(values[i]), int(counts[i])] for i in listed],
        "exact": True,
        "complete": len(listed) == len(frequent),
        "error": 0,
    }


def _top_sampled(profiler: ColumnProfiler, points: np.ndarray, weights: np.ndarray) -> dict[str, Any]:
    if points.size == 0:
        return {"values": [], "exact": False, "complete": False, "error": 0}
    starts = np.concatenate([[0], np.flatnonzero(points[1:] != points[:-1]) + 1])
    sums = np.add.reduceat(weights, starts)
    sizes = np.diff(np.append(starts, points.size))
    keep = np.flatnonzero((sizes >= profiler.sampled_rows_needed()) & (sums >= profiler.settings.min_count))
    ranked = keep[np.argsort(-sums[keep], kind="stable")][: profiler.settings.top]  # ties stay in value order
    return {
        "values": [[plain(points[starts[i]]), int(round(sums[i]))] for i in ranked],
        "exact": False,
        "complete": False,
        "error": _sampled_error(profiler, float(weights.max()), float(sums[ranked[0]]) if ranked.size else 0.0),
    }


def _sampled_error(profiler: ColumnProfiler, heaviest: float, largest: float) -> int:
    """How far a listed estimated count may be off: two of the heaviest points (where a run of
    the value starts and ends between picks), the compactions' rank error, and the pick's own
    spread. One row in `stride` picked from rows in no particular order counts a value of c
    rows with a standard deviation of at most sqrt(c * stride); four of them, at the largest
    count listed, bound every listed count but rarely (common practice for a bound that holds
    with high probability). A merge of pieces sampled apart adds a start of the pick per
    piece, within the same spread; only values repeating with the stride's own period escape
    it, as they escape any systematic pick."""
    sample = profiler.sample
    assert sample is not None
    spread = 4.0 * math.sqrt(largest * sample.stride) if sample.stride > 1 else 0.0
    return int(math.ceil(2 * heaviest + sample.rank_error * (profiler.rows - profiler.nulls) + spread))


def _bounds(profiler: ColumnProfiler, values: np.ndarray, weights: np.ndarray, held: np.ndarray,
            frequent: np.ndarray) -> list[Any] | None:
    """Histogram bounds of sorted distinct values: `weights` rows each stands for, `held`
    rows known to hold each (a sample's points are rows of their own)."""
    if profiler.kind not in ("integer", "float", "temporal"):
        return None
    step = 86_400 * 10**9 // unit_nanoseconds(profiler.arrow_type) if profiler.kind == "temporal" else 0
    settings = profiler.settings
    return safe_bounds(values, weights, held, frequent, settings.min_count, settings.buckets,
                       step, profiler.kind != "float", lambda value: _output(profiler, value))


def _output(profiler: ColumnProfiler, value: Any) -> Any:
    value = plain(value)
    if profiler.kind == "temporal":
        return iso(value, profiler.arrow_type)
    return value


def _finite(value: Any) -> bool:
    if isinstance(value, float):
        return math.isfinite(value)
    if isinstance(value, dict):
        return all(_finite(v) for v in value.values())
    if isinstance(value, list):
        return all(_finite(v) for v in value)
    return True
