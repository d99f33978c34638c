"""Long inputs: `chainlint check` on a run of k `df = df[...]` statements and on a module of n
lines of chains, each at two sizes, so that the ratio shows how the time grows.

Goal: near-linear growth: 4x the statements or lines takes at most about 5x the time (a
quadratic step would take 16x). The demo profile binds the chains. One run each, in process.
Usage: python benchmarks/long_inputs.py
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

from click.testing import CliRunner

from chainlint.cli import main

STORE = Path(__file__).parent.parent / "examples" / ".chainlint"


def _run(source: str) -> float:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "long.py"
        path.write_text(source)
        start = time.perf_counter()
        result = CliRunner().invoke(main, ["check", str(path), "--store", str(STORE), "--jobs", "1"])
        elapsed = time.perf_counter() - start
    assert result.exit_code in (0, 1), result.output
    return elapsed


def _statement_run(steps: int) -> str:
    return "def g(scans):\n" + "".join(f"    scans = scans[scans.weight_kg > {i / steps:.6f}]\n" for i in range(steps)) + "    return scans\n"


def _module(lines: int) -> str:
    chain = "x{n} = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.depot == 'WEST'].loc[lambda d: d.attempts >= 3]\n"
    return "".join(chain.format(n=n) if n % 4 == 0 else f"y{n} = {n}\n" for n in range(lines))


def main_() -> None:
    for label, build, small, large in (("statement run", _statement_run, 1_250, 5_000),
                                       ("module lines", _module, 25_000, 100_000)):
        first, second = _run(build(small)), _run(build(large))
        print(f"{label}: {small:,} -> {first:.2f} s, {large:,} -> {second:.2f} s, ratio {second / first:.2f} "
              f"for {large / small:.0f}x the input (goal: at most about 5x)")


if __name__ == "__main__":
    main_()
