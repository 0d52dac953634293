"""Closed-form error rates of block codes on a binary symmetric channel (BSC, flip prob p).

All functions take plain numbers and weight distributions, so they serve `simulate`,
`plan` and `codes show` alike. References: S. Lin & D. J. Costello, Error Control Coding
(2nd ed.), ch. 3 and 10 (block error and undetected error of bounded-distance decoding);
MacWilliams & Sloane ch. 1. Sums run over the error tail directly, never as 1 - (...), so
small probabilities keep their precision.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import comb, exp, expm1, log1p


def _term(n: int, i: int, p: float) -> float:
    """C(n, i) p^i (1-p)^(n-i)."""
    if p == 0.0:
        return 1.0 if i == 0 else 0.0
    if p == 1.0:
        return 1.0 if i == n else 0.0
    return comb(n, i) * p ** i * exp((n - i) * log1p(-p))


def _power_term(n: int, e: int, p: float) -> float:
    """p^e (1-p)^(n-e) without 0^0 trouble."""
    if p == 0.0:
        return 1.0 if e == 0 else 0.0
    if p == 1.0:
        return 1.0 if e == n else 0.0
    return p ** e * exp((n - e) * log1p(-p))


def bsc_block_error(n: int, t: int, p: float) -> float:
    """P(more than t of n bits flip) = sum_{i>t} C(n,i) p^i (1-p)^(n-i): the block error
    rate of bounded-distance decoding (corrects every pattern of weight <= t, no other)."""
    return min(1.0, sum(_term(n, i, p) for i in range(t + 1, n + 1)))


def uncoded_block_error(k: int, p: float) -> float:
    """P(a k-bit block sent without coding arrives with any flip) = 1 - (1-p)^k."""
    return -expm1(k * log1p(-p)) if p < 1 else 1.0


def undetected_error(weights: tuple[int, ...], p: float) -> float:
    """P_ud = sum_{w>0} A_w p^w (1-p)^(n-w): a code used for detection only passes an error
    unnoticed exactly when the error pattern is a non-zero codeword."""
    n = len(weights) - 1
    return sum(a * _power_term(n, w, p) for w, a in enumerate(weights) if w > 0 and a)


def miscorrection(weights: tuple[int, ...], t: int, p: float) -> float:
    """P(bounded-distance decoding delivers a wrong codeword) on a BSC.

    The received word r = c + e is decoded to the codeword c' != c within distance t. With
    A_w codewords of weight w, the error patterns at distance s from one of them number
    sum_r C(w, s-r) C(n-w, r) with weight w - s + 2r, giving
    P = sum_{w>0} A_w sum_{s<=t} sum_{r<=s} C(w, s-r) C(n-w, r) p^(w-s+2r) (1-p)^(n-w+s-2r)
    (Lin & Costello, ch. 10)."""
    n = len(weights) - 1
    total = 0.0
    for w, a in enumerate(weights):
        if w == 0 or not a:
            continue
        for s in range(t + 1):
            for r in range(s + 1):
                if s - r > w or r > n - w:
                    continue
                e = w - s + 2 * r
                total += a * comb(w, s - r) * comb(n - w, r) * _power_term(n, e, p)
    return total


@dataclass(frozen=True)
class BlockOutcomes:
    """Per-codeword outcome probabilities of bounded-distance decoding on a BSC."""

    block_error: float  # anything but the right message: detected + undetected
    detected: float  # flagged as uncorrectable (status 255)
    undetected: float  # delivered wrong, caught only by the frame CRC

    def to_dict(self) -> dict:
        return {"block_error": self.block_error, "detected": self.detected, "undetected": self.undetected}


def block_outcomes(n: int, t: int, weights: tuple[int, ...], p: float) -> BlockOutcomes:
    """Split the block error rate into detected failures and miscorrections."""
    error = bsc_block_error(n, t, p)
    wrong = min(error, miscorrection(weights, t, p))
    return BlockOutcomes(error, max(0.0, error - wrong), wrong)


def frame_error(block_error: float, blocks: int) -> float:
    """P(at least one of `blocks` independent codewords fails) = 1 - (1 - P_B)^blocks."""
    if block_error >= 1.0:
        return 1.0
    return -expm1(blocks * log1p(-block_error))


def binomial_interval(events: int, trials: int, confidence: float = 0.95) -> tuple[float, float]:
    """Exact (Clopper-Pearson) interval for a rate seen as events in trials, from the beta
    distribution's quantiles (scipy)."""
    if trials <= 0:
        return 0.0, 1.0
    from scipy.stats import beta  # loaded only when intervals are asked for

    alpha = 1.0 - confidence
    low = 0.0 if events == 0 else float(beta.ppf(alpha / 2, events, trials - events + 1))
    high = 1.0 if events == trials else float(beta.ppf(1 - alpha / 2, events + 1, trials - events))
    return low, high


def gilbert_elliott_hit(bits: int, enter: float, leave: float, bad: float, good: float = 0.0) -> float:
    """P(at least one of `bits` consecutive bits flips) on a stationary Gilbert-Elliott chain
    (state good/bad; per bit the chain moves good -> bad with probability `enter` and
    bad -> good with `leave`; a bit flips with probability `good` or `bad` by state).

    With pi the stationary distribution, Q = diag(1 - flip) the chance a bit passes clean
    in each state and T the transition matrix, P(all clean) = pi Q (T Q)^(bits-1) 1, the
    forward recursion of the hidden Markov chain taken as a matrix power (log2(bits)
    products). Used for the uncoded line: a raw block or frame hit at least once."""
    if bits <= 0:
        return 0.0
    import numpy as np  # numpy is a core dependency; imported here to keep this module's import light

    total = enter + leave
    pi_bad = 0.0 if total == 0 else enter / total
    pi = np.array([1.0 - pi_bad, pi_bad])
    clean = np.diag([1.0 - good, 1.0 - bad])
    step = np.array([[1.0 - enter, enter], [leave, 1.0 - leave]])
    through = pi @ clean @ np.linalg.matrix_power(step @ clean, bits - 1)
    return float(min(1.0, max(0.0, 1.0 - through.sum())))


def symbol_error(p: float, symbol_bits: int = 8) -> float:
    """P(an s-bit symbol arrives wrong) on a BSC with bit flip probability p: at least one
    of its s bits flips, q = 1 - (1-p)^s."""
    return uncoded_block_error(symbol_bits, p)


def bsc_symbol_block_error(n: int, t: int, p: float, symbol_bits: int = 8) -> float:
    """Block error rate on a BSC of a code of n symbols of s bits that corrects any t symbol
    errors (Reed-Solomon over GF(2^8): s = 8) with bounded-distance decoding. Bit flips are
    independent, so symbols are wrong independently with q = symbol_error(p, s), and
    P_B = sum_{i>t} C(n,i) q^i (1-q)^(n-i)."""
    return bsc_block_error(n, t, symbol_error(p, symbol_bits))
