"""What a profile may say about rows that few others share.

The rule: nothing written lets a reader confirm a value held by fewer than `min_count` rows.
Counted values are listed only from `min_count` rows (entries.py); this module makes the other
fields keep to it:

- `safe_bounds`: histogram bounds, `min` and `max`. Each is a value held by at least
  `min_count` rows, or a rounded number whose rounding cell holds at least `min_count` rows
  (the precision drops a digit at a time until it does). The ends are taken `min_count` rows
  in from the true extremes, so that the rarest values (an age of 103, one person's birth
  date) never move them.
- `fold_rare`: when the unlisted values hold fewer than `min_count` rows, or are fewer than
  `min_count` values, even their number tells (listed 'no' x 1,999 of 2,000 rows: somebody said
  'yes'; 3 unlisted values of a status column whose 5 values everyone knows: all 3 occur); they
  are counted with the most common value instead, so that the column reads as if it held no
  rare value at all.
- `hide_small_cells`: joint counts. From the rows passing every subset of a chain's predicates
  a reader derives, by inclusion-exclusion, the rows passing exactly each pattern of them (a
  count's complement is one such derivation). Patterns held by fewer than `min_count` rows are
  counted with their nearest larger pattern, so every derivable group is empty or holds at
  least `min_count` rows.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np

from chainlint.profile.histograms import equi_depth_positions

_MAX_STEPS = 40  # precision steps tried, a factor of ten each


def safe_bounds(
    values: np.ndarray, weights: np.ndarray, held: np.ndarray, frequent: np.ndarray, min_count: int,
    buckets: int, step: float | int, integral: bool, output: Callable[[Any], Any],
) -> list[Any] | None:
    """Equi-depth bounds (numpy's `inverted_cdf` quantiles by `weights`) of the sorted distinct
    `values`, made safe. `held`: rows known to hold each value (exact counts, or a sample's
    points, each a row of its own); `frequent`: values that may be written as they are;
    `step`: the finest rounding (None: three significant digits); `integral`: values are
    integers; `output`: a number as the profile writes it. None when fewer than `min_count`
    rows hold values."""
    held = held.astype(np.float64)
    total = float(held.sum())
    if values.size == 0 or total < min_count:
        return None
    numbers = values.astype(np.float64)
    before = np.concatenate([[0.0], np.cumsum(held)])  # rows held by values[:i]
    positions = equi_depth_positions(weights, buckets)
    positions[0] = int(np.searchsorted(before[1:], min_count, side="left"))
    positions[-1] = int(np.searchsorted(before[:-1], total - min_count, side="right")) - 1
    span = float(numbers[-1] - numbers[0])

    def rows_within(low: float, high: float, closed_low: bool, closed_high: bool) -> float:
        start = np.searchsorted(numbers, low, side="left" if closed_low else "right")
        stop = np.searchsorted(numbers, high, side="right" if closed_high else "left")
        return float(before[stop] - before[start]) if stop > start else 0.0

    def safe(position: int, direction: int, first: int, levels: int) -> tuple[float, Any] | None:
        if frequent[position]:
            return float(numbers[position]), output(values[position])
        found = _cell(values[position], direction, step, span, integral, min_count, rows_within, first, levels)
        return None if found is None else (float(found), output(found))

    out: list[Any] = []
    last: float | None = None
    for index, position in enumerate(positions):
        if index in (0, len(positions) - 1):
            direction = -1 if index == 0 else 1
            # An end may move inward (up to its neighbouring bound) rather than round to a
            # far-off number when its tail is sparse.
            walk = _walk(position, max(position, positions[1]) if index == 0 else min(position, positions[-2]))
            chosen = next((found for p in walk if (found := safe(p, direction, 0, 3))), None)
            chosen = chosen or safe(position, direction, 0, _MAX_STEPS)
        else:
            chosen = safe(position, 0, 0, _MAX_STEPS)
        if chosen is None:
            return None
        number, written = chosen
        if last is not None and number < last:  # rounding may cross a neighbour: keep the order
            number, written = last, out[-1]
        out.append(written)
        last = number
    return out


def _walk(start: int, stop: int) -> list[int]:
    """Positions from `start` toward `stop` at doubling distances."""
    sign = 1 if stop >= start else -1
    walk, offset = [start], 1
    while offset <= abs(stop - start):
        walk.append(start + sign * offset)
        offset *= 2
    return walk


def _cell(
    value: Any, direction: int, step: float | int, span: float, integral: bool, min_count: int,
    rows_within: Callable[[float, float, bool, bool], float], first: int, levels: int,
) -> Any:
    """`value` rounded at the finest precision (from `first` digits coarser than three
    significant ones, or than `step`, trying `levels` of them) whose rounding cell holds
    `min_count` rows: up at the low end (the cell below), down at the high end (the cell
    above), else to nearest. None when no precision tried does."""
    value = value.item() if isinstance(value, np.generic) else value
    if step:
        unit: float | int = step
    else:
        magnitude = abs(value) if value else span
        if not magnitude or not math.isfinite(magnitude):
            return None
        exponent = math.floor(math.log10(magnitude)) - 2  # three significant digits
        unit = 10**exponent if exponent >= 0 else 1 if integral else 10.0**exponent
    unit = unit * 10**first
    for _ in range(levels):
        rounded = _round(value, unit, direction, integral and isinstance(unit, int))
        if not math.isfinite(rounded):
            return None
        if direction < 0:
            held = rows_within(rounded - unit, rounded, False, True)
        elif direction > 0:
            held = rows_within(rounded, rounded + unit, True, False)
        else:
            held = rows_within(rounded - unit / 2, rounded + unit / 2, True, False)
        if held >= min_count:
            return rounded
        unit = unit * 10
    return None


def _round(value: Any, unit: float | int, direction: int, integral: bool) -> Any:
    """`value` rounded to a multiple of `unit`: up (direction < 0), down (> 0) or to nearest."""
    if integral:  # integer arithmetic: int64 values and times lose digits as floats
        if direction < 0:
            return -(-value // unit) * unit
        if direction > 0:
            return value // unit * unit
        return (2 * value + unit) // (2 * unit) * unit
    quotient = value / unit
    whole = math.ceil(quotient) if direction < 0 else math.floor(quotient) if direction > 0 else math.floor(quotient + 0.5)
    return float(f"{whole * unit:.12g}")


def fold_rare(counts: np.ndarray, min_count: int) -> np.ndarray:
    """Counts in which values held by fewer than `min_count` rows, when they are fewer than
    `min_count` rows or fewer than `min_count` values in all, are counted with the most common
    value (and become 0): at most (min_count - 1)**2 rows move."""
    rare = counts < min_count
    rare_rows = int(counts[rare].sum())
    if rare_rows == 0 or rare.all() or (rare_rows >= min_count and int(rare.sum()) >= min_count):
        return counts
    folded = np.where(rare, 0, counts)
    folded[int(np.argmax(folded))] += rare_rows  # the first of the most common, in value order
    return folded


def hide_small_cells(subsets: np.ndarray, min_count: int) -> np.ndarray:
    """Rows passing each subset of predicates, changed so that every pattern (exactly these
    predicates passed) derivable from them is empty or holds at least `min_count` rows: the
    smallest pattern under `min_count` moves to the nearest non-empty pattern (fewest
    predicates flipped; then the larger; then the lower mask), until none is left."""
    cells = subsets.astype(np.int64).copy()
    size = len(cells)
    masks = np.arange(size)
    bit = 1
    while bit < size:  # inclusion-exclusion: rows passing exactly each pattern
        without = masks[(masks & bit) == 0]
        cells[without] -= cells[without | bit]
        bit <<= 1
    while True:
        small = np.flatnonzero((cells > 0) & (cells < min_count))
        if small.size == 0 or np.count_nonzero(cells) < 2:
            break
        source = int(small[np.lexsort((small, cells[small]))[0]])
        others = np.flatnonzero(cells > 0)
        others = others[others != source]
        flips = np.bitwise_count(others ^ source)
        target = int(others[np.lexsort((others, -cells[others], flips))[0]])
        cells[target] += cells[source]
        cells[source] = 0
    bit = 1
    while bit < size:  # back to rows passing each subset: sums over the patterns holding it
        without = masks[(masks & bit) == 0]
        cells[without] += cells[without | bit]
        bit <<= 1
    return cells
