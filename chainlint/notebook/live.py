"""Plans and profiles from a live DataFrame in the kernel, for the IPython extension.

The frame goes through the profiler as an in-memory dataset (the same code as `chainlint
profile`); the chain's own predicates are counted on it exactly (joint counts, from
chainlint's predicate IR evaluated with pyarrow compute), and the planner runs as for `check`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import pyarrow as pa

from chainlint.bind.binding import Binding, BoundBy
from chainlint.engine.check import PlannedChain, keep_written
from chainlint.engine.options import Options
from chainlint.estimate.cost import DEFAULT_MODEL, CostModel
from chainlint.estimate.selectivity import Estimator
from chainlint.model import Chain, ChainlintError
from chainlint.plan.chains import ChainPlan, plan_chain
from chainlint.profile.build import profile_dataset
from chainlint.profile.errors import DataError
from chainlint.profile.format import ProfileError
from chainlint.profile.joint import JointCounter
from chainlint.profile.dtypes import with_dtype
from chainlint.profile.readers import Dataset, memory_dataset
from chainlint.profile.settings import Settings
from chainlint.profile.store import StoreError, check_name, find_store, save_profile
from chainlint.profile.view import Profile
from chainlint.report.explain import explain_text


class MagicError(ChainlintError):
    """A problem to show the user in place of a plan."""


@dataclass(frozen=True)
class LivePlan:
    plan: ChainPlan
    text: str


def _dataset(frame: Any) -> Dataset:
    try:
        table = pa.Table.from_pandas(frame, preserve_index=False)
    except (pa.ArrowException, TypeError, ValueError) as error:
        raise MagicError(f"the frame cannot be read as columns of one type each: {error}") from None
    # The profile states the frame's own dtypes (an object column of text is not `str`).
    marked = pa.schema([with_dtype(field, str(dtype)) for field, dtype in zip(table.schema, frame.dtypes)])
    return memory_dataset(pa.Table.from_arrays(table.columns, schema=marked))


def plan_on_frame(chain: Chain, frame: Any, options: Options, model: CostModel = DEFAULT_MODEL) -> LivePlan:
    """The chain planned with statistics and exact joint counts of `frame` (every value kept)
    under the store's cost `model`, the written order kept unless the plan clears the
    thresholds of `options`, as in `check`."""
    name = f"{chain.frame} (live)"
    dataset = _dataset(frame)
    joint = JointCounter([chain], set(dataset.schema.names))
    try:
        document = profile_dataset(dataset, name, Settings(min_count=1), joint=joint)
    except DataError as error:
        raise MagicError(str(error)) from None
    # The frame's own dtypes judge how far steps may move: an object column of strings reads
    # as Arrow strings (`str` in a profile), but `.str` of it gives missing values that cannot mask.
    dtypes = {str(column): str(dtype) for column, dtype in frame.dtypes.items()}
    plan = keep_written(plan_chain(chain, Binding(name, BoundBy.KERNEL), Estimator(Profile.from_document(document)),
                                   len(frame), model, dtypes=dtypes), options.context)
    shown = replace(chain, path="cell")
    text = explain_text([PlannedChain(shown, plan.binding, replace(plan, chain=shown))])
    for predicate, reason in sorted(joint.skipped.items()):
        text += f"  not counted jointly: `{predicate}`: {reason}\n"
    return LivePlan(plan, text)


def measure_text(frame: Any, plan: ChainPlan, repeat: int) -> str:
    """Both orders timed on the frame, built from chainlint's predicates (not the cell's code)."""
    from chainlint.measure.report import measure_text as render
    from chainlint.measure.run import MeasureError, measure_chain

    try:
        measured = measure_chain(frame, plan.chain, plan.groups, plan.speedup, max(1, repeat), single=plan.single)
    except MeasureError as error:
        return f"  cannot time this chain: {error}\n"
    lines = render([replace(measured, chain=replace(plan.chain, path="cell"))]).splitlines()[1:]
    return "  measured on the live frame:\n" + "".join(f"  {line}\n" for line in lines)


def profile_into_store(frame: Any, name: str, store: Path | None, min_count: int) -> str:
    """Profile a live frame into the store (the `chainlint profile` format); one line saying so."""
    try:
        check_name(name)
        folder = store or find_store(".")
        document = profile_dataset(_dataset(frame), name, Settings(min_count=max(1, min_count)))
        path, changed = save_profile(folder, document)
    except (DataError, StoreError, ProfileError) as error:
        raise MagicError(str(error)) from None
    made = Profile.from_document(document)
    state = "written" if changed else "unchanged"
    return f"profile {name}: {made.rows:,} rows, {len(made.columns)} columns -> {path} ({state})"
