"""GF(2^8) matrix algebra for the erasure code across frames, and the numpy twin of its kernel.

Field: GF(2^8) modulo x^8 + x^4 + x^3 + x^2 + 1 (0x11D), the field of the Reed-Solomon
codes (kernels.gf2m.field(8)). Addition is XOR.

Every job of the erasure code, making repair symbols or rebuilding lost ones, is one
operation: output row t = sum_j M[t, j] * input row j, bytewise in GF(2^8), for a small
coefficient matrix M (r x k to make repair symbols; e x k to rebuild e lost sources from
the k symbols that arrived). `combine_rows` does it with plain numpy (a product-table
lookup for every coefficient and byte, XOR-reduced), for small work that should not load
numba; `kernels.erasure.combine_rows` is the compiled form with the same arguments and
bit-identical results.

Coefficients travel to both as *bit masks*: for a coefficient c, mask b (b = 0..7) is the
byte c * x^b replicated into all 8 bytes of a uint64. Multiplication by c is linear over
GF(2), so for a byte s with bits s_b, c * s = XOR_b s_b (c * x^b): eight AND/XOR steps
that work on 8 bytes of a word at once (see kernels.erasure). Mask 0 is c itself.

Set-up algebra (`gf_matmul`, `gf_inverse`) runs once per code or per pattern of lost
symbols, on matrices of at most 255 x 255: numpy on whole rows, not a hot path.
"""

from __future__ import annotations

import numpy as np

from bitmend.errors import BitmendError
from bitmend.kernels.gf2m import field

REPLICATE = np.uint64(0x0101010101010101)  # byte 0x01 in every byte of a word
_SMALL_BLOCK = 1 << 20  # bytes of (rows, k, columns) products per numpy step


class SingularMatrixError(BitmendError, ValueError):
    """A square matrix over GF(2^8) that has no inverse."""


def mul_table() -> np.ndarray:
    """The 256 x 256 product table of GF(2^8) mod 0x11D (uint8)."""
    return field(8).mul_table


def inv_table() -> np.ndarray:
    """inv[a] = a^-1 in GF(2^8) mod 0x11D (inv[0] = 0, never used)."""
    return field(8).inv_table


def gf_matmul(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """(a @ b) over GF(2^8): (m, l) x (l, n) uint8 -> (m, n), entry sum_l a[i, l] b[l, j]."""
    a = np.asarray(a, dtype=np.uint8)
    b = np.asarray(b, dtype=np.uint8)
    if a.shape[1] != b.shape[0]:
        raise ValueError(f"cannot multiply a {a.shape} matrix by a {b.shape} matrix")
    if a.shape[1] == 0:
        return np.zeros((a.shape[0], b.shape[1]), dtype=np.uint8)
    products = mul_table()[a[:, :, None], b[None, :, :]]  # (m, l, n)
    return np.bitwise_xor.reduce(products, axis=1)


def gf_inverse(a: np.ndarray) -> np.ndarray:
    """The inverse of a square matrix over GF(2^8), by Gauss-Jordan elimination on [A | I].

    Raises SingularMatrixError if a column has no non-zero pivot (A is not invertible)."""
    a = np.asarray(a, dtype=np.uint8)
    n = a.shape[0]
    if a.ndim != 2 or a.shape[1] != n:
        raise ValueError(f"only a square matrix has an inverse, got shape {a.shape}")
    mul, inv = mul_table(), inv_table()
    work = np.concatenate([a, np.eye(n, dtype=np.uint8)], axis=1)
    for col in range(n):
        nonzero = np.flatnonzero(work[col:, col])
        if nonzero.size == 0:
            raise SingularMatrixError(f"the {n} x {n} matrix is singular (no pivot in column {col})")
        pivot = col + int(nonzero[0])
        if pivot != col:
            work[[col, pivot]] = work[[pivot, col]]
        work[col] = mul[inv[work[col, col]], work[col]]  # scale the pivot row to a leading 1
        factors = work[:, col].copy()
        factors[col] = 0
        # row_i -= factor_i * pivot_row for every other row, all rows at once
        work ^= mul[factors[:, None], work[col][None, :]]
    return work[:, n:].copy()


def coefficient_masks(coefficients: np.ndarray) -> np.ndarray:
    """(..., k) uint8 coefficients -> (..., k, 8) uint64 bit masks: mask b of c is the
    byte c * x^b in all 8 bytes of a word."""
    c = np.asarray(coefficients, dtype=np.uint8)
    powers = np.array([1 << b for b in range(8)], dtype=np.uint8)
    byte_masks = mul_table()[c[..., None], powers]  # c * x^b
    return byte_masks.astype(np.uint64) * REPLICATE


def coefficients_of(masks: np.ndarray) -> np.ndarray:
    """The coefficients back from their masks: the low byte of mask 0 (c * x^0)."""
    return (masks[..., 0] & np.uint64(0xFF)).astype(np.uint8)


def combine_rows(inputs: np.ndarray, masks: np.ndarray, targets: np.ndarray, copies: np.ndarray,
                 out: np.ndarray) -> None:
    """numpy twin of kernels.erasure.combine_rows; same arguments, same results.

    inputs  (G, k, S) uint8: k input symbols per group
    masks   (1 or G, m, k, 8) uint64: m coefficient rows per group (or one set for all)
    targets (1 or G, m) int64: output row of each combination (negative: not written)
    copies  (1 or G, T) int64: copies[g, t] >= 0 puts input row copies[g, t] at output row t
    out     (G, T, S) uint8: written at the rows named by targets and copies only

    For every group g: out[g, targets[g, i]] = sum_j c[g, i, j] * inputs[g, j] in GF(2^8),
    bytewise; out[g, t] = inputs[g, copies[g, t]] where copies[g, t] >= 0."""
    groups, k, size = inputs.shape
    m = masks.shape[1]
    mul = mul_table()
    coefs = coefficients_of(masks)  # (1 or G, m, k)
    cols = max(1, _SMALL_BLOCK // max(1, m * k))  # bounds the (m, k, cols) product array
    for g in range(groups):
        gc = 0 if coefs.shape[0] == 1 else g
        gt = 0 if targets.shape[0] == 1 else g
        gp = 0 if copies.shape[0] == 1 else g
        rows = targets[gt]
        live = rows >= 0
        if m and live.any():
            c = coefs[gc][live]  # (m', k)
            for c0 in range(0, size, cols):
                block = inputs[g, :, c0:c0 + cols]  # (k, cols)
                products = mul[c[:, :, None], block[None, :, :]]
                out[g, rows[live], c0:c0 + cols] = np.bitwise_xor.reduce(products, axis=1)
        wanted = copies[gp]
        placed = np.flatnonzero(wanted >= 0)
        if placed.size:
            out[g, placed] = inputs[g, wanted[placed]]
