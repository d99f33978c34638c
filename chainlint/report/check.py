"""`chainlint check` output: GNU `path:line:col: rule: message` lines and a summary, or JSON.

In a notebook the line is counted within its cell and the message starts with `cell N: `
(N counts all the notebook's cells from 1, as editors show them); JSON carries `cell`.
"""

from __future__ import annotations

import json
from collections import Counter
from typing import Any

from chainlint.analysis.check import CheckResult
from chainlint.analysis.model import Cell, FileError
from chainlint.report.escape import encodable, printable
from chainlint.report.explain import cell_record, error_record
from chainlint.rules import Finding


def cell_prefix(cell: Cell | None) -> str:
    return "" if cell is None else f"cell {cell.number}: "


def error_line(error: FileError) -> str:
    return printable(f"{error.path}:{error.line}:{error.column}: error: {cell_prefix(error.cell)}{error.message}")


def finding_record(finding: Finding) -> dict[str, Any]:
    return {
        "rule": finding.rule,
        "path": finding.path,
        "cell": cell_record(finding.cell),
        "line": finding.span.line,
        "column": finding.span.column,
        "end_line": finding.span.end_line,
        "end_column": finding.span.end_column,
        "message": finding.message,
        "speedup": None if finding.speedup is None else round(finding.speedup, 4),
        "current_seconds": None if finding.current_seconds is None else round(finding.current_seconds, 6),
        "planned_seconds": None if finding.planned_seconds is None else round(finding.planned_seconds, 6),
        "order": None if finding.order is None else list(finding.order),
        "fix": None if finding.fix is None else {
            "line": finding.fix.span.line,
            "column": finding.fix.span.column,
            "end_line": finding.fix.span.end_line,
            "end_column": finding.fix.span.end_column,
            "text": finding.fix.text,
        },
        "fix_error": finding.fix_error,
    }


def check_json(result: CheckResult) -> str:
    document = {
        "findings": [finding_record(f) for f in result.findings],
        "suppressed": len(result.suppressed),
        "errors": [error_record(e) for e in sorted(result.errors, key=lambda e: (e.path, e.line, e.column))],
    }
    return json.dumps(encodable(document), indent=2, ensure_ascii=False) + "\n"


def check_lines(result: CheckResult) -> list[str]:
    lines = []
    for f in result.findings:
        cell = cell_prefix(f.cell)
        lines.append(printable(f"{f.path}:{f.span.line}:{f.span.column}: {f.rule}: {cell}{f.message}"))
        if f.fix_error:
            lines.append(printable(f"{f.path}:{f.span.line}:{f.span.column}: note: {cell}no automatic fix: {f.fix_error}"))
    return lines


def check_summary(result: CheckResult, fixed: int = 0) -> str:
    """One line; `fixed` findings were rewritten and are no longer counted as findings."""
    chains = len(result.chains)
    bound = sum(1 for c in result.chains if c.plan is not None)
    by_rule = Counter(f.rule for f in result.findings)
    if result.findings:
        parts = ", ".join(f"{count} {rule}" for rule, count in sorted(by_rule.items()))
        head = f"{len(result.findings)} finding{'s' if len(result.findings) != 1 else ''} ({parts})"
    else:
        head = "no findings"
    text = f"{head}; {chains} chain{'s' if chains != 1 else ''} in {result.files} file{'s' if result.files != 1 else ''}, {bound} planned with a profile"
    if fixed:
        text = f"{fixed} fixed; " + text
    if result.suppressed:
        text += f"; {len(result.suppressed)} kept as written by a `chainlint: keep` comment"
    if result.errors:
        text += f"; {len(result.errors)} error{'s' if len(result.errors) != 1 else ''}"
    return text
