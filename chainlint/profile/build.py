"""Profile a dataset: stream its batches through one profiler per column."""

from __future__ import annotations

import importlib
import os
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Any

from chainlint.profile.columns import ColumnProfiler
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
    expected = dataset.expected_rows or 0
    profilers = [ColumnProfiler(field.name, field.type, settings, expected) for field in dataset.schema]
    rows = 0
    # Columns are independent and numpy/pyarrow release the GIL for the heavy work, so the
    # columns of a batch are spread over threads.
    with ThreadPoolExecutor(max_workers=os.cpu_count() or 1) as pool, ThreadPoolExecutor(max_workers=1) as reader:
        if joint is not None and joint.needs_pandas():
            pool.submit(importlib.import_module, "pandas")  # imported while the first batch is read
        batches = iter(dataset.batches)
        ahead = reader.submit(next, batches, None)
        counted: Future[None] | None = None
        while (batch := ahead.result()) is not None:
            ahead = reader.submit(next, batches, None)  # read the next batch while this one is counted
            if counted is not None:
                counted.result()  # the previous batch's joint counts: they ran beside its columns
            counted = pool.submit(joint.add, batch) if joint is not None else None
            list(pool.map(ColumnProfiler.add_batch, profilers, batch.columns))
            rows += batch.num_rows
            if progress is not None:
                progress(rows)
        if counted is not None:
            counted.result()
        columns = list(pool.map(finished_entry, profilers)) if rows else []
    if rows == 0:
        where = dataset.files[0].path if dataset.files else f"the {dataset.kind} data"
        raise DataError(f"{where}: no data rows (header only or empty)")
    source = {
        "kind": dataset.kind,
        "files": [{"path": f.path, "bytes": f.bytes, "modified": f.modified} for f in dataset.files],
        "fingerprint": dataset.fingerprint(),
    }
    document = header(name, rows, source, settings.written())
    document["columns"] = {p.name: column for p, column in zip(profilers, columns)}
    document["column_order"] = [p.name for p in profilers]
    if joint is not None:
        document["joint"] = joint.finish(settings.min_count)
    return document
