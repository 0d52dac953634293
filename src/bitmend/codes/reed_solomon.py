"""Reed-Solomon codes over GF(2^8): symbols are bytes.

Field: GF(2^8) modulo p(x) = x^8 + x^4 + x^3 + x^2 + 1 (0x11D), alpha = x (the byte 0x02).
Generator: g(x) = (x - alpha^c)(x - alpha^(c+1)) ... (x - alpha^(c+r-1)), r = n - k, with
first root exponent c = 1 (narrow sense). These are the defaults of the galois library's
ReedSolomon(255, k), so its codewords are the same as ours.

The code called rs-n-k has n <= 255 symbols; n < 255 is the code of length 255 shortened
by 255 - n leading zero symbols (not sent). n - k must be even: t = (n - k) / 2 symbol
errors are corrected, or any e errors and f erasures (symbols known to be unreliable)
with 2e + f <= n - k. Reed-Solomon codes are MDS: d = n - k + 1 exactly, and their weight
distribution has a closed form (MacWilliams & Sloane, The Theory of Error-Correcting
Codes, ch. 11, Theorem 6):

    A_w = C(n, w) (q - 1) sum_{j=0}^{w-d} (-1)^j C(w - 1, j) q^(w-d-j),   d <= w <= n.

Encoding is systematic: the k message symbols, then the r symbols of m(x) x^r mod g(x),
the first symbol sent the highest-degree coefficient.
"""

from __future__ import annotations

from functools import cached_property
from math import comb
from types import ModuleType

import numpy as np

from bitmend.analysis.weights import WeightDistribution
from bitmend.codes.cyclic import CyclicCode
from bitmend.errors import CodeError
from bitmend.kernels.gf2m import GF2m, field, rs_generator, symbol_register_table

RS_FIELD_POLYNOMIAL = 0x11D
RS_FIRST_ROOT = 1


class ReedSolomonParameterError(CodeError):
    """(n, k) that this family does not provide."""


def mds_weight_distribution(n: int, k: int, q: int) -> tuple[int, ...]:
    """Symbol-weight distribution A_0 .. A_n of an (n, k) MDS code over GF(q)."""
    d = n - k + 1
    counts = [0] * (n + 1)
    counts[0] = 1
    for w in range(d, n + 1):
        counts[w] = comb(n, w) * (q - 1) * sum((-1) ** j * comb(w - 1, j) * q ** (w - d - j)
                                               for j in range(w - d + 1))
    return tuple(counts)


class ReedSolomonCode(CyclicCode):
    """rs-n-k over GF(2^8). `encode` takes message symbols (k,) or (N, k) (integers
    0..255); `decode` takes received symbols (n,) or (N, n) and optional erasure marks of
    the same shape, and returns (messages, status) with status 0 clean, s symbols
    corrected, FAILED uncorrectable."""

    family = "rs"
    symbol_bits = 8  # errors are counted in 8-bit symbols
    distance_kind = "exact"  # MDS: d = n - k + 1
    supports_erasures = True

    def __init__(self, n: int, k: int, description: str = "") -> None:
        if not 2 <= n <= 255:
            raise ReedSolomonParameterError(f"rs-{n}-{k}: n must be 2..255 over GF(2^8)")
        if not 1 <= k < n or (n - k) % 2:
            raise ReedSolomonParameterError(f"rs-{n}-{k}: need 1 <= k < n with n - k even")
        self.field: GF2m = field(8, RS_FIELD_POLYNOMIAL)
        self.first_root = RS_FIRST_ROOT
        self._n, self._k = n, k
        self.generator_poly: list[int] = rs_generator(self.field, n - k, self.first_root)
        self.name = f"rs-{n}-{k}"
        self.description = description or (
            "Reed-Solomon over GF(2^8)" + (", shortened from length 255" if n < 255 else ""))

    # ---- parameters --------------------------------------------------------------------------------
    @property
    def d(self) -> int:
        """Minimum distance in symbols, n - k + 1 (MDS)."""
        return self.r + 1

    # ---- weight distribution ------------------------------------------------------------------------
    @cached_property
    def weight_distribution(self) -> WeightDistribution:
        """Distribution of codeword symbol weights (closed form for MDS codes)."""
        return WeightDistribution(mds_weight_distribution(self._n, self._k, 256), "closed form (MDS)")

    @property
    def minimum_distance(self) -> int:
        return self.d

    # ---- row kernels (CyclicCode picks kernels.cyclic or kernels.cyclic_small) ----------------------
    def _defining_parameters(self) -> tuple:
        return (self._n, self._k, self.field.polynomial, self.first_root)

    def _build_register_table(self) -> np.ndarray:
        return symbol_register_table(self.field, self.generator_poly)

    @property
    def root_exponents(self) -> range:
        return range(self.first_root, self.first_root + self.r)

    def _encode_with(self, kernels: ModuleType, rows: np.ndarray) -> None:
        kernels.rs_encode_rows(rows, self._k, self.r, self.register_table)

    def _decode_with(self, kernels: ModuleType, rows: np.ndarray, erasures: np.ndarray | None,
                     status: np.ndarray) -> None:
        marks = np.zeros((0, self._n), dtype=np.uint8) if erasures is None else erasures
        gf = self.field
        kernels.rs_decode_rows(rows, self.r, self.first_root, self.register_table, gf.mul_table, gf.inv_table, gf.exp,
                               gf.order, marks, status)

    def __repr__(self) -> str:
        return f"<ReedSolomonCode {self.name} t={self.t}>"


def reed_solomon(n: int, k: int) -> ReedSolomonCode:
    return ReedSolomonCode(n, k)
