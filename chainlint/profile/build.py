"""Profile a dataset: stream its batches through one profiler per column (`count_batches`), then
write each column's entry under the privacy rule (`profile_document`)."""

from __future__ import annotations

import importlib
import os
from collections.abc import Callable, Iterable
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Any

import pyarrow as pa

from chainlint.profile.columns import ColumnProfiler
from chainlint.profile.dtypes import fixed_dtype
from chainlint.profile.entries import finished_entry
from chainlint.profile.errors import DataError
from chainlint.profile.format import header
from chainlint.profile.joint import JointCounter
from chainlint.profile.readers import Dataset
from chainlint.profile.settings import Settings


def profile_dataset(
    dataset: Dataset, name: str, settings: Settings, progress: Callable[[int], None] | None = None,
    joint: JointCounter | None = None,
) -> dict[str, Any]:
    """The profile document of a dataset (see docs/profile-format.md); with `joint`, also the
    exact joint counts of the code's predicates."""
    unknown = sorted(settings.redact - set(dataset.schema.names))
    if unknown:
        raise DataError(f"--redact names no column of the data: {', '.join(unknown)}")
    profilers = new_profilers(dataset.schema, settings, dataset.expected_rows or 0)
    rows = count_batches(dataset.batches, profilers, joint, progress)
    if rows == 0:
        where = dataset.files[0].path if dataset.files else f"the {dataset.kind} data"
        raise DataError("no data rows (header only or empty)", path=str(where))
    source = {
        "kind": dataset.kind,
        "files": [{"path": f.path, "bytes": f.bytes, "modified": f.modified} for f in dataset.files],
        "fingerprint": dataset.fingerprint(),
    }
    return profile_document(name, settings, source, profilers, rows, joint)


def new_profilers(schema: pa.Schema, settings: Settings, expected_rows: int,
                  kind: type[ColumnProfiler] = ColumnProfiler) -> list[ColumnProfiler]:
    """One profiler per column; `expected_rows` (of the whole dataset) sets the sampling stride."""
    return [kind(field.name, field.type, settings, expected_rows, fixed_dtype(field)) for field in schema]


def count_batches(
    batches: Iterable[pa.Table], profilers: list[ColumnProfiler], joint: JointCounter | None = None,
    progress: Callable[[int], None] | None = None,
) -> int:
    """Count batches into the profilers (and the joint counter); the rows counted. The cluster
    path counts each piece of a dataset with this same loop."""
    rows = 0
    # Columns are independent and numpy/pyarrow release the GIL for the heavy work, so the
    # columns of a batch are spread over threads.
    with ThreadPoolExecutor(max_workers=os.cpu_count() or 1) as pool, ThreadPoolExecutor(max_workers=1) as reader:
        if joint is not None and joint.needs_pandas():
            pool.submit(importlib.import_module, "pandas")  # imported while the first batch is read
        stream = iter(batches)
        ahead = reader.submit(next, stream, None)
        counted: Future[None] | None = None
        while (batch := ahead.result()) is not None:
            ahead = reader.submit(next, stream, None)  # read the next batch while this one is counted
            if counted is not None:
                counted.result()  # the previous batch's joint counts: they ran beside its columns
            counted = pool.submit(joint.add, batch) if joint is not None else None
            list(pool.map(ColumnProfiler.add_batch, profilers, batch.columns))
            rows += batch.num_rows
            if progress is not None:
                progress(rows)
        if counted is not None:
            counted.result()
    return rows


def profile_document(
    name: str, settings: Settings, source: dict[str, Any], profilers: list[ColumnProfiler], rows: int,
    joint: JointCounter | None = None,
) -> dict[str, Any]:
    """The profile document of counted profilers: the privacy rule applies here, to the final
    counts only."""
    with ThreadPoolExecutor(max_workers=os.cpu_count() or 1) as pool:
        columns = list(pool.map(finished_entry, profilers))
    document = header(name, rows, source, settings.written())
    document["columns"] = {p.name: column for p, column in zip(profilers, columns)}
    document["column_order"] = [p.name for p in profilers]
    if joint is not None:
        document["joint"] = joint.finish(settings.min_count)
    return document
