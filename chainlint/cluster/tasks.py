"""What the workers run: thin calls into the profiler, taking and returning sealed partials.

Plain Python (no dask import), so that a worker unpickles a task without loading more than
chainlint's profiler and the sealing.
"""

from __future__ import annotations

from typing import Any

from chainlint.cluster.sealing import Sealed
from chainlint.profile.partial import count_piece, merge_partials
from chainlint.profile.pieces import Piece, file_digest


def hold(value: Any) -> Any:
    """A task returning its argument: what every task shares (layout, settings without keys,
    the joint counter), sent once and recomputable if the worker holding it is lost."""
    return value


def count(piece: Piece, context: tuple, key: bytes) -> Sealed:  # type: ignore[type-arg]
    layout, settings, expected_rows, joint = context
    return Sealed(count_piece(piece, layout, settings, expected_rows, joint), key)


def merge(earlier: Sealed, later: Sealed, key: bytes) -> Sealed:
    return Sealed(merge_partials(earlier.open(key), later.open(key)), key)


def digest(path: str) -> str:
    """One file's sha256, for the profile's fingerprint: read where the data is."""
    return file_digest(path)
