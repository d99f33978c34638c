"""Per-column statistics, accumulated batch by batch.

A column starts exact: counts of every value, per batch from dictionary indices with
`bincount` (Parquet strings arrive dictionary-encoded; other strings are encoded once, which
also gives the value changes), by `bincount` for integers of a narrow range, else by pyarrow's
`value_counts`, then added into one table of values. When its distinct count passes the cap it
switches to summaries: a HyperLogLog for the distinct count and a weighted sample for quantiles
and frequent values. What is written obeys the privacy rule (see `finish`).
"""

from __future__ import annotations

import hashlib
import hmac
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from chainlint.arrays import filled_numpy, index_array, to_numpy
from chainlint.profile.privacy import equi_depth_positions, fold_rare, safe_bounds
from chainlint.profile.sketches import HyperLogLog, WeightedSample, hash32, hash_strings, seal


@dataclass(frozen=True)
class Settings:
    min_count: int = 5
    distinct_cap: int = 10_000
    top: int = 100
    buckets: int = 100
    redact: frozenset[str] = frozenset()
    redaction_key: bytes = b""
    sketch_key: bytes = b""  # without one no sketch is written (it would be readable by all)


def value_kind(arrow_type: pa.DataType) -> str:
    if pa.types.is_dictionary(arrow_type):
        arrow_type = arrow_type.value_type
    if pa.types.is_string(arrow_type) or pa.types.is_large_string(arrow_type):
        return "string"
    if pa.types.is_boolean(arrow_type):
        return "boolean"
    if pa.types.is_integer(arrow_type):
        return "integer"
    if pa.types.is_floating(arrow_type):
        return "float"
    if pa.types.is_timestamp(arrow_type) or pa.types.is_date(arrow_type):
        return "temporal"
    return "other"


def pandas_type(arrow_type: pa.DataType, has_nulls: bool) -> str:
    """The dtype pandas 3 gives this column when it reads the file (default numpy backend)."""
    if pa.types.is_dictionary(arrow_type):
        return "category"
    kind = value_kind(arrow_type)
    if kind == "string":
        return "str"
    if kind == "integer":
        return "float64" if has_nulls else str(arrow_type.to_pandas_dtype().__name__)
    if kind == "boolean":
        return "object" if has_nulls else "bool"
    if kind == "float":
        return str(arrow_type.to_pandas_dtype().__name__)
    if pa.types.is_timestamp(arrow_type):
        zone = f", {arrow_type.tz}" if arrow_type.tz else ""
        return f"datetime64[{arrow_type.unit}{zone}]"
    if pa.types.is_duration(arrow_type):
        return f"timedelta64[{arrow_type.unit}]"
    return "object"


def redact_value(key: bytes, value: Any) -> str:
    """The keyed hash under which a redacted value is stored and a literal is looked up."""
    return "h:" + hmac.new(key, repr(value).encode("utf-8", "surrogatepass"), hashlib.sha256).hexdigest()[:16]


_NUMERIC = frozenset({"integer", "float", "temporal", "boolean"})


def _narrow(values: np.ndarray) -> bool:
    """Whether the values are integers (within int64) spanning few enough values that
    `bincount` counts them faster than hashing."""
    if not (values.dtype.kind == "i" or (values.dtype.kind == "u" and values.dtype.itemsize < 8)):
        return False
    return int(values.max()) - int(values.min()) <= max(len(values), 1 << 16)


def _surely_past(valid: pa.Array | pa.ChunkedArray, cap: int) -> bool:
    """Whether a first batch's leading rows alone hold more distinct values than the cap: a
    near-unique column then goes straight to its summaries, with no exact count table."""
    if len(valid) <= 2 * cap:
        return False
    lead = valid.slice(0, 2 * cap)
    if isinstance(lead, pa.DictionaryArray):
        lead = lead.indices
    return pc.count_distinct(lead).as_py() > cap


class ColumnProfiler:
    def __init__(self, name: str, arrow_type: pa.DataType, settings: Settings, expected_rows: int = 0) -> None:
        self.name = name
        self.arrow_type = arrow_type.value_type if pa.types.is_dictionary(arrow_type) else arrow_type
        self.kind = value_kind(arrow_type)
        self.counted_type = pa.int64() if self.kind == "temporal" else self.arrow_type  # times count as integers
        self.settings = settings
        self.rows = 0
        self.nulls = 0
        self.exact = self.kind != "other"
        self.counter = _Counter(self.counted_type)
        self.hll = HyperLogLog()
        self.sample: WeightedSample | None = None
        self.expected_rows = expected_rows
        # How clustered equal values lie in row order: value changes between consecutive
        # non-null rows (a sorted column changes rarely; kept rows then lie in runs).
        self.changes = 0
        self.last: Any = None

    # -- accumulation ---------------------------------------------------------------------
    def add(self, column: pa.Array | pa.ChunkedArray) -> None:
        """Count one batch of the column (a CSV piece's column comes in several chunks)."""
        if isinstance(column, pa.ChunkedArray):
            if pa.types.is_dictionary(column.type) and column.num_chunks > 1:
                for chunk in column.chunks:  # each chunk has its own dictionary
                    self.add(chunk)
                return
            if column.num_chunks == 1:
                column = column.chunk(0)
        self.rows += len(column)
        if self.kind == "other":
            self.nulls += column.null_count
            return
        if self.kind == "temporal":
            column = _temporal_ints(column)
        nan = pc.is_nan(column) if self.kind == "float" else None
        nans = int(pc.sum(nan).as_py() or 0) if nan is not None else 0  # NaN is missing to pandas
        self.nulls += column.null_count + nans
        valid = column.filter(pc.invert(nan)) if nans else column.drop_null() if column.null_count else column
        if len(valid) == 0:
            return
        if self.exact and self.counter.empty() and _surely_past(valid, self.settings.distinct_cap):
            self.start_summaries()
        if self.kind in _NUMERIC:
            values = to_numpy(valid)
            self.count_changes(values, values[0], values[-1])
        else:
            values = None
            if self.exact and not isinstance(valid, pa.DictionaryArray):
                # One hash pass gives both the counts (by index) and the changes (of indices).
                valid = pc.dictionary_encode(valid.combine_chunks() if isinstance(valid, pa.ChunkedArray) else valid)
            comparable = to_numpy(valid.indices) if isinstance(valid, pa.DictionaryArray) else valid
            self.count_changes(comparable, valid[0].as_py(), valid[len(valid) - 1].as_py())
        if self.exact:
            self.count_exact(valid, values)
        else:
            self.summarise(valid, values)

    def count_changes(self, comparable: pa.Array | pa.ChunkedArray | np.ndarray, first: Any, last: Any) -> None:
        """Changes between neighbouring values: within the batch, and from the last batch's end."""
        if len(comparable) > 1:
            if isinstance(comparable, np.ndarray):
                self.changes += int(np.count_nonzero(comparable[1:] != comparable[:-1]))
            else:
                self.changes += int(pc.sum(pc.not_equal(comparable.slice(1), comparable.slice(0, len(comparable) - 1))).as_py() or 0)
        if self.last is not None and first != self.last:
            self.changes += 1
        self.last = last

    def clustering(self, shares: np.ndarray) -> float:
        """1 when equal values lie in one run each (a sorted column), 0 when they are spread as
        in a random order: 1 - changes / the changes a random order would have."""
        pairs = self.rows - self.nulls - 1
        if pairs <= 0:
            return 0.0
        expected = pairs * (1.0 - float(np.sum(shares**2)))
        if expected <= 0:
            return 1.0
        # One decimal: enough for the cost model, and a few rare rows (two changes each at most)
        # seldom move it.
        return round(min(1.0, max(0.0, 1.0 - self.changes / expected)), 1)

    def count_exact(self, valid: pa.Array | pa.ChunkedArray, values: np.ndarray | None) -> None:
        """Add a batch's non-null values to the exact counts (`values`: their numpy form, for
        numbers)."""
        if isinstance(valid, pa.DictionaryArray):
            indices = to_numpy(valid.indices)
            self.counter.add_indices(valid.dictionary, np.bincount(indices, minlength=len(valid.dictionary)))
        elif values is not None and _narrow(values):
            low = int(values.min())
            counts = np.bincount(np.subtract(values, low, dtype=np.int64))
            present = np.flatnonzero(counts)
            self.counter.add(index_array(present + low).cast(self.counted_type), counts[present])
        else:
            table = pc.value_counts(valid)
            self.counter.add(table.field("values"), to_numpy(table.field("counts")))
        if len(self.counter) > self.settings.distinct_cap:
            self.start_summaries()

    def start_summaries(self) -> None:
        """Leave exact counting: the values counted so far become weighted points."""
        counted, counts = self.counter.table()
        self.exact = False
        self.counter = _Counter(self.counted_type)
        self.sample = WeightedSample(expected=self.expected_rows)
        if len(counted):
            values = to_numpy(counted)
            self.hll.add_hashes(self.hash(counted))
            # A value counted c times enters as min(c, the points the frequent-value rule asks
            # for) points sharing its weight: it then passes the rule as the rows it stands for do.
            points = np.minimum(counts, self.sampled_rows_needed())
            self.sample.add_weighted(np.repeat(values, points), np.repeat(counts / points, points))

    def summarise(self, valid: pa.Array | pa.ChunkedArray, values: np.ndarray | None) -> None:
        """Feed non-null values to the summaries; `values` is their numpy form for numbers
        (strings stay in Arrow: they are hashed from its buffers and only the sampled ones
        become Python objects)."""
        assert self.sample is not None
        if values is not None:
            self.hll.add_hashes(hash32(values))
            self.sample.add(values)
            return
        self.hll.add_hashes(self.hash(valid))
        weight = float(self.sample.stride)
        picked = valid.take(index_array(np.arange(len(valid))[self.sample.strided(len(valid))]))
        if pa.types.is_dictionary(picked.type):
            picked = picked.cast(picked.type.value_type)
        self.sample.add_weighted(to_numpy(picked), np.full(len(picked), weight))

    def hash(self, values: pa.Array | pa.ChunkedArray) -> np.ndarray:
        """32-bit hashes for the HyperLogLog: numbers by their bit patterns, strings by bytes."""
        if isinstance(values, pa.ChunkedArray):
            parts = [self.hash(chunk) for chunk in values.chunks]
            return np.concatenate(parts) if parts else np.zeros(0, np.uint32)
        if self.kind in _NUMERIC:
            return hash32(to_numpy(values))
        return hash_strings(values)

    # -- the written profile --------------------------------------------------------------
    def finish(self) -> dict[str, Any]:
        """The column's entry in the profile.

        Privacy: a value with fewer than `min_count` rows is never listed, nor told by the
        complement of the listed ones; bounds follow `privacy.safe_bounds`; strings get no
        bounds at all.
        """
        settings = self.settings
        has_nulls = self.nulls > 0
        entry: dict[str, Any] = {
            "type": pandas_type(self.arrow_type, has_nulls),
            "arrow_type": str(self.arrow_type),
            "rows": self.rows,
            "nulls": self.nulls,
        }
        if self.kind == "other":
            return entry
        if self.exact:
            counted, counts = self.counter.table()
            self.hll.add_hashes(self.hash(counted))
            values = to_numpy(counted)
            counts = fold_rare(counts, settings.min_count)
            values, counts = values[counts > 0], counts[counts > 0]
            entry["distinct"] = {"value": int(len(values)), "exact": True}
            frequent = counts >= settings.min_count
            entry["top"] = self.top_exact(values, counts)
            entry["suppressed"] = {"values": int((~frequent).sum()), "rows": int(counts[~frequent].sum())}
            bounds = self.bounds(values, counts.astype(np.float64), counts, frequent)
            rank_error = 0.0
            entry["clustering"] = self.clustering(counts / max(counts.sum(), 1))
        else:
            assert self.sample is not None
            points, weights = self.sample.points()
            entry["distinct"] = {
                "value": int(round(self.hll.estimate())),
                "exact": False,
                "standard_error": round(HyperLogLog.standard_error(), 6),
            }
            entry["top"] = self.top_sampled(points, weights)
            bounds = None
            if points.size:
                starts = np.concatenate([[0], np.flatnonzero(points[1:] != points[:-1]) + 1])
                sums = np.add.reduceat(weights, starts)
                sizes = np.diff(np.append(starts, points.size))
                frequent = (sizes >= self.sampled_rows_needed()) & (sums >= settings.min_count)
                bounds = self.bounds(points[starts], sums, sizes, frequent)
            rank_error = self.sample.rank_error
            listed = np.array([c for _, c in entry["top"]["values"]], dtype=np.float64)
            entry["clustering"] = self.clustering(listed / max(self.rows - self.nulls, 1))
        if settings.sketch_key:
            entry["sketch"] = seal(self.hll, settings.sketch_key, self.name)
        redacted = self.name in settings.redact
        entry["redacted"] = redacted
        if redacted:
            entry["top"]["values"] = sorted([redact_value(settings.redaction_key, v), c] for v, c in entry["top"]["values"])
            return entry
        entry["top"]["values"] = [[self.output(v), c] for v, c in entry["top"]["values"]]
        if bounds is not None:
            entry["histogram"] = {"bounds": bounds, "exact": self.exact, "rank_error": round(rank_error, 6)}
            entry["min"], entry["max"] = bounds[0], bounds[-1]
        return entry

    def top_exact(self, values: np.ndarray, counts: np.ndarray) -> dict[str, Any]:
        frequent = np.flatnonzero(counts >= self.settings.min_count)
        # `values` is sorted; a stable sort by descending count breaks ties by value.
        order = frequent[np.argsort(-counts[frequent], kind="stable")]
        listed = order[: self.settings.top].tolist()
        return {
            "values": [[_plain(values[i]), int(counts[i])] for i in listed],
            "exact": True,
            "complete": len(listed) == len(frequent),
            "error": 0,
        }

    def top_sampled(self, points: np.ndarray, weights: np.ndarray) -> dict[str, Any]:
        if points.size == 0:
            return {"values": [], "exact": False, "complete": False, "error": 0}
        starts = np.concatenate([[0], np.flatnonzero(points[1:] != points[:-1]) + 1])
        sums = np.add.reduceat(weights, starts)
        sizes = np.diff(np.append(starts, points.size))
        keep = np.flatnonzero((sizes >= self.sampled_rows_needed()) & (sums >= self.settings.min_count))
        ranked = keep[np.argsort(-sums[keep], kind="stable")][: self.settings.top]  # ties stay in value order
        heaviest = float(weights.max())
        return {
            "values": [[_plain(points[starts[i]]), int(round(sums[i]))] for i in ranked],
            "exact": False,
            "complete": False,
            "error": int(math.ceil(2 * heaviest + self.sample.rank_error * (self.rows - self.nulls))),  # type: ignore[union-attr]
        }

    def sampled_rows_needed(self) -> int:
        """Sampled points a value needs to be listed. Each strided point is a row of its own, so
        a value seen in `min_count` of them is held by at least `min_count` rows: the privacy
        rule holds for estimated columns too (a compaction picks a value k times only when its
        weight spans k - 1 of the new spacings, about 2(k - 1) of the old points)."""
        return max(2, self.settings.min_count)

    def bounds(self, values: np.ndarray, weights: np.ndarray, held: np.ndarray, frequent: np.ndarray) -> list[Any] | None:
        """Histogram bounds of sorted distinct values: `weights` rows each stands for, `held`
        rows known to hold each (a sample's points are rows of their own)."""
        if self.kind not in ("integer", "float", "temporal"):
            return None
        step = 86_400 * 10**9 // _unit_nanoseconds(self.arrow_type) if self.kind == "temporal" else 0
        return safe_bounds(values, weights, held, frequent, self.settings.min_count, self.settings.buckets,
                           step, self.kind != "float", self.output)

    def output(self, value: Any) -> Any:
        value = _plain(value)
        if self.kind == "temporal":
            return _iso(value, self.arrow_type)
        return value


class _Counter:
    """Exact counts of values, keyed by a growing Arrow array (a few thousand values at most);
    pyarrow's `index_in` looks a batch's values up in one vectorised pass."""

    def __init__(self, value_type: pa.DataType) -> None:
        self.value_type = value_type
        self.values: pa.Array | None = None
        self.counts = np.zeros(0, dtype=np.int64)
        # Counts by index of the current Parquet dictionary, folded in when it changes: the
        # batches of one row group share their dictionary, so most batches need no lookup.
        self.dictionary: pa.Array | None = None
        self.dictionary_counts: np.ndarray | None = None

    def __len__(self) -> int:
        self.fold()
        return 0 if self.values is None else len(self.values)

    def empty(self) -> bool:
        return self.values is None and self.dictionary is None

    def add_indices(self, dictionary: pa.Array, counts: np.ndarray) -> None:
        if self.dictionary is not None and (self.dictionary is dictionary or self.dictionary.equals(dictionary)):
            self.dictionary_counts += counts  # type: ignore[operator]
            return
        self.fold()
        self.dictionary, self.dictionary_counts = dictionary, counts.astype(np.int64)

    def fold(self) -> None:
        if self.dictionary is None or self.dictionary_counts is None:
            return
        used = np.flatnonzero(self.dictionary_counts)
        dictionary, counts = self.dictionary, self.dictionary_counts
        self.dictionary = self.dictionary_counts = None
        self.add(dictionary.take(index_array(used)), counts[used])

    def add(self, values: pa.Array, counts: np.ndarray) -> None:
        if len(values) == 0:
            return
        counts = counts.astype(np.int64)
        if self.values is None:
            self.values, self.counts = values, counts.copy()
            return
        positions = filled_numpy(pc.index_in(values, value_set=self.values), -1).astype(np.int64)
        new = positions < 0
        if new.any():
            added = values.take(index_array(np.flatnonzero(new)))
            positions[new] = np.arange(len(self.values), len(self.values) + len(added))
            self.values = pa.concat_arrays([self.values, added.cast(self.values.type)])
            self.counts = np.concatenate([self.counts, np.zeros(len(added), dtype=np.int64)])
        np.add.at(self.counts, positions, counts)

    def table(self) -> tuple[pa.Array, np.ndarray]:
        """Values in ascending order with their counts."""
        self.fold()
        if self.values is None:
            return pa.nulls(0, self.value_type), np.zeros(0, dtype=np.int64)
        order = pc.sort_indices(self.values)
        return self.values.take(order), self.counts[to_numpy(order)]


def _equi_depth(values: np.ndarray, weights: np.ndarray, buckets: int) -> list[Any]:
    """Bounds at quantiles i/buckets by the inverted CDF (numpy `method="inverted_cdf"`)."""
    return [values[p] for p in equi_depth_positions(weights, buckets)]


def _temporal_ints(array: pa.Array) -> pa.Array:
    if pa.types.is_timestamp(array.type):
        return array.cast(pa.timestamp(array.type.unit)).cast(pa.int64())
    if pa.types.is_date32(array.type):
        return array.cast(pa.int32()).cast(pa.int64())
    return array.cast(pa.int64())


def _unit_nanoseconds(arrow_type: pa.DataType) -> int:
    if pa.types.is_timestamp(arrow_type):
        return {"s": 10**9, "ms": 10**6, "us": 10**3, "ns": 1}[arrow_type.unit]
    if pa.types.is_date32(arrow_type):
        return 86_400 * 10**9
    return 10**6


def _iso(value: int, arrow_type: pa.DataType) -> str:
    if pa.types.is_date32(arrow_type):
        return str(np.datetime64(int(value), "D"))
    if pa.types.is_date64(arrow_type):
        return str(np.datetime64(int(value), "ms").astype("datetime64[D]"))
    return str(np.datetime64(int(value), arrow_type.unit))


def _plain(value: Any) -> Any:
    """A numpy scalar as the Python value JSON writes."""
    return value.item() if isinstance(value, np.generic) else value

