"""`chainlint explain` output: a table per chain (text) or the documented JSON contract."""

from __future__ import annotations

import json
from collections.abc import Sequence
from typing import Any

from chainlint.analysis.model import Chain, FileAnalysis, FileError, Step


def step_record(step: Step) -> dict[str, Any]:
    return {
        "line": step.span.line,
        "column": step.span.column,
        "end_line": step.span.end_line,
        "end_column": step.span.end_column,
        "kind": step.kind,
        "predicate": step.predicate.canonical(),
        "columns": list(step.columns),
        "movable": step.movable,
        "barrier": step.barrier.kind if step.barrier else None,
        "reason": step.barrier.reason if step.barrier else None,
        "mask_frame": step.mask_frame,
    }


def chain_record(chain: Chain) -> dict[str, Any]:
    return {
        "path": chain.path,
        "line": chain.span.line,
        "column": chain.span.column,
        "end_line": chain.span.end_line,
        "end_column": chain.span.end_column,
        "frame": chain.frame,
        "form": chain.form,
        "steps": [step_record(step) for step in chain.steps],
    }


def error_record(error: FileError) -> dict[str, Any]:
    return {"path": error.path, "line": error.line, "column": error.column, "message": error.message}


def all_errors(results: Sequence[FileAnalysis], extra: Sequence[FileError] = ()) -> list[FileError]:
    return sorted([e for r in results for e in r.errors] + list(extra), key=lambda e: (e.path, e.line, e.column))


def explain_json(results: Sequence[FileAnalysis], extra_errors: Sequence[FileError] = ()) -> str:
    document = {
        "chains": [chain_record(c) for r in results for c in r.chains],
        "errors": [error_record(e) for e in all_errors(results, extra_errors)],
    }
    return json.dumps(document, indent=2, ensure_ascii=False, sort_keys=False) + "\n"


def explain_text(results: Sequence[FileAnalysis]) -> str:
    blocks = [_chain_text(c) for r in results for c in r.chains]
    return "\n".join(blocks)


def _chain_text(chain: Chain) -> str:
    movable = sum(step.movable for step in chain.steps)
    form = "statement run" if chain.form == "statements" else "method chain"
    head = (
        f"{chain.path}:{chain.span.line}:{chain.span.column}: {form} on `{chain.frame}`, "
        f"{len(chain.steps)} steps, {movable} movable"
    )
    rows = [("#", "at", "kind", "moves", "predicate")]
    notes: dict[int, str] = {}
    for number, step in enumerate(chain.steps, start=1):
        rows.append(
            (str(number), f"{step.span.line}:{step.span.column}", step.kind, "yes" if step.movable else "no", step.predicate.canonical())
        )
        if step.barrier:
            notes[number] = step.barrier.reason
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
