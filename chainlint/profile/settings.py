"""What a profile is made with: the privacy threshold, the exact-counting cap, the lengths of
its lists, the redacted columns and the store's keys."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class Settings:
    min_count: int = 5
    distinct_cap: int = 10_000
    top: int = 100
    buckets: int = 100
    redact: frozenset[str] = frozenset()
    redaction_key: bytes = b""
    sketch_key: bytes = b""  # without one no sketch is written (it would be readable by all)

    def written(self) -> dict[str, Any]:
        """The `settings` a profile records (the keys stay in the store, never in a profile)."""
        return {
            "min_count": self.min_count,
            "distinct_cap": self.distinct_cap,
            "top": self.top,
            "buckets": self.buckets,
            "redacted": sorted(self.redact),
        }
