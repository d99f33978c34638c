"""A profile as typed, read-only values: what binding, estimation, planning, the rules and the
reports read of it.

Built once from a document that `documents.check_profile` has validated (or that the profiler
has just made), so every field the format marks optional is here a value or None, never a
missing key. Writing and merging work on the document itself (`format.dumps`, `merge.py`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from functools import cached_property
from types import MappingProxyType
from typing import Any

#: A joint count too small to state (`"below"` in the file): fewer than `min_count` rows.
BELOW = "below"


@dataclass(frozen=True)
class TopValues:
    """The most common values with their row counts (a redacted column's values are keyed
    hashes); `exact`: counted, not sampled; `complete`: every value of `min_count` rows or more
    is listed; `error`: how far a listed count may be off."""

    values: tuple[tuple[Any, int], ...]
    exact: bool
    complete: bool
    error: float


@dataclass(frozen=True)
class Histogram:
    bounds: tuple[Any, ...]  # numbers, or ISO texts for dates and times
    exact: bool
    rank_error: float


@dataclass(frozen=True)
class Distinct:
    value: int | float
    exact: bool
    standard_error: float | None  # stated when `exact` is false


@dataclass(frozen=True)
class ColumnProfile:
    """One column's entry; `dtype` is the dtype pandas reads it as."""

    name: str
    dtype: str
    arrow_type: str
    rows: int
    nulls: int
    distinct: Distinct | None = None
    top: TopValues | None = None
    suppressed_values: int = 0  # values under `min_count` rows, and the rows they hold
    suppressed_rows: int = 0
    histogram: Histogram | None = None
    bounds: tuple[Any, Any] | None = None  # (min, max), each held by enough rows
    clustering: float = 0.0
    sketch: str | None = None
    redacted: bool = False
    unsummarised: str | None = None  # why there is nothing past rows and nulls

    @classmethod
    def from_entry(cls, name: str, entry: Mapping[str, Any]) -> ColumnProfile:
        distinct = entry.get("distinct")
        top = entry.get("top")
        suppressed = entry.get("suppressed") or {}
        histogram = entry.get("histogram")
        return cls(
            name=name,
            dtype=entry["type"],
            arrow_type=entry["arrow_type"],
            rows=entry["rows"],
            nulls=entry["nulls"],
            distinct=None if distinct is None else Distinct(distinct["value"], distinct["exact"], distinct.get("standard_error")),
            top=None if top is None else TopValues(
                tuple((value, count) for value, count in top["values"]),
                bool(top.get("exact", False)), bool(top.get("complete", False)), top.get("error", 0)),
            suppressed_values=suppressed.get("values", 0),
            suppressed_rows=suppressed.get("rows", 0),
            histogram=None if histogram is None else Histogram(
                tuple(histogram["bounds"]), bool(histogram.get("exact", False)), histogram.get("rank_error", 0.0)),
            bounds=(entry["min"], entry["max"]) if "min" in entry else None,
            clustering=float(entry.get("clustering", 0.0)),
            sketch=entry.get("sketch"),
            redacted=bool(entry.get("redacted", False)),
            unsummarised=entry.get("unsummarised"),
        )


@dataclass(frozen=True)
class JointCounts:
    """Rows passing each subset of a set of predicates (bit i of a subset: the i-th predicate),
    `BELOW` where fewer than `min_count`; `chains`: the chains counted (`path:frame`), when
    recorded."""

    predicates: tuple[str, ...]
    subsets: tuple[tuple[int, int | str], ...]
    chains: tuple[str, ...] | None = None


@dataclass(frozen=True)
class RecordedFile:
    path: str
    bytes: int | None = None


@dataclass(frozen=True)
class Source:
    """Where the data came from: its files as given when profiling (none for a frame in
    memory), their combined sha256, and the parts a merged profile was made of."""

    kind: str
    files: tuple[RecordedFile, ...]
    fingerprint: str
    merged_from: tuple[str, ...] | None = None


@dataclass(frozen=True)
class ProfileSettings:
    min_count: int
    distinct_cap: int
    top: int
    buckets: int
    redacted: tuple[str, ...] = ()


@dataclass(frozen=True)
class Profile:
    """A profile document, read. `columns` keep the document's order; `joint` is None for a
    profile made without joint counts (an empty tuple: made with them, none counted)."""

    name: str
    rows: int
    created: str
    chainlint_version: str
    format_version: int
    source: Source
    settings: ProfileSettings
    columns: tuple[ColumnProfile, ...]
    joint: tuple[JointCounts, ...] | None = None

    @classmethod
    def from_document(cls, document: Mapping[str, Any]) -> Profile:
        """The view of a validated document (`documents.check_profile`) or of one the profiler
        has just made."""
        source = document["source"]
        settings = document["settings"]
        joint = document.get("joint")
        return cls(
            name=document["name"],
            rows=document["rows"],
            created=document["created"],
            chainlint_version=document["chainlint_version"],
            format_version=document["format_version"],
            source=Source(
                source["kind"],
                tuple(RecordedFile(f["path"], f.get("bytes")) for f in source["files"]),
                source["fingerprint"],
                None if "merged_from" not in source else tuple(source["merged_from"]),
            ),
            settings=ProfileSettings(settings["min_count"], settings["distinct_cap"], settings["top"],
                                     settings["buckets"], tuple(settings.get("redacted", ()))),
            columns=tuple(ColumnProfile.from_entry(name, entry) for name, entry in document["columns"].items()),
            joint=None if joint is None else tuple(
                JointCounts(tuple(entry["predicates"]), tuple((mask, count) for mask, count in entry["subsets"]),
                            None if "chains" not in entry else tuple(entry["chains"]))
                for entry in joint),
        )

    @cached_property
    def _index(self) -> dict[str, ColumnProfile]:
        return {column.name: column for column in self.columns}

    @property
    def by_name(self) -> Mapping[str, ColumnProfile]:
        """The columns by name (read-only)."""
        return MappingProxyType(self._index)

    def column(self, name: str) -> ColumnProfile | None:
        return self._index.get(name)

    def dtypes(self) -> dict[str, str]:
        """Column name -> the dtype pandas reads it as."""
        return {column.name: column.dtype for column in self.columns}
