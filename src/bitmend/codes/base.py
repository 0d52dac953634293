"""What every block code in bitmend shares: its length n, dimension k and the rate k/n."""

from __future__ import annotations


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
