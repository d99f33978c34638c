"""Move positions from a notebook's analysed text into its cells, for reports.

A located position is a line counted within its cell (1-based) and the cell's own column, with
the cell (its 1-based number among all cells, and its id) beside it. The rewriter keeps working
on the analysed text; only what is shown to the user goes through here.
"""

from __future__ import annotations

import bisect
from collections.abc import Sequence
from dataclasses import replace

from chainlint.engine.check import CheckResult, PlannedChain
from chainlint.model import Cell, CellLines, Chain, FileAnalysis, Finding, Span


class _Map:
    def __init__(self, cells: Sequence[CellLines]) -> None:
        self.cells = list(cells)
        self.starts = [c.first_line for c in self.cells]

    def cell(self, line: int) -> CellLines:
        return self.cells[max(0, bisect.bisect_right(self.starts, line) - 1)]

    def span(self, span: Span) -> tuple[Span, Cell]:
        cell = self.cell(span.line)
        shift = cell.first_line - 1
        return Span(span.line - shift, span.column, span.end_line - shift, span.end_column), cell.cell


def _maps(results: Sequence[FileAnalysis]) -> dict[str, _Map]:
    return {r.path: _Map(r.cells) for r in results if r.cells}


def locate_chain(chain: Chain, where: _Map) -> Chain:
    span, cell = where.span(chain.span)
    steps = tuple(
        replace(step, span=where.span(step.span)[0], mask_span=None if step.mask_span is None else where.span(step.mask_span)[0],
                conjunct=None if step.conjunct is None else where.span(step.conjunct)[0])
        for step in chain.steps
    )
    return replace(chain, span=span, steps=steps, cell=cell)


def locate_planned(planned: Sequence[PlannedChain], results: Sequence[FileAnalysis]) -> list[PlannedChain]:
    maps = _maps(results)
    return [
        replace(item, chain=locate_chain(item.chain, maps[item.chain.path])) if item.chain.path in maps else item
        for item in planned
    ]


def locate_finding(finding: Finding, where: _Map) -> Finding:
    span, cell = where.span(finding.span)
    fix = finding.fix
    if fix is not None:
        fix = replace(fix, span=where.span(fix.span)[0])
    return replace(finding, span=span, fix=fix, cell=cell)


def locate_result(result: CheckResult, results: Sequence[FileAnalysis]) -> CheckResult:
    """The check result with every notebook position moved into its cell."""
    maps = _maps(results)
    if not maps:
        return result

    def move(findings: Sequence[Finding]) -> tuple[Finding, ...]:
        return tuple(locate_finding(f, maps[f.path]) if f.path in maps else f for f in findings)

    return replace(
        result,
        chains=tuple(locate_planned(result.chains, results)),
        findings=move(result.findings),
        suppressed=move(result.suppressed),
    )

