"""`chainlint explain` output: a table per chain (text) or the documented JSON contract."""

from __future__ import annotations

import ast
import json
import re
from collections.abc import Sequence
from typing import Any

from chainlint.engine.check import PlannedChain, error_order
from chainlint.model import Cell, Chain, ChainForm, FileAnalysis, FileProblem, Step
from chainlint.plan.chains import ChainPlan
from chainlint.plan.totality import ANY, LATER, STAYS, Limit
from chainlint.ir import Node
from chainlint.report.escape import encodable, printable
from chainlint.units import duration


def step_record(step: Step) -> dict[str, Any]:
    return {
        "line": step.span.line,
        "column": step.span.column,
        "end_line": step.span.end_line,
        "end_column": step.span.end_column,
        "kind": step.kind.value,
        "predicate": step.predicate.canonical(),
        "columns": list(step.columns),
        "movable": step.movable,
        "barrier": step.barrier.kind.value if step.barrier else None,
        "reason": step.barrier.reason if step.barrier else None,
        "mask_frame": step.mask_frame.value if step.mask_frame else None,
        "apart": step.apart,
        "conjunct": None if step.conjunct is None else {
            "line": step.conjunct.line, "column": step.conjunct.column,
            "end_line": step.conjunct.end_line, "end_column": step.conjunct.end_column,
        },
    }


def chain_record(chain: Chain) -> dict[str, Any]:
    return {
        "path": chain.path,
        "cell": cell_record(chain.cell),
        "line": chain.span.line,
        "column": chain.span.column,
        "end_line": chain.span.end_line,
        "end_column": chain.span.end_column,
        "frame": chain.frame,
        "form": chain.form.value,
        "steps": [step_record(step) for step in chain.steps],
    }


def cell_record(cell: Cell | None) -> dict[str, Any] | None:
    """A notebook cell in JSON: its 1-based number among all cells and its id (or null)."""
    return None if cell is None else {"number": cell.number, "id": cell.id}


def error_record(error: FileProblem) -> dict[str, Any]:
    return {"path": error.path, "cell": cell_record(error.cell), "line": error.line, "column": error.column, "message": error.message}


def all_errors(results: Sequence[FileAnalysis], extra: Sequence[FileProblem] = ()) -> list[FileProblem]:
    return sorted([e for r in results for e in r.errors] + list(extra), key=error_order)


def planned_record(item: PlannedChain) -> dict[str, Any]:
    record = chain_record(item.chain)
    plan = item.plan
    if plan is None:
        record["binding"] = None
        record["reason"] = item.binding.reason
        record.update(order=None, groups=None, speedup=None, rows=None, written_seconds=None, planned_seconds=None, fused_seconds=None)
        for step in record["steps"]:
            step.update(moves=None, limit=None, selectivity=None, basis=None, rows_in=None, rows_out=None, seconds=None)
        return record
    record["binding"] = {"profile": item.binding.profile, "how": item.binding.how.value if item.binding.how else None}
    record.update(
        order=list(plan.order),
        groups=[list(g) for g in plan.groups],
        speedup=round(plan.speedup, 4),
        rows=plan.rows,
        written_seconds=round(plan.written_seconds, 6),
        planned_seconds=round(plan.planned_seconds, 6),
        fused_seconds=round(plan.fused_seconds, 6),
    )
    for step, estimate, limit in zip(record["steps"], plan.written, plan.limits):
        step.update(
            moves=limit.moves if limit else "stays",
            limit=limit.reason if limit else step["reason"],
            selectivity=round(estimate.selectivity, 6),
            basis=estimate.basis.value,
            rows_in=round(estimate.rows_in),
            rows_out=round(estimate.rows_out),
            seconds=round(estimate.seconds, 6),
        )
    return record


def explain_json(planned: Sequence[PlannedChain], errors: Sequence[FileProblem]) -> str:
    document = {
        "chains": [planned_record(item) for item in planned],
        "errors": [error_record(e) for e in sorted(errors, key=error_order)],
    }
    return json.dumps(encodable(document), indent=2, ensure_ascii=False, sort_keys=False) + "\n"


def explain_text(planned: Sequence[PlannedChain]) -> str:
    return "\n".join(_chain_text(item.chain, item.plan.limits if item.plan else ()) + _plan_text(item) for item in planned)


def _plan_text(item: PlannedChain) -> str:
    plan = item.plan
    if plan is None:
        return f"  no plan: {printable(item.binding.reason)}\n"
    lines = [f"  profile `{plan.binding.profile}` (by {plan.binding.how.value if plan.binding.how else None}), {plan.rows:,} rows"]
    lines += _order_table("written", plan, plan.written)
    lines += _order_table("planned", plan, plan.planned)
    lines.append(
        f"  written {duration(plan.written_seconds)}, planned {duration(plan.planned_seconds)} "
        f"({plan.speedup:.2f}x), fused into one mask {duration(plan.fused_seconds)}"
    )
    for number, (step, limit) in enumerate(zip(item.chain.steps, plan.limits), start=1):
        if step.apart and limit is not None and limit.moves != STAYS:
            lines.append(printable(f"  step {number} joins no mask: {step.apart}"))
    if item.chain.form is ChainForm.MASK and any(limit is None or limit.moves != ANY for limit in plan.limits):
        lines.append("  kept whole: a conjunct that may raise or give missing values on its own is not split from the mask")
    return "\n".join(lines) + "\n"


def readable(predicate: Node) -> str:
    """The canonical text for people: code chainlint does not follow is shown as written, in
    backticks, not as the `opaque('...')` of the canonical form (the step's reason says why)."""
    return _OPAQUE.sub(lambda m: f"`{ast.literal_eval(m.group(1))}`", predicate.canonical())


_OPAQUE = re.compile(r"opaque\(('(?:[^'\\]|\\.)*'|\"(?:[^\"\\]|\\.)*\")\)")


def _order_table(title: str, plan: ChainPlan, estimates) -> list[str]:  # type: ignore[no-untyped-def]
    rows = [(title, "rows in", "rows out", "keeps", "basis", "time")]
    for estimate in estimates:
        rows.append((
            f"step {estimate.step + 1}" if len(estimate.steps) == 1 else "steps " + " & ".join(str(i + 1) for i in estimate.steps),
            f"{estimate.rows_in:,.0f}",
            f"{estimate.rows_out:,.0f}",
            f"{estimate.selectivity:.2%}",
            estimate.basis.value,
            duration(estimate.seconds),
        ))
    widths = [max(len(r[i]) for r in rows) for i in range(6)]
    aligned = []
    for row in rows:
        cells = [row[0].ljust(widths[0])] + [row[i].rjust(widths[i]) if i != 4 else row[i].ljust(widths[i]) for i in range(1, 6)]
        aligned.append("    " + "  ".join(cells))
    return aligned


#: What the "moves" column says for each limit of a bound chain.
_MOVES = {ANY: "yes", LATER: "later", STAYS: "no"}


def _chain_text(chain: Chain, limits: Sequence[Limit | None] = ()) -> str:
    """The steps; with a plan's limits, how far each may move and why not further."""
    if limits:
        moves = [_MOVES[limit.moves] if limit else "no" for limit in limits]
        reasons = [limit.reason if limit else step.barrier.reason if step.barrier else None for step, limit in zip(chain.steps, limits)]
    else:
        moves = ["yes" if step.movable else "no" for step in chain.steps]
        reasons = [step.barrier.reason if step.barrier else None for step in chain.steps]
    movable = sum(m != "no" for m in moves)
    form = {ChainForm.STATEMENTS: "statement run", ChainForm.MASK: "one written mask"}.get(chain.form, "method chain")
    head = printable(
        f"{chain.path}:{chain.span.line}:{chain.span.column}: {'' if chain.cell is None else f'cell {chain.cell.number}: '}"
        f"{form} on `{chain.frame}`, "
        f"{len(chain.steps)} steps, {movable} movable"
    )
    rows = [("#", "at", "kind", "moves", "predicate")]
    notes: dict[int, str] = {}
    for number, step in enumerate(chain.steps, start=1):
        at = step.conjunct or step.span
        rows.append((str(number), f"{at.line}:{at.column}", step.kind.value, moves[number - 1], printable(readable(step.predicate))))
        if reasons[number - 1]:
            notes[number] = printable(reasons[number - 1])  # type: ignore[arg-type]
    widths = [max(len(row[i]) for row in rows) for i in range(4)]
    lines = [head]
    for index, row in enumerate(rows):
        cells = [row[i].ljust(widths[i]) for i in range(4)] + [row[4]]
        lines.append("  " + "  ".join(cells).rstrip())
        if index in notes:
            lines.append("  " + " " * (sum(widths) + 8) + "^ " + notes[index])
    return "\n".join(lines) + "\n"


def summary(results: Sequence[FileAnalysis], error_count: int) -> str:
    chains = sum(len(r.chains) for r in results)
    with_chains = sum(1 for r in results if r.chains)
    text = f"{chains} chain{'s' if chains != 1 else ''} in {with_chains} of {len(results)} file{'s' if len(results) != 1 else ''}"
    if error_count:
        text += f"; {error_count} file{'s' if error_count != 1 else ''} could not be analysed"
    return text
