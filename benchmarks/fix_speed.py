"""Fixing a 2,000-line module with 20 chains against a bare `libcst.parse_module` of it.

Goal: `chainlint check --fix` (in process: analysis, planning, rewriting, verification and
the write) takes at most 1.5x the bare libcst parse. Ratios from one run, medians of repeats.
Usage: python benchmarks/fix_speed.py [--repeat N]
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import tempfile
import time
from pathlib import Path

import libcst
from click.testing import CliRunner

from chainlint.cli import main

EXAMPLES = Path(__file__).parent.parent / "examples"
CHAIN = '''

def report_{n}(scans):
    """Chain {n}."""
    return (
        scans
        .loc[lambda d: d["weight_kg"] > 0.5]
        .loc[lambda d: d["depot"] == "WEST"]
        .loc[lambda d: d["status"] == "damaged"]
    )
'''
FILLER = '''

def helper_{n}(values, factor={n}):
    total = 0
    for index, value in enumerate(values):
        if value % 3 == 0:
            total += value * factor
        elif value % 3 == 1:
            total -= index
        else:
            total ^= value
    return {{"total": total, "count": len(values), "name": "helper_{n}"}}
'''


def module() -> str:
    parts = ["import pandas as pd\n"]
    n = 0
    while sum(p.count("\n") for p in parts) < 2000:
        parts.append(CHAIN.format(n=n) if n < 20 else "")
        parts.append(FILLER.format(n=n))
        n += 1
    return "".join(parts)


def main_() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    source = module()
    print(f"module: {source.count(chr(10))} lines, {source.count('report_') // 1} chains, {len(source) / 1e3:.0f} kB")
    parse_times, fix_times = [], []
    with tempfile.TemporaryDirectory() as folder:
        root = Path(folder)
        shutil.copytree(EXAMPLES / ".chainlint", root / ".chainlint")
        path = root / "big.py"
        for _ in range(args.repeat):
            start = time.perf_counter()
            libcst.parse_module(source)
            parse_times.append(time.perf_counter() - start)
            path.write_text(source)
            start = time.perf_counter()
            result = CliRunner().invoke(main, ["check", "--fix", "--jobs", "1", str(path)])
            fix_times.append(time.perf_counter() - start)
            assert result.output.count("fixed: reorder") == 20, result.output
    parse, fix = statistics.median(parse_times), statistics.median(fix_times)
    print(f"bare libcst.parse_module: {parse:.3f} s")
    print(f"chainlint check --fix:    {fix:.3f} s  ratio {fix / parse:.2f}x (goal <= 1.5x)")


if __name__ == "__main__":
    main_()
