"""How many errors one interleaved codeword sees on a channel, and what decoding leaves.

A codeword interleaved at depth D occupies every D-th bit of its group on the wire
(docs/FORMAT.md, coded segments), so what matters for decoding is the distribution of the
number of errors among n channel bits taken D apart. This module computes that
distribution for the channel models bitmend knows, and the residual rates of
bounded-distance decoding that follow from it. Plain numbers in, numpy arrays and floats
out; the models' meaning is that of `bitmend.channel.models`.

- Binary symmetric channel: Binomial(n, p), whatever D.
- Gilbert-Elliott chain (good/bad states; per bit the chain moves good -> bad with
  probability `enter`, bad -> good with `leave`; a bit flips with `good` or `bad` by
  state): exact, by a forward recursion over the n sampled bits with the D-step transition
  matrix T^D = Pi + lambda^D (I - Pi), lambda = 1 - enter - leave, starting from the
  stationary state (Pi: rows equal to the stationary distribution).
- Byte substitutions (each byte replaced by one of the 255 other values): a codeword's
  bits taken D apart share a byte in runs of at most ceil(8/D); the runs are treated as
  whole and hit independently (exact for D >= 8, where every bit lies in its own byte;
  otherwise it errs on the side of more errors per codeword).
- Several flip channels in a chain: their error counts are added (a convolution). Two
  flips on the same bit cancel, so the true count is never larger: an upper bound.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import comb, exp, expm1, log1p

import numpy as np


def bsc_error_counts(n: int, p: float) -> np.ndarray:
    """counts[i] = C(n, i) p^i (1-p)^(n-i), i = 0..n."""
    _check_probability("p", p)
    if p == 0.0:
        return _point(n, 0)
    if p == 1.0:
        return _point(n, n)
    log_q = log1p(-p)
    return np.array([comb(n, i) * p ** i * exp((n - i) * log_q) for i in range(n + 1)])


def _point(n: int, i: int) -> np.ndarray:
    out = np.zeros(n + 1)
    out[i] = 1.0
    return out


def gilbert_elliott_steps(enter: float, leave: float, steps: int | np.ndarray) -> np.ndarray:
    """T^steps for the two-state chain (state 0 good, 1 bad), computed in closed form so
    that tiny transition probabilities keep their precision; for an array of step counts,
    one 2 x 2 matrix per count."""
    counts = np.asarray(steps, dtype=float)
    total = enter + leave
    if total == 0.0:
        return np.broadcast_to(np.eye(2), counts.shape + (2, 2)).copy()
    pi_bad = enter / total
    # 1 - lambda^steps without cancellation when lambda = 1 - enter - leave is close to 1
    decay = -np.expm1(counts * log1p(-total)) if total < 1.0 else 1.0 - (1.0 - total) ** counts
    move_to_bad = pi_bad * decay
    move_to_good = (1.0 - pi_bad) * decay
    return np.stack([np.stack([1.0 - move_to_bad, move_to_bad], -1),
                     np.stack([move_to_good, 1.0 - move_to_good], -1)], -2)


def _chain_setup(depths, enter: float, leave: float, bad: float, good: float) -> tuple[np.ndarray, float]:
    """Checked chain parameters: the depths as a 1-D array (each at least 1) and the
    stationary chance pi_bad = enter / (enter + leave) of the bad state."""
    for name, value in (("enter", enter), ("leave", leave), ("bad", bad), ("good", good)):
        _check_probability(name, value)
    depths = np.asarray(depths, dtype=np.int64).reshape(-1)
    if depths.size and depths.min() < 1:
        raise ValueError(f"depth must be at least 1, got {depths.min()}")
    total = enter + leave
    return depths, 0.0 if total == 0.0 else enter / total


def gilbert_elliott_error_counts_by_depth(n: int, depths: np.ndarray | list[int], enter: float, leave: float,
                                          bad: float, good: float = 0.0) -> np.ndarray:
    """One row per depth: the distribution of the number of flips among n bits taken
    `depth` apart from a stationary Gilbert-Elliott chain (exact). All depths advance
    together through the n-step recursion."""
    depths, pi_bad = _chain_setup(depths, enter, leave, bad, good)
    flip = np.array([good, bad])
    step = gilbert_elliott_steps(enter, leave, depths)  # (depths, 2, 2)
    f = np.zeros((len(depths), 2, n + 1))  # f[depth, state, errors so far]
    f[:, 0, 0], f[:, 1, 0] = 1.0 - pi_bad, pi_bad
    for j in range(n):
        shifted = np.zeros_like(f)
        shifted[:, :, 1:] = f[:, :, :-1]
        f = f * (1.0 - flip)[None, :, None] + shifted * flip[None, :, None]
        if j < n - 1:
            f = np.matmul(step.transpose(0, 2, 1), f)  # next state t from state s: step[s, t]
    return f.sum(axis=1)


def gilbert_elliott_error_counts(n: int, depth: int, enter: float, leave: float, bad: float,
                                 good: float = 0.0) -> np.ndarray:
    """Distribution of the number of flips among n bits taken `depth` apart from a
    stationary Gilbert-Elliott chain (exact)."""
    return gilbert_elliott_error_counts_by_depth(n, [depth], enter, leave, bad, good)[0]


def gilbert_elliott_symbol_error_counts_by_depth(n: int, symbol_bits: int, depths: np.ndarray | list[int],
                                                 enter: float, leave: float, bad: float,
                                                 good: float = 0.0) -> np.ndarray:
    """One row per depth: the number of wrong symbols among a codeword's n symbols of
    `symbol_bits` consecutive bits each, its symbols `depth` symbols apart (symbol j of
    the codeword starts depth * symbol_bits bits after symbol j - 1), on a stationary
    Gilbert-Elliott chain (exact). A symbol is wrong when any of its bits flips.

    Per symbol, with Q = diag(1 - flip) and T the one-bit transition matrix,
    K = Q (T Q)^(s-1) carries the chain through s clean bits and T^(s-1) - K through the
    rest; between symbols the chain takes the remaining D s - s + 1 steps."""
    depths, pi_bad = _chain_setup(depths, enter, leave, bad, good)
    one = gilbert_elliott_steps(enter, leave, 1)
    clean = np.diag([1.0 - good, 1.0 - bad])
    through_clean = clean.copy()
    for _ in range(symbol_bits - 1):
        through_clean = through_clean @ one @ clean
    through_hit = gilbert_elliott_steps(enter, leave, symbol_bits - 1) - through_clean
    gap = gilbert_elliott_steps(enter, leave, depths * symbol_bits - symbol_bits + 1)  # (depths, 2, 2)
    f = np.zeros((len(depths), 2, n + 1))  # f[depth, state at the symbol's first bit, wrong so far]
    f[:, 0, 0], f[:, 1, 0] = 1.0 - pi_bad, pi_bad
    for j in range(n):
        # (depth, end state, count): clean symbols keep the count, hit ones add one
        kept = np.einsum("ab,dae->dbe", through_clean, f)
        hit = np.einsum("ab,dae->dbe", through_hit, f)
        f = kept
        f[:, :, 1:] += hit[:, :, :-1]
        f[:, :, -1] += hit[:, :, -1]  # (never reached: at most n symbols are wrong)
        if j < n - 1:
            f = np.matmul(gap.transpose(0, 2, 1), f)
    return f.sum(axis=1)


def byte_substitution_error_counts(n: int, depth: int, p: float) -> np.ndarray:
    """Distribution of flips in a codeword interleaved at `depth` when each byte is
    replaced with probability p by one of the 255 other byte values (uniformly)."""
    _check_probability("p", p)
    if depth < 1:
        raise ValueError(f"depth must be at least 1, got {depth}")
    return _byte_counts(n, min(n, -(-8 // depth)), p)


def byte_substitution_error_counts_by_depth(n: int, depths: np.ndarray | list[int], p: float) -> np.ndarray:
    """byte_substitution_error_counts for each depth, one row per depth (depths >= 8 share
    one distribution)."""
    _check_probability("p", p)
    runs = [min(n, -(-8 // int(d))) for d in depths]
    if runs and min(int(d) for d in depths) < 1:
        raise ValueError("depth must be at least 1")
    table = {run: _byte_counts(n, run, p) for run in set(runs)}
    return np.array([table[run] for run in runs]).reshape(len(runs), n + 1)


def _byte_counts(n: int, run: int, p: float) -> np.ndarray:
    """Flips among n bits that share bytes in runs of `run` (the last run shorter)."""

    def run_counts(s: int) -> np.ndarray:
        # the XOR mask of a substitution is uniform over the 255 non-zero bytes; a given
        # pattern on s of its bits is shared by 2^(8-s) masks (one fewer for all-zero)
        hit = np.array([comb(s, j) * 2 ** (8 - s) for j in range(s + 1)], dtype=float)
        hit[0] -= 1
        out = p * hit / 255
        out[0] += 1.0 - p
        return out

    counts = np.ones(1)
    full, rest = divmod(n, run)
    one_run = run_counts(run)
    for _ in range(full):
        counts = np.convolve(counts, one_run)
    if rest:
        counts = np.convolve(counts, run_counts(rest))
    return counts[: n + 1]


def add_error_counts(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Counts of the sum of two independent error counts on the same n bits, the excess
    above n folded into n (an upper bound on the errors of the combined pattern). Either
    may be one distribution or a stack of them (one row per depth)."""
    if np.ndim(a) == 2 or np.ndim(b) == 2:
        a2, b2 = np.atleast_2d(a), np.atleast_2d(b)
        rows = max(len(a2), len(b2))
        a2, b2 = np.broadcast_to(a2, (rows, a2.shape[1])), np.broadcast_to(b2, (rows, b2.shape[1]))
        return np.array([add_error_counts(x, y) for x, y in zip(a2, b2)])
    n = len(a) - 1
    total = np.convolve(a, b)
    out = total[: n + 1].copy()
    out[n] += total[n + 1:].sum()
    return out


def miscorrecting_patterns(weights: tuple[int, ...] | list[int], t: int) -> list[int]:
    """N[i]: how many error patterns of weight i bounded-distance decoding turns into a
    wrong codeword, i.e. lie within distance t of a non-zero codeword.

    A pattern at distance s from a codeword c of weight w turns off a of c's ones and turns
    on b of its zeros (a + b = s, weight w - a + b); the spheres of radius t are disjoint
    because d >= 2t + 1, so N[i] = sum_w A_w sum_{a+b<=t, w-a+b=i} C(w, a) C(n-w, b).
    Summed with p^i (1-p)^(n-i) this is the miscorrection probability on a BSC
    (`theory.miscorrection`)."""
    n = len(weights) - 1
    out = [0] * (n + 1)
    for w, a_w in enumerate(weights):
        if w == 0 or not a_w:
            continue
        for a in range(min(w, t) + 1):
            for b in range(min(n - w, t - a) + 1):
                out[w - a + b] += a_w * comb(w, a) * comb(n - w, b)
    return out


@dataclass(frozen=True)
class CodewordOutcome:
    """What bounded-distance decoding does with one codeword, given its error counts."""

    block_error: float  # more than t errors: anything but the right message
    miscorrected: float  # of those, decoded to a wrong codeword (caught only by the frame CRC)
    detected: float  # of those, flagged uncorrectable
    bit_error: float  # expected wrong message bits per message bit after decoding

    def to_dict(self) -> dict:
        return {"block_error": self.block_error, "miscorrected": self.miscorrected, "detected": self.detected,
                "bit_error": self.bit_error}


def codeword_outcome(counts: np.ndarray, t: int, weights: tuple[int, ...] | list[int] | None) -> CodewordOutcome:
    """Outcome of decoding a codeword whose error count has distribution `counts`.

    Given i > t errors, placed uniformly among the n positions (exact on a BSC), the
    decoder miscorrects with probability m_i = N_i / C(n, i) (`miscorrecting_patterns`).
    A detected block keeps its i errors; a miscorrected one ends at most t further away,
    with at most min(n, i + t). Errors fall on message bits in proportion k/n, so per
    message bit:  P_bit = (1/n) sum_{i>t} P(i) (i + m_i (min(n, i + t) - i)).
    Without a weight distribution (weights None) every failure counts as a miscorrection
    (m_i = 1), which bounds the bit error from above."""
    block, wrong, bits = codeword_outcomes(np.asarray(counts)[None, :], t, weights)
    return CodewordOutcome(float(block[0]), float(wrong[0]), max(0.0, float(block[0] - wrong[0])), float(bits[0]))


def codeword_outcomes(counts: np.ndarray, t: int, weights: tuple[int, ...] | list[int] | None,
                      wrong_bit_share: float = 1.0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """codeword_outcome for a stack of distributions (one row each): arrays of block
    error, miscorrected and bit error. For a code over symbols of several bits, counts
    are of wrong symbols, weights must be None (the binary pattern count does not apply)
    and wrong_bit_share is the share of a wrong symbol's bits taken as wrong."""
    counts = np.atleast_2d(counts)
    n = counts.shape[1] - 1
    errors = np.arange(t + 1, n + 1)
    if weights is None:
        share = np.ones(len(errors))
    else:
        if len(weights) != n + 1:
            raise ValueError(f"weights cover length {len(weights) - 1}, counts length {n}")
        wrong_patterns = miscorrecting_patterns(weights, t)
        share = np.array([wrong_patterns[i] / comb(n, i) for i in range(t + 1, n + 1)])
    tail = counts[:, t + 1:]
    block = np.minimum(1.0, tail.sum(axis=1))
    wrong = np.minimum(block, tail @ share)
    bits = np.minimum(1.0, wrong_bit_share * (tail @ (errors + share * (np.minimum(n, errors + t) - errors))) / n)
    return block, wrong, bits


def burst_length_quantile(leave: float, length: int) -> float:
    """P(a bad spell lasts at most `length` bits) for the geometric spell length of a
    Gilbert-Elliott chain: 1 - (1 - leave)^length."""
    _check_probability("leave", leave)
    if leave == 0.0:
        return 0.0
    if leave == 1.0:
        return 1.0 if length >= 1 else 0.0
    return -expm1(length * log1p(-leave))


def burst_length_for_quantile(leave: float, quantile: float) -> float:
    """The spell length (bits) that a share `quantile` of bad spells do not exceed."""
    _check_probability("leave", leave)
    if not 0.0 <= quantile < 1.0:
        raise ValueError(f"quantile must be in [0, 1), got {quantile}")
    if leave == 0.0:
        return float("inf")
    if leave == 1.0:
        return 1.0
    return float(np.ceil(log1p(-quantile) / log1p(-leave)))


def _check_probability(name: str, value: float) -> None:
    if not 0.0 <= value <= 1.0:
        raise ValueError(f"{name} must be a probability in [0, 1], got {value}")
