"""The edits that put chains into their plans, for every chain of a text at once.

A plan that fuses steps is made in two halves (`chainlint.rewrite.fuse`): the steps are first
put into the plan's order, then the chain is found again in that text and its groups are written
as masks. Finding a chain again means parsing the file and running the finder, so it is done
once for all the chains of a text, not once a chain: the moves of every chain are applied
together, the text is parsed once, the finder walks only the moved regions, and each chain is
found again inside its own region (among the chains there with the same form and predicates,
the nearest to where it was). Chains whose regions overlap (one nested in another's step) wait
for a further round; a batch whose moved text does not parse is split in halves down to the
chain at fault. Every result is still checked by `chainlint.rewrite.verify`.
"""

from __future__ import annotations

import bisect
from collections.abc import Sequence
from dataclasses import dataclass, replace

from chainlint.find.chains import find_chains
from chainlint.find.screen import Seams
from chainlint.model import Chain, ChainForm, Edit, Span
from chainlint.parse.source import SourceError, SourceText, parse_tree, text_source
from chainlint.rewrite.fuse import Groups, Started, fused_edits, start_plan
from chainlint.rewrite.permute import RewriteError, apply_edits
from chainlint.rewrite.runs import run_edits


@dataclass(frozen=True)
class _Waiting:
    """A started plan, `index` in the caller's list, and the characters its edit may change."""

    index: int
    started: Started
    start: int
    end: int


def plan_edit(source: SourceText, chain: Chain, groups: Groups) -> Edit:
    """The edit that applies `groups` (step indices, each group run as one mask, in order)."""
    (outcome,) = plan_edits(source, [(chain, groups)])
    if isinstance(outcome, RewriteError):
        raise outcome
    return outcome


def plan_edits(source: SourceText, plans: Sequence[tuple[Chain, Groups]]) -> list[Edit | RewriteError]:
    """Each plan's edit of `source`, or why there is none, in the order given."""
    outcomes: list[Edit | RewriteError | None] = [None] * len(plans)
    waiting: list[_Waiting] = []
    for index, (chain, groups) in enumerate(plans):
        try:
            started = start_plan(source, chain, groups)
        except RewriteError as error:
            outcomes[index] = error
            continue
        if isinstance(started, Edit):
            outcomes[index] = started
        else:
            waiting.append(_Waiting(index, started, *_region(source, started)))
    while waiting:
        batch, waiting = _apart(waiting)
        for index, outcome in _finish(source, batch):
            outcomes[index] = outcome
    return outcomes  # type: ignore[return-value]


def _offset(source: SourceText, line: int, column: int) -> int:
    return source.line_starts[line - 1] + column - 1


def _region(source: SourceText, started: Started) -> tuple[int, int]:
    """The characters the plan's edit may change: the moved text, else the steps'."""
    if started.moved is not None:
        return started.moved.start, started.moved.end
    spans = [step.span for step in started.chain.steps]
    return min(_offset(source, s.line, s.column) for s in spans), max(_offset(source, s.end_line, s.end_column) for s in spans)


def _apart(waiting: list[_Waiting]) -> tuple[list[_Waiting], list[_Waiting]]:
    """The plans whose regions do not overlap an earlier one (by start), and the others."""
    batch: list[_Waiting] = []
    rest: list[_Waiting] = []
    for item in sorted(waiting, key=lambda w: (w.start, -w.end)):
        (rest if batch and item.start < batch[-1].end else batch).append(item)
    return batch, rest


def _finish(source: SourceText, batch: list[_Waiting]) -> list[tuple[int, Edit | RewriteError]]:
    """Each plan of `batch` (regions apart, by start) finished in one parse of the moved text."""
    text = apply_edits(source.text, [w.started.moved for w in batch if w.started.moved is not None])
    permuted = text_source(source.path, text, source.encoding)
    try:
        tree = parse_tree(permuted)
    except SourceError as error:
        if len(batch) > 1:
            return _finish(source, batch[: len(batch) // 2]) + _finish(source, batch[len(batch) // 2 :])
        return [(batch[0].index, RewriteError(f"the reordered chain does not parse: {error.message}"))]
    # Where each region lies in the moved text.
    starts: list[int] = []
    ends: list[int] = []
    shift = 0
    for item in batch:
        moved = item.started.moved
        length = len(moved.text) if moved is not None else item.end - item.start
        starts.append(item.start + shift)
        ends.append(item.start + shift + length)
        shift += length - (item.end - item.start)
    seams = Seams([(permuted.position(start)[0], permuted.position(max(start, end - 1))[0]) for start, end in zip(starts, ends)])
    inside: list[list[Chain]] = [[] for _ in batch]
    for again in find_chains(permuted, tree, seams):
        first = min(_offset(permuted, s.span.line, s.span.column) for s in again.steps)
        last = max(_offset(permuted, s.span.end_line, s.span.end_column) for s in again.steps)
        region = bisect.bisect_right(starts, first) - 1
        if region >= 0 and last <= ends[region]:
            inside[region].append(again)
    outcomes: list[tuple[int, Edit | RewriteError]] = []
    move = _mover(batch, starts, ends)
    for item, start, end, candidates in zip(batch, starts, ends, inside):
        try:
            outcomes.append((item.index, _fused(source, permuted, item, start, end, candidates, move)))
        except RewriteError as error:
            outcomes.append((item.index, error))
    return outcomes


def _mover(batch: list[_Waiting], starts: list[int], ends: list[int]):  # type: ignore[no-untyped-def]
    """Offset in the source -> offset in the moved text, for offsets outside the regions."""
    original_ends = [item.end for item in batch]
    shifts = [0] + [end - start - (item.end - item.start) for item, start, end in zip(batch, starts, ends)]
    for n in range(1, len(shifts)):
        shifts[n] += shifts[n - 1]

    def move(offset: int) -> int:
        return offset + shifts[bisect.bisect_right(original_ends, offset)]

    return move


def _fused(source: SourceText, permuted: SourceText, item: _Waiting, start: int, end: int,
           candidates: list[Chain], move) -> Edit:  # type: ignore[no-untyped-def]
    """The plan's whole edit of `source`: its move and its groups written as masks."""
    chain, groups = item.started.chain, item.started.groups
    expected = [chain.steps[i].predicate for group in groups for i in group]
    found = [c for c in candidates if c.form == chain.form and [s.predicate for s in c.steps] == expected]
    if not found:
        raise RewriteError("the reordered chain is not found again")
    line, column = permuted.position(move(_offset(source, chain.span.line, chain.span.column)))
    again = min(found, key=lambda c: (abs(c.span.line - line), abs(c.span.column - column)))
    fused = (run_edits if chain.form is ChainForm.STATEMENTS else fused_edits)(permuted, again, groups)
    if any(edit.start < start or edit.end > end for edit in fused) and chain.form is not ChainForm.STATEMENTS:
        raise RewriteError("the reordered chain is not found again")
    # A group of a statement run reaches past the steps: the name its statement assigns, the
    # statements it removes to their line breaks (text no other chain of the batch holds).
    if item.started.moved is not None:
        low, high = min([start] + [e.start for e in fused]), max([end] + [e.end for e in fused])
    else:
        low, high = min(e.start for e in fused), max(e.end for e in fused)
    first, last = item.start + (low - start), item.end + (high - end)
    text = apply_edits(permuted.text[low:high], [replace(e, start=e.start - low, end=e.end - low) for e in fused])
    return Edit(first, last, text, Span(*source.position(first), *source.position(last)))
