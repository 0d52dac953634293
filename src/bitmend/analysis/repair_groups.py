"""Frames lost for good when every group of K data frames is followed by R repair frames.

Plain numbers in and out: the group's sizes K and R and the chance that one frame goes
missing. A frame of the group is *missing* when the channel drops it or when it arrives
but fails after decoding (payload CRC, both header copies, a slip). The repair code is MDS
(docs/FORMAT.md, "Repair frames"): any K of a group's K + R frames rebuild every data
frame, and with fewer than K at hand no missing data frame can be rebuilt (for an MDS code
the received frames plus any one missing data frame still lie inside an information set,
so that frame's value stays free).

With missing frames independent from frame to frame, each with probability q, the number
M of missing frames in a group is Binomial(K + R, q) and a data frame is delivered unless
M > R. The residual frame loss (share of data frames never delivered) is

    P_res = E[missing data frames in groups with M > R] / K.

Given M = m, the missing frames are a uniformly random m-subset of the K + R (every frame
has the same q), so m K / (K + R) of them are data frames on average, and

    P_res = (1 / (K + R)) sum_{m=R+1}^{K+R} m C(K+R, m) q^m (1-q)^(K+R-m)
          = q P[Binomial(K + R - 1, q) >= R]

using m C(N, m) = N C(N-1, m-1). The second form reads directly: a data frame is lost when
it is missing itself and at least R of the other K + R - 1 frames of its group are too.

That second form extends exactly to repair frames with their own miss probability q_r
(a repair frame carries a slightly longer payload: its symbol head and CRC), and to any
share e of a data frame that goes bad when it is not rebuilt (e = q for a frame target;
the expected share of bad bits for a bit target), since whether frame j is rebuilt depends
only on the other frames of its group:

    P_res = e P[X + Y >= R],   X ~ Binomial(K - 1, q),  Y ~ Binomial(R, q_r)  independent.

A group loses data for good with probability P[M > R]; the number L of its data frames
lost for good is 0 when M <= R and X' (the missing data frames, X' ~ Binomial(K, q)) when
M = X' + Y > R, so E[L] = K P_res (for e = q) and its full distribution is given by
`lost_per_group_pmf` (for confidence intervals over a run of independent groups).
"""

from __future__ import annotations

import math

import numpy as np

MAX_K = 32  # data frames per group (container/repair.py, MAX_GROUP)
MAX_R = 32  # repair frames per group (container/repair.py, MAX_REPAIR)


def binomial_pmfs(n_max: int, q: np.ndarray | float) -> np.ndarray:
    """pmf[..., n, x] = P[Binomial(n, q) = x] for n, x = 0..n_max, for every q of an array
    (shape q.shape + (n_max + 1, n_max + 1)), by the recursion
    P_{n+1}(x) = P_n(x) (1 - q) + P_n(x - 1) q: sums of non-negative terms, so tiny
    probabilities keep their relative precision."""
    q = np.asarray(q, dtype=float)
    pmf = np.zeros(q.shape + (n_max + 1, n_max + 1))
    pmf[..., 0, 0] = 1.0
    qe, pe = q[..., None], (1.0 - q)[..., None]
    for n in range(n_max):
        pmf[..., n + 1, :] = pmf[..., n, :] * pe
        pmf[..., n + 1, 1:] += pmf[..., n, :-1] * qe
    return pmf


def _upper_tails(pmf: np.ndarray) -> np.ndarray:
    """tail[..., n, y] = P[Binomial(n, .) >= y] from pmf[..., n, x], summed from the top
    (smallest terms first)."""
    return np.flip(np.cumsum(np.flip(pmf, -1), -1), -1)


def not_rebuilt_table(q: np.ndarray | float, q_repair: np.ndarray | float | None = None,
                      max_k: int = MAX_K, max_r: int = MAX_R) -> np.ndarray:
    """table[..., K - 1, R] = P[X + Y >= R] for K = 1..max_k and R = 0..max_r, with
    X ~ Binomial(K - 1, q) (the other data frames) and Y ~ Binomial(R, q_repair): the chance
    that a missing data frame is not rebuilt. R = 0 (no repair) gives 1. Multiply by the
    share e of a data frame that goes bad to get the residual rate (module docstring)."""
    q = np.asarray(q, dtype=float)
    qr = q if q_repair is None else np.broadcast_to(np.asarray(q_repair, dtype=float), q.shape)
    data = binomial_pmfs(max_k - 1, q)  # [..., K-1, x]
    repair_tail = _upper_tails(binomial_pmfs(max_r, qr))  # [..., R, y] = P[Y_R >= y]
    # needed[..., R, x] = P[Y_R >= R - x]: 1 once the other data frames alone reach R
    r = np.arange(max_r + 1)[:, None]
    x = np.arange(max_k)[None, :]
    need = np.clip(r - x, 0, max_r)
    needed = np.take_along_axis(repair_tail, np.broadcast_to(need, q.shape + need.shape), axis=-1)
    needed = np.where(r - x <= 0, 1.0, needed)
    table = np.minimum(1.0, np.einsum("...kx,...rx->...kr", data, needed))
    table[..., 0] = 1.0  # no repair: a missing frame stays missing
    return table


def residual_loss(k: int, r: int, q: float, q_repair: float | None = None, bad_share: float | None = None) -> float:
    """Share of data frames never delivered (or, with bad_share = e, of their bits gone bad)
    for groups of k data and r repair frames: e P[Binomial(k-1, q) + Binomial(r, q_r) >= r],
    e = q unless given; r = 0 means no repair (the rate is e)."""
    _check(k, r, q, q_repair)
    e = q if bad_share is None else bad_share
    return float(e * not_rebuilt_table(q, q_repair, k, max(r, 0))[k - 1, r])


def residual_loss_sum(k: int, r: int, q: float) -> float:
    """The first form, (1/(K+R)) sum_{m>R} m C(K+R, m) q^m (1-q)^(K+R-m), term by term
    (one q for every frame); equal to residual_loss(k, r, q)."""
    _check(k, r, q, None)
    n = k + r
    return sum(m * math.comb(n, m) * q ** m * (1 - q) ** (n - m) for m in range(r + 1, n + 1)) / n


def group_failure(k: int, r: int, q: float, q_repair: float | None = None) -> float:
    """P[M > R]: a group loses at least one data frame for good (M missing of K + R)."""
    _check(k, r, q, q_repair)
    qr = q if q_repair is None else q_repair
    x = binomial_pmfs(k, q)[k]
    y = binomial_pmfs(r, qr)[r]
    total = np.convolve(x, y)  # M = X' + Y
    return float(total[r + 1:].sum())


def lost_per_group_pmf(k: int, r: int, q: float, q_repair: float | None = None) -> np.ndarray:
    """pmf[l] = P[L = l], L the data frames of one group lost for good: L = X' when
    X' + Y > R (X' ~ Binomial(k, q) missing data frames, Y ~ Binomial(r, q_r)), else 0."""
    _check(k, r, q, q_repair)
    qr = q if q_repair is None else q_repair
    x = binomial_pmfs(k, q)[k]
    y_tail = _upper_tails(binomial_pmfs(r, qr))[r]  # P[Y >= y], y = 0..r
    out = np.zeros(k + 1)
    for lost in range(1, k + 1):
        need = r + 1 - lost  # Y > R - lost
        out[lost] = x[lost] * (1.0 if need <= 0 else y_tail[need])
    out[0] = 1.0 - out[1:].sum()
    return out


def _check(k: int, r: int, q: float, q_repair: float | None) -> None:
    if k < 1 or r < 0:
        raise ValueError(f"a group needs K >= 1 data frames and R >= 0 repair frames, got R/K = {r}/{k}")
    for v in (q, q_repair):
        if v is not None and not 0.0 <= v <= 1.0:
            raise ValueError(f"a frame's miss probability must be in [0, 1], got {v}")
