"""Exact joint counts for the code's own predicates (`chainlint profile --for SRC`).

Per-column statistics cannot see correlation (a destination and the carriers that fly there).
For every chain bound to the profile, each movable step's predicate is evaluated exactly on
the data from chainlint's IR (pyarrow compute, never the user's code): one boolean mask per
predicate, packed as bits. For a chain of up to `PACKED_STEPS` predicates, the rows passing
each subset are the popcount of the AND of its masks; for longer chains the masks form one code
per row, counted by one `bincount` and summed over supersets. The profile stores, per set of
predicates, the rows that pass each subset of them, changed so that no group of fewer than
`min_count` rows can be derived from them (`privacy.hide_small_cells`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pyarrow as pa

from chainlint.evaluate.arrow_masks import bit_mask
from chainlint.evaluate.support import NotEvaluable, uncountable
from chainlint.ir import Node
from chainlint.model import Chain
from chainlint.profile.privacy import hide_small_cells
from chainlint.profile.sites import chain_site

MAX_STEPS = 12
PACKED_STEPS = 6  # 2**6 ANDs of packed masks beat a per-row code; past that, bincount wins


@dataclass
class _Target:
    texts: tuple[str, ...]
    predicates: tuple[Node, ...]
    subsets: np.ndarray  # rows passing every predicate of each subset (bit i: the i-th)
    sites: set[str] = field(default_factory=set)  # the chains counted (`chain_site`)


class JointCounter:
    """Counts, batch by batch, how many rows pass each combination of a chain's predicates."""

    def __init__(self, chains: Sequence[Chain], columns: set[str], redacted: frozenset[str] = frozenset(),
                 root: Path | None = None) -> None:
        """`redacted`: columns whose predicates are not counted (a count would confirm that the
        code's literal occurs in the column); `root`: the project root, to name the chains
        counted."""
        self.targets: dict[tuple[str, ...], _Target] = {}
        self.skipped: dict[str, str] = {}
        self.chains = 0  # chains with at least one set of predicates to count
        for chain in chains:
            counted = False
            for segment in chain.segments():
                chosen: dict[str, Node] = {}
                for index in segment:
                    predicate = chain.steps[index].predicate
                    reason = uncountable(predicate)
                    if reason is None and not predicate.columns() <= columns:
                        reason = "it reads columns the data does not have"
                    elif reason is None and predicate.columns() & redacted:
                        reason = "it reads a redacted column"
                    if reason:
                        self.skipped[predicate.canonical()] = reason
                        continue
                    chosen[predicate.canonical()] = predicate
                texts = tuple(sorted(chosen))[:MAX_STEPS]
                if len(texts) >= 2 and texts not in self.targets:
                    self.targets[texts] = _Target(texts, tuple(chosen[t] for t in texts), np.zeros(1 << len(texts), dtype=np.int64))
                if len(texts) >= 2:
                    counted = True
                    if root is not None:
                        self.targets[texts].sites.add(chain_site(chain, root))
            self.chains += counted
        self.needed = sorted({name for target in self.targets.values() for p in target.predicates for name in p.columns()})

    def needs_pandas(self) -> bool:
        """Whether counting will import pandas: pyarrow turns Python literals into scalars
        through its pandas shim, which imports pandas (0.2 s) on first use."""
        return bool(self.targets)

    def add(self, table: pa.Table) -> None:
        if not self.targets or table.num_rows == 0:
            return
        # One record batch of the columns the predicates read, so that dictionary-encoded
        # columns are seen as such (a CSV piece's columns come in several chunks).
        part = table.select(self.needed)
        batches = part.to_batches()
        batch = batches[0] if len(batches) == 1 else part.combine_chunks().to_batches()[0]
        masks: dict[str, np.ndarray] = {}  # a predicate shared by several chains is evaluated once
        for target in list(self.targets.values()):
            try:
                for text, predicate in zip(target.texts, target.predicates):
                    if text not in masks:
                        masks[text] = bit_mask(batch, predicate)
            except (NotEvaluable, pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError) as error:
                for text in target.texts:
                    self.skipped.setdefault(text, f"pyarrow cannot evaluate it: {error}")
                del self.targets[target.texts]
                continue
            planes = [masks[text] for text in target.texts]
            if len(planes) <= PACKED_STEPS:
                target.subsets += subset_counts(planes, batch.num_rows)
            else:
                target.subsets += superset_sums(pattern_counts(planes, batch.num_rows))

    def finish(self, min_count: int) -> list[dict]:
        """Per set of predicates: rows passing every subset (bit i: the i-th predicate), with
        every pattern of passed predicates empty or held by at least `min_count` rows."""
        entries = []
        for texts in sorted(self.targets):
            subsets = hide_small_cells(self.targets[texts].subsets, min_count)
            entry: dict = {"predicates": list(texts), "subsets": [[mask, int(c)] for mask, c in enumerate(subsets)]}  # type: ignore[type-arg]
            if self.targets[texts].sites:
                entry["chains"] = sorted(self.targets[texts].sites)
            entries.append(entry)
        return entries


def subset_counts(planes: list[np.ndarray], rows: int) -> np.ndarray:
    """Rows passing every predicate of each subset (bit i: plane i) from packed masks: each
    subset's AND is built from the subset without its highest bit, then counted."""
    counts = np.zeros(1 << len(planes), dtype=np.int64)
    counts[0] = rows
    passing: list[np.ndarray] = [planes[0]] * len(counts)
    for subset in range(1, len(counts)):
        high = subset.bit_length() - 1
        rest = subset ^ (1 << high)
        passing[subset] = planes[high] if rest == 0 else np.bitwise_and(passing[rest], planes[high])
        counts[subset] = int(np.bitwise_count(passing[subset]).sum())
    return counts


def pattern_counts(planes: list[np.ndarray], rows: int) -> np.ndarray:
    """Rows by the exact pattern of predicates they pass (bit i: plane i), by one `bincount`."""
    code = np.zeros(rows, dtype=np.uint16)  # MAX_STEPS <= 16
    for bit, plane in enumerate(planes):
        code |= np.left_shift(np.unpackbits(plane.view(np.uint8), count=rows, bitorder="little"), bit, dtype=np.uint16)
    return np.bincount(code, minlength=1 << len(planes))


def superset_sums(patterns: np.ndarray) -> np.ndarray:
    """From counts of each exact pattern of passed predicates to counts of rows passing each
    subset: rows(S) = sum of patterns that contain S (a zeta transform, k passes)."""
    sums = patterns.copy()
    size = len(sums)
    bit = 1
    while bit < size:
        masks = np.arange(size)
        without = masks[(masks & bit) == 0]
        sums[without] += sums[without | bit]
        bit <<= 1
    return sums
