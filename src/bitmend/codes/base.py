"""What every block code in bitmend shares: its sizes, distance facts and weight distribution.

An (n, k) block code over symbols of `symbol_bits` bits (q = 2^symbol_bits) maps k message
symbols to n code symbols; r = n - k parity symbols, rate k / n. From the minimum distance d
(exact, or a designed lower bound) follow the rest, once, for every family:

    t = floor((d - 1) / 2)          symbol errors corrected per codeword
    detects = d - 1 - t             errors always detected while correcting up to t
    perfect  <=>  sum_{i<=t} C(n, i) (q - 1)^i == q^r    (the Hamming bound met with equality)

Block status everywhere: 0 clean, 1..t symbols corrected, or FAILED (kernels.status).
"""

from __future__ import annotations

from math import comb
from typing import TYPE_CHECKING

import numpy as np

from bitmend.kernels.status import FAILED

if TYPE_CHECKING:
    from bitmend.analysis.weights import WeightDistribution

__all__ = ["FAILED", "BlockCode", "SystematicBinaryCode", "as_rows"]


class BlockCode:
    """An (n, k) block code: k message symbols in, n code symbols out (rate k / n).

    Subclasses set self._n, self._k and self.name and define `d`; symbols are bits unless a
    family says otherwise (symbol_bits = 8 for Reed-Solomon)."""

    _n: int
    _k: int
    name: str
    description: str = ""
    symbol_bits: int = 1  # bits per code symbol: 1 for binary codes, 8 for Reed-Solomon
    distance_kind: str = "exact"  # "designed" when d is a guaranteed lower bound, not the true distance

    @property
    def n(self) -> int:
        return self._n

    @property
    def k(self) -> int:
        return self._k

    @property
    def r(self) -> int:
        """Number of parity symbols, n - k."""
        return self._n - self._k

    @property
    def rate(self) -> float:
        return self._k / self._n

    @property
    def d(self) -> int:  # pragma: no cover - every family defines it
        """Minimum distance in symbols (exact, or designed: see distance_kind)."""
        raise NotImplementedError

    @property
    def t(self) -> int:
        """Symbol errors corrected per codeword: floor((d - 1) / 2)."""
        return (self.d - 1) // 2

    @property
    def detects(self) -> int:
        """Symbol errors always detected while correcting up to t: d - 1 - t."""
        return self.d - 1 - self.t

    @property
    def is_perfect(self) -> bool:
        """q-ary Hamming bound met with equality: sum_{i<=t} C(n, i) (q - 1)^i == q^(n-k)."""
        q = 1 << self.symbol_bits
        return sum(comb(self._n, i) * (q - 1) ** i for i in range(self.t + 1)) == q ** self.r

    @property
    def weight_distribution(self) -> WeightDistribution | None:
        """Number of codewords of each symbol weight 0..n, or None when it cannot be listed
        (weight_distribution_note says why)."""
        return None

    @property
    def weight_distribution_available(self) -> bool:
        """Whether weight_distribution can be had (without computing it)."""
        return True

    @property
    def weight_distribution_note(self) -> str:
        """"" when the weight distribution is available, else why it is not."""
        return "" if self.weight_distribution_available else "not available"

    @property
    def minimum_distance(self) -> int | None:
        """The true minimum distance when known (from the weight distribution), else None."""
        if not self.weight_distribution_available:
            return None
        wd = self.weight_distribution
        return None if wd is None else wd.minimum_distance

    @property
    def column_order(self) -> tuple[int, ...]:
        """Positions of the defining matrix's columns in the systematic form (identity
        unless the family permuted them to put an information set first)."""
        return tuple(range(self._n))

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.name} n={self.n} k={self.k}>"


class SystematicBinaryCode(BlockCode):
    """A binary code in systematic form, given by its parity part P (k x r):
    G = [I_k | P] and H = [P^T | I_r], so that G H^T = 0."""

    @property
    def P(self) -> np.ndarray:  # pragma: no cover - every family defines it
        raise NotImplementedError

    @property
    def G(self) -> np.ndarray:
        """Systematic generator [I_k | P] (k x n)."""
        return np.hstack([np.eye(self._k, dtype=np.uint8), self.P])

    @property
    def H(self) -> np.ndarray:
        """Systematic parity-check matrix [P^T | I_r] (r x n); G H^T = 0."""
        return np.hstack([self.P.T, np.eye(self.r, dtype=np.uint8)])


def as_rows(values: object, width: int, what: str, symbol_bits: int = 1) -> np.ndarray:
    """values as a 2-D uint8 array of shape (N, width): one vector becomes one row. Bits
    must be exactly 0 or 1; wider symbols must lie in 0 .. 2^symbol_bits - 1. ValueError
    says what shape or value was expected and what arrived."""
    a = np.atleast_2d(np.asarray(values))
    if a.ndim != 2 or a.shape[1] != width:
        raise ValueError(f"{what} must have shape ({width},) or (N, {width}), got {np.shape(values)}")
    if symbol_bits == 1:
        if not np.isin(a, (0, 1)).all():
            raise ValueError(f"{what} must hold only 0 and 1")
    elif a.size and (a.min() < 0 or a.max() > (1 << symbol_bits) - 1):
        raise ValueError(f"{what} must hold symbols 0..{(1 << symbol_bits) - 1}")
    return np.ascontiguousarray(a, dtype=np.uint8)
