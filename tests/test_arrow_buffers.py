"""Reading Arrow buffers directly agrees with pyarrow's own conversions, and the string hash
follows its definition.

References: pyarrow's `Array.to_numpy` and `fill_null` (the library's own conversions), and a
plain-Python evaluation of the hash's formula (docstring of `hash_strings`).
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
from hypothesis import given
from hypothesis import strategies as st

from chainlint.arrays import filled_numpy, index_array, packed_bits, to_numpy
from chainlint.profile import sketches
from chainlint.profile.sketches import hash_strings

_TYPES = {
    "bool": (pa.bool_(), st.booleans()),
    "int8": (pa.int8(), st.integers(-128, 127)),
    "uint32": (pa.uint32(), st.integers(0, 2**32 - 1)),
    "int64": (pa.int64(), st.integers(-(2**63), 2**63 - 1)),
    "float32": (pa.float32(), st.floats(width=32, allow_nan=False)),
    "float64": (pa.float64(), st.floats(allow_nan=False)),
    "string": (pa.string(), st.text(max_size=12)),
}


@st.composite
def sliced_arrays(draw: st.DrawFn) -> pa.Array:
    arrow_type, values = _TYPES[draw(st.sampled_from(sorted(_TYPES)))]
    items = draw(st.lists(values, min_size=1, max_size=40))
    start = draw(st.integers(0, len(items) - 1))
    return pa.array(items, arrow_type).slice(start, draw(st.integers(0, len(items) - start)))


@given(sliced_arrays())
def test_to_numpy_equals_pyarrows_conversion(array: pa.Array) -> None:
    expected = array.to_numpy(zero_copy_only=False)
    got = to_numpy(array)
    assert got.dtype == expected.dtype and got.tolist() == expected.tolist()


@given(st.lists(sliced_arrays(), min_size=1, max_size=4))
def test_chunked_to_numpy_concatenates(arrays: list[pa.Array]) -> None:
    arrays = [a.cast(arrays[0].type) for a in arrays if a.type == arrays[0].type]
    chunked = pa.chunked_array(arrays, type=arrays[0].type)
    assert to_numpy(chunked).tolist() == chunked.to_numpy().tolist()


@given(st.lists(st.one_of(st.none(), st.integers(-1000, 1000)), min_size=1, max_size=40), st.integers(0, 39))
def test_filled_numpy_equals_fill_null(items: list[int | None], start: int) -> None:
    array = pa.array(items, pa.int32()).slice(min(start, len(items) - 1))
    assert filled_numpy(array, -1).tolist() == pc.fill_null(array, -1).to_numpy().tolist()


def test_index_array_takes_like_a_list() -> None:
    values = pa.array(["a", "b", "c", "d"])
    assert values.take(index_array(np.array([3, 0, 0]))).to_pylist() == ["d", "a", "a"]


def _reference_hash(text: str) -> int:
    """The formula of `hash_strings`, one string at a time with Python integers."""
    data, modulus = text.encode("utf-8"), 2**64
    h = sum(byte * pow(0x100000001B3, i, modulus) for i, byte in enumerate(data)) % modulus
    h ^= len(data) * 0x9E3779B97F4A7C15 % modulus
    x = (h & 0xFFFFFFFF) ^ (h >> 32)
    for shift, multiplier in ((16, 0x85EBCA6B), (13, 0xC2B2AE35)):  # MurmurHash3's fmix32
        x = ((x ^ (x >> shift)) * multiplier) & 0xFFFFFFFF
    return x ^ (x >> 16)


@given(st.lists(st.text(max_size=30), min_size=1, max_size=30), st.integers(0, 29), st.booleans())
def test_string_hash_follows_its_formula(texts: list[str], start: int, large: bool) -> None:
    array = pa.array(texts, pa.large_string() if large else pa.string()).slice(min(start, len(texts) - 1))
    expected = [_reference_hash(t) for t in array.to_pylist()]
    assert hash_strings(array).tolist() == expected
    assert hash_strings(array.dictionary_encode()).tolist() == expected


def test_string_hash_in_slices_is_the_same(monkeypatch) -> None:  # type: ignore[no-untyped-def]
    texts = [f"{'é' * (i % 9)}{i}" for i in range(300)]
    array = pa.array(texts).slice(7)
    monkeypatch.setattr(sketches, "_HASH_BYTES", 16)  # many slices, as a batch of long strings is cut
    assert hash_strings(array).tolist() == [_reference_hash(t) for t in texts[7:]]


@given(st.lists(st.booleans(), min_size=1, max_size=200), st.integers(0, 199), st.booleans())
def test_packed_bits_hold_the_mask_and_nothing_past_it(items: list[bool], start: int, as_numpy: bool) -> None:
    array = pa.array(items).slice(min(start, len(items) - 1))  # offsets on and off a byte
    mask = to_numpy(array) if as_numpy else array
    bits = np.unpackbits(packed_bits(mask).view(np.uint8), bitorder="little")
    assert bits[: len(array)].astype(bool).tolist() == array.to_pylist()
    assert not bits[len(array) :].any()
