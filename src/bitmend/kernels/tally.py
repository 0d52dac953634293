"""Compiled count of a run's block statuses (the container's per-frame report figures)."""

from __future__ import annotations

import numpy as np
from bitmend.kernels.jit import njit

from bitmend.kernels.status import FAILED


@njit(cache=True)
def status_counts(status):
    """Per row of a C-contiguous (frames, blocks) uint8 status array: blocks corrected
    (0 < s < FAILED), symbols corrected (the sum of those s) and blocks failed
    (s == FAILED). Statuses are mostly zero even on a poor channel (a block is hit far
    less often than not), so the array is read eight statuses at a time as one word and
    only the bytes of a nonzero word are looked at, wherever rows begin."""
    rows, blocks = status.shape
    out = np.zeros((rows, 3), dtype=np.int64)
    flat = status.reshape(rows * blocks)
    whole = flat.size // 8
    words = flat[: whole * 8].view(np.uint64)
    for w in range(whole):
        if words[w] == 0:
            continue
        for j in range(8 * w, 8 * w + 8):
            _count(flat[j], j // blocks, out)
    for j in range(8 * whole, flat.size):
        if flat[j]:
            _count(flat[j], j // blocks, out)
    return out


@njit(cache=True, inline="always")
def _count(s, row, out):
    if s == FAILED:
        out[row, 2] += 1
    elif s:
        out[row, 0] += 1
        out[row, 1] += s
