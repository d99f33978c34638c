"""Profile a dataset: stream its batches through one profiler per column."""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from datetime import UTC, datetime
from typing import Any

import pyarrow as pa

from chainlint import __version__
from chainlint.profile.columns import ColumnProfiler, Settings, pandas_type
from chainlint.profile.format import FORMAT_NAME, FORMAT_VERSION
from chainlint.profile.joint import JointCounter
from chainlint.profile.readers import DataError, Dataset


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
        batches = iter(dataset.batches)
        ahead = reader.submit(next, batches, None)
        counted: Future[None] | None = None
        while (batch := ahead.result()) is not None:
            ahead = reader.submit(next, batches, None)  # read the next batch while this one is counted
            if counted is not None:
                counted.result()  # the previous batch's joint counts: they ran beside its columns
            counted = pool.submit(joint.add, batch) if joint is not None else None
            list(pool.map(_add, profilers, batch.columns))
            rows += batch.num_rows
            if progress is not None:
                progress(rows)
        if counted is not None:
            counted.result()
        columns = list(pool.map(_finish, profilers)) if rows else []
    if rows == 0:
        raise DataError(f"{dataset.files[0].path}: no data rows (header only or empty)")
    document = {
        "format": FORMAT_NAME,
        "format_version": FORMAT_VERSION,
        "chainlint_version": __version__,
        "name": name,
        "created": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "rows": rows,
        "source": {
            "kind": dataset.kind,
            "files": [{"path": f.path, "bytes": f.bytes, "modified": f.modified} for f in dataset.files],
            "fingerprint": dataset.fingerprint(),
        },
        "settings": {
            "min_count": settings.min_count,
            "distinct_cap": settings.distinct_cap,
            "top": settings.top,
            "buckets": settings.buckets,
            "redacted": sorted(settings.redact),
        },
        "columns": {p.name: column for p, column in zip(profilers, columns)},
        "column_order": [p.name for p in profilers],
    }
    if joint is not None:
        document["joint"] = joint.finish(settings.min_count)
    return document


_ARROW_ERRORS = (pa.ArrowNotImplementedError, pa.ArrowInvalid, pa.ArrowTypeError)


def _add(profiler: ColumnProfiler, column: pa.Array | pa.ChunkedArray) -> None:
    """Count a batch; a type pyarrow has no kernel for is counted from then on as one without
    statistics (rows and nulls only) rather than failing the profile."""
    try:
        profiler.add(column)
    except _ARROW_ERRORS as error:
        profiler.kind, profiler.exact = "other", False
        profiler.unsummarised = f"pyarrow cannot count {profiler.arrow_type} values ({str(error).splitlines()[0]})"


def _finish(profiler: ColumnProfiler) -> dict[str, Any]:
    """The column's entry, or rows and nulls with `unsummarised` saying why there is no more:
    a type without statistics, one pyarrow cannot sort, or infinities (JSON holds no infinity)."""
    reason = getattr(profiler, "unsummarised", None)
    if reason is None:
        try:
            entry = profiler.finish()
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
    return {"type": pandas_type(profiler.arrow_type, profiler.nulls > 0), "arrow_type": str(profiler.arrow_type),
            "rows": profiler.rows, "nulls": profiler.nulls, "unsummarised": reason}


def _finite(value: Any) -> bool:
    if isinstance(value, float):
        return math.isfinite(value)
    if isinstance(value, dict):
        return all(_finite(v) for v in value.values())
    if isinstance(value, list):
        return all(_finite(v) for v in value)
    return True
