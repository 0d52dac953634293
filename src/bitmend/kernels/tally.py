"""Compiled count of a run's block statuses (the container's per-frame report figures)."""

from __future__ import annotations

import numpy as np

from bitmend.kernels.jit import njit
from bitmend.kernels.status import FAILED


@njit(cache=True)
def status_counts(status):
    """Per row of a C-contiguous (frames, blocks) uint8 status array: blocks corrected
    (0 < s < FAILED), symbols corrected (the sum of those s) and blocks failed (s == FAILED)."""
    return status_tally(status, np.int64(0))[0]  # not a literal 0: status_tally compiles once


@njit(cache=True)
def status_tally(status, limit):
    """status_counts, and the first `limit` indexes of failed blocks in each row (row i's
    are failed[i, :min(counts[i, 2], limit)]; the rest of `failed` is not written)."""
    return _tally(status, limit, status, False)


@njit(cache=True)
def tally_taken(status, limit, kept):
    """status_tally of a status buffer's rows, which are also copied to kept (same shape)
    and left zero: the one pass over a damaged run's statuses that hands them on and
    gives the buffer back (kernels/status.py taken_statuses)."""
    return _tally(status, limit, kept, True)


# SWAR constants: the seven low bits and the high bit of each byte, alternate bytes, a
# one in each byte (sums bytes into the top one), a one in each 16-bit lane
LOW7 = np.uint64(0x7F7F7F7F7F7F7F7F)
HIGH = np.uint64(0x8080808080808080)
PAIRS = np.uint64(0x00FF00FF00FF00FF)
ONES = np.uint64(0x0101010101010101)
LANES = np.uint64(0x0001000100010001)


@njit(cache=True)
def _tally(status, limit, kept, take):
    """status_tally; with take, each status is also copied to kept and cleared in status.

    Statuses are mostly zero even on a poor channel (a block is hit far less often than
    not), so each row is read eight statuses at a time as one word (its first and last
    few one by one, where rows do not begin on a word). A nonzero word is counted whole,
    with no branch per status: its nonzero bytes and its FAILED (255) bytes as the high
    bits of a SWAR test (Hacker's Delight 6-1, bytes that are zero), added up by one
    multiplication, and its byte sum by two; only a word holding a FAILED byte is read
    byte by byte, for the failed blocks' places. Against a branch per status of each
    nonzero word: 0.76 against 0.88 ms on a hamming-7-4 run at p = 1e-3 (72 rows of
    32,776 statuses, 0.7% hit), 0.38 against 0.61 ms on golay-24-12 (2.4% hit), 0.50
    against 0.47 ms at p = 1e-4."""
    rows, blocks = status.shape
    counts = np.zeros((rows, 3), dtype=np.int64)
    failed = np.empty((rows, max(limit, 1)), dtype=np.int32)
    flat = status.reshape(rows * blocks)
    copy = kept.reshape(rows * blocks)
    words = flat[: (flat.size // 8) * 8].view(np.uint64)
    copy_words = copy[: (flat.size // 8) * 8].view(np.uint64)
    for row in range(rows):
        begin = row * blocks
        end = begin + blocks
        first_word = (begin + 7) // 8
        end_word = max(first_word, end // 8)
        head_end = min(end, first_word * 8)
        zero = np.int64(0)  # not a literal 0: _tally_bytes compiles once for the counts
        corrected, symbols, lost = _tally_bytes(flat, copy, take, begin, head_end, failed, row, begin, limit,
                                                zero, zero, zero)
        for w in range(first_word, end_word):
            x = words[w]
            if take:
                copy_words[w] = x
            if x == 0:
                continue
            if take:
                words[w] = 0
            nonzero = (((x & LOW7) + LOW7) | x) & HIGH
            inverse = ~x
            full = ~(((inverse & LOW7) + LOW7) | inverse) & HIGH  # bytes of x that are FAILED (255)
            gone = np.int64(0)
            if full:
                gone = np.int64(((full >> np.uint64(7)) * ONES) >> np.uint64(56))
                for j in range(8 * w, 8 * w + 8):
                    if (copy[j] if take else flat[j]) == FAILED:
                        if lost < limit:
                            failed[row, lost] = j - begin
                        lost += 1
            pairs = (x & PAIRS) + ((x >> np.uint64(8)) & PAIRS)
            # np.int64, not int: numba's int() of a uint64 stays unsigned, and a uint64 added to
            # the int64 counts made them float64 (a float loop and a third compile of _tally_bytes)
            corrected += np.int64(((nonzero >> np.uint64(7)) * ONES) >> np.uint64(56)) - gone
            symbols += np.int64((pairs * LANES) >> np.uint64(48)) - FAILED * gone
        corrected, symbols, lost = _tally_bytes(flat, copy, take, max(head_end, end_word * 8), end, failed, row,
                                                begin, limit, corrected, symbols, lost)
        counts[row, 0] = corrected
        counts[row, 1] = symbols
        counts[row, 2] = lost
    return counts, failed


@njit(cache=True)
def _tally_bytes(flat, copy, take, start, stop, failed, row, begin, limit, corrected, symbols, lost):
    """_tally's count of statuses start .. stop-1 one by one (a row's few statuses before
    its first whole word and after its last); the row's counts so far in, updated out."""
    for j in range(start, stop):
        s = flat[j]
        if take:
            copy[j] = s
            flat[j] = 0
        if s == FAILED:
            if lost < limit:
                failed[row, lost] = j - begin
            lost += 1
        elif s:
            corrected += 1
            symbols += s
    return corrected, symbols, lost
