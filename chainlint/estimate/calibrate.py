"""Re-measure the cost model on this machine (`chainlint calibrate`), in ten seconds or so.

Builds a frame of numeric and pyarrow string columns, times the predicate kinds and the take
of masks that keep different shares, and fits the figures `CostModel` holds; then frames of
nullable, categorical and object columns, for how dear a kept row of each kind is against its
family (wide frames from joins hold many of them), and the `&` of a fused group's masks, plain
and nullable booleans (a comparison on a nullable column gives a nullable mask). Every timing
is the minimum of a few repeats, which is the least disturbed by other work on the machine.

The frames are as long as the ones the shipped figures were measured on (2,000,000 rows): the
8 numeric columns then hold 128 MB, more than a processor's cache, as the frames worth planning
do. At 400,000 rows (26 MB) they stayed in the cache between repeats, and a kept numeric row
was measured at one cost whatever the share kept (about 16 ns at 1% and at 30%, on a shared
machine at load 10), where frames of 1,500,000-2,000,000 rows paid 1.7-3.1 times more per
kept row at 5% than at 30%, as the shipped figures (measured on 2,000,000 x 40) do.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import asdict, fields
from typing import Any

import numpy as np

from chainlint.estimate.cost import CostModel

_COLUMNS = 8
COST_MODEL_FILE = "cost-model.json"


def _best(function: Callable[[], object], repeat: int = 5) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return min(times)


#: Shares kept at which the take is timed. The cost per kept row falls steeply between 5% and
#: 30% (scattered kept rows each cost a cache line, denser ones share them): with no point
#: between, the line from 5% to 30% priced a kept row at 10-20% 1.5-2.1 times dearer than
#: measured (`benchmarks/plan_forms.py`'s Lahman chain 6 took 32% of the rows first, to avoid
#: a take of 17% priced dearer, which measured 0.5-0.7 times the 32% one).
SHARES = (0.01, 0.05, 0.10, 0.15, 0.20, 0.30, 0.70)


def calibrate(rows: int = 2_000_000, seed: int = 1) -> CostModel:
    import pandas as pd  # only this command runs pandas itself

    rng = np.random.default_rng(seed)
    numbers = pd.DataFrame({f"n{i}": rng.random(rows) for i in range(_COLUMNS)})
    labels = np.array([f"label{k}" for k in range(50)], dtype=object)
    strings = pd.DataFrame({f"s{i}": pd.array(labels[rng.integers(0, 50, rows)], dtype="str") for i in range(_COLUMNS)})
    n, s = numbers["n0"], strings["s0"]
    # Tests of a value run on codes of one width, four equally common: pyarrow compares such
    # strings in full and the outcome is unpredictable, where labels of different widths
    # mostly differ by their length (6 to 10 times cheaper, and rare in real columns).
    codes = pd.Series(pd.array(np.array(["AB1", "AB2", "AB3", "AB4"], dtype=object)[rng.integers(0, 4, rows)], dtype="str"))
    obj = codes.astype(object)
    cat = codes.astype("category")
    integers = pd.Series(rng.integers(0, 100, rows))
    per_row = 1e9 / rows

    def cost(function: Callable[[], object]) -> float:
        return _best(function) * per_row

    compare = {
        "numeric": cost(lambda: n > 0.5),
        "str": cost(lambda: codes == "AB3"),
        "object": cost(lambda: obj == "AB3"),
        "category": cost(lambda: cat == "AB3"),
    }
    listed = ["AB1", "AB3", "CD5"]
    member = {
        "numeric": cost(lambda: integers.isin([1, 2, 3, 4, 5])),
        "str": cost(lambda: codes.isin(listed)),
        "object": cost(lambda: obj.isin(listed)),
        "category": cost(lambda: cat.isin(listed)),
    }
    a, b = n > 0.5, numbers["n1"] > 0.5
    nullable = pd.Series(pd.array(integers, dtype="Int64")) > 50
    # A group's masks are joined with `&`: plain booleans, and nullable ones (Kleene logic).
    combine = (cost(lambda: a & b) + cost(lambda: a & nullable)) / 2
    between = cost(lambda: n.between(0.2, 0.7))
    string_test = cost(lambda: s.str.contains("bel1", regex=False))
    regex_test = cost(lambda: s.str.contains("^lab[a-z]+1[0-9]$"))
    null_test = cost(lambda: n.isna())
    numeric_points, string_points = [], []
    numeric_in = string_in = 0.0
    for frame, points in ((numbers, numeric_points), (strings, string_points)):
        nothing = np.zeros(rows, dtype=bool)
        base = _best(lambda frame=frame, nothing=nothing: frame[nothing]) * per_row
        if frame is numbers:
            numeric_in = base
        else:
            string_in = base / _COLUMNS
        for share in SHARES:
            mask = rng.random(rows) < share
            kept = int(mask.sum())
            seconds = _best(lambda frame=frame, mask=mask: frame[mask])
            points.append((share, max((seconds * 1e9 - base * rows) / (kept * _COLUMNS), 0.0)))
    weights = _take_weights(pd, rng, rows, labels, numbers, strings)
    tiny = numbers.iloc[:10]
    tiny_mask = np.ones(10, dtype=bool)
    tiny_mask[0] = False
    fixed = _best(lambda: tiny[tiny_mask], repeat=50) * 1e9
    tiny_strings = strings.iloc[:10]
    per_column = max(_best(lambda: tiny_strings[tiny_mask], repeat=50) * 1e9 - fixed, 0.0) / _COLUMNS
    default = CostModel()
    return CostModel(
        compare=compare,
        member=member,
        between=between,
        null_test=null_test,
        string_test=string_test,
        regex_test=regex_test,
        arith=default.arith,
        combine=combine,
        opaque=default.opaque,
        numeric_take_in=numeric_in,
        string_take_in=string_in,
        numeric_take_kept=_curve(numeric_points),
        string_take_kept=_curve(string_points),
        fixed=fixed,
        fixed_per_column=per_column,
        take_weight=weights,
    )


def _take_weights(pd, rng, rows: int, labels, numbers, strings) -> dict[str, float]:  # type: ignore[no-untyped-def]
    """A kept row of each kind against its family's (numeric or string), at 30% kept."""
    mask = rng.random(rows) < 0.30
    nothing = np.zeros(rows, dtype=bool)

    def kept(frame) -> float:  # type: ignore[no-untyped-def]
        return max(_best(lambda: frame[mask]) - _best(lambda: frame[nothing]), 1e-12)

    # Two object columns, not eight: a Python object per value (about 130 MB a column at 2,000,000
    # rows); each kind is compared per column.
    frames = {
        "nullable": pd.DataFrame({f"m{i}": pd.array(rng.integers(0, 100, rows), dtype="Int64") for i in range(_COLUMNS)}),
        "category": pd.DataFrame({f"k{i}": pd.Categorical(labels[rng.integers(0, 50, rows)]) for i in range(_COLUMNS)}),
        "object": strings.iloc[:, :2].astype(object),
    }
    numeric, string = kept(numbers) / _COLUMNS, kept(strings) / _COLUMNS
    weights = {"numeric": 1.0, "str": 1.0}
    for kind, frame in frames.items():
        weights[kind] = kept(frame) / frame.shape[1] / (string if kind == "object" else numeric)
    return weights


def _curve(points: list[tuple[float, float]]) -> tuple[tuple[float, float], ...]:
    ordered = sorted(points)
    return ((0.0, ordered[0][1]),) + tuple(ordered) + ((1.0, ordered[-1][1]),)


def _round(value: Any) -> Any:
    """Four significant digits: the measurements are no more precise, and diffs stay small."""
    if isinstance(value, float):
        return float(f"{value:.4g}")
    if isinstance(value, dict):
        return {k: _round(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_round(v) for v in value]
    return value


def model_to_json(model: CostModel) -> dict[str, Any]:
    return {"format": "chainlint-cost-model", "format_version": 1, "model": _round(asdict(model))}


def model_from_json(document: dict[str, Any]) -> CostModel:
    """A stored model; fields it lacks keep the measured defaults."""
    if document.get("format") != "chainlint-cost-model":
        raise ValueError("not a chainlint cost model")
    values = dict(document.get("model", {}))
    known = {f.name for f in fields(CostModel)}
    unknown = set(values) - known
    if unknown:
        raise ValueError(f"unknown cost model fields: {', '.join(sorted(unknown))}")
    for key in ("numeric_take_kept", "string_take_kept"):
        if key in values:
            values[key] = tuple(tuple(float(x) for x in p) for p in values[key])
    return CostModel(**values)
