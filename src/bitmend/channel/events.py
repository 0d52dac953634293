"""Where random events fall: a Bernoulli process read piece by piece, the same whatever the pieces.

Each fault model needs the places, on some clock (bit index, byte index, frame count, bits
spent in the bad state), where an event with per-tick probability p happens. Drawing a
coin per tick would cost per bit; instead the gaps between events are drawn, geometric on
{1, 2, ...}: gap = floor(log(1 - U) / log(1 - p)) + 1 for U uniform on [0, 1) (inversion
of the geometric distribution's tail P(gap > g) = (1 - p)^g). Gaps are drawn in batches of
a size fixed by p alone, never by how the stream happens to be cut into chunks, so a
generator seeded the same way gives the same event positions for any chunking, and the
cost follows the number of events, not the number of bits.
"""

from __future__ import annotations

import math

import numpy as np

NEVER = float(2 ** 62)  # a position no stream reaches: "no more events"


def batch_size(p: float) -> int:
    """Gaps drawn per batch: enough that a megabyte of stream needs few batches, few
    enough that a rare event does not draw a large useless batch. Depends on p only."""
    return int(min(1 << 16, max(1 << 10, p * (1 << 23))))


def geometric_gaps(u: np.ndarray, p: float) -> np.ndarray:
    """Gaps (>= 1, as float64) from uniforms u on [0, 1); p = 1 gives all ones, p = 0 NEVER."""
    if p >= 1.0:
        return np.ones(len(u))
    if p <= 0.0:
        return np.full(len(u), NEVER)
    gaps = np.floor(np.log1p(-u) / math.log1p(-p)) + 1.0
    return np.minimum(gaps, NEVER)


class Events:
    """Event positions of a Bernoulli(p) process on the ticks 0, 1, 2, ...

    `take(stop)` returns, in increasing order, the positions below stop that earlier calls
    have not returned. With `marks` > 0 every event also carries a random integer in
    [0, marks) (drawn in the same batches, so it too is independent of the chunking):
    `take` then returns (positions, marks)."""

    def __init__(self, p: float, rng: np.random.Generator, marks: int = 0, mark_low: int = 0) -> None:
        self.p = float(p)
        self._rng = rng
        self._batch = batch_size(self.p)
        self._marks = marks
        self._mark_low = mark_low
        self._last = -1.0  # position of the last event drawn so far
        self._pos: list[np.ndarray] = []  # drawn, not yet taken (pieces, in order)
        self._mark: list[np.ndarray] = []
        self._done = self.p <= 0.0  # no event will ever happen again

    def _draw(self) -> None:
        gaps = geometric_gaps(self._rng.random(self._batch), self.p)
        pos = self._last + np.cumsum(gaps)
        marks = self._rng.integers(self._mark_low, self._mark_low + self._marks, self._batch) if self._marks else None
        keep = int(np.searchsorted(pos, NEVER))
        if keep < self._batch:
            self._done = True
            pos = pos[:keep]
            marks = marks[:keep] if marks is not None else None
        if keep:
            self._last = float(pos[-1])
        self._pos.append(pos.astype(np.int64))
        if marks is not None:
            self._mark.append(marks)

    def take(self, stop: int):
        """Positions (and marks) of the events before tick `stop` not returned before."""
        while not self._done and self._last < stop:
            self._draw()
        pos = _join(self._pos)
        cut = int(np.searchsorted(pos, stop))
        self._pos = [pos[cut:]] if cut < len(pos) else []
        if not self._marks:
            return pos[:cut]
        mark = _join(self._mark)
        self._mark = [mark[cut:]] if cut < len(mark) else []
        return pos[:cut], mark[:cut]


def _join(pieces: list[np.ndarray]) -> np.ndarray:
    if not pieces:
        return np.empty(0, np.int64)
    return pieces[0] if len(pieces) == 1 else np.concatenate(pieces)
