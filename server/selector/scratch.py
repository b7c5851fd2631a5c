"""Scratch buffers the DP takes and gives back, so that repeated solves skip fresh-page faults.

Arrays of a megabyte or so, freed after every solve, go back to the operating system, and the
next solve's first write to each of their 4 KiB pages is a page fault. On a virtual machine a
fault costs a microsecond or two: for a plan of 50 initiatives over 90,000 capacity units that
was over half of the solve. A small pool keeps a few such buffers between solves instead. It
is shared by every thread under a lock and bounded (at most KEEP buffers of at most MAX_BYTES
each), so it never holds more than KEEP x MAX_BYTES however many threads solve.

A buffer that is never given back (an exception on the way) is simply freed by Python.
"""

from __future__ import annotations

import math
import threading

import numpy as np

KEEP = 6
MAX_BYTES = 8 << 20

_lock = threading.Lock()
_free: list[np.ndarray] = []


def take(dtype: np.dtype | type, shape: int | tuple[int, ...]) -> np.ndarray:
    """An array of dtype and shape with undefined contents, from the pool when one fits."""
    dtype = np.dtype(dtype)
    # math.prod, not np.prod: this runs twice per DP pass and np.prod costs microseconds
    size = (math.prod(shape) if isinstance(shape, tuple) else int(shape)) * dtype.itemsize
    buffer = None
    with _lock:
        best = -1
        for k, pooled in enumerate(_free):
            if pooled.nbytes >= size and (best < 0 or pooled.nbytes < _free[best].nbytes):
                best = k
        if best >= 0:
            buffer = _free.pop(best)
    if buffer is None:
        buffer = np.empty(max(size, 1), dtype=np.uint8)
    return np.ndarray(shape, dtype=dtype, buffer=buffer)


def give_back(array: np.ndarray) -> None:
    """Return an array from take to the pool; the caller keeps no view of it."""
    buffer = array.base
    while isinstance(buffer, np.ndarray) and buffer.base is not None:
        buffer = buffer.base
    if not isinstance(buffer, np.ndarray) or buffer.nbytes > MAX_BYTES:
        return
    with _lock:
        if any(b is buffer for b in _free):
            return
        if len(_free) >= KEEP:
            # Keep the larger ones: a small buffer is cheap to make again.
            smallest = min(range(len(_free)), key=lambda k: _free[k].nbytes)
            if _free[smallest].nbytes >= buffer.nbytes:
                return
            _free.pop(smallest)
        _free.append(buffer)


def pooled_bytes() -> int:
    """Bytes the pool holds now."""
    with _lock:
        return sum(b.nbytes for b in _free)


def clear() -> None:
    """Drop every pooled buffer (a memory measurement then sees a solve's whole working set)."""
    with _lock:
        _free.clear()
