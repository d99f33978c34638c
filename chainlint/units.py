"""How every report writes times, so that one rule holds in every output."""

from __future__ import annotations


def duration(seconds: float) -> str:
    """Milliseconds below one second (`25.3 ms`), seconds from there (`1.25 s`)."""
    if seconds < 1:
        return f"{seconds * 1e3:.1f} ms"
    return f"{seconds:,.2f} s"

