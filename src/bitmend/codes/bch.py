"""Binary BCH codes: primitive, narrow-sense, of length 2^m - 1 (3 <= m <= 8), and their
shortened forms.

The code of designed distance 2t + 1 has the generator g(x) = lcm(M_1(x), ..., M_2t(x)),
the M_s minimal polynomials of alpha^s over GF(2) computed from the field (kernels.gf2m),
so its roots include alpha^1 .. alpha^2t. Any 2t consecutive roots bound the minimum
distance from below by 2t + 1 (the BCH bound); the true minimum distance can be larger,
which is why `d` is called the designed distance and `distance_kind` says "designed".

Encoding is systematic: the k message bits, then the r = n - k bits of m(x) x^r mod g(x),
the first bit sent the highest-degree coefficient. A shortened code bch-N-K (N < 2^m - 1)
is the set of codewords whose first 2^m - 1 - N positions are zero, with those positions
not sent; it keeps n - k, t and the designed distance.

Decoding is algebraic (kernels.cyclic): syndromes, Berlekamp-Massey, Chien search; up to t
bit errors per codeword are corrected and a word that cannot be brought within t of a
codeword is reported as FAILED, never guessed.
"""

from __future__ import annotations

from functools import cached_property
from types import ModuleType

import numpy as np

from bitmend.analysis.weights import WeightDistribution, macwilliams
from bitmend.codes.base import SystematicBinaryCode
from bitmend.codes.cyclic import CyclicCode
from bitmend.errors import CodeError
from bitmend.kernels.gf2m import GF2m, bch_designed_range, bch_generator, binary_register_table, field

LISTING_LIMIT_BITS = 20  # weight distributions list at most 2^20 words (of the code or of its dual)


class BCHParameterError(CodeError):
    """(n, k) that no primitive narrow-sense binary BCH code (or shortening of one) has."""


class BCHCode(CyclicCode, SystematicBinaryCode):
    """A binary BCH code: m, designed t, and the (possibly shortened) length n.

    The array API is BlockCode's: `encode` takes 0/1 message bits of shape (k,) or (N, k);
    `decode` takes received bits (n,) or (N, n) and returns (messages, status) with status
    0 clean, w bits corrected, FAILED uncorrectable; `syndromes` are the power sums
    S_j = r(alpha^j), j = 1 .. 2t.
    """

    family = "bch"
    symbol_bits = 1  # errors are counted in bits
    distance_kind = "designed"  # d = 2t + 1 is a guaranteed lower bound

    def __init__(self, m: int, t: int, n: int | None = None, description: str = "") -> None:
        gf = field(m)
        mother = gf.order
        if t < 1:
            raise BCHParameterError(f"t must be at least 1, got {t}")
        g = bch_generator(gf, t)
        r = g.bit_length() - 1
        if r >= mother:
            raise BCHParameterError(f"t = {t} leaves no message bits at length {mother}")
        # a larger t may give the same generator (its extra roots were conjugates already):
        # the designed distance is that of the largest such t
        t = max([t] + [t2 for t2, r2 in bch_designed_range(m) if r2 == r])
        n = mother if n is None else n
        if not r < n <= mother:
            raise BCHParameterError(f"length {n} must be {r + 1}..{mother} for m = {m}, t = {t}")
        self.field: GF2m = gf
        self.m = m
        self._t = t
        self._n = n
        self._k = n - r
        self.generator = g  # binary polynomial, bit i = coefficient of x^i
        self.name = f"bch-{n}-{n - r}"
        self.description = description or (
            f"binary BCH, designed distance {2 * t + 1}" + (f", shortened from length {mother}" if n < mother else ""))

    @classmethod
    def from_nk(cls, n: int, k: int) -> "BCHCode":
        """The code called bch-n-k: the smallest m with 2^m - 1 >= n, and the designed t
        whose generator has degree n - k (the largest such t if several give one code)."""
        if not 1 <= k < n:
            raise BCHParameterError(f"bch-{n}-{k}: need 1 <= k < n")
        m = max(3, n.bit_length())
        if m > 8:
            raise BCHParameterError(f"bch-{n}-{k}: lengths up to 255 are supported")
        for t, r in bch_designed_range(m):
            if r == n - k:
                return cls(m, t, n)
        ks = [n - r for _, r in bch_designed_range(m) if n - r >= 1]
        raise BCHParameterError(f"bch-{n}-{k}: no BCH code of length {n} has k = {k}; possible k: "
                                + ", ".join(map(str, ks)))

    # ---- parameters ----------------------------------------------------------------------------
    @property
    def d(self) -> int:
        """Designed distance 2t + 1: the minimum distance is at least this."""
        return 2 * self._t + 1

    @property
    def generator_octal(self) -> str:
        """g(x) in octal, highest degree first, the form of the published BCH tables."""
        return format(self.generator, "o")

    # ---- matrices --------------------------------------------------------------------------------
    @cached_property
    def _parity_rows(self) -> list[int]:
        """Row i of P as an r-bit integer: the parity of message bit i, x^(n-1-i) mod g."""
        g, r = self.generator, self.r
        rem = g ^ (1 << r)  # x^r mod g
        out = [rem]
        for _ in range(self._k - 1):  # x^(r+1) .. x^(n-1) mod g
            rem <<= 1
            if rem >> r & 1:
                rem ^= g
            out.append(rem)
        return out[::-1]  # message bit 0 is the highest degree

    @property
    def P(self) -> np.ndarray:
        """Parity part (k x r) of the systematic generator."""
        r = self.r
        return np.array([[(row >> (r - 1 - j)) & 1 for j in range(r)] for row in self._parity_rows], dtype=np.uint8)

    # ---- weight distribution --------------------------------------------------------------------
    @property
    def weight_distribution_available(self) -> bool:
        return min(self._k, self.r) <= LISTING_LIMIT_BITS

    @property
    def weight_distribution_note(self) -> str:
        if self.weight_distribution_available:
            return ""
        return (f"not available: neither the code (2^{self._k} words) nor its dual (2^{self.r} words) is small "
                "enough to list")

    @cached_property
    def weight_distribution(self) -> WeightDistribution | None:
        """Exact distribution, by listing the 2^k codewords or the 2^r words of the dual
        and the MacWilliams identity, whichever is fewer; None when both are too many (see
        weight_distribution_note)."""
        if not self.weight_distribution_available:
            return None
        k, r, n = self._k, self.r, self._n
        rows = self._parity_rows
        if k <= r:  # codeword (m, m P): its parity is the XOR of the rows m selects
            m = np.arange(1 << k, dtype=np.uint64)
            words = -(-r // 64)
            parity = np.zeros((1 << k, words), dtype=np.uint64)
            for i, row in enumerate(rows):
                selected = ((m >> np.uint64(k - 1 - i)) & np.uint64(1)).astype(bool)
                for w in range(words):
                    parity[selected, w] ^= np.uint64((row >> (64 * w)) & 0xFFFFFFFFFFFFFFFF)
            weights = np.bitwise_count(m).astype(np.int64) + np.bitwise_count(parity).sum(axis=1, dtype=np.int64)
            counts = np.bincount(weights, minlength=n + 1)
            return WeightDistribution(tuple(int(c) for c in counts), "enumeration")
        u = np.arange(1 << r, dtype=np.uint64)  # dual word for u: (u P^T, u)
        weights = np.bitwise_count(u).astype(np.int64)
        for row in rows:
            weights += np.bitwise_count(u & np.uint64(row)).astype(np.int64) & 1
        dual = [int(c) for c in np.bincount(weights, minlength=n + 1)]
        return WeightDistribution(tuple(macwilliams(dual, n)), "macwilliams")

    # ---- row kernels (CyclicCode picks kernels.cyclic or kernels.cyclic_small) ----------------------
    def _defining_parameters(self) -> tuple:
        return (self.m, self._t, self._n)

    def _build_register_table(self) -> np.ndarray:
        return binary_register_table(self.generator)

    @property
    def root_exponents(self) -> range:
        return range(1, 2 * self._t + 1)

    def _encode_with(self, kernels: ModuleType, rows: np.ndarray) -> None:
        kernels.bch_encode_rows(rows, self._k, self.r, self.register_table)

    def _decode_with(self, kernels: ModuleType, rows: np.ndarray, erasures: np.ndarray | None,
                     status: np.ndarray) -> None:
        gf = self.field
        kernels.bch_decode_rows(rows, self._n, self.r, self._t, self.register_table, gf.mul_table, gf.inv_table,
                                gf.exp, gf.order, status)

    def __repr__(self) -> str:
        return f"<BCHCode {self.name} m={self.m} t={self._t}>"


def bch(n: int, k: int) -> BCHCode:
    """The BCH code called bch-n-k (see BCHCode.from_nk)."""
    return BCHCode.from_nk(n, k)
