"""Partial profiles: the counting state of a piece of a dataset, merged exactly, finished once.

A partial holds what the profilers hold before `finish`: every value counted exactly with its
count (rare ones too), the distinct-count registers, the weighted sample, the value changes
and the first and last values, and the joint counts of every pattern however small. The
privacy rule (min-count, folded complements, safe bounds, redaction, sealed sketches) applies
to the merged counts only, in `partial_document`, exactly as the local path applies it to its
one pass. That is why a partial leaves its process only sealed (`chainlint.cluster.sealing`):
encrypted and authenticated under a key made for the run, held in memory by the client and
passed to the tasks with their arguments, never written to a file; the store's redaction and
sketch keys never leave the client.

Merging is exact where the local profile is exact: counts add, the value changes add plus
one where the later piece's first value differs from the earlier piece's last, registers take
their maximum (a set function: the distinct estimate is the local one), joint counts add. A
column past the distinct cap switches to its summaries, as the local path does; its weighted
sample is the union of the pieces' samples (drawn with the whole dataset's stride), so it
differs from the local one only by where the pieces start, within the stated rank error.
"""

from __future__ import annotations

import copy
import hashlib
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from typing import Any

from chainlint.profile.build import count_batches, new_profilers, profile_document
from chainlint.profile.columns import ColumnProfiler
from chainlint.profile.errors import DataError
from chainlint.profile.joint import JointCounter
from chainlint.profile.settings import Settings
from chainlint.profile.pieces import Layout, Piece, file_digest, piece_batches

class PieceProfiler(ColumnProfiler):
    """The local profiler, also keeping the piece's first value: a merge needs it to count the
    value change where one piece ends and the next begins. Its sample's systematic pick starts
    at a place drawn for the piece and column (`pick_start`): were every piece to start at its
    first value, data repeating with the pieces' length (a day per row group) would be picked
    at the same places in every piece and the merged counts would be off by a whole stride per
    piece, beyond the stated error; drawn starts make the pieces' picks independent."""

    first: Any = None
    pick_start: int = 0

    def start_summaries(self) -> None:
        super().start_summaries()
        assert self.sample is not None
        self.sample.offset = self.pick_start % self.sample.stride

    def count_changes(self, comparable: Any, first: Any, last: Any) -> None:
        if self.last is None:
            self.first = first
        super().count_changes(comparable, first, last)


@dataclass
class Partial:
    rows: int
    profilers: list[PieceProfiler]
    joint: JointCounter | None
    digests: dict[str, str] = field(default_factory=dict)  # each file's sha256, taken by its first piece


def worker_settings(settings: Settings) -> Settings:
    """The settings a task counts with: without the store's keys (counting never needs them)."""
    return replace(settings, redaction_key=b"", sketch_key=b"")


def count_piece(piece: Piece, layout: Layout, settings: Settings, expected_rows: int,
                joint: JointCounter | None = None) -> Partial:
    """A piece counted by the local path's own loop (`count_batches`); `expected_rows`: the
    whole dataset's, so that every piece samples with the local profile's stride."""
    profilers = new_profilers(layout.schema, worker_settings(settings), expected_rows, PieceProfiler)
    for column, profiler in enumerate(profilers):
        drawn = hashlib.blake2b(f"{piece.number}:{column}".encode(), digest_size=8).digest()
        profiler.pick_start = int.from_bytes(drawn, "big")  # type: ignore[attr-defined]
    own = copy.deepcopy(joint)
    # The file's digest is read alongside the counting, as the local path reads it: no task
    # of its own waiting for a worker thread.
    with ThreadPoolExecutor(max_workers=1) as hasher:
        digest = hasher.submit(file_digest, piece.path) if piece.hashes else None
        rows = count_batches(piece_batches(piece, layout), profilers, own)
        digests = {piece.path: digest.result()} if digest is not None else {}
    for profiler in profilers:
        if profiler.exact:
            len(profiler.counter)  # fold the last Parquet dictionary's counts: only values counted travel
    return Partial(rows, profilers, own, digests)  # type: ignore[arg-type]


def merge_partials(earlier: Partial, later: Partial) -> Partial:
    """The partial of two pieces, `earlier` before `later` in row order (changes `earlier`)."""
    for into, other in zip(earlier.profilers, later.profilers):
        _merge_column(into, other)
    if earlier.joint is not None and later.joint is not None:
        _merge_joint(earlier.joint, later.joint)
    earlier.rows += later.rows
    earlier.digests.update(later.digests)
    return earlier


def _merge_column(into: PieceProfiler, other: PieceProfiler) -> None:
    into.rows += other.rows
    into.nulls += other.nulls
    if into.kind == "other" or other.kind == "other":
        into.kind, into.exact = "other", False
        into.unsummarised = into.unsummarised or other.unsummarised
        return
    if other.last is not None:
        if into.last is not None and other.first != into.last:
            into.changes += 1
        if into.last is None:
            into.first = other.first
        into.last = other.last
    into.changes += other.changes
    if into.exact and other.exact:
        other.counter.fold()  # its values in the order counted: `add` needs no sorted input
        if other.counter.values is not None:
            into.counter.add(other.counter.values, other.counter.counts)
        if len(into.counter) > into.settings.distinct_cap:
            into.start_summaries()
        return
    for profiler in (into, other):
        if profiler.exact:
            profiler.start_summaries()
    assert into.sample is not None and other.sample is not None
    into.hll = into.hll.merge(other.hll)
    into.sample.rank_error = max(into.sample.rank_error, other.sample.rank_error)
    into.sample.stride = max(into.sample.stride, other.sample.stride)
    for points, weights in other.sample.chunks:
        into.sample.add_weighted(points, weights)


def _merge_joint(into: JointCounter, other: JointCounter) -> None:
    for text, reason in other.skipped.items():
        into.skipped.setdefault(text, reason)
    for texts in list(into.targets):
        if texts not in other.targets:  # a piece could not evaluate it: the local path drops it too
            del into.targets[texts]
        else:
            into.targets[texts].subsets += other.targets[texts].subsets


def partial_document(partial: Partial, name: str, settings: Settings, source: dict[str, Any]) -> dict[str, Any]:
    """The profile document of the merged partial: finished with the store's settings and keys,
    on the client."""
    if partial.rows == 0:
        raise DataError(f"{source['files'][0]['path']}: no data rows (header only or empty)")
    for profiler in partial.profilers:
        profiler.settings = settings
    return profile_document(name, settings, source, partial.profilers, partial.rows, partial.joint)  # type: ignore[arg-type]
