"""What binary BCH and Reed-Solomon codes share: cyclic codes over GF(2^m), shortened.

A cyclic code of length N = 2^m - 1 (the mother length) is the set of polynomials c(x) of
degree < N divisible by its generator g(x), whose roots are consecutive powers of alpha:
alpha^c .. alpha^(c + 2t - 1). Encoding is systematic, the message m(x) followed by the
remainder m(x) x^r mod g(x); the first symbol sent is the highest-degree coefficient. A
shortened code (n < N) holds the codewords whose first N - n symbols are zero, with those
symbols not sent: the same r, t and d.

Syndromes are the power sums S_j = r(alpha^j) at the roots of g: symbol i of an n-symbol
word is the coefficient of x^(n - 1 - i), and every S_j is zero exactly for a codeword.

The row kernels run in kernels.cyclic (numba) once a piece of work is large, else in the
numpy twins of kernels.cyclic_small (kernels.loader's rent-or-buy rule); this class picks
one, and each family says only which of their functions it calls with which tables.
"""

from __future__ import annotations

import abc
from functools import cached_property
from types import ModuleType

import numpy as np

from bitmend.codes.base import BlockCode
from bitmend.kernels import cyclic_small
from bitmend.kernels.gf2m import GF2m
from bitmend.kernels.loader import compiled_cyclic

SYNDROME_CHUNK_CELLS = 1 << 22  # bounds the (rows, roots, n) product table of syndromes


class CyclicCode(BlockCode):
    """A (possibly shortened) cyclic code over GF(2^m): its field, generator, register
    table and row-kernel dispatch. Families set self.field and define the generator's
    register table, the roots of g and the two kernel calls."""

    field: GF2m

    # ---- shortening -------------------------------------------------------------------------------
    @property
    def mother_n(self) -> int:
        """Length 2^m - 1 of the code before shortening."""
        return self.field.order

    @property
    def shortened_by(self) -> int:
        """Leading zero symbols not sent: mother_n - n."""
        return self.field.order - self._n

    # ---- generator ----------------------------------------------------------------------------------
    @cached_property
    def register_table(self) -> np.ndarray:
        """The shift-register table of g(x): the remainder advances 8 bits a step."""
        return self._build_register_table()

    @abc.abstractmethod
    def _build_register_table(self) -> np.ndarray:
        """kernels.gf2m's register table for this family's generator."""

    @property
    @abc.abstractmethod
    def root_exponents(self) -> range:
        """The j with g(alpha^j) = 0 that the syndromes are taken at."""

    # ---- row kernels ----------------------------------------------------------------------------------
    @staticmethod
    def _kernels(rows: np.ndarray) -> ModuleType:
        """kernels.cyclic for large work (or once numba is loaded), else kernels.cyclic_small."""
        return compiled_cyclic(8 * rows.size) or cyclic_small

    def _encode_rows(self, rows: np.ndarray) -> None:
        self._encode_with(self._kernels(rows), rows)

    def _decode_rows(self, rows: np.ndarray, erasures: np.ndarray | None) -> np.ndarray:
        status = np.zeros(rows.shape[0], dtype=np.uint8)
        self._decode_with(self._kernels(rows), rows, erasures, status)
        return status

    @abc.abstractmethod
    def _encode_with(self, kernels: ModuleType, rows: np.ndarray) -> None:
        """Call the family's encoder in `kernels` (cyclic or cyclic_small) on rows."""

    @abc.abstractmethod
    def _decode_with(self, kernels: ModuleType, rows: np.ndarray, erasures: np.ndarray | None,
                     status: np.ndarray) -> None:
        """Call the family's decoder in `kernels` on rows, filling status."""

    def _syndrome_rows(self, rows: np.ndarray) -> np.ndarray:
        """S_j = sum_i c_i alpha^(j (n - 1 - i)) for j in root_exponents, (N, 2t) uint8."""
        gf = self.field
        n = self._n
        degrees = np.arange(n - 1, -1, -1)
        powers = gf.exp[(np.array(self.root_exponents)[:, None] * degrees[None, :]) % gf.order].astype(np.uint8)
        symbols = self._unpack(rows, n)
        out = np.empty((rows.shape[0], powers.shape[0]), dtype=np.uint8)
        step = max(1, SYNDROME_CHUNK_CELLS // powers.size)
        for first in range(0, rows.shape[0], step):  # a bounded product table per piece of rows
            part = symbols[first: first + step]
            products = gf.mul_table[part[:, None, :], powers[None, :, :]]
            out[first: first + step] = np.bitwise_xor.reduce(products, axis=2)
        return out
