"""`measure` in the engine: the chains of a file planned with the run's options (its store,
its bindings, its thresholds) at the loaded data's row count, then timed in both orders.
A chain no profile describes is planned with statistics of the data given."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

from chainlint.engine.check import plan_results
from chainlint.engine.options import Options
from chainlint.model import Chain, FileAnalysis
from chainlint.plan.chains import plan_chain


@dataclass
class Measured:
    """The measurements, a located note for every chain planned without a profile or not
    measured, and how many chains the data cannot run."""

    measurements: list[Any] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    unrunnable: int = 0


def measure_chains(result: FileAnalysis, chains: Sequence[Chain], table: Any, options: Options, repeat: int,
                   progress: Callable[[Chain, int, int], None] | None = None) -> Measured:
    """Plan `chains` of `result` with `options` and time both orders on `table` (loaded data)."""
    from chainlint.measure.run import DataMismatch, MeasureError, as_read_csv, measure_chain

    frame = as_read_csv(table)
    planned, _ = plan_results([replace(result, chains=tuple(chains))], replace(options, rows=len(frame)))
    done = Measured()
    in_memory = None
    for item in planned:
        plan = item.plan
        where = f"{item.chain.path}:{item.chain.span.line}"
        if plan is None:
            in_memory = in_memory or _profile_in_memory(table)
            plan = plan_chain(item.chain, item.binding, in_memory, len(frame))
            done.notes.append(f"{where}: no profile ({item.binding.reason}); planned with statistics of the data given")
        told = None if progress is None else (lambda run, total, chain=item.chain: progress(chain, run, total))
        try:
            done.measurements.append(measure_chain(frame, item.chain, plan.groups, plan.speedup, repeat, told, plan.single))
        except DataMismatch as error:
            needs = "columns " + ", ".join(sorted({c for step in item.chain.steps for c in step.columns}))
            if item.binding.profile:
                needs += f", as in the data of profile `{item.binding.profile}`"
            done.notes.append(f"{where}: error: cannot run this chain: {error}; it needs {needs}")
            done.unrunnable += 1
        except MeasureError as error:
            done.notes.append(f"{where}: cannot measure: {error}")
    return done


def _profile_in_memory(table: Any) -> Any:
    """An estimator over statistics of the loaded data, for chains no stored profile describes."""
    from chainlint.estimate.selectivity import Estimator
    from chainlint.profile.build import profile_dataset
    from chainlint.profile.readers import memory_dataset
    from chainlint.profile.settings import Settings
    from chainlint.profile.view import Profile

    return Estimator(Profile.from_document(profile_dataset(memory_dataset(table), "in-memory", Settings())))
