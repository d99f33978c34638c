"""Partials in transit: a partial leaves its worker process only sealed, encrypted and
authenticated with AES-256-GCM (`cryptography`, a dependency of the `chainlint[dask]` extra)
under a random key made for the run. Until the client applies the privacy rule a partial holds
every value counted, rare ones too; sealed, what Dask sends between processes or spills to disk
reads as random bytes without the key, and a partial altered or sealed by another run is refused.
"""

from __future__ import annotations

import os
import pickle
from typing import Any

from cryptography.exceptions import InvalidTag
from cryptography.hazmat.primitives.ciphers.aead import AESGCM

from chainlint.profile.partial import Partial

_NONCE_BYTES = 12
_CONTEXT = b"chainlint partial profile"


class PartialKeyError(ValueError):
    """A sealed partial that the run's key did not seal, or that was altered."""


class Sealed:
    """A partial as a task returns it: the partial itself while it stays in the worker's
    memory, sealed whenever it is pickled (sent to another worker or the client, or spilled to
    disk). Each partial feeds one merge, which may change it in place."""

    __slots__ = ("_partial", "_key", "_sealed")

    def __init__(self, partial: Partial | None, key: bytes, sealed: bytes | None = None) -> None:
        self._partial, self._key, self._sealed = partial, key, sealed

    def __reduce__(self) -> tuple[Any, tuple[bytes]]:
        assert self._partial is not None or self._sealed is not None
        return _arrived, (self._sealed if self._sealed is not None else seal_partial(self._partial, self._key),)  # type: ignore[arg-type]

    def open(self, key: bytes) -> Partial:
        if self._partial is not None:
            return self._partial
        assert self._sealed is not None
        return open_partial(self._sealed, key)

    def __sizeof__(self) -> int:
        """About the bytes held (for Dask's memory accounting)."""
        if self._partial is None:
            return len(self._sealed or b"")
        held = 0
        for profiler in self._partial.profilers:
            counter = profiler.counter
            held += counter.counts.nbytes * 2 + (counter.values.nbytes if counter.values is not None else 0)
            if profiler.sample is not None:
                held += sum(values.nbytes + weights.nbytes for values, weights in profiler.sample.chunks)
        return held + 4096


def _arrived(sealed: bytes) -> Sealed:
    return Sealed(None, b"", sealed)


def seal_partial(partial: Partial, key: bytes) -> bytes:
    """The pickled partial under AES-256-GCM with the run's 32-byte key and a random nonce:
    nonce, then ciphertext and tag. (Measured here on the benchmark's 14 MB merged partial,
    pickling included: 0.07 s to seal and 0.1 s to open, against 0.3 s each with the SHAKE-256
    keystream and HMAC-SHA256 it replaced.)"""
    nonce = os.urandom(_NONCE_BYTES)
    return nonce + AESGCM(key).encrypt(nonce, pickle.dumps(partial, protocol=pickle.HIGHEST_PROTOCOL), _CONTEXT)


def open_partial(sealed: bytes, key: bytes) -> Partial:
    """A sealed partial's contents; PartialKeyError when `key` did not seal it or it was altered."""
    try:
        plain = AESGCM(key).decrypt(sealed[:_NONCE_BYTES], sealed[_NONCE_BYTES:], _CONTEXT)
    except (InvalidTag, ValueError):
        raise PartialKeyError("a partial profile was not sealed with this run's key") from None
    return pickle.loads(plain)  # authenticated: sealed by this run
