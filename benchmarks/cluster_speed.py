"""Profiling on a Dask cluster against the local path, on this machine.

Data: the generated table of `profile_speed.py` (40 columns), written as Parquet with row groups
of `--group-rows` rows: a task per run of row groups of about a million rows. For each number of worker processes a cluster
is started as `--dask local:N` starts it (one task thread each, the cores shared out for pyarrow
and the counting threads). What is counted, separately:
- start-up: `connect("local:N")` until the client is ready (worker processes spawned);
- first run: the first profile on the new cluster, where each worker imports chainlint;
- profile run: `plan_pieces` + `profile_on_cluster` on the warm cluster, from the client's call
  to the finished document (the client's plan, the tasks, the merges, the root's transfer, the
  finish); never the start-up.
The local path is `profile_dataset(open_dataset(...))` in this process, timed alternately with
the cluster's runs. Times are minima of the repeats; beside them the CPU seconds of the run
(the client process, which also holds the scheduler, plus every worker process), which a loaded
machine disturbs less than the wall time, and the load average before and after.
Goal: the cluster path at one worker <= 1.3x the local path. Usage:
python benchmarks/cluster_speed.py [--rows N] [--group-rows N] [--workers 1,2] [--repeat N]
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time
from collections.abc import Callable
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


def _cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_SELF)
    return usage.ru_utime + usage.ru_stime


def measured(function: Callable[[], object], cpu: Callable[[], float] = _cpu) -> tuple[float, float]:
    """(wall seconds, CPU seconds) of one call."""
    before, start = cpu(), time.perf_counter()
    function()
    return time.perf_counter() - start, cpu() - before


def load() -> str:
    return "load average " + " ".join(f"{value:.2f}" for value in os.getloadavg())


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=2_000_000)
    parser.add_argument("--group-rows", type=int, default=250_000)
    parser.add_argument("--workers", default=f"1,{os.cpu_count() or 1}")
    parser.add_argument("--repeat", type=int, default=3)
    options = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        path = str(Path(folder) / "table.parquet")
        pq.write_table(make_table(options.rows), path, row_group_size=options.group_rows)
        plan = plan_pieces([path])
        print(f"{options.rows:,} rows x 40 columns, {os.path.getsize(path) / 1e6:.0f} MB Parquet, "
              f"{pq.ParquetFile(path).metadata.num_row_groups} row groups in {len(plan.pieces)} tasks; "
              f"{os.cpu_count()} cores; {load()}")

        def local() -> object:
            return profile_dataset(open_dataset([path]), "bench", SETTINGS)

        locals_ = [measured(local)]
        results = {}
        for count in sorted({int(n) for n in options.workers.split(",")}):
            start = time.perf_counter()
            with connect(f"local:{count}") as client:
                started = time.perf_counter() - start

                def cpu() -> float:  # the client (and scheduler) process and every worker
                    return _cpu() + sum(client.run(_cpu).values())

                def remote() -> object:
                    return profile_on_cluster(client, plan_pieces([path]), "bench", SETTINGS)

                first = measured(remote, cpu)[0]
                runs = []
                for _ in range(options.repeat):
                    runs.append(measured(remote, cpu))
                    locals_.append(measured(local))
            results[count] = (min(r[0] for r in runs), min(r[1] for r in runs))
            print(f"  {count} worker process{'es' if count > 1 else ''}: profile run {results[count][0]:.2f} s "
                  f"({results[count][1]:.2f} CPU s); start-up {started:.1f} s and first run {first:.2f} s, not counted")
        wall, cpu_seconds = min(r[0] for r in locals_), min(r[1] for r in locals_)
        print(f"  local path: {wall:.2f} s ({cpu_seconds:.2f} CPU s)")
        for count, (cluster_wall, cluster_cpu) in results.items():
            print(f"  {count} worker{'s' if count > 1 else ''} against the local path: {cluster_wall / wall:.2f}x the time, "
                  f"{cluster_cpu / cpu_seconds:.2f}x the CPU" + ("  (goal at one worker: <= 1.3x the time)" if count == 1 else ""))
        print(f"  {load()}")


if __name__ == "__main__":
    main()
