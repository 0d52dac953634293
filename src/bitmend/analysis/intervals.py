"""Confidence intervals for a rate measured in trials that fail in clusters.

On a channel with memory (Gilbert-Elliott bursts, byte substitutions) the codewords of one
interleaved group, and the bits of one failed codeword, fail together: the events are not
independent trials, their count varies more than a binomial one (2-3x under bursts), and a
Clopper-Pearson interval built on the trial count is too narrow. Consecutive frames of a run
are nearly independent of one another, though, once they span more bits than the channel
remembers. So the run is cut into batches of consecutive frames (batch means: a long
stationary output split into batches whose sums are close to independent, e.g. A. M. Law,
Simulation Modeling and Analysis, ch. 9; B. Schmeiser, Operations Research 30(3), 1982 —
recalled from memory), and the rate's variance is estimated from the batch totals as for a
cluster sample (the ratio estimator, W. G. Cochran, Sampling Techniques, 3rd ed., ch. 6 —
recalled from memory):

    p = X / N,   v(p) = b / (b-1) * sum_j (x_j - p m_j)^2 / N^2

with b batches holding x_j events in m_j trials. The interval is then Clopper-Pearson on
an effective sample (E. L. Korn and B. I. Graubard, "Confidence intervals for proportions
with small expected number of positive counts estimated from survey data", Survey
Methodology 24(2), 1998 — recalled from memory):

    n* = min(N, p (1-p) / v(p)),   n*_df = n* (z_{a/2} / t_{b-1, a/2})^2,   x* = p n*_df,
    low = Beta^-1(a/2; x*, n*_df - x* + 1),   high = Beta^-1(1 - a/2; x* + 1, n*_df - x*).

It keeps Clopper-Pearson's good behaviour with few events, becomes Clopper-Pearson exactly
when the batches vary no more than a binomial (n* = N, many batches), and widens by the
design effect N / n* when they vary more. With no event at all (or every trial an event)
the variance cannot be estimated from the batches and the plain Clopper-Pearson interval on
N trials is returned: an upper bound of about 3/N, which clustering would widen by its
(unknown) design effect.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class ClusteredInterval:
    low: float
    high: float
    design_effect: float  # N / n*: how much more the batch totals vary than binomial counts
    effective_trials: float  # n*_df
    batches: int
    method: str  # "batch-means" or why it fell back to "clopper-pearson"


def clopper_pearson(events: float, trials: float, confidence: float = 0.95) -> tuple[float, float]:
    """Exact binomial interval, from the beta quantiles; events and trials may be non-integer
    (an effective sample)."""
    if trials <= 0:
        return 0.0, 1.0
    from scipy.stats import beta  # loaded only when an interval is computed

    alpha = 1.0 - confidence
    low = 0.0 if events <= 0 else float(beta.ppf(alpha / 2, events, trials - events + 1))
    high = 1.0 if events >= trials else float(beta.ppf(1 - alpha / 2, events + 1, trials - events))
    return low, high


class BatchTally:
    """Running sums of per-batch totals: X = sum x_j, N = sum m_j, b, and the exact integer
    sums sum x_j^2, sum x_j m_j, sum m_j^2 that the ratio estimator's variance needs. Memory
    is constant however many batches are added, and two tallies of disjoint batches merge
    by adding (`merge`), so runs split across workers combine exactly."""

    __slots__ = ("events", "trials", "batches", "xx", "xm", "mm")

    def __init__(self) -> None:
        self.events = self.trials = self.batches = self.xx = self.xm = self.mm = 0

    def add(self, events, trials) -> None:
        """Add batches: their event counts and trial counts (arrays of equal length, or scalars)."""
        x = np.atleast_1d(np.asarray(events, dtype=np.int64))
        m = np.atleast_1d(np.asarray(trials, dtype=np.int64))
        keep = m > 0
        x, m = x[keep], m[keep]
        self.events += int(x.sum())
        self.trials += int(m.sum())
        self.batches += int(x.size)
        # python ints: exact, so the variance below cancels without rounding
        self.xx += int(np.dot(x, x))
        self.xm += int(np.dot(x, m))
        self.mm += int(np.dot(m, m))

    def add_sparse(self, event_batches: np.ndarray, trials: np.ndarray, trials_sum: int, trials_squares: int,
                   batches: int) -> None:
        """Add a set of batches given as the batch index of each event (repeats allowed) and
        their trial counts `trials` (indexed by batch), with sum(trials), sum(trials^2) and
        the number of batches with trials worked out once by the caller: the cost follows the
        events, not the batches."""
        if event_batches is not None and len(event_batches):
            ids, counts = np.unique(np.asarray(event_batches), return_counts=True)
            counts = counts.astype(np.int64)
            self.events += int(counts.sum())
            self.xx += int(np.dot(counts, counts))
            self.xm += int(np.dot(counts, np.asarray(trials, dtype=np.int64)[ids]))
        self.trials += int(trials_sum)
        self.mm += int(trials_squares)
        self.batches += int(batches)

    def merge(self, other: "BatchTally") -> "BatchTally":
        for name in self.__slots__:
            setattr(self, name, getattr(self, name) + getattr(other, name))
        return self

    def interval(self, confidence: float = 0.95) -> ClusteredInterval:
        """The batch-means interval for X / N (see the module text)."""
        x, n, b = self.events, self.trials, self.batches
        if n <= 0:
            return ClusteredInterval(0.0, 1.0, 1.0, 0.0, b, "clopper-pearson (no trials)")
        if b < 2 or x <= 0 or x >= n:
            why = "fewer than two batches" if b < 2 else "no event" if x <= 0 else "every trial an event"
            low, high = clopper_pearson(x, n, confidence)
            return ClusteredInterval(low, high, 1.0, float(n), b, f"clopper-pearson ({why}: clustering not estimable)")
        p = x / n
        # sum_j (x_j - p m_j)^2 = (N^2 sum x^2 - 2 X N sum x m + X^2 sum m^2) / N^2, exactly in integers
        spread = (n * n * self.xx - 2 * x * n * self.xm + x * x * self.mm) / (n * n)
        variance = b / (b - 1) * spread / n ** 2
        binomial = p * (1.0 - p) / n
        effective = float(n) if variance <= binomial else p * (1.0 - p) / variance
        from scipy.stats import norm, t

        alpha = 1.0 - confidence
        # few batches make the variance itself uncertain: shrink the sample as a t quantile widens
        effective *= float(norm.ppf(1 - alpha / 2) / t.ppf(1 - alpha / 2, b - 1)) ** 2
        low, high = clopper_pearson(p * effective, effective, confidence)
        return ClusteredInterval(low, high, float(n / effective), effective, b, "batch-means")


def batch_means_interval(events: np.ndarray, trials: np.ndarray, confidence: float = 0.95) -> ClusteredInterval:
    """Interval for sum(events) / sum(trials) from per-batch totals (see the module text)."""
    tally = BatchTally()
    tally.add(events, trials)
    return tally.interval(confidence)


def batch_frames(memory_bits: float, frame_bits: int, frames: int, max_batches: int) -> int:
    """Frames per batch: enough that a batch spans at least `memory_bits` channel bits (so
    batch totals are close to independent), and few enough batches to bound memory."""
    by_memory = 1 if memory_bits <= 0 or frame_bits <= 0 else max(1, math.ceil(memory_bits / frame_bits))
    by_count = max(1, math.ceil(frames / max_batches))
    return max(by_memory, by_count)
