"""Arrow arrays to and from numpy through their buffers.

pyarrow's `Array.to_numpy` and `pa.array(ndarray)` import pandas on first use: 0.2 s of a
profiling run that otherwise never needs it. These cover what the profiler meets: null-free
arrays of fixed-width numbers, booleans and strings.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc


def numpy_dtype(arrow_type: pa.DataType) -> np.dtype:
    if pa.types.is_boolean(arrow_type):
        return np.dtype(bool)
    if pa.types.is_integer(arrow_type):
        return np.dtype(f"{'i' if pa.types.is_signed_integer(arrow_type) else 'u'}{arrow_type.bit_width // 8}")
    if pa.types.is_floating(arrow_type):
        return np.dtype(f"f{arrow_type.bit_width // 8}")
    return np.dtype(object)


def to_numpy(array: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """A null-free array's values (zero-copy for numbers in one chunk; read-only then)."""
    if isinstance(array, pa.ChunkedArray):
        parts = [to_numpy(chunk) for chunk in array.chunks]
        if len(parts) == 1:
            return parts[0]
        return np.concatenate(parts) if parts else np.zeros(0, numpy_dtype(array.type))
    if array.null_count:
        raise ValueError("to_numpy takes arrays without nulls")
    arrow_type = array.type
    dtype = numpy_dtype(arrow_type)
    if pa.types.is_boolean(arrow_type):
        bits = np.frombuffer(array.buffers()[1], dtype=np.uint8)
        return np.unpackbits(bits, count=array.offset + len(array), bitorder="little")[array.offset :].astype(bool)
    if dtype.kind in "iuf":
        return np.frombuffer(array.buffers()[1], dtype=dtype, count=len(array), offset=array.offset * dtype.itemsize)
    return np.array(array.to_pylist(), dtype=object)


def filled_numpy(array: pa.Array, fill: int | float) -> np.ndarray:
    """A fixed-width numeric array's values with `fill` where it is null (read-only, and
    zero-copy, when it has no nulls)."""
    dtype = numpy_dtype(array.type)
    values = np.frombuffer(array.buffers()[1], dtype=dtype, count=len(array), offset=array.offset * dtype.itemsize)
    if array.null_count:
        values = values.copy()
        values[~to_numpy(pc.is_valid(array))] = fill
    return values


def packed_bits(mask: pa.Array | np.ndarray) -> np.ndarray:
    """A null-free boolean mask as little-endian bits in uint64 words, the bits past its end
    zero (Arrow's own bitmap when it starts on a byte; Arrow leaves padding bits undefined)."""
    rows = len(mask)
    if isinstance(mask, pa.Array):
        if mask.null_count:
            raise ValueError("packed_bits takes masks without nulls")
        if mask.offset % 8 == 0:
            start = mask.offset // 8
            raw = np.frombuffer(mask.buffers()[1], dtype=np.uint8)[start : start + (rows + 7) // 8]
        else:
            raw = np.packbits(to_numpy(mask), bitorder="little")
    else:
        raw = np.packbits(mask, bitorder="little")
    words = np.zeros((rows + 63) // 64 * 8, dtype=np.uint8)
    words[: raw.size] = raw
    if rows % 8:
        words[rows // 8] &= (1 << (rows % 8)) - 1
    return words.view(np.uint64)


def index_array(values: np.ndarray) -> pa.Array:
    """Positions as an Arrow int64 array (for `take`)."""
    values = np.ascontiguousarray(values, dtype=np.int64)
    return pa.Array.from_buffers(pa.int64(), len(values), [None, pa.py_buffer(values)])
