"""Failure classes A and G of the rewrite promise, end to end through `check --fix`.

A: an earlier filter guards a later predicate (`qty != 0` before `amount / qty > 2` on Decimal
values read from Parquet); moving the division before its guard raises `DivisionByZero`.
G: a column the profile does not hold as a plain column (`d.revenue` on MultiIndex columns is
a sub-frame: the step masks cells, not rows) must not move. pandas runs the code as written and
as fixed; it is the reference for what the code does.
"""

from __future__ import annotations

import decimal
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner

from chainlint.cli import main

GUARDED = '''def guarded(orders):
    return orders.loc[lambda d: d.qty != 0].loc[lambda d: d.amount / d.qty > 2].loc[lambda d: d.code == "x"]
'''


def _project(root: Path, table: pa.Table, name: str, code: str) -> Path:
    (root / "pyproject.toml").write_text("[project]\nname = 'shop'\n")
    pq.write_table(table, root / f"{name}.parquet")
    result = CliRunner().invoke(main, ["profile", str(root / f"{name}.parquet"), "--name", name, "--store", str(root / ".chainlint")])
    assert result.exit_code == 0, result.output
    (root / "pipeline.py").write_text(code)
    return root / "pipeline.py"


def _function(path: Path, name: str):  # type: ignore[no-untyped-def]
    """The test's own project code, run as the user would run it."""
    scope: dict = {}
    exec(compile(path.read_text(), str(path), "exec"), scope)
    return scope[name]


@pytest.fixture()
def decimal_orders(tmp_path: Path) -> Path:
    rng = np.random.default_rng(1)
    rows = 20_000
    table = pa.table({
        "qty": pa.array([decimal.Decimal(int(v)) for v in rng.integers(0, 5, rows)], pa.decimal128(10, 2)),
        "amount": pa.array([decimal.Decimal(int(v)) / 4 for v in rng.integers(0, 100, rows)], pa.decimal128(10, 2)),
        "code": np.array(["a", "b", "c", "x"])[rng.choice(4, rows, p=[0.5, 0.3, 0.19, 0.01])],
    })
    return _project(tmp_path, table, "orders", GUARDED)


def test_a_guarded_division_keeps_its_guard_in_front(decimal_orders: Path) -> None:
    frame = pd.read_parquet(decimal_orders.parent / "orders.parquet")
    written = _function(decimal_orders, "guarded")(frame)
    result = CliRunner().invoke(main, ["check", "--jobs", "1", "--rows", "10000000", "--fix", str(decimal_orders)])
    assert result.exit_code in (0, 1), result.output
    fixed_source = decimal_orders.read_text()
    assert fixed_source != GUARDED  # the total step still moves to the front
    fixed = _function(decimal_orders, "guarded")(frame)  # raised decimal.DivisionByZero before
    pd.testing.assert_frame_equal(fixed, written)
    assert fixed_source.index("d.qty != 0") < fixed_source.index("d.amount / d.qty")


def test_a_explain_says_why_a_step_only_moves_later(decimal_orders: Path) -> None:
    result = CliRunner().invoke(main, ["explain", "--format", "json", str(decimal_orders)])
    steps = json.loads(result.output)["chains"][0]["steps"]
    assert [s["moves"] for s in steps] == ["later", "later", "any"]
    assert steps[1]["limit"].startswith("may raise on rows an earlier step removes: `amount / qty`")
    text = CliRunner().invoke(main, ["explain", str(decimal_orders)]).output
    assert "later" in text and "may raise on rows an earlier step removes" in text


MULTI = '''def north_revenue(sales):
    # chainlint: profile=sales
    return sales[sales.revenue > 100].loc[lambda d: d.city == "north"]
'''


def test_g_a_column_not_held_as_a_plain_column_stays(tmp_path: Path) -> None:
    rng = np.random.default_rng(2)
    rows = 5_000
    city = np.array(["north", "south", "east", "west", "centre"])[rng.choice(5, rows, p=[0.01, 0.3, 0.3, 0.3, 0.09])]
    flat = pa.table({"city": city, "q1": rng.integers(0, 200, rows), "q2": rng.integers(0, 200, rows)})
    path = _project(tmp_path, flat, "sales", MULTI)
    # The frame the code really gets: MultiIndex columns, `revenue` a group of two.
    sales = pd.DataFrame({("city", ""): city, ("revenue", "q1"): flat["q1"].to_numpy(), ("revenue", "q2"): flat["q2"].to_numpy()})
    sales.columns = pd.MultiIndex.from_tuples(sales.columns)
    as_written = _function(path, "north_revenue")(sales)
    swapped = sales.loc[lambda d: d.city == "north"]
    swapped = swapped[swapped.revenue > 100]
    assert not as_written.equals(swapped)  # pandas: the order matters here
    result = CliRunner().invoke(main, ["check", "--jobs", "1", "--rows", "10000000", "--fix", str(path)])
    assert result.exit_code in (0, 1), result.output
    assert path.read_text() == MULTI
    explained = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", str(path)]).output)
    steps = explained["chains"][0]["steps"]
    assert steps[0]["moves"] == "stays"
    assert steps[0]["limit"] == "reads `revenue`, which profile `sales` does not hold as a plain column"


def test_a_live_frame_is_judged_by_its_own_dtypes() -> None:
    # A kernel's object column of strings reads as Arrow strings; pandas (the reference) shows
    # that `.str` of it, with None, cannot mask once the guard no longer runs first.
    from chainlint.engine.run import analyse_source
    from chainlint.engine.options import Options
    from chainlint.notebook.live import plan_on_frame
    from chainlint.parse.source import text_source

    rows = 3_000
    frame = pd.DataFrame({
        "o": pd.Series(["apple", None, "banana"] * (rows // 3), dtype=object),
        "i": np.arange(rows) % 7,
    })
    source = 'out = df.loc[lambda d: d.o.notna()].loc[lambda d: d.o.str.contains("ap")].loc[lambda d: d.i == 1]\n'
    (chain,) = analyse_source(text_source("<cell>", source)).chains
    with pytest.raises(ValueError, match="non-boolean"):
        frame.loc[lambda d: d.o.str.contains("ap")]
    plan = plan_on_frame(chain, frame, Options()).plan
    assert plan.limits[1] is not None and plan.limits[1].moves == "stays"
    assert plan.order[:2] == (0, 1)
