"""What every block code in bitmend shares: its sizes, distance facts and weight distribution.

An (n, k) block code over symbols of `symbol_bits` bits (q = 2^symbol_bits) maps k message
symbols to n code symbols; r = n - k parity symbols, rate k / n. From the minimum distance d
(exact, or a designed lower bound) follow the rest, once, for every family:

    t = floor((d - 1) / 2)          symbol errors corrected per codeword
    detects = d - 1 - t             errors always detected while correcting up to t
    perfect  <=>  sum_{i<=t} C(n, i) (q - 1)^i == q^r    (the Hamming bound met with equality)

Block status everywhere: 0 clean, 1..t symbols corrected, or FAILED (kernels.status).

The public operations live here, once, with their shape handling: `encode` (c = m G),
`decode` (bounded distance: the message of the codeword within t of the received word, or
FAILED), `detect` (True where a word is not a codeword) and `syndromes`, each on one vector
or an (N, width) matrix, giving back the same rank. A family supplies only its row kernels,
with one contract on codeword rows of `row_bytes` uint8 each (one byte per symbol for byte
symbols, the bits packed first bit most significant for binary codes):

    _encode_rows(rows)              message in the first k symbols, zeros after: fill in the parity
    _decode_rows(rows, erasures)    correct in place; uint8 status per row, 0..t or FAILED
    _syndrome_rows(rows)            (N, s) syndrome symbols, all zero exactly for codewords
"""

from __future__ import annotations

import abc
from functools import cached_property
from math import comb
from typing import TYPE_CHECKING

import numpy as np

from bitmend.kernels.status import FAILED

if TYPE_CHECKING:
    from bitmend.analysis.weights import WeightDistribution
    from bitmend.codes.linear import BinaryLinearCode

__all__ = ["FAILED", "BlockCode", "SystematicBinaryCode", "as_rows"]


class BlockCode(abc.ABC):
    """An (n, k) block code: k message symbols in, n code symbols out (rate k / n).

    Subclasses set self._n, self._k and self.name, and define `d`, `_defining_parameters`
    and the three row kernels; symbols are bits unless a family says otherwise
    (symbol_bits = 8 for Reed-Solomon). Two codes are equal when they are of one family
    with the same defining parameters (the name and description are labels, not part of
    the code)."""

    _n: int
    _k: int
    name: str
    description: str = ""
    family: str = ""  # "linear", "bch", "rs": codes of one family compare by their defining parameters
    symbol_bits: int = 1  # bits per code symbol: 1 for binary codes, 8 for Reed-Solomon
    distance_kind: str = "exact"  # "designed" when d is a guaranteed lower bound, not the true distance
    supports_erasures: bool = False  # decode accepts marks of symbols known to be unreliable

    # ---- sizes ----------------------------------------------------------------------------------
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

    # ---- distance ---------------------------------------------------------------------------------
    @property
    @abc.abstractmethod
    def d(self) -> int:
        """Minimum distance in symbols (exact, or designed: see distance_kind)."""

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

    # ---- matrices ---------------------------------------------------------------------------------
    @property
    def column_order(self) -> tuple[int, ...]:
        """Positions of the defining matrix's columns in the systematic form (identity
        unless the family permuted them to put an information set first)."""
        return tuple(range(self._n))

    @property
    def G(self) -> np.ndarray:
        """Systematic generator [I_k | P] (k x n symbols): row i is the codeword of the
        i-th unit message."""
        return self.encode(np.eye(self._k, dtype=np.uint8))

    @property
    def H(self) -> np.ndarray:
        """Systematic parity-check matrix [P^T | I_r] (r x n symbols), G H^T = 0 (over a
        field of characteristic 2, -P^T = P^T)."""
        return np.hstack([self.G[:, self._k:].T, np.eye(self.r, dtype=np.uint8)])

    # ---- engines ----------------------------------------------------------------------------------
    @property
    def generic_engine(self) -> BinaryLinearCode | None:
        """The code as the generic binary engine (table-driven, fused stream kernels) when
        it is one, else None: its codewords then go through the row kernels."""
        return None

    # ---- identity ---------------------------------------------------------------------------------
    @abc.abstractmethod
    def _defining_parameters(self) -> tuple:
        """What fixes the code within its family (hashable)."""

    @cached_property
    def _identity(self) -> tuple:
        return (self.family, *self._defining_parameters())

    @cached_property
    def _identity_hash(self) -> int:  # codes key lru_caches on the stream path: hash once
        return hash(self._identity)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, BlockCode):
            return NotImplemented
        return self is other or self._identity == other._identity

    def __hash__(self) -> int:
        return self._identity_hash

    # ---- row kernels (each family) -------------------------------------------------------------------
    @abc.abstractmethod
    def _encode_rows(self, rows: np.ndarray) -> None:
        """Fill in the parity of (N, row_bytes) rows holding messages in their first k
        symbols and zeros after."""

    @abc.abstractmethod
    def _decode_rows(self, rows: np.ndarray, erasures: np.ndarray | None) -> np.ndarray:
        """Correct (N, row_bytes) rows in place; uint8 status per row: 0 clean, the number
        of symbols corrected (at most t, or e + f with f erasures), or FAILED (the row left
        as received). erasures: (N, n) 0/1 marks, only for codes that support them."""

    @abc.abstractmethod
    def _syndrome_rows(self, rows: np.ndarray) -> np.ndarray:
        """(N, s) syndrome symbols of (N, row_bytes) rows; all zero exactly for codewords."""

    # ---- rows: the form every kernel works on -------------------------------------------------------
    @property
    def row_bytes(self) -> int:
        """Bytes of one codeword row: n for byte symbols, ceil(n / 8) for packed bits."""
        return self._n if self.symbol_bits == 8 else (self._n + 7) // 8

    def encode_rows(self, rows: np.ndarray) -> np.ndarray:
        """Fill in, in place, the parity of uint8 rows (N, row_bytes) whose first k symbols
        hold the messages and the rest zeros; returns rows."""
        self._check_rows(rows)
        if rows.shape[0]:
            self._encode_rows(rows)
        return rows

    def decode_rows(self, rows: np.ndarray, erasures: np.ndarray | None = None) -> np.ndarray:
        """Correct uint8 rows (N, row_bytes) in place; per-row uint8 status (0 clean,
        symbols corrected, FAILED). erasures: optional (N, n) 0/1 marks of unreliable symbols."""
        self._check_rows(rows)
        marks = self._erasure_marks(erasures, (rows.shape[0], self._n))
        if not rows.shape[0]:
            return np.zeros(0, dtype=np.uint8)
        return self._decode_rows(rows, marks)

    def _check_rows(self, rows: np.ndarray) -> None:
        if not (isinstance(rows, np.ndarray) and rows.dtype == np.uint8 and rows.ndim == 2
                and rows.shape[1] == self.row_bytes and rows.flags.c_contiguous and rows.flags.writeable):
            raise ValueError(f"{self.name} rows must be a writable C-contiguous uint8 array (N, {self.row_bytes}), "
                             f"got {type(rows).__name__} of shape {np.shape(rows)}")

    def _erasure_marks(self, erasures: object, shape: tuple[int, int]) -> np.ndarray | None:
        if erasures is None:
            return None
        if not self.supports_erasures:
            raise ValueError(f"{self.name} takes no erasures: only Reed-Solomon codes decode with erased symbols")
        marks = np.asarray(erasures)
        if marks.ndim == 1:
            marks = marks[None, :]
        if marks.shape != shape:
            raise ValueError(f"erasures must have the shape of the received words {shape}, got {np.shape(erasures)}")
        if not np.isin(marks, (0, 1)).all():
            raise ValueError("erasures must hold only 0/1 or booleans")
        return np.ascontiguousarray(marks, dtype=np.uint8)

    def _pack(self, symbols: np.ndarray) -> np.ndarray:
        """(N, w <= n) symbols -> (N, row_bytes) rows, the symbols first and zeros after."""
        count, width = symbols.shape
        if self.symbol_bits == 8:
            rows = np.zeros((count, self._n), dtype=np.uint8)
            rows[:, :width] = symbols
            return rows
        bits = np.zeros((count, 8 * self.row_bytes), dtype=np.uint8)
        bits[:, :width] = symbols
        return np.packbits(bits, axis=1)

    def _unpack(self, rows: np.ndarray, width: int) -> np.ndarray:
        """The first `width` symbols of every row, as (N, width) uint8."""
        if self.symbol_bits == 8:
            return rows[:, :width].copy()
        return np.unpackbits(rows, axis=1, count=width)

    # ---- the public array API: one vector or an (N, width) matrix --------------------------------------
    def encode(self, messages: object) -> np.ndarray:
        """c = m G for messages of shape (k,) or (N, k); codewords (n,) or (N, n), the k
        message symbols first (systematic)."""
        m = as_rows(messages, self._k, "messages", self.symbol_bits)
        rows = self.encode_rows(self._pack(m))
        out = self._unpack(rows, self._n)
        return out[0] if np.ndim(messages) == 1 else out

    def decode(self, received: object, erasures: object = None) -> tuple[np.ndarray, np.ndarray]:
        """Bounded-distance decoding of words (n,) or (N, n): (messages, status), messages
        (k,) or (N, k) and status a uint8 per word (a scalar for one word): 0 clean, symbols
        corrected, FAILED for a detected uncorrectable word (its message left as received,
        never guessed). erasures: 0/1 marks of the received shape, for codes that support
        them (2e + f <= n - k)."""
        c = as_rows(received, self._n, "received words", self.symbol_bits)
        rows = self._pack(c)
        status = self.decode_rows(rows, erasures)
        out = self._unpack(rows, self._k)
        return (out[0], status[0]) if np.ndim(received) == 1 else (out, status)

    def syndromes(self, received: object) -> np.ndarray:
        """Syndromes of words (n,) or (N, n): (s,) or (N, s) symbols, all zero exactly for
        codewords (s = c H^T bits for the generic engine; power sums r(alpha^j) for cyclic
        codes)."""
        c = as_rows(received, self._n, "received words", self.symbol_bits)
        out = self._syndrome_rows(self._pack(c))
        return out[0] if np.ndim(received) == 1 else out

    def detect(self, received: object) -> np.ndarray | np.bool_:
        """True where a word (n,) or (N, n) is not a codeword (a non-zero syndrome)."""
        c = as_rows(received, self._n, "received words", self.symbol_bits)
        flags = self._syndrome_rows(self._pack(c)).any(axis=1)
        return flags[0] if np.ndim(received) == 1 else flags

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.name} n={self.n} k={self.k}>"


class SystematicBinaryCode(BlockCode):
    """A binary code in systematic form, given by its parity part P (k x r):
    G = [I_k | P] and H = [P^T | I_r], so that G H^T = 0."""

    @property
    @abc.abstractmethod
    def P(self) -> np.ndarray:
        """Parity part (k x r) of the systematic generator."""

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
