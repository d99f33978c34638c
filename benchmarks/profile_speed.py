"""Profiling speed and memory against a bare pyarrow read of the same file, in one run.

Data: a generated table of 2,000,000 rows x 40 columns (16 string columns with skewed value
frequencies, 5 to 5,000 distinct; integers; floats; a date), written as Parquet and CSV.
Goals: Parquet profile <= 3x `pyarrow.parquet.read_table`; CSV profile <= 1.5x
`pyarrow.csv.read_csv`; profiling a file 4x as long raises peak RSS by at most 20%; with
`--for` 20 chains of 4 steps, at most 1.5x the profile without.
Times are the minimum of interleaved repeats of the whole `chainlint profile` command (start-up
included, bytecode cached as in an installed package) and of the bare read. Usage:
python benchmarks/profile_speed.py [--rows N] [--repeat N] [--skip-csv] [--skip-memory]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq


def make_table(rows: int, seed: int = 7) -> pa.Table:
    rng = np.random.default_rng(seed)
    columns: dict[str, pa.Array] = {}
    for index, distinct in enumerate(np.geomspace(5, 5000, 16).astype(int)):
        ranks = np.minimum(rng.zipf(1.3, rows), distinct) - 1
        labels = np.array([f"v{index}_{k}" for k in range(distinct)], dtype=object)
        columns[f"s{index:02d}"] = pa.array(labels[ranks], pa.string())
    for index in range(10):
        high = [10, 100, 1000, 10**6, 10**9][index % 5]
        columns[f"i{index:02d}"] = pa.array(rng.integers(0, high, rows))
    for index in range(13):
        values = rng.lognormal(2, 1, rows).round(index % 4 + 1)
        mask = rng.random(rows) < 0.05 if index % 3 == 0 else None
        columns[f"f{index:02d}"] = pa.array(values, mask=mask)
    days = np.datetime64("2024-01-01") + rng.integers(0, 3 * 365, rows).astype("timedelta64[D]")
    columns["day"] = pa.array(days)
    return pa.table(columns)


# The commands run with their bytecode cached, as an installed package has it (pip compiles it);
# without, a source checkout under PYTHONDONTWRITEBYTECODE recompiles chainlint on every run.
_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
_ENV["PYTHONPYCACHEPREFIX"] = os.path.join(tempfile.gettempdir(), "chainlint-benchmark-pycache")


def timed(function) -> float:  # type: ignore[no-untyped-def]
    start = time.perf_counter()
    function()
    return time.perf_counter() - start


def profile_command(path: Path, store: Path) -> list[str]:
    return [sys.executable, "-m", "chainlint", "profile", str(path), "--name", "bench", "--store", str(store)]


def profile_seconds(path: Path, store: Path) -> float:
    return timed(lambda: subprocess.run(profile_command(path, store), check=True, capture_output=True, env=_ENV))


def peak_rss_mb(path: Path, store: Path) -> float:
    # VmHWM is the peak of this process's own memory; ru_maxrss would also count the pages of
    # the (large) benchmark process it was started from, which Linux carries across exec.
    code = (
        "import sys; sys.argv = sys.argv[1:]; sys.argv[0] = 'chainlint'\n"
        "from chainlint.cli import main\n"
        "try:\n    main()\nexcept SystemExit:\n    pass\n"
        "status = open('/proc/self/status').read().split('VmHWM:')[1]\n"
        "print(int(status.split()[0]) / 1024)"
    )
    done = subprocess.run([sys.executable, "-c", code, *profile_command(path, store)[2:]], check=True, capture_output=True, text=True, env=_ENV)
    return float(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=2_000_000)
    parser.add_argument("--skip-csv", action="store_true")
    parser.add_argument("--skip-memory", action="store_true")
    parser.add_argument("--repeat", type=int, default=3, help="interleaved runs of each; minimums are compared")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        work = Path(folder)
        table = make_table(args.rows)
        parquet = work / "bench.parquet"
        pq.write_table(table, parquet)
        os.sync()  # written pages flushed before timing: writeback would run during the first runs
        print(f"table: {args.rows:,} rows x {table.num_columns} columns; parquet {parquet.stat().st_size / 1e6:.0f} MB")
        reads, profiles = [], []
        for _ in range(args.repeat):  # interleaved; the minimum is the least disturbed run
            reads.append(timed(lambda: pq.read_table(parquet)))
            profiles.append(profile_seconds(parquet, work / "store"))
        read, profile = min(reads), min(profiles)
        print(f"parquet: read_table {read:.2f} s, profile {profile:.2f} s, ratio {profile / read:.2f}x (goal <= 3x)")
        chains = work / "chains.py"
        chains.write_text("".join(
            f"def chain_{n}(f):\n    return f.loc[lambda d: d.s{n % 16:02d} == 'v{n % 16}_1'].loc[lambda d: d.i{n % 10:02d} > {n}]"
            f".loc[lambda d: d.f{n % 13:02d} < 5.0].loc[lambda d: d.s{(n + 5) % 16:02d}.isin(['v{(n + 5) % 16}_0', 'v{(n + 5) % 16}_2'])]\n\n"
            for n in range(20)
        ))
        joint = []
        for _ in range(args.repeat):
            joint.append(timed(lambda: subprocess.run(profile_command(parquet, work / "joint") + ["--for", str(chains)], check=True, capture_output=True, env=_ENV)))
        print(f"parquet with --for (20 chains of 4 steps): profile {min(joint):.2f} s, {min(joint) / profile:.2f}x the profile without (goal <= 1.5x)")
        if not args.skip_csv:
            csv = work / "bench.csv"
            pacsv.write_csv(table, csv)
            os.sync()
            reads, profiles = [], []
            for _ in range(args.repeat):
                reads.append(timed(lambda: pacsv.read_csv(csv)))
                profiles.append(profile_seconds(csv, work / "store"))
            read, profile = min(reads), min(profiles)
            print(f"csv ({csv.stat().st_size / 1e6:.0f} MB): read_csv {read:.2f} s, profile {profile:.2f} s, ratio {profile / read:.2f}x (goal <= 1.5x)")
            csv.unlink()
        if not args.skip_memory:
            long = work / "long.parquet"
            with pq.ParquetWriter(long, table.schema) as writer:
                for _ in range(4):
                    writer.write_table(table)
            os.sync()
            base, grown = peak_rss_mb(parquet, work / "store"), peak_rss_mb(long, work / "store")
            print(f"memory: peak RSS {base:.0f} MB for 1x, {grown:.0f} MB for 4x rows: +{(grown / base - 1):.0%} (goal <= +20%)")


if __name__ == "__main__":
    main()
