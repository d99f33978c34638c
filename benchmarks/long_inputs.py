"""Long inputs: how `chainlint check` and `check --diff` grow with the length of one file.

Three kinds of long file, each at sizes doubling up to the largest: a run of `scans = scans[...]`
statements in one function (up to 5,000 statements), the same run under a new name each
statement (`s2 = s1[...]`), and a module of 100,000 lines with a three-step chain (planned as
one step and one fused mask) every ten lines. For each size it prints the CPU time of the run
and the time per statement or per line; the ratio of the largest size's time per unit to the
smallest's shows the growth: about 1 is linear, a quadratic step makes it about the size ratio
(8x here). CPU time, not wall time, so that other work on a shared machine disturbs it less;
the load average is printed beside it. The demo profile binds the chains. One run each, in
process, after one warm-up run.

Goal: near-linear growth, a ratio of at most about 1.5 for 8x the input.
Usage: python benchmarks/long_inputs.py [--scale N]   (N > 1 divides every size, for a quick look)
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

from click.testing import CliRunner

from chainlint.cli import main

STORE = Path(__file__).parent.parent / "examples" / ".chainlint"


def _run(source: str, *flags: str) -> float:
    """CPU seconds of one `chainlint check` of `source` as one file."""
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "long.py"
        path.write_text(source)
        start = time.process_time()
        result = CliRunner().invoke(main, ["check", str(path), "--store", str(STORE), "--jobs", "1",
                                           "--max-file-size", "64", *flags])
        elapsed = time.process_time() - start
    assert result.exit_code in (0, 1), result.output
    return elapsed


def _statement_run(steps: int) -> str:
    lines = "".join(f"    scans = scans[scans.weight_kg > {i / steps:.6f}]\n" for i in range(steps))
    return "def g(scans):  # chainlint: profile=parcel_scans\n" + lines + "    return scans\n"


def _renamed_run(steps: int) -> str:
    lines = "".join(f"    s{i + 1} = s{i}[s{i}.weight_kg > {i / steps:.6f}]\n" for i in range(steps))
    return "def g(s0):  # chainlint: profile=parcel_scans\n" + lines + f"    return s{steps}\n"


def _module(lines: int) -> str:
    chain = ("x{n} = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.depot == 'WEST']"
             ".loc[lambda d: d.status == 'damaged']  # chainlint: profile=parcel_scans\n")
    return "".join(chain.format(n=n) if n % 10 == 0 else f"y{n} = {n}\n" for n in range(lines))


def _series(label: str, unit: str, build: Callable[[int], str], sizes: list[int], flags: tuple[str, ...]) -> None:
    load = os.getloadavg()[0]
    per_unit = []
    cells = []
    for size in sizes:
        seconds = _run(build(size), *flags)
        per_unit.append(seconds / size)
        cells.append(f"{size:,}: {seconds:.2f} s ({seconds / size * 1e3:.3f} ms/{unit})")
    ratio = per_unit[-1] / per_unit[0]
    print(f"{label}: " + ", ".join(cells) + f"; per {unit} largest/smallest {ratio:.2f} "
          f"for {sizes[-1] / sizes[0]:.0f}x the input (load {load:.1f} -> {os.getloadavg()[0]:.1f})", flush=True)


def main_() -> None:
    scale = int(sys.argv[sys.argv.index("--scale") + 1]) if "--scale" in sys.argv else 1
    _run(_module(100))  # warm-up: imports, the store, the cost model
    for label, unit, build, largest in (("statement run", "statement", _statement_run, 5_000),
                                        ("renamed run", "statement", _renamed_run, 5_000),
                                        ("module", "line", _module, 100_000)):
        sizes = [largest // scale // 8, largest // scale // 4, largest // scale // 2, largest // scale]
        for command, flags in (("check", ()), ("check --diff", ("--diff",))):
            _series(f"{command}, {label}", unit, build, sizes, flags)


if __name__ == "__main__":
    main_()
