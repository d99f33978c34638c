"""Speed of `chainlint explain` against a bare `ast.parse` of the same files, in one run.

Corpus: the `.py` files of the installed pandas package (code no one here wrote). Goal: the
single-process run takes at most 0.8x the bare parse (the screen skips most files).
Usage: python benchmarks/lint_speed.py [--jobs N] [--repeat N]
"""

from __future__ import annotations

import argparse
import ast
import os
import statistics
import sys
import time
from pathlib import Path

import pandas

from chainlint.engine.check import plan_results
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_files
from chainlint.discover import discover
from chainlint.report.explain import explain_json


def bare_parse(files: list[str]) -> float:
    start = time.perf_counter()
    for path in files:
        with open(path, "rb") as handle:
            ast.parse(handle.read())
    return time.perf_counter() - start


def explain(root: str, jobs: int) -> tuple[float, int]:
    start = time.perf_counter()
    found = discover([root])
    results = analyse_files(found.files, jobs=jobs)
    planned, errors = plan_results(results, Options())
    explain_json(planned, errors)
    return time.perf_counter() - start, sum(len(r.chains) for r in results)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--jobs", type=int, default=os.cpu_count() or 1)
    parser.add_argument("--repeat", type=int, default=3, help="runs of each, interleaved; medians are compared")
    args = parser.parse_args()
    root = str(Path(pandas.__file__).parent)
    files = discover([root]).files
    size = sum(os.path.getsize(f) for f in files)
    print(f"corpus: {len(files)} files, {size / 1e6:.1f} MB (pandas {pandas.__version__}), python {sys.version.split()[0]}")
    parse_times, single_times, parallel_times = [], [], []
    chains = 0
    for _ in range(args.repeat):
        parse_times.append(bare_parse(files))
        seconds, chains = explain(root, jobs=1)
        single_times.append(seconds)
        parallel_times.append(explain(root, jobs=args.jobs)[0])
    parse = statistics.median(parse_times)
    single = statistics.median(single_times)
    parallel = statistics.median(parallel_times)
    print(f"bare ast.parse:          {parse:6.2f} s")
    print(f"chainlint explain, 1 job: {single:6.2f} s  ratio {single / parse:.2f}x  (goal <= 0.80x); {chains} chains")
    print(f"chainlint explain, {args.jobs} jobs: {parallel:6.2f} s  ratio {parallel / parse:.2f}x")


if __name__ == "__main__":
    main()
