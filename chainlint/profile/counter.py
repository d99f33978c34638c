"""Exact counts of a column's values while it has few enough distinct ones."""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from chainlint.arrays import filled_numpy, index_array, to_numpy


class ValueCounter:
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
