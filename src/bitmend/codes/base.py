"""What every block code in bitmend shares: its length n, dimension k and the rate k/n."""

from __future__ import annotations

import numpy as np


class BlockCode:
    """An (n, k) block code: k message symbols in, n code symbols out (rate k / n).

    Subclasses set self._n and self._k; symbols are bits unless a family says otherwise
    (symbol_bits = 8 for Reed-Solomon)."""

    _n: int
    _k: int
    symbol_bits: int = 1

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
