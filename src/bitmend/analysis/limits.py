"""How close a code of length n and k message bits comes to the best code of that length on a
binary symmetric channel (BSC) with crossover probability p.

Source: Y. Polyanskiy, H. V. Poor and S. Verdu, "Channel coding rate in the finite
blocklength regime", IEEE Trans. Inf. Theory 56(5), 2010 (below: PPV). M*(n, eps) is the
largest number of codewords of any code of length n whose block error is at most eps.

- Capacity C = 1 - h2(p), h2(p) = -p log2 p - (1-p) log2 (1-p).
- Normal approximation with its third-order term (PPV, for the BSC):
      log2 M*(n, eps) ~ n C - sqrt(n V) Q^-1(eps) + (1/2) log2 n,
      V = p (1-p) log2^2((1-p)/p)   (the channel dispersion),
  Q the standard normal tail. Turned around, the block error of the best (n, 2^k) code is
  about  Q((n C - k + (1/2) log2 n) / sqrt(n V)).
- Achievability, the random-coding union (RCU) bound for the BSC (PPV): a code with M words
  and block error at most
      eps_RCU = sum_{t=0}^{n} C(n,t) p^t (1-p)^(n-t) min{1, (M-1) sum_{s<=t} C(n,s) 2^-n}
  exists. (A random codeword lands within distance t of the received word with probability
  sum_{s<=t} C(n,s) 2^-n; ties are counted as errors.)
- Converse, the binomial bound for the BSC (PPV's meta-converse against the uniform output):
  every code with M words and block error eps has M <= 1 / beta_{1-eps}, where beta_alpha is
  the least uniform-measure of a set of outputs that holds probability alpha of the channel's
  output: take error patterns by increasing weight (the likelihood ratio falls with weight
  for p < 1/2), the last weight class L only in part,
      alpha = sum_{l<L} C(n,l) p^l (1-p)^(n-l) + lambda C(n,L) p^L (1-p)^(n-L),
      beta  = sum_{l<L} C(n,l) 2^-n + lambda C(n,L) 2^-n.
  A perfect code meets it with equality: its decoding regions are exactly these spheres.

Everything runs in the log domain over the n + 1 weight classes (numpy and scipy.special),
so n up to a few thousand and block errors down to 1e-300 cost microseconds to milliseconds.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from functools import lru_cache

import numpy as np

LN2 = math.log(2.0)
EXACT_MAX_N = 8192  # the exact bounds are computed up to this length (cost grows with n)
SEARCH_LOW_P = 1e-15  # the smallest crossover probability a search for p looks at
MAX_BLOCK_ERROR = 1.0 - 1e-9  # above this a code fails (nearly) always: no comparison
SEARCH_STEPS = 80  # bisection steps (on log p, or on log2 M): far below any printed digit


def _check(p: float, n: int | None = None) -> None:
    if not 0.0 < p < 0.5:
        raise ValueError(f"the crossover probability must lie strictly between 0 and 1/2, got {p}")
    if n is not None and n < 1:
        raise ValueError(f"the block length must be at least 1, got {n}")


def binary_entropy(p: float) -> float:
    """h2(p) = -p log2 p - (1-p) log2 (1-p), 0 at p = 0 and 1."""
    if p <= 0.0 or p >= 1.0:
        return 0.0
    return -(p * math.log2(p) + (1.0 - p) * math.log2(1.0 - p))


def capacity(p: float) -> float:
    """Capacity of the BSC in bits per channel bit: C = 1 - h2(p)."""
    return 1.0 - binary_entropy(p)


def dispersion(p: float) -> float:
    """Channel dispersion of the BSC, bits^2: V = p (1-p) log2^2((1-p)/p) (PPV)."""
    if p <= 0.0 or p >= 1.0:
        return 0.0
    return p * (1.0 - p) * math.log2((1.0 - p) / p) ** 2


def _q_inverse(eps: float) -> float:
    """Q^-1(eps) = -Phi^-1(eps), taken from the lower tail so small eps keep their digits."""
    from scipy.special import ndtri

    return float(-ndtri(eps))


def _q(z: float) -> float:
    from scipy.special import ndtr

    return float(ndtr(-z))


def normal_approximation_log2m(n: int, p: float, eps: float) -> float:
    """log2 M*(n, eps) ~ n C - sqrt(n V) Q^-1(eps) + (1/2) log2 n."""
    _check(p, n)
    return n * capacity(p) - math.sqrt(n * dispersion(p)) * _q_inverse(eps) + 0.5 * math.log2(n)


def normal_approximation_block_error(n: int, k: float, p: float) -> float:
    """The block error at which the normal approximation allows exactly 2^k words:
    eps = Q((n C - k + (1/2) log2 n) / sqrt(n V))."""
    _check(p, n)
    return _q((n * capacity(p) - k + 0.5 * math.log2(n)) / math.sqrt(n * dispersion(p)))


# ---- the exact bounds, on the n + 1 weight classes --------------------------------------------

@lru_cache(maxsize=32)
def _log_binomials(n: int) -> tuple[np.ndarray, np.ndarray]:
    """(ln C(n, i), ln sum_{s<=i} C(n, s)) for i = 0..n."""
    from scipy.special import gammaln

    i = np.arange(n + 1, dtype=float)
    log_c = gammaln(n + 1.0) - gammaln(i + 1.0) - gammaln(n - i + 1.0)
    log_c.setflags(write=False)
    log_cum = np.logaddexp.accumulate(log_c)
    log_cum.setflags(write=False)
    return log_c, log_cum


def _log_pmf(n: int, p: float) -> np.ndarray:
    """ln [C(n, i) p^i (1-p)^(n-i)], i = 0..n."""
    log_c, _ = _log_binomials(n)
    i = np.arange(n + 1, dtype=float)
    return log_c + i * math.log(p) + (n - i) * math.log1p(-p)


def _log_tails(log_pmf: np.ndarray) -> np.ndarray:
    """ln sum_{l>=i} pmf_l for i = 0..n (summed from the far tail, no cancellation), with
    the whole sum taken as exactly 1 (it is, up to rounding)."""
    tails = np.logaddexp.accumulate(log_pmf[::-1])[::-1]
    return np.minimum(0.0, tails - tails[0])


def _log_words_minus_one(log2m: float) -> float:
    """ln(M - 1) for M = 2^log2m (M >= 1); -inf for a single word."""
    if log2m <= 0.0:
        return -math.inf
    return log2m * LN2 + math.log1p(-(2.0 ** -log2m)) if log2m < 60 else log2m * LN2


def rcu_block_error(n: int, log2m: float, p: float) -> float:
    """The RCU bound: a code of length n with 2^log2m words and at most this block error
    exists on BSC(p)."""
    _check(p, n)
    _, log_cum = _log_binomials(n)
    inner = np.minimum(0.0, _log_words_minus_one(log2m) + log_cum - n * LN2)
    total = np.logaddexp.reduce(_log_pmf(n, p) + inner)
    return float(min(1.0, math.exp(total)))


def rcu_log2m(n: int, p: float, eps: float) -> float:
    """The largest log2 M for which the RCU bound is at most eps: some code of length n with
    that many words reaches block error eps (bisection; the bound grows with M)."""
    _check(p, n)
    if rcu_block_error(n, float(n), p) <= eps:
        return float(n)
    low, high = 0.0, float(n)
    for _ in range(SEARCH_STEPS):
        mid = 0.5 * (low + high)
        if rcu_block_error(n, mid, p) <= eps:
            low = mid
        else:
            high = mid
        if high - low < 1e-10:
            break
    return low


def converse_log2m(n: int, p: float, eps: float) -> float:
    """The binomial converse: no code of length n with block error eps has more than
    2^(this) words, log2 M <= -log2 beta_{1-eps}."""
    _check(p, n)
    if not 0.0 < eps < 1.0:
        raise ValueError(f"the block error must lie strictly between 0 and 1, got {eps}")
    log_c, log_cum = _log_binomials(n)
    log_pmf = _log_pmf(n, p)
    tails = _log_tails(log_pmf)
    log_eps = math.log(eps)
    # L: the last weight class whose tail still holds eps (the tail from L on is >= eps)
    big = int(np.flatnonzero(tails >= log_eps)[-1])
    # lambda a_L = tail(L) - eps: the part of class L the test takes
    share = max(0.0, -math.expm1(log_eps - tails[big])) * math.exp(tails[big] - log_pmf[big])
    parts = [log_cum[big - 1]] if big > 0 else []
    if share > 0.0:
        parts.append(math.log(share) + log_c[big])
    if not parts:
        return math.inf
    log_beta = float(np.logaddexp.reduce(parts)) - n * LN2
    return -log_beta / LN2


def converse_block_error(n: int, log2m: float, p: float) -> float:
    """The least block error any code of length n with 2^log2m words can have on BSC(p):
    eps = 1 - alpha at beta = 2^-log2m."""
    _check(p, n)
    log_c, log_cum = _log_binomials(n)
    log_pmf = _log_pmf(n, p)
    tails = _log_tails(log_pmf)
    log_room = (n - log2m) * LN2  # ln(2^n beta): the sequences the test may take
    if log_room >= log_cum[-1] - 1e-15:
        return 0.0
    # L: the first weight class that does not fit whole
    big = int(np.searchsorted(log_cum, log_room, side="right"))
    before = math.exp(log_cum[big - 1] - log_c[big]) if big > 0 else 0.0
    share = min(1.0, max(0.0, math.exp(log_room - log_c[big]) - before))  # lambda
    after = math.exp(tails[big + 1]) if big < n else 0.0
    return float(min(1.0, after + (1.0 - share) * math.exp(log_pmf[big])))


# ---- the crossover probability at which the best code reaches a block error -----------------------

def _solve_p(block_error_at, eps: float) -> float | None:
    """The p in [SEARCH_LOW_P, 1/2) with block_error_at(p) = eps, by bisection on log p
    (the block error of the best code grows with p). None if even SEARCH_LOW_P is too
    noisy; 1/2 if no p below 1/2 is."""
    low, high = math.log(SEARCH_LOW_P), math.log(0.5 - 1e-12)
    if block_error_at(math.exp(low)) > eps:
        return None
    if block_error_at(math.exp(high)) <= eps:
        return 0.5
    for _ in range(SEARCH_STEPS):
        mid = 0.5 * (low + high)
        if block_error_at(math.exp(mid)) <= eps:
            low = mid
        else:
            high = mid
        if high - low < 1e-12:
            break
    return math.exp(low)


def crossover_normal_approximation(n: int, k: float, eps: float) -> float | None:
    """The p at which the best (n, 2^k) code reaches block error eps, by the normal approximation."""
    return _solve_p(lambda p: normal_approximation_block_error(n, k, p), eps)


def crossover_rcu(n: int, k: float, eps: float) -> float | None:
    """The largest p at which the RCU bound still promises an (n, 2^k) code with block error eps."""
    return _solve_p(lambda p: rcu_block_error(n, k, p), eps)


def crossover_converse(n: int, k: float, eps: float) -> float | None:
    """The largest p at which the converse still allows an (n, 2^k) code with block error eps:
    above it no such code exists."""
    return _solve_p(lambda p: converse_block_error(n, k, p), eps)


# ---- one code against the limit ----------------------------------------------------------------------

@dataclass(frozen=True)
class DistanceToLimit:
    """A code of n bits carrying k message bits, with block error `block_error` at crossover
    p, beside the best code of length n (all in bits, rates in bits per channel bit)."""

    n: int
    k: int
    p: float
    block_error: float  # the code's own, at p
    capacity: float  # 1 - h2(p)
    dispersion: float  # V
    rate_normal: float  # best rate at (n, block_error), normal approximation
    rate_achievable: float | None  # RCU: some code of length n does at least this well
    rate_converse: float | None  # no code of length n does better
    p_normal: float | None  # the best (n, k) code reaches block_error at this p (normal approximation)
    p_achievable: float | None  # some (n, k) code reaches block_error at least up to this p (RCU)
    p_converse: float | None  # no (n, k) code reaches block_error above this p

    @property
    def rate(self) -> float:
        return self.k / self.n

    @property
    def rate_gap(self) -> float:
        """Best rate (normal approximation) minus the code's rate."""
        return self.rate_normal - self.rate

    @property
    def rate_gap_most(self) -> float | None:
        """The converse's bound on the gap: no code of length n beats the code's rate by more."""
        return None if self.rate_converse is None else self.rate_converse - self.rate

    @property
    def exact(self) -> bool:
        return self.rate_converse is not None

    @property
    def normal_within_bounds(self) -> bool | None:
        """Whether the normal approximation agrees with what is known for sure (rate within
        two bits per block of the exact bounds, p not beyond the converse nor below the
        RCU); the code itself is a witness too: a code of its length reaches its block error
        at its rate and p, so the best one does no worse. None without the bounds. Outside,
        the approximation is outside its regime (short block, tiny or huge block error) and
        the bounds are the guide."""
        if not self.exact:
            return None
        slack = 2.0 / self.n  # the approximation drops an O(1) term: a couple of bits per block
        floor = max(self.rate_achievable, self.rate)
        rate_ok = floor - slack <= self.rate_normal <= self.rate_converse + slack
        p_floor = max(self.p_achievable or 0.0, self.p)
        p_ok = self.p_normal is not None and self.p_converse is not None and \
            p_floor / 1.01 <= self.p_normal <= self.p_converse * 1.01
        return rate_ok and p_ok

    def to_dict(self) -> dict:
        out = asdict(self)
        out.update(rate=self.rate, rate_gap=self.rate_gap, rate_gap_most=self.rate_gap_most,
                   bits_gap=self.rate_gap * self.n, normal_within_bounds=self.normal_within_bounds,
                   p_ratio=None if self.p_normal is None else self.p_normal / self.p)
        return out


def distance_to_limit(n: int, k: int, p: float, block_error: float, exact: bool | None = None) -> DistanceToLimit | None:
    """The code against the best code of its length at its own block error; None where the
    block error is 0 or above MAX_BLOCK_ERROR (nothing to compare: float sums cannot tell
    such an error from 1). exact: also the RCU and converse bounds (default: when
    n <= EXACT_MAX_N)."""
    _check(p, n)
    if not 1 <= k <= n:
        raise ValueError(f"need 1 <= k <= n, got n = {n}, k = {k}")
    if not 0.0 < block_error <= MAX_BLOCK_ERROR:
        return None
    exact = n <= EXACT_MAX_N if exact is None else exact
    eps = block_error
    normal = normal_approximation_log2m(n, p, eps) / n
    return DistanceToLimit(
        n, k, p, eps, capacity(p), dispersion(p), normal,
        rcu_log2m(n, p, eps) / n if exact else None, converse_log2m(n, p, eps) / n if exact else None,
        crossover_normal_approximation(n, k, eps),
        crossover_rcu(n, k, eps) if exact else None, crossover_converse(n, k, eps) if exact else None)


def crossover_at_capacity(rate: float) -> float:
    """The p at which capacity equals the rate: 1 - h2(p) = rate (bisection); above it no
    long code of that rate works."""
    if not 0.0 < rate < 1.0:
        raise ValueError(f"rate must lie strictly between 0 and 1, got {rate}")
    low, high = 0.0, 0.5
    for _ in range(200):
        mid = 0.5 * (low + high)
        if capacity(mid) >= rate:
            low = mid
        else:
            high = mid
    return low
