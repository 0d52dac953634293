"""Constructions of the catalog's code families as generator or parity-check matrices.

Only the defining matrices are built here; the systematic form, distance and decoding
tables are derived by BinaryLinearCode.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np

from bitmend.codes.linear import BinaryLinearCode


def repetition(n: int) -> BinaryLinearCode:
    """(n, 1) repetition code: G = [1 1 ... 1]."""
    return BinaryLinearCode.from_generator(np.ones((1, n), dtype=np.uint8), name=f"rep-{n}",
                                           description=f"{n}-fold repetition")


def hamming(m: int) -> BinaryLinearCode:
    """(2^m - 1, 2^m - 1 - m) Hamming code: H has every non-zero m-bit column once."""
    n = (1 << m) - 1
    columns = [v for v in range(1, n + 1) if v & (v - 1)] + [1 << (m - 1 - i) for i in range(m)]
    H = np.array([[(v >> (m - 1 - row)) & 1 for v in columns] for row in range(m)], dtype=np.uint8)
    return BinaryLinearCode.from_parity_check(H, name=f"hamming-{n}-{n - m}",
                                              description="perfect single-error-correcting Hamming code")


def hsiao_secded(k: int, r: int) -> BinaryLinearCode:
    """Odd-weight-column SECDED code (Hsiao 1970), n = k + r.

    H = [A | I_r] where A's k columns are distinct odd-weight r-bit vectors of weight >= 3,
    taken from the lightest weights first (fewest XOR gates) and, within a weight, chosen
    greedily so that the rows of H carry weights as equal as possible. Any double error
    gives an even-weight non-zero syndrome, which no single error (odd weight) can give,
    so every double error is detected.
    """
    chosen: list[tuple[int, ...]] = []
    row_weight = [0] * r
    weight = 3
    while len(chosen) < k:
        if weight > r:
            raise ValueError(f"no odd-weight-column SECDED code with k={k}, r={r}")
        pool = list(combinations(range(r), weight))
        while pool and len(chosen) < k:
            # the column whose rows are currently lightest keeps the row weights balanced
            best = min(pool, key=lambda col: (sum(row_weight[i] for i in col), col))
            pool.remove(best)
            chosen.append(best)
            for i in best:
                row_weight[i] += 1
        weight += 2
    A = np.zeros((r, k), dtype=np.uint8)
    for j, col in enumerate(chosen):
        A[list(col), j] = 1
    H = np.hstack([A, np.eye(r, dtype=np.uint8)])
    return BinaryLinearCode.from_parity_check(H, name=f"secded-{k + r}-{k}",
                                              description="single-error-correcting, double-error-detecting (Hsiao)")


def cyclic_generator_matrix(n: int, generator_poly: int) -> np.ndarray:
    """Rows are x^i g(x), i = 0 .. k-1, coefficients of x^0 .. x^(n-1) left to right."""
    degree = generator_poly.bit_length() - 1
    k = n - degree
    G = np.zeros((k, n), dtype=np.uint8)
    coefficients = [(generator_poly >> e) & 1 for e in range(degree + 1)]
    for i in range(k):
        G[i, i: i + degree + 1] = coefficients
    return G


# g(x) = x^11 + x^10 + x^6 + x^5 + x^4 + x^2 + 1, a generator of the binary Golay code
# (MacWilliams & Sloane ch. 2; recalled from memory, checked by the published weight
# distribution in the tests).
GOLAY_23_GENERATOR = 0b110001110101


def golay23() -> BinaryLinearCode:
    """(23, 12) binary Golay code, cyclic with generator polynomial GOLAY_23_GENERATOR."""
    G = cyclic_generator_matrix(23, GOLAY_23_GENERATOR)
    return BinaryLinearCode.from_generator(G, name="golay-23-12",
                                           description="perfect triple-error-correcting Golay code")


def golay24() -> BinaryLinearCode:
    """(24, 12) extended Golay code: golay-23-12 plus an overall parity bit."""
    G = cyclic_generator_matrix(23, GOLAY_23_GENERATOR)
    overall = G.sum(axis=1, keepdims=True) % 2
    return BinaryLinearCode.from_generator(np.hstack([G, overall]).astype(np.uint8), name="golay-24-12",
                                           description="extended Golay: corrects 3, detects 4")
