"""An MDS erasure code across frames: K source symbols, R repair symbols, over GF(2^8).

A group holds K source symbols (the payloads of K data frames, each zero-padded to the
group's symbol size S) and R repair symbols of S bytes each, computed bytewise:

    repair[i][b] = sum_{j=0}^{K-1} C[i, j] * source[j][b]       in GF(2^8), i = 0..R-1

with the field of the Reed-Solomon codes, GF(2^8) modulo x^8 + x^4 + x^3 + x^2 + 1 (0x11D),
and addition XOR. Symbol index j = 0..K-1 names source j and K + i names repair i.

The matrix is a Cauchy matrix,

    C[i, j] = 1 / (x_i + y_j),   x_i = 255 - i = 0xFF XOR i,   y_j = j,

so C[i, j] = 1 / (0xFF XOR i XOR j). The x_i (255, 254, ...) and y_j (0, 1, ...) are
distinct elements and the two sets are disjoint whenever K + R <= 256. Definition: J. S.
Plank and L. Xu, "Optimizing Cauchy Reed-Solomon Codes for Fault-Tolerant Storage
Applications", IEEE NCA 2006, section 2 (an m x n Cauchy matrix over GF(2^w) from disjoint
sets X, Y of distinct elements has 1 / (x_i + y_j) at (i, j)); the use of Cauchy matrices
for MDS erasure codes goes back to J. Blomer, M. Kalfane, R. Karp, M. Karpinski, M. Luby
and D. Zuckerman, "An XOR-Based Erasure-Resilient Coding Scheme", ICSI TR-95-048, 1995
(recalled from memory).

Why it is MDS: every square submatrix of a Cauchy matrix is itself a Cauchy matrix, whose
determinant prod_{i<i'} (x_i - x_i') (y_j' - y_j) / prod_{i,j} (x_i + y_j) is non-zero
(Cauchy's determinant formula, recalled from memory). Take any K of the K + R rows of the
generator [I_K; C]: with e source rows missing, the chosen rows' determinant is, up to
sign, the determinant of the e x e submatrix of C on the e chosen repair rows and the e
missing source columns, so it is non-zero and the K symbols determine the sources. The
tests check this property exhaustively for small codes with the galois library.

Nesting: C for (K', R') is the top-left R' x K' corner of C for any larger (K, R). So a
short group of K' < K sources coded with (K', R) gives the same repair bytes as the full
code with the missing sources set to zero, and dropping repair symbols never changes the
others.

Rebuilding: with sources Kn known, sources E lost (e = |E|) and e repair symbols Rr,

    C[Rr, E] s_E = p_Rr + C[Rr, Kn] s_Kn      so      s_E = D^-1 (p_Rr + C[Rr, Kn] s_Kn),

D = C[Rr, E] (a Cauchy matrix, invertible). The e x K recovery matrix
[D^-1 C[Rr, Kn] | D^-1] over the stacked symbols (s_Kn, p_Rr) is computed per group by
the compiled kernel (kernels/erasure.recovery_masks, Gauss-Jordan on D, no Python per
group), or, on the numpy path for small work, in Python once per pattern of arrived
symbols and cached. The bytes go through the same kernel as encoding (combine_rows,
compiled in kernels/erasure.py, its numpy twin in kernels/erasure_small.py).

The code does no I/O and knows nothing of frames or containers.
"""

from __future__ import annotations

import sys
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from types import ModuleType
from typing import Union

import numpy as np

from bitmend.errors import CodeError
from bitmend.kernels import erasure_small
from bitmend.kernels.erasure_small import coefficient_masks, gf_inverse, gf_matmul, inv_table, mul_table
from bitmend.kernels.loader import SMALL_WORK_BITS, compiled_loaded

MAX_SYMBOLS = 255  # K + R at most: symbol indices and the header's counts fit one byte
_PLAN_CACHE = 1024  # recovery plans kept per code (one per pattern of arrived symbols)

SymbolLike = Union[bytes, bytearray, memoryview, np.ndarray]
Received = Union[Mapping[int, SymbolLike], tuple[Sequence[int] | np.ndarray, Sequence[SymbolLike] | np.ndarray]]


class ErasureCodeError(CodeError):
    """Bad parameters or symbols given to a FrameErasureCode."""


class NotEnoughSymbolsError(ErasureCodeError):
    """Fewer than k distinct symbols of a group arrived: its sources cannot be rebuilt."""


def cauchy_matrix(k: int, r: int) -> np.ndarray:
    """C (r x k, uint8) with C[i, j] = 1 / (0xFF XOR i XOR j) in GF(2^8) mod 0x11D."""
    _check_parameters(k, r)
    i = np.arange(r, dtype=np.int64)[:, None]
    j = np.arange(k, dtype=np.int64)[None, :]
    # x_i + y_j = (255 - i) XOR j = 0xFF XOR i XOR j, never 0 since i XOR j <= i + j <= 253
    return inv_table()[0xFF ^ i ^ j].astype(np.uint8)


def _check_parameters(k: int, r: int) -> None:
    if not (isinstance(k, (int, np.integer)) and isinstance(r, (int, np.integer))):
        raise ErasureCodeError(f"k and r must be integers, got k={k!r}, r={r!r}")
    if k < 1 or r < 1 or k + r > MAX_SYMBOLS:
        raise ErasureCodeError(f"an erasure code needs k >= 1, r >= 1 and k + r <= {MAX_SYMBOLS}, "
                               f"got k={k}, r={r}")


@dataclass(frozen=True)
class RecoveryPlan:
    """How to rebuild the sources from one set of k arrived symbols.

    used: the k symbol indices used, in stack order (known sources ascending, then the
    repair symbols ascending); lost: the source indices rebuilt; matrix: e x k over
    GF(2^8), lost source lost[t] = sum_p matrix[t, p] * symbol used[p]."""

    used: tuple[int, ...]
    lost: tuple[int, ...]
    matrix: np.ndarray
    masks: np.ndarray  # (1, e, k, 8) uint64: the matrix for the kernels
    targets: np.ndarray  # (1, e) int64: = lost
    copies: np.ndarray  # (1, k) int64: stack position of each known source, -1 if lost


def _compiled(work_bits: int) -> ModuleType | None:
    """kernels.erasure once compiled kernels are loaded or the work is large (>= 2^16
    input bits), else None: use the numpy twin (kernels.erasure_small). Same bytes."""
    if "bitmend.kernels.erasure" in sys.modules or compiled_loaded() or work_bits >= SMALL_WORK_BITS:
        from bitmend.kernels import erasure as compiled

        return compiled
    return None


def _symbol_array(symbols: object, count: int, size: int | None, what: str) -> np.ndarray:
    """count symbols as a C-contiguous (count, S) uint8 array, each zero-padded to S.

    symbols: a (count, S') uint8 array, or a sequence of count byte strings / 1-D uint8
    arrays of any lengths. S = size, or the longest symbol when size is None."""
    if isinstance(symbols, np.ndarray):
        if symbols.ndim != 2 or symbols.shape[0] != count:
            raise ErasureCodeError(f"{what} must be an array of shape ({count}, S), got {symbols.shape}")
        if symbols.dtype != np.uint8:
            raise ErasureCodeError(f"{what} must be uint8 bytes, got dtype {symbols.dtype}")
        width = symbols.shape[1]
        if size is None or size == width:
            return np.ascontiguousarray(symbols)
        rows: list = list(symbols)
    else:
        rows = list(symbols)  # type: ignore[call-overload]
        if len(rows) != count:
            raise ErasureCodeError(f"{what} must hold {count} symbols, got {len(rows)}")
    views = [_as_bytes(row, what) for row in rows]
    longest = max((v.size for v in views), default=0)
    size = longest if size is None else size
    if longest > size:
        raise ErasureCodeError(f"{what}: a symbol of {longest} bytes is longer than the symbol size {size}")
    out = np.empty((count, size), dtype=np.uint8)
    for row, v in zip(out, views):
        if v.size == size:
            row[:] = v
        else:
            row[: v.size] = v
            row[v.size:] = 0
    return out


def _as_bytes(symbol: object, what: str) -> np.ndarray:
    if type(symbol) is np.ndarray and symbol.dtype == np.uint8 and symbol.ndim == 1:
        return symbol  # the common case, checked first
    if isinstance(symbol, np.ndarray):
        if symbol.ndim != 1 or symbol.dtype != np.uint8:
            raise ErasureCodeError(f"{what}: a symbol must be bytes or a 1-D uint8 array, "
                                   f"got {symbol.dtype} of shape {symbol.shape}")
        return symbol
    if isinstance(symbol, (bytes, bytearray, memoryview)):
        return np.frombuffer(symbol, dtype=np.uint8)
    raise ErasureCodeError(f"{what}: a symbol must be bytes or a 1-D uint8 array, got {type(symbol).__name__}")


class FrameErasureCode:
    """MDS erasure code over GF(2^8) across k source symbols with r repair symbols
    (k + r <= 255), applied bytewise: repair symbol i, byte b, is
    sum_j C[i, j] * source[j][b] with C the Cauchy matrix C[i, j] = 1 / (0xFF XOR i XOR j)
    (module docstring; docs/FORMAT.md, "Repair frames"). Systematic: the sources are sent
    as they are. Any k distinct symbols of the k + r rebuild all sources exactly.

    Symbol indices: 0..k-1 the sources, k..k+r-1 the repair symbols. Get instances with
    `erasure_code(k, r)`, which caches them; a short group uses the code with smaller k.
    """

    def __init__(self, k: int, r: int) -> None:
        _check_parameters(k, r)
        self.k = int(k)
        self.r = int(r)
        self.n = self.k + self.r
        matrix = cauchy_matrix(self.k, self.r)
        matrix.flags.writeable = False
        self.matrix = matrix  # C, r x k
        self._masks = coefficient_masks(matrix)[None]  # (1, r, k, 8)
        self._targets = np.arange(self.r, dtype=np.int64)[None]
        self._no_copies = np.full((1, 0), -1, dtype=np.int64)
        self._plan_for = lru_cache(maxsize=_PLAN_CACHE)(self._make_plan)
        self._row_plan_for = lru_cache(maxsize=_PLAN_CACHE)(self._make_row_plan)

    def __repr__(self) -> str:
        return f"FrameErasureCode(k={self.k}, r={self.r})"

    @property
    def generator(self) -> np.ndarray:
        """[I_k; C], (k + r) x k: symbol t = sum_j generator[t, j] * source j."""
        return np.vstack([np.eye(self.k, dtype=np.uint8), self.matrix])

    # ---- encoding ----------------------------------------------------------------------------

    def repair_symbols(self, sources: np.ndarray | Sequence[SymbolLike], size: int | None = None) -> np.ndarray:
        """(k, S) uint8 sources -> (r, S) uint8 repair symbols.

        sources may also be k byte strings of different lengths: each is zero-padded to S =
        size (default: the longest), which is what the receiver must assume too."""
        src = _symbol_array(sources, self.k, size, "sources")
        return self.repair_symbols_groups(src[None])[0]

    def repair_symbols_groups(self, sources: np.ndarray) -> np.ndarray:
        """(G, k, S) uint8 sources of G groups -> (G, r, S) repair symbols, in one call."""
        src = self._groups(sources, "sources")
        out = np.empty((src.shape[0], self.r, src.shape[2]), dtype=np.uint8)
        compiled = _compiled(8 * src.size)
        combine = compiled.combine_rows if compiled else erasure_small.combine_rows
        combine(src, self._masks, self._targets, self._no_copies, out)
        return out

    # ---- rebuilding --------------------------------------------------------------------------

    def recover(self, received: Received, size: int | None = None) -> np.ndarray:
        """The (k, S) sources from any k distinct symbols of the group.

        received: {index: symbol}, or (indices, symbols) with symbols a sequence or an
        (m, S) array; index 0..k-1 a source, k..k+r-1 a repair symbol. A symbol shorter
        than S = size (default: the longest given) is zero-padded, as the sender padded
        the sources. With more than k symbols, the sources that arrived are used first,
        then the repair symbols in index order; a repeated index counts once (its first
        symbol is used). Fewer than k distinct symbols raise NotEnoughSymbolsError."""
        indices, symbols = self._received(received)
        used = self._select(indices)
        position: dict[int, int] = {}
        for p, idx in enumerate(indices):
            position.setdefault(idx, p)  # a repeated index: its first symbol counts
        stack = _symbol_array([symbols[position[idx]] for idx in used], self.k, size, "received symbols")
        return self._rebuild(stack[None], np.array([used], dtype=np.int64))[0]

    def recover_groups(self, symbols: np.ndarray, indices: np.ndarray) -> np.ndarray:
        """(G, k, S) symbols with their (G, k) indices -> (G, k, S) sources, in one call.

        Row p of group g is symbol indices[g, p]; each group needs k distinct indices."""
        stack = self._groups(symbols, "symbols")
        idx = np.asarray(indices)
        if idx.shape != stack.shape[:2] or idx.dtype.kind not in "iu":
            raise ErasureCodeError(f"indices must be integers of shape {stack.shape[:2]}, "
                                   f"got {idx.dtype} of shape {idx.shape}")
        if idx.size and (idx.min() < 0 or idx.max() >= self.n):
            bad = idx[(idx < 0) | (idx >= self.n)]
            raise ErasureCodeError(f"symbol indices of a ({self.k}, {self.r}) group are 0..{self.n - 1}, "
                                   f"got {bad[:8].tolist()}")
        return self._rebuild(stack, np.ascontiguousarray(idx, dtype=np.int64))

    def recovery_plan(self, indices: Sequence[int]) -> RecoveryPlan:
        """The plan (symbols used, sources lost, e x k recovery matrix) for the arrived
        symbol indices; cached per pattern (the numpy path's plans)."""
        used = self._select(list(indices))
        k_known = sum(1 for i in used if i < self.k)
        return self._plan_for(used[:k_known], used[k_known:])

    # ---- internals ---------------------------------------------------------------------------

    def _rebuild(self, stack: np.ndarray, idx: np.ndarray) -> np.ndarray:
        """Sources of each group from k stacked symbols with in-range indices idx (G, k)."""
        groups, _, size = stack.shape
        out = np.empty((groups, self.k, size), dtype=np.uint8)
        compiled = _compiled(8 * stack.size)
        if compiled is not None:  # plans computed in the kernel, no Python per group
            masks = np.empty((groups, self.r, self.k, 8), dtype=np.uint64)
            targets = np.empty((groups, self.r), dtype=np.int64)
            copies = np.empty((groups, self.k), dtype=np.int64)
            status = compiled.recovery_masks(self.matrix, idx, mul_table(), inv_table(), masks, targets, copies)
            failed = np.flatnonzero(status)
            if failed.size:
                g = int(failed[0])
                raise NotEnoughSymbolsError(f"group {g}: indices repeat ({idx[g].tolist()}); "
                                            f"{self.k} distinct symbols are needed")
            compiled.combine_rows(stack, masks, targets, copies, out)
            return out
        masks = np.zeros((groups, self.r, self.k, 8), dtype=np.uint64)
        targets = np.full((groups, self.r), -1, dtype=np.int64)
        copies = np.empty((groups, self.k), dtype=np.int64)
        for g, row in enumerate(idx.tolist()):
            try:
                g_masks, g_targets, g_copies = self._row_plan_for(tuple(row))
            except NotEnoughSymbolsError as exc:
                raise NotEnoughSymbolsError(f"group {g}: {exc}") from None
            e = g_targets.shape[0]
            masks[g, :e] = g_masks
            targets[g, :e] = g_targets
            copies[g] = g_copies
        erasure_small.combine_rows(stack, masks, targets, copies, out)
        return out

    def _groups(self, arr: np.ndarray, what: str) -> np.ndarray:
        a = np.asarray(arr)
        if a.ndim != 3 or a.shape[1] != self.k or a.dtype != np.uint8:
            raise ErasureCodeError(f"{what} must be a uint8 array of shape (G, {self.k}, S), "
                                   f"got {a.dtype} of shape {a.shape}")
        return np.ascontiguousarray(a)

    def _received(self, received: Received) -> tuple[list[int], list]:
        if isinstance(received, Mapping):
            indices = [int(i) for i in received.keys()]
            symbols = list(received.values())
        elif isinstance(received, tuple) and len(received) == 2:
            indices = [int(i) for i in np.asarray(received[0]).reshape(-1).tolist()]
            symbols = list(received[1])
            if len(symbols) != len(indices):
                raise ErasureCodeError(f"{len(indices)} indices were given with {len(symbols)} symbols")
        else:
            raise ErasureCodeError("received must be {index: symbol} or (indices, symbols)")
        return indices, symbols

    def _select(self, indices: Sequence[int]) -> tuple[int, ...]:
        """The k symbols to use: the sources that arrived, ascending, then the first
        repair symbols by index; NotEnoughSymbolsError if fewer than k are distinct."""
        bad = [i for i in indices if not 0 <= i < self.n]
        if bad:
            raise ErasureCodeError(f"symbol indices of a ({self.k}, {self.r}) group are 0..{self.n - 1}, "
                                   f"got {bad[:8]}")
        distinct = set(indices)
        known = sorted(i for i in distinct if i < self.k)
        repairs = sorted(i for i in distinct if i >= self.k)
        lost = self.k - len(known)
        if len(repairs) < lost:
            raise NotEnoughSymbolsError(
                f"rebuilding the {self.k} sources of a group needs {self.k} distinct symbols of "
                f"{self.n}; got {len(distinct)} ({len(known)} sources, {len(repairs)} repair)")
        return tuple(known + repairs[:lost])

    def _make_plan(self, known: tuple[int, ...], repairs: tuple[int, ...]) -> RecoveryPlan:
        lost = tuple(sorted(set(range(self.k)) - set(known)))
        used = known + repairs
        rows = np.array([i - self.k for i in repairs], dtype=np.int64)
        d = self.matrix[np.ix_(rows, np.array(lost, dtype=np.int64))]  # e x e Cauchy
        d_inv = gf_inverse(d) if lost else np.zeros((0, 0), dtype=np.uint8)
        c_known = self.matrix[np.ix_(rows, np.array(known, dtype=np.int64))]
        matrix = np.concatenate([gf_matmul(d_inv, c_known), d_inv], axis=1)  # e x k over used
        matrix.flags.writeable = False
        copies = np.full((1, self.k), -1, dtype=np.int64)
        copies[0, list(known)] = np.arange(len(known))
        return RecoveryPlan(used=used, lost=lost, matrix=matrix, masks=coefficient_masks(matrix)[None],
                            targets=np.array(lost, dtype=np.int64)[None], copies=copies)

    def _make_row_plan(self, row: tuple[int, ...]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """A plan laid out for symbols stacked in the order of `row` (k indices):
        masks (e, k, 8) by row, targets (e,), copies (k,)."""
        if len(set(row)) != len(row):
            raise NotEnoughSymbolsError(f"indices repeat ({list(row)}); {self.k} distinct symbols are needed")
        plan = self.recovery_plan(row)
        where = np.array([row.index(u) for u in plan.used], dtype=np.int64)  # stack -> row
        masks = np.zeros((len(plan.lost), self.k, 8), dtype=np.uint64)
        masks[:, where] = plan.masks[0]
        stack_pos = plan.copies[0]
        copies = np.where(stack_pos >= 0, where[np.maximum(stack_pos, 0)], -1).astype(np.int64)
        return masks, plan.targets[0], copies


@lru_cache(maxsize=None)
def erasure_code(k: int, r: int) -> FrameErasureCode:
    """The shared FrameErasureCode for (k, r): built once (microseconds), then cached."""
    return FrameErasureCode(k, r)
