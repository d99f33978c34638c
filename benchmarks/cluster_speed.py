"""Profiling on a Dask cluster against the local path, on this machine.

Data: the generated table of `profile_speed.py` (40 columns), written as Parquet with row groups
of `--group-rows` rows: one task per row group. For each number of worker processes (a
`distributed.LocalCluster` started as `--dask local:N` starts it: one task thread each, the
cores shared out for pyarrow; a task's columns spread over threads as the local path's do) the
cluster is started and warmed up once (workers import chainlint on
their first task), then `profile_on_cluster` is timed; the local path is
`profile_dataset(open_dataset(...))` in this process. Times are minima of interleaved repeats.
Goal: the cluster path at one worker <= 1.3x the local path. Usage:
python benchmarks/cluster_speed.py [--rows N] [--group-rows N] [--workers 1,2] [--repeat N]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import pyarrow.parquet as pq

sys.path.insert(0, str(Path(__file__).resolve().parent))
from profile_speed import make_table  # noqa: E402

from chainlint.cluster.run import connect, profile_on_cluster  # noqa: E402
from chainlint.profile.build import profile_dataset  # noqa: E402
from chainlint.profile.columns import Settings  # noqa: E402
from chainlint.profile.pieces import plan_pieces  # noqa: E402
from chainlint.profile.readers import open_dataset  # noqa: E402

SETTINGS = Settings(sketch_key=bytes(32))


def timed(function) -> float:  # type: ignore[no-untyped-def]
    start = time.perf_counter()
    function()
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=2_000_000)
    parser.add_argument("--group-rows", type=int, default=250_000)
    parser.add_argument("--workers", default=f"1,{os.cpu_count() or 1}")
    parser.add_argument("--repeat", type=int, default=3)
    options = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "table.parquet"
        pq.write_table(make_table(options.rows), path, row_group_size=options.group_rows)
        plan = plan_pieces([str(path)])
        print(f"{options.rows:,} rows x 40 columns, {path.stat().st_size / 1e6:.0f} MB Parquet, {len(plan.pieces)} row groups (tasks)")
        local = [timed(lambda: profile_dataset(open_dataset([str(path)]), "bench", SETTINGS))]
        for count in sorted({int(n) for n in options.workers.split(",")}):
            start = time.perf_counter()
            with connect(f"local:{count}") as client:
                started = time.perf_counter() - start
                profile_on_cluster(client, plan, "bench", SETTINGS)  # warm-up: imports on the workers
                times = []
                for _ in range(options.repeat):
                    times.append(timed(lambda: profile_on_cluster(client, plan_pieces([str(path)]), "bench", SETTINGS)))
                    local.append(timed(lambda: profile_dataset(open_dataset([str(path)]), "bench", SETTINGS)))
            best = min(times)
            print(f"  {count} worker process{'es' if count > 1 else ''}: {best:.2f} s "
                  f"({min(local) / best:.2f}x the local path's speed; cluster start-up {started:.1f} s, not counted)")
            if count == 1:
                print(f"  overhead at one worker: {best / min(local):.2f}x the local path (goal <= 1.3x)")
        print(f"  local path: {min(local):.2f} s")


if __name__ == "__main__":
    main()
