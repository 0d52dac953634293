"""Compiled count of a run's block statuses (the container's per-frame report figures)."""

from __future__ import annotations

import numpy as np

from bitmend.kernels.jit import njit
from bitmend.kernels.status import FAILED


@njit(cache=True)
def status_counts(status):
    """Per row of a C-contiguous (frames, blocks) uint8 status array: blocks corrected
    (0 < s < FAILED), symbols corrected (the sum of those s) and blocks failed (s == FAILED)."""
    return status_tally(status, 0)[0]


@njit(cache=True)
def status_tally(status, limit):
    """status_counts, and the first `limit` indexes of failed blocks in each row (row i's
    are failed[i, :min(counts[i, 2], limit)]; the rest of `failed` is not written).

    Statuses are mostly zero even on a poor channel (a block is hit far less often than
    not), so the array is read eight statuses at a time as one word and only the bytes of
    a nonzero word are looked at, wherever rows begin."""
    rows, blocks = status.shape
    counts = np.zeros((rows, 3), dtype=np.int64)
    failed = np.empty((rows, max(limit, 1)), dtype=np.int32)
    flat = status.reshape(rows * blocks)
    whole = flat.size // 8
    words = flat[: whole * 8].view(np.uint64)
    for w in range(whole):
        if words[w] == 0:
            continue
        for j in range(8 * w, 8 * w + 8):
            if flat[j]:
                _count(flat[j], j, blocks, limit, counts, failed)
    for j in range(8 * whole, flat.size):
        if flat[j]:
            _count(flat[j], j, blocks, limit, counts, failed)
    return counts, failed


@njit(cache=True, inline="always")
def _count(s, j, blocks, limit, counts, failed):
    row = j // blocks
    if s == FAILED:
        listed = counts[row, 2]
        if listed < limit:
            failed[row, listed] = j - row * blocks
        counts[row, 2] = listed + 1
    else:
        counts[row, 0] += 1
        counts[row, 1] += s
