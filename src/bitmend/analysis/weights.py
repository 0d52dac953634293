"""Weight distributions of binary linear codes, by enumeration or through the dual.

For an (n, k) code C with dual C_perp (dimension r = n - k), the MacWilliams identity
(MacWilliams & Sloane, The Theory of Error-Correcting Codes, ch. 5) gives

    A_j = 2^-r * sum_i B_i K_j(i),   K_j(i) = sum_s (-1)^s C(i, s) C(n - i, j - s),

where A is the weight distribution of C, B that of C_perp and K_j the Krawtchouk
polynomials. We enumerate whichever of C (2^k words) and C_perp (2^r words) is smaller.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import comb

import numpy as np

ENUMERATION_LIMIT_BITS = 24  # at most 2^24 codewords are listed for a distribution


@dataclass(frozen=True)
class WeightDistribution:
    """counts[w] = number of codewords of Hamming weight w; method says how it was found."""

    counts: tuple[int, ...]
    method: str  # "enumeration" or "macwilliams"

    @property
    def minimum_distance(self) -> int:
        """d = the least non-zero weight (for a linear code)."""
        for w, a in enumerate(self.counts):
            if w > 0 and a > 0:
                return w
        return len(self.counts) - 1  # only the zero word: no finite distance; report n


def _popcount(values: np.ndarray) -> np.ndarray:
    return np.bitwise_count(values).astype(np.int64)


def _row_products(vectors: np.ndarray, rows: list[int]) -> np.ndarray:
    """For each vector v (uint64) the integer whose bit (len(rows)-1-i) is <v, rows[i]> mod 2."""
    out = np.zeros(vectors.shape[0], dtype=np.uint64)
    width = len(rows)
    for i, row in enumerate(rows):
        bit = (_popcount(vectors & np.uint64(row)) & 1).astype(np.uint64)
        out |= bit << np.uint64(width - 1 - i)
    return out


def krawtchouk(n: int, j: int, i: int) -> int:
    """K_j(i) for length n."""
    return sum((-1) ** s * comb(i, s) * comb(n - i, j - s) for s in range(0, j + 1))


def macwilliams(dual_counts: list[int], n: int) -> list[int]:
    """Weight distribution of C from that of C_perp (exact integer arithmetic)."""
    size = sum(dual_counts)
    result = []
    for j in range(n + 1):
        total = sum(b * krawtchouk(n, j, i) for i, b in enumerate(dual_counts) if b)
        if total % size:
            raise ArithmeticError("MacWilliams transform gave a non-integer count")
        result.append(total // size)
    return result


def weight_distribution(n: int, k: int, parity_rows: list[int]) -> WeightDistribution:
    """Distribution of the systematic code G = [I_k | P], P given as k integers of r bits
    (parity bit j of row i at integer bit r-1-j)."""
    r = n - k
    if k <= r and k <= ENUMERATION_LIMIT_BITS:
        messages = np.arange(1 << k, dtype=np.uint64)
        # parity of m is the XOR of rows whose message bit is set; m bit (k-1-i) is row i
        columns = [sum(((parity_rows[i] >> (r - 1 - j)) & 1) << (k - 1 - i) for i in range(k))
                   for j in range(r)]
        parity = _row_products(messages, columns) if r else np.zeros_like(messages)
        weights = _popcount(messages) + _popcount(parity)
        counts = np.bincount(weights, minlength=n + 1)
        return WeightDistribution(tuple(int(c) for c in counts), "enumeration")
    if r <= ENUMERATION_LIMIT_BITS:
        # dual codeword for u (r bits): (u P^T, u); bit i of u P^T is <u, row i of P>
        duals = np.arange(1 << r, dtype=np.uint64)
        message_part = _row_products(duals, parity_rows)
        weights = _popcount(message_part) + _popcount(duals)
        dual_counts = [int(c) for c in np.bincount(weights, minlength=n + 1)]
        return WeightDistribution(tuple(macwilliams(dual_counts, n)), "macwilliams")
    raise ValueError(f"both k={k} and n-k={r} exceed 2^{ENUMERATION_LIMIT_BITS} words to list")
