"""Deterministic, mergeable summaries for columns with too many distinct values to count.

- `HyperLogLog`: distinct count with the published standard error 1.04/sqrt(m) (Flajolet,
  Fusy, Gandouet & Meunier 2007); registers merge by maximum. Vectorised with numpy: values
  are hashed with fixed functions of chainlint's own (no library's hash, whose output may
  change between versions), so the same data always gives the same registers.
- `seal` / `unseal`: the registers as a profile stores them, encrypted under the store's sketch
  key. Registers built with a public hash let anyone holding a profile test candidate values
  (a value's register proves absence and suggests presence); sealed, they read as random bytes
  to whoever lacks the key. Deterministic (the nonce is a keyed MAC of the registers, as in
  SIV), so the same data under the same key gives the same text; the MAC also catches a wrong
  key on merging.
- `WeightedSample`: a bounded set of weighted points for quantiles and frequent values: every
  `stride`-th value with weight `stride`; when full, it is compacted to equally spaced weighted
  quantiles and the stride doubles. Each compaction adds at most 2/capacity of rank error,
  which the summary tracks (`rank_error`); the systematic pick itself is a sample, not a bound.
"""

from __future__ import annotations

import base64
import hashlib
import hmac

import numpy as np
import pyarrow as pa

from chainlint.arrays import to_numpy
from chainlint.model import ChainlintError

HLL_PRECISION = 12
_STRING_BASE = np.uint64(0x100000001B3)
_LENGTH_MIX = np.uint64(0x9E3779B97F4A7C15)
_HASH_BYTES = 1 << 22
_RANK_BITS = 32 - HLL_PRECISION


def hash32(values: np.ndarray) -> np.ndarray:
    """A fixed 32-bit hash of integer or float bit patterns: the two halves of the 64-bit
    pattern folded, then MurmurHash3's finaliser (fmix32), in place on one new array. 32-bit
    lanes halve the memory traffic of the mix, which is most of the profiling time of
    near-unique numeric columns."""
    if values.dtype.kind == "f":
        bits = np.add(values.astype(np.float64, copy=False), 0.0)  # -0.0 + 0.0 is +0.0
    else:
        bits = np.ascontiguousarray(values.astype(np.int64, copy=False))
    halves = bits.view(np.uint32).reshape(-1, 2)  # xor is symmetric: byte order does not matter
    return _fmix32(np.bitwise_xor(halves[:, 0], halves[:, 1]))


def _fmix32(h: np.ndarray) -> np.ndarray:
    scratch = np.empty_like(h)
    with np.errstate(over="ignore"):
        for shift, multiplier in ((16, 0x85EBCA6B), (13, 0xC2B2AE35)):
            np.right_shift(h, np.uint32(shift), out=scratch)
            h ^= scratch
            h *= np.uint32(multiplier)
        np.right_shift(h, np.uint32(16), out=scratch)
        h ^= scratch
    return h


def hash_strings(array: pa.Array) -> np.ndarray:
    """A fixed 32-bit hash of each string's UTF-8 bytes, vectorised over the Arrow buffers (no
    Python object per value): the polynomial sum of byte * B**position mod 2**64 with B the
    64-bit FNV prime, the length mixed in, then folded and mixed as `hash32` does. Takes a
    null-free string array; a dictionary array hashes its dictionary once."""
    if isinstance(array, pa.DictionaryArray):
        return hash_strings(array.dictionary)[to_numpy(array.indices)]
    width = np.dtype(np.int64 if pa.types.is_large_string(array.type) else np.int32)
    _, offset_buffer, data_buffer = array.buffers()
    offsets = np.frombuffer(offset_buffer, dtype=width, count=len(array) + 1, offset=array.offset * width.itemsize).astype(np.int64)
    first = int(offsets[0])
    offsets -= first
    if offsets[-1] > _HASH_BYTES and len(array) > 1:  # the temporaries take 40 bytes per byte hashed
        half = len(array) // 2
        return np.concatenate([hash_strings(array.slice(0, half)), hash_strings(array.slice(half))])
    lengths = np.diff(offsets)
    data = np.frombuffer(data_buffer, dtype=np.uint8, count=int(offsets[-1]), offset=first) if offsets[-1] else np.zeros(0, np.uint8)
    longest = int(lengths.max()) if lengths.size else 0
    powers = np.full(max(longest, 1), _STRING_BASE, dtype=np.uint64)
    powers[0] = 1
    powers = np.cumprod(powers, dtype=np.uint64)  # B**0, B**1, ... (mod 2**64)
    position = np.arange(data.size, dtype=np.int64) - np.repeat(offsets[:-1], lengths)
    running = np.concatenate([np.zeros(1, np.uint64), np.cumsum(data.astype(np.uint64) * powers[position], dtype=np.uint64)])
    sums = running[offsets[1:]] - running[offsets[:-1]]
    sums ^= lengths.astype(np.uint64) * _LENGTH_MIX
    halves = sums.view(np.uint32).reshape(-1, 2)
    return _fmix32(np.bitwise_xor(halves[:, 0], halves[:, 1]))


class HyperLogLog:
    __slots__ = ("registers",)

    def __init__(self, registers: np.ndarray | None = None) -> None:
        self.registers = registers if registers is not None else np.zeros(1 << HLL_PRECISION, dtype=np.uint8)

    def add_hashes(self, hashes: np.ndarray) -> None:
        if hashes.size == 0:
            return
        index = np.bitwise_and(hashes, np.uint32((1 << HLL_PRECISION) - 1)).astype(np.intp)
        # Rank: 1 + leading zeros of the other 20 bits; frexp(0.0) gives exponent 0, rank 21.
        _, exponent = np.frexp(np.right_shift(hashes, np.uint32(HLL_PRECISION)).astype(np.float32))
        np.subtract(_RANK_BITS + 1, exponent, out=exponent)
        np.maximum.at(self.registers, index, exponent.astype(np.uint8))

    def merge(self, other: HyperLogLog) -> HyperLogLog:
        return HyperLogLog(np.maximum(self.registers, other.registers))

    def estimate(self) -> float:
        m = float(self.registers.size)
        alpha = 0.7213 / (1 + 1.079 / m)
        raw = alpha * m * m / float(np.sum(np.power(2.0, -self.registers.astype(np.float64))))
        zeros = int(np.count_nonzero(self.registers == 0))
        if raw <= 2.5 * m and zeros:
            return m * np.log(m / zeros)
        space = 2.0**32
        if raw > space / 30:
            # Flajolet et al.'s large-range correction for 32-bit hashes.
            return -space * np.log(1 - raw / space)
        return raw

    @staticmethod
    def standard_error() -> float:
        return 1.04 / np.sqrt(1 << HLL_PRECISION)



_TAG_BYTES = 16
_REGISTER_BITS = 5  # ranks reach 32 - HLL_PRECISION + 1 = 21
SEALED_BYTES = _TAG_BYTES + (1 << HLL_PRECISION) * _REGISTER_BITS // 8


class SketchKeyError(ChainlintError, ValueError):
    """A sealed sketch that this key did not seal (or that was altered)."""


def seal(sketch: HyperLogLog, key: bytes, column: str) -> str:
    """The registers packed in 5 bits each (a fixed length: a compressed length would tell how
    many are set), encrypted with a keystream drawn from a MAC of themselves; base64."""
    packed = np.packbits(np.unpackbits(sketch.registers[:, None], axis=1)[:, 8 - _REGISTER_BITS :]).tobytes()
    tag = hmac.new(_subkey(key, b"tag"), _column_bytes(column) + packed, hashlib.sha256).digest()[:_TAG_BYTES]
    return base64.b64encode(tag + _xor(packed, _keystream(key, tag, len(packed)))).decode("ascii")


def unseal(text: str, key: bytes, column: str) -> HyperLogLog:
    """The registers of a sealed sketch; SketchKeyError when `key` did not seal it for `column`."""
    raw = base64.b64decode(text.encode("ascii"), validate=True)
    if len(raw) != SEALED_BYTES:
        raise ValueError("distinct-count sketch has the wrong size")
    tag, body = raw[:_TAG_BYTES], raw[_TAG_BYTES:]
    packed = _xor(body, _keystream(key, tag, len(body)))
    expected = hmac.new(_subkey(key, b"tag"), _column_bytes(column) + packed, hashlib.sha256).digest()[:_TAG_BYTES]
    if not key or not hmac.compare_digest(tag, expected):
        raise SketchKeyError("the distinct-count sketch was sealed with another key")
    bits = np.unpackbits(np.frombuffer(packed, dtype=np.uint8)).reshape(-1, _REGISTER_BITS)
    registers = np.packbits(np.pad(bits, ((0, 0), (8 - _REGISTER_BITS, 0))), axis=1).ravel()
    return HyperLogLog(registers)


def _subkey(key: bytes, purpose: bytes) -> bytes:
    return hmac.new(key, b"chainlint sketch " + purpose, hashlib.sha256).digest()


def _column_bytes(column: str) -> bytes:
    return column.encode("utf-8", "surrogatepass") + b"\0"


def _keystream(key: bytes, tag: bytes, size: int) -> bytes:
    stream = _subkey(key, b"stream")
    blocks = [hmac.new(stream, tag + i.to_bytes(4, "big"), hashlib.sha256).digest() for i in range(-(-size // 32))]
    return b"".join(blocks)[:size]


def _xor(data: bytes, stream: bytes) -> bytes:
    return (np.frombuffer(data, dtype=np.uint8) ^ np.frombuffer(stream, dtype=np.uint8)).tobytes()


class WeightedSample:
    """Weighted points standing for the non-null values seen; bounded by `capacity`."""

    def __init__(self, capacity: int = 1 << 16, expected: int = 0) -> None:
        """`expected`: the number of values to come, when known, so that the stride can start
        where no compaction will be needed."""
        self.capacity = capacity
        self.stride = max(1, -(-expected // capacity))
        self.offset = 0
        self.chunks: list[tuple[np.ndarray, np.ndarray]] = []
        self.size = 0
        self.rank_error = 0.0

    def add(self, values: np.ndarray) -> None:
        """Add a batch of non-null values: every `stride`-th one, continuing across batches."""
        if values.size == 0:
            return
        picked = values[self.strided(values.size)].copy()  # a view would keep the whole batch alive
        self.add_weighted(picked, np.full(picked.size, float(self.stride)))

    def strided(self, count: int) -> slice:
        """Which of the next `count` values to keep: every `stride`-th, continuing across batches."""
        start = (-self.offset) % self.stride
        self.offset = (self.offset + count) % self.stride
        return slice(start, count, self.stride)

    def add_weighted(self, values: np.ndarray, weights: np.ndarray) -> None:
        if values.size == 0:
            return
        self.chunks.append((values, weights))
        self.size += values.size
        if self.size > self.capacity:
            self.compact()

    def points(self) -> tuple[np.ndarray, np.ndarray]:
        if not self.chunks:
            return np.array([]), np.array([])
        values = np.concatenate([c[0] for c in self.chunks])
        weights = np.concatenate([c[1] for c in self.chunks])
        order = np.argsort(values, kind="stable")
        return values[order], weights[order]

    def compact(self) -> None:
        values, weights = self.points()
        keep = self.capacity // 2
        total = weights.sum()
        targets = (np.arange(keep) + 0.5) * (total / keep)
        positions = np.searchsorted(np.cumsum(weights), targets, side="left")
        positions = np.minimum(positions, values.size - 1)
        self.chunks = [(values[positions], np.full(keep, total / keep))]
        self.size = keep
        self.rank_error += 1.0 / keep
        self.stride *= 2
