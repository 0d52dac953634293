"""One engine for binary linear block codes: systematic form, table encoding, syndrome decoding.

A code is given by a generator matrix G (k x n) or a parity-check matrix H (r x n),
r = n - k. Its systematic form is derived by Gaussian elimination over GF(2):

    G = [I_k | P],   H = [P^T | I_r],   c = m G = (m, m P),   s = c H^T = p XOR m P.

Decoding is bounded-distance: an error pattern of weight <= t = floor((d - 1) / 2) has a
unique syndrome, and the table of coset leaders holds exactly those patterns. A syndrome
outside the table is a detected, uncorrectable block; it is never guessed.
"""

from __future__ import annotations

from functools import cached_property
from itertools import combinations

import numpy as np

from bitmend.analysis.weights import WeightDistribution, weight_distribution
from bitmend.codes.base import SystematicBinaryCode
from bitmend.errors import CodeError
from bitmend.kernels.gf2 import as_bit_matrix, row_reduce
from bitmend.kernels.loader import compiled
from bitmend.kernels.status import FAILED

MAX_MESSAGE_BITS = 64  # k: a message is one uint64 in the kernels
MAX_PARITY_BITS = 20  # r: the coset-leader table has 2^r entries
WORD_TABLE_MAX_N = 16  # codes this short decode by one lookup per received word


class CodeDefinitionError(CodeError):
    """A generator or parity-check matrix that does not define a usable code."""


def _bits_to_int(bits: np.ndarray) -> int:
    return int("".join("1" if b else "0" for b in bits) or "0", 2)


class BinaryLinearCode(SystematicBinaryCode):
    """An (n, k) binary linear block code in systematic form: the generic engine.

    Build with from_generator(G) or from_parity_check(H). If the information set is not
    the first k positions, the columns are permuted so that it is (an equivalent code
    with the same n, k, d and weight distribution); `column_order` records the order.
    """

    family = "linear"

    def __init__(self, name: str, parity_part: np.ndarray, column_order: tuple[int, ...] | None = None,
                 description: str = "") -> None:
        k, r = parity_part.shape
        n = k + r
        if not 1 <= k <= MAX_MESSAGE_BITS:
            raise CodeDefinitionError(f"k must be 1..{MAX_MESSAGE_BITS}, got {k}")
        if not 1 <= r <= MAX_PARITY_BITS:
            raise CodeDefinitionError(f"n - k must be 1..{MAX_PARITY_BITS}, got {r}")
        self.name = name
        self.description = description
        self._P = parity_part.astype(np.uint8)
        self._n, self._k = n, k
        self._column_order = column_order or tuple(range(n))

    # ---- construction -------------------------------------------------------------
    @classmethod
    def from_generator(cls, generator: object, name: str = "custom", description: str = "") -> BinaryLinearCode:
        """Code spanned by the rows of G (k x n, full row rank)."""
        G = as_bit_matrix(generator)
        k, n = G.shape
        if k >= n:
            raise CodeDefinitionError(f"a generator needs k < n, got {k} x {n}")
        reduced, pivots = row_reduce(G)
        if len(pivots) < k:
            raise CodeDefinitionError(f"generator rows are dependent: rank {len(pivots)} < k = {k}")
        order = tuple(pivots + [c for c in range(n) if c not in pivots])
        systematic = reduced[:, list(order)]
        return cls(name, systematic[:, k:], None if order == tuple(range(n)) else order, description)

    @classmethod
    def from_parity_check(cls, parity_check: object, name: str = "custom", description: str = "") -> BinaryLinearCode:
        """Null space of H (r x n, full row rank), with the parity positions made last."""
        H = as_bit_matrix(parity_check)
        r, n = H.shape
        if r >= n:
            raise CodeDefinitionError(f"a parity-check matrix needs r < n, got {r} x {n}")
        reduced, pivots = row_reduce(H, pivot_columns=list(range(n - 1, -1, -1)))
        if len(pivots) < r:
            raise CodeDefinitionError(f"parity-check rows are dependent: rank {len(pivots)} < r = {r}")
        # order rows so pivot columns ascend: H = [A | I_r] once the pivots are moved last
        row_of = sorted(range(r), key=lambda i: pivots[i])
        parity_cols = sorted(pivots)
        order = tuple([c for c in range(n) if c not in pivots] + parity_cols)
        A = reduced[row_of][:, list(order[: n - r])]
        return cls(name, A.T.copy(), None if order == tuple(range(n)) else order, description)

    # ---- dimensions and matrices ----------------------------------------------------
    @property
    def P(self) -> np.ndarray:
        """Parity part (k x r) of the systematic generator."""
        return self._P.copy()

    # ---- distance properties ----------------------------------------------------------
    @cached_property
    def weight_distribution(self) -> WeightDistribution:
        return weight_distribution(self._n, self._k, self._parity_rows)

    @property
    def d(self) -> int:
        """Minimum distance, computed from the weight distribution."""
        return self.weight_distribution.minimum_distance

    @property
    def column_order(self) -> tuple[int, ...]:
        return self._column_order

    # ---- kernel tables ----------------------------------------------------------------
    @cached_property
    def _parity_rows(self) -> list[int]:
        """Row i of P as an r-bit integer (parity bit j at integer bit r-1-j)."""
        return [_bits_to_int(row) for row in self._P]

    @cached_property
    def parity_table(self) -> np.ndarray:
        """table[c, v] = XOR of P rows whose message bit lies in chunk c with value v."""
        k = self._k
        chunks = (k + 7) // 8
        table = np.zeros((chunks, 256), dtype=np.uint64)
        rows = self._parity_rows
        for c in range(chunks):
            for b in range(8):
                int_bit = 8 * c + b
                if int_bit >= k:
                    break
                row = np.uint64(rows[k - 1 - int_bit])
                has_bit = (np.arange(256) >> b) & 1 == 1
                table[c, has_bit] ^= row
        return table

    @cached_property
    def _column_syndromes(self) -> np.ndarray:
        """Syndrome of a single error at each codeword position (length n, uint64)."""
        rows = self._parity_rows
        r = self.r
        return np.array(rows + [1 << (r - 1 - j) for j in range(r)], dtype=np.uint64)

    @cached_property
    def leader_tables(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(message mask, parity mask, weight) per syndrome; weight FAILED where no leader
        of weight <= t exists. Leaders of weight <= t are unique because d >= 2t + 1."""
        size = 1 << self.r
        lead_m = np.zeros(size, dtype=np.uint64)
        lead_p = np.zeros(size, dtype=np.uint64)
        weight = np.full(size, FAILED, dtype=np.uint8)
        weight[0] = 0
        k, n = self._k, self._n
        syndromes = self._column_syndromes
        masks_m = np.array([1 << (k - 1 - j) if j < k else 0 for j in range(n)], dtype=np.uint64)
        masks_p = np.array([0 if j < k else 1 << (n - 1 - j) for j in range(n)], dtype=np.uint64)
        for w in range(1, self.t + 1):
            positions = np.array(list(combinations(range(n), w)), dtype=np.intp)
            s = np.bitwise_xor.reduce(syndromes[positions], axis=1)
            lead_m[s] = np.bitwise_or.reduce(masks_m[positions], axis=1)
            lead_p[s] = np.bitwise_or.reduce(masks_p[positions], axis=1)
            weight[s] = w
        return lead_m, lead_p, weight

    @cached_property
    def word_table(self) -> np.ndarray:
        """For n <= WORD_TABLE_MAX_N: entry[w] = decoded message | status << 56 for every
        received n-bit word w (one lookup per codeword); otherwise a 1-entry placeholder."""
        if self._n > WORD_TABLE_MAX_N:
            return np.zeros(1, dtype=np.uint64)
        words = np.arange(1 << self._n, dtype=np.uint64)
        messages = words >> np.uint64(self.r)
        parity = words & np.uint64((1 << self.r) - 1)
        status = self.correct(messages, parity)
        return messages | (status.astype(np.uint64) << np.uint64(56))

    # ---- identity and engine --------------------------------------------------------------------
    def _defining_parameters(self) -> tuple:
        return (self._k, self.r, self._P.tobytes(), self._column_order)

    @property
    def generic_engine(self) -> BinaryLinearCode:
        """This code: the stream path runs it through the fused table kernels."""
        return self

    # ---- integer-form coding (used by the stream path) -----------------------------------
    def parity_of(self, messages: np.ndarray) -> np.ndarray:
        """p = m P for a uint64 array of k-bit messages (message bit 0 most significant)."""
        messages = np.ascontiguousarray(messages, dtype=np.uint64)
        kernels = compiled(len(messages) * self._n)
        if kernels is not None:
            return kernels[1].parities(messages, self.parity_table)
        table = self.parity_table  # small work: the same table lookups in numpy
        parity = np.zeros(len(messages), dtype=np.uint64)
        for chunk in range(table.shape[0]):
            parity ^= table[chunk, ((messages >> np.uint64(8 * chunk)) & np.uint64(0xFF)).astype(np.intp)]
        return parity

    def correct(self, messages: np.ndarray, parity: np.ndarray) -> np.ndarray:
        """Correct received (messages, parity) uint64 arrays in place; per-block uint8 status
        (0 clean, w bits corrected, FAILED uncorrectable and left as received)."""
        lead_m, lead_p, weight = self.leader_tables
        kernels = compiled(len(messages) * self._n)
        if kernels is not None:
            return kernels[1].syndrome_correct(messages, parity, self.parity_table, lead_m, lead_p, weight)
        syndrome = (parity ^ self.parity_of(messages)).astype(np.intp)
        messages ^= lead_m[syndrome]  # leaders are zero where no leader of weight <= t exists
        parity ^= lead_p[syndrome]
        return weight[syndrome]

    # ---- row kernels: packed bit rows, message then parity ---------------------------------------
    def _split(self, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(bits, messages, parity) of packed rows: bits (N, 8 row_bytes) and the two
        fields as uint64 integers."""
        bits = np.unpackbits(rows, axis=1)
        return bits, _rows_to_ints(bits[:, : self._k]), _rows_to_ints(bits[:, self._k: self._n])

    def _join(self, rows: np.ndarray, bits: np.ndarray, messages: np.ndarray, parity: np.ndarray) -> None:
        bits[:, : self._k] = _ints_to_rows(messages, self._k)
        bits[:, self._k: self._n] = _ints_to_rows(parity, self.r)
        rows[:] = np.packbits(bits, axis=1)

    def _encode_rows(self, rows: np.ndarray) -> None:
        bits, messages, _ = self._split(rows)
        self._join(rows, bits, messages, self.parity_of(messages))

    def _decode_rows(self, rows: np.ndarray, erasures: np.ndarray | None) -> np.ndarray:
        bits, messages, parity = self._split(rows)
        status = self.correct(messages, parity)
        self._join(rows, bits, messages, parity)
        return status

    def _syndrome_rows(self, rows: np.ndarray) -> np.ndarray:
        """s = c H^T = p XOR m P, as (N, r) bits."""
        _, messages, parity = self._split(rows)
        return _ints_to_rows(parity ^ self.parity_of(messages), self.r)


def _rows_to_ints(rows: np.ndarray) -> np.ndarray:
    """(N, w) bits -> uint64 with the first column most significant (w <= 64)."""
    width = rows.shape[1]
    weights = np.uint64(1) << np.arange(width - 1, -1, -1, dtype=np.uint64)
    return np.bitwise_or.reduce(rows.astype(np.uint64) * weights, axis=1) if width else np.zeros(len(rows), np.uint64)


def _ints_to_rows(values: np.ndarray, width: int) -> np.ndarray:
    shifts = np.arange(width - 1, -1, -1, dtype=np.uint64)
    return ((values[:, None] >> shifts) & np.uint64(1)).astype(np.uint8)

