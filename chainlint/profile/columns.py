"""Per-column statistics, accumulated batch by batch.

A column starts exact: counts of every value, per batch from dictionary indices with
`bincount` (Parquet strings arrive dictionary-encoded; other strings are encoded once, which
also gives the value changes), by `bincount` for integers of a narrow range, else by pyarrow's
`value_counts`, then added into one table of values. When its distinct count passes the cap it
switches to summaries: a HyperLogLog for the distinct count and a weighted sample for quantiles
and frequent values. What is written of it (and the privacy rule it obeys): `entries.py`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from chainlint.arrays import index_array, to_numpy
from chainlint.profile.counter import ValueCounter
from chainlint.profile.dtypes import NUMERIC, pandas_type, temporal_ints, value_kind
from chainlint.profile.settings import Settings
from chainlint.profile.sketches import HyperLogLog, WeightedSample, hash32, hash_strings


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
    """One column's counts, exact or summarised, fed a batch at a time (`add_batch`)."""

    #: pyarrow's errors for a type it has no kernel for.
    ARROW_ERRORS = (pa.ArrowNotImplementedError, pa.ArrowInvalid, pa.ArrowTypeError)

    def __init__(self, name: str, arrow_type: pa.DataType, settings: Settings, expected_rows: int = 0,
                 dtype: str | None = None) -> None:
        self.name = name
        self.fixed_dtype = dtype  # the dtype pandas gives the column whatever its values, where the data fixes it
        self.arrow_type = arrow_type.value_type if pa.types.is_dictionary(arrow_type) else arrow_type
        self.kind = value_kind(arrow_type)
        self.counted_type = pa.int64() if self.kind == "temporal" else self.arrow_type  # times count as integers
        self.settings = settings
        self.rows = 0
        self.nulls = 0
        self.exact = self.kind != "other"
        self.counter = ValueCounter(self.counted_type)
        self.hll = HyperLogLog()
        self.sample: WeightedSample | None = None
        self.expected_rows = expected_rows
        # How clustered equal values lie in row order: value changes between consecutive
        # non-null rows (a sorted column changes rarely; kept rows then lie in runs).
        self.changes = 0
        self.last: Any = None
        self.unsummarised: str | None = None  # why the column gets no statistics past rows and nulls

    def add_batch(self, column: pa.Array | pa.ChunkedArray) -> None:
        """Count a batch; a type pyarrow has no kernel for is counted from then on as one without
        statistics (rows and nulls only) rather than failing the profile."""
        try:
            self.add(column)
        except self.ARROW_ERRORS as error:
            self.kind, self.exact = "other", False
            self.unsummarised = f"pyarrow cannot count {self.arrow_type} values ({str(error).splitlines()[0]})"

    def dtype(self) -> str:
        """The dtype pandas gives the column: fixed by the data (`fixed_dtype`), else by its
        Arrow type and whether it holds nulls."""
        return self.fixed_dtype or pandas_type(self.arrow_type, self.nulls > 0)

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
            column = temporal_ints(column)
        nan = pc.is_nan(column) if self.kind == "float" else None
        nans = int(pc.sum(nan).as_py() or 0) if nan is not None else 0  # NaN is missing to pandas
        self.nulls += column.null_count + nans
        valid = column.filter(pc.invert(nan)) if nans else column.drop_null() if column.null_count else column
        if len(valid) == 0:
            return
        if self.exact and self.counter.empty() and _surely_past(valid, self.settings.distinct_cap):
            self.start_summaries()
        if self.kind in NUMERIC:
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
        self.counter = ValueCounter(self.counted_type)
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
        if self.kind in NUMERIC:
            return hash32(to_numpy(values))
        return hash_strings(values)

    def sampled_rows_needed(self) -> int:
        """Sampled points a value needs to be listed. Each strided point is a row of its own, so
        a value seen in `min_count` of them is held by at least `min_count` rows: the privacy
        rule holds for estimated columns too (a compaction picks a value k times only when its
        weight spans k - 1 of the new spacings, about 2(k - 1) of the old points)."""
        return max(2, self.settings.min_count)
