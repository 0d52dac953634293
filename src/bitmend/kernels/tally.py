"""Compiled count of a run's block statuses (the container's per-frame report figures)."""

from __future__ import annotations

import numpy as np
from numba import njit

from bitmend.kernels.status import FAILED


@njit(cache=True)
def status_counts(status):
    """Per row of a (frames, blocks) uint8 status array: blocks corrected (0 < s < FAILED),
    symbols corrected (the sum of those s) and blocks failed (s == FAILED), one pass."""
    rows, blocks = status.shape
    out = np.zeros((rows, 3), dtype=np.int64)
    for i in range(rows):
        corrected = 0
        symbols = 0
        failed = 0
        for j in range(blocks):  # branch-free, so the loop vectorizes
            s = np.int64(status[i, j])
            bad = np.int64(s == FAILED)
            failed += bad
            corrected += np.int64(s != 0) - bad
            symbols += s * (1 - bad)
        out[i, 0] = corrected
        out[i, 1] = symbols
        out[i, 2] = failed
    return out
