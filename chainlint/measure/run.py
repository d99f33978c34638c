"""Measure a chain's written form, its planned form and its best single order on real data
(`chainlint measure`).

Every form is built from chainlint's own IR (never the user's code) and run as pandas runs a
filter: a boolean mask (for a group of steps, their masks joined with `&`), then the rows it
keeps. After a warm-up, the forms alternate for `repeat` runs; medians are reported, per group
and in all. All must return the same frame.
"""

from __future__ import annotations

import math
import statistics
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import pandas as pd
import pyarrow as pa

from chainlint.evaluate.pandas_masks import apply_group
from chainlint.evaluate.support import unevaluable
from chainlint.model import Chain, ChainlintError
from chainlint.profile.dtypes import NUMBERS_KEY, fixed_dtype
from chainlint.profile.read_options import CsvOptions
from chainlint.profile.readers import open_dataset


class MeasureError(ChainlintError):
    """The measurement cannot be made or its result is wrong; the message says which."""


class DataMismatch(MeasureError):
    """The chain cannot run on the data given (columns it reads are missing, or pandas raises)."""


@dataclass(frozen=True)
class OrderTiming:
    """One form timed: its groups of steps (each run as one mask), in order; per group its
    median time and the rows left after it."""

    groups: tuple[tuple[int, ...], ...]
    seconds: float
    step_seconds: tuple[float, ...]
    rows_after: tuple[int, ...]

    @property
    def order(self) -> tuple[int, ...]:
        return tuple(i for group in self.groups for i in group)


@dataclass(frozen=True)
class Measurement:
    chain: Chain
    rows: int
    written: OrderTiming
    planned: OrderTiming
    estimated_speedup: float
    same_result: bool
    #: The index's class and `freq` agree too (pandas derives them from the path the rows
    #: took; README: "The index after a reorder").
    same_index_type: bool = True
    #: The cheapest order of single steps (no fused masks), when the plan is not one.
    single: OrderTiming | None = None

    @property
    def measured_speedup(self) -> float:
        return self.written.seconds / self.planned.seconds if self.planned.seconds > 0 else 1.0

    @property
    def fastest(self) -> str:
        """`written`, `planned` or `single order`: the form measured fastest."""
        timings = {"planned": self.planned, "written": self.written}
        if self.single is not None:
            timings["single order"] = self.single
        return min(timings, key=lambda name: timings[name].seconds)


def load_table(data: Sequence[str], rows: int | None, columns: Sequence[str] | None, csv: CsvOptions | None = None) -> pa.Table:
    """The data as one Arrow table (first `rows` rows, chosen `columns`), with the profile readers."""
    dataset = open_dataset(data, csv=csv)
    names = dataset.schema.names
    if columns:
        missing = [c for c in columns if c not in names]
        if missing:
            raise MeasureError(f"--columns names no column of the data: {', '.join(missing)}")
    batches = []
    taken = 0
    for batch in dataset.batches:
        if columns:
            batch = batch.select(list(columns))
        if rows is not None and taken + batch.num_rows > rows:
            batch = batch.slice(0, rows - taken)
        batches.append(batch)
        taken += batch.num_rows
        if rows is not None and taken >= rows:
            break
    schema = dataset.schema if not columns else pa.schema([dataset.schema.field(c) for c in columns])
    table = pa.concat_tables([b.cast(schema) if b.schema != schema else b for b in batches]) if batches else schema.empty_table()
    # The schema as profiled, its marks of the dtypes pandas gives whatever the values included.
    return pa.Table.from_arrays(table.combine_chunks().columns, schema=schema)


def as_read_csv(table: pa.Table) -> pd.DataFrame:
    """The table as the frame pandas' readers give: a column whose dtype the data fixes (a
    categorical, a nullable dtype, a `read_csv` dtype) in that dtype; a boolean column with
    missing values holds NaN, not None, in its object array."""
    frame = table.to_pandas()
    for field in table.schema:
        dtype = fixed_dtype(field)
        if dtype == "category":
            frame[field.name] = _categorical(table.column(field.name))
        elif NUMBERS_KEY in (field.metadata or {}) and dtype == "object":
            # Python ints, counted as float64 by the profiler: exact up to 2**53 only.
            frame[field.name] = pd.Series([int(v) if math.isfinite(v) else v for v in frame[field.name]], dtype=object,
                                          index=frame.index)
        elif dtype is not None:
            frame[field.name] = frame[field.name].astype(dtype)
        elif pa.types.is_boolean(field.type) and table.column(field.name).null_count:
            column = frame[field.name]
            frame[field.name] = column.where(column.notna(), float("nan"))
    return frame


def _categorical(column: pa.ChunkedArray) -> pd.Categorical:
    """A column as a categorical of its values in their own type (integers stay integers, as
    `read_csv` converts categories), in sorted order."""
    encoded = column.combine_chunks().dictionary_encode()
    categories = pd.Index(encoded.dictionary.to_pandas())
    codes = encoded.indices.fill_null(-1).to_numpy(zero_copy_only=False)
    return pd.Categorical.from_codes(codes, categories).set_categories(categories.sort_values())


def measurable(chain: Chain) -> str | None:
    """Why a chain cannot be measured, or None."""
    for number, step in enumerate(chain.steps, start=1):
        reason = unevaluable(step.predicate)
        if reason:
            return f"step {number} cannot be measured: {reason}"
    return None


Groups = tuple[tuple[int, ...], ...]


def _run(frame: pd.DataFrame, chain: Chain, groups: Groups) -> tuple[pd.DataFrame, list[float], list[int]]:
    seconds, rows = [], []
    current = frame
    for group in groups:
        start = time.perf_counter()
        current = apply_group(current, [chain.steps[i].predicate for i in group])
        seconds.append(time.perf_counter() - start)
        rows.append(len(current))
    return current, seconds, rows


def measure_chain(
    frame: pd.DataFrame,
    chain: Chain,
    planned: Sequence[Sequence[int]],
    estimated_speedup: float,
    repeat: int = 5,
    progress: Callable[[int, int], None] | None = None,
    single: Sequence[int] | None = None,
) -> Measurement:
    """Time the written form, the `planned` groups and (when given and another form) the
    `single` order of single steps."""
    reason = measurable(chain)
    if reason:
        raise MeasureError(reason)
    written = tuple((i,) for i in range(len(chain.steps)))
    planned = tuple(tuple(group) for group in planned)
    orders: tuple[Groups, ...] = (written, planned)
    alone = tuple((i,) for i in single) if single is not None else None
    if alone is not None and alone not in orders:
        orders += (alone,)
    missing = sorted({c for step in chain.steps for c in step.predicate.columns()} - set(frame.columns))
    if missing:
        raise DataMismatch(f"the data has no column {', '.join(f'`{c}`' for c in missing)}, which the chain reads")
    try:
        results = [_run(frame, chain, order)[0] for order in orders]  # warm-up, and the results
    except (KeyError, TypeError, ValueError) as error:
        raise DataMismatch(f"pandas raises on this data: {type(error).__name__}: {error}") from None
    checked = [compare_results(result, results[0]) for result in results[1:]]
    same, same_index_type = all(c[0] for c in checked), all(c[1] for c in checked)
    totals: dict[Groups, list[float]] = {order: [] for order in orders}
    steps: dict[Groups, list[list[float]]] = {order: [] for order in orders}
    rows: dict[Groups, list[int]] = {}
    for run in range(repeat):
        for order in orders if run % 2 == 0 else orders[::-1]:
            _, seconds, rows[order] = _run(frame, chain, order)
            totals[order].append(sum(seconds))
            steps[order].append(seconds)
        if progress is not None:
            progress(run + 1, repeat)

    def timing(order: Groups) -> OrderTiming:
        per_step = tuple(statistics.median(run[k] for run in steps[order]) for k in range(len(order)))
        return OrderTiming(order, statistics.median(totals[order]), per_step, tuple(rows[order]))

    return Measurement(chain, len(frame), timing(written), timing(planned), estimated_speedup, same, same_index_type,
                       timing(alone) if alone is not None and alone not in (written, planned) else None)


def compare_results(planned: pd.DataFrame, written: pd.DataFrame) -> tuple[bool, bool]:
    """(the same frame: rows, order, columns, dtypes, values and index labels; and the same
    index class and `freq` as well). A RangeIndex against an int64 Index of the same labels,
    or a DatetimeIndex whose `freq` differs, is the same frame with another index type."""
    try:
        pd.testing.assert_frame_equal(planned, written, check_index_type="equiv", check_freq=False)
    except AssertionError:
        return False, False
    same_type = type(planned.index) is type(written.index) and getattr(planned.index, "freq", None) == getattr(written.index, "freq", None)
    return True, same_type
