"""Dense GF(2) matrix algebra on numpy uint8 arrays of 0/1 (set-up work, not a hot path)."""

from __future__ import annotations

import numpy as np


def as_bit_matrix(rows: object) -> np.ndarray:
    """A 2-D uint8 array of 0/1, or ValueError saying what arrived."""
    matrix = np.asarray(rows)
    if matrix.ndim != 2 or matrix.size == 0:
        raise ValueError(f"expected a non-empty 2-D matrix of 0/1, got shape {matrix.shape}")
    if not np.isin(matrix, (0, 1)).all():
        raise ValueError("matrix entries must be 0 or 1")
    return matrix.astype(np.uint8)


def row_reduce(matrix: np.ndarray, pivot_columns: list[int] | None = None) -> tuple[np.ndarray, list[int]]:
    """Reduced row echelon form over GF(2).

    Pivots are sought in the order of pivot_columns (default left to right). Returns the
    reduced matrix with zero rows removed and the pivot column of each remaining row.
    """
    m = matrix.copy() % 2
    rows, cols = m.shape
    order = list(range(cols)) if pivot_columns is None else list(pivot_columns)
    pivots: list[int] = []
    row = 0
    for col in order:
        if row == rows:
            break
        candidates = np.nonzero(m[row:, col])[0]
        if candidates.size == 0:
            continue
        pick = row + int(candidates[0])
        if pick != row:
            m[[row, pick]] = m[[pick, row]]
        others = np.nonzero(m[:, col])[0]
        others = others[others != row]
        m[others] ^= m[row]
        pivots.append(col)
        row += 1
    return m[:row], pivots


def rank(matrix: np.ndarray) -> int:
    """Rank over GF(2)."""
    return len(row_reduce(matrix)[1])


def null_space(matrix: np.ndarray) -> np.ndarray:
    """A basis (as rows) of {x : matrix x^T = 0} over GF(2)."""
    reduced, pivots = row_reduce(matrix)
    cols = matrix.shape[1]
    free = [c for c in range(cols) if c not in pivots]
    basis = np.zeros((len(free), cols), dtype=np.uint8)
    for i, f in enumerate(free):
        basis[i, f] = 1
        for r, p in enumerate(pivots):
            basis[i, p] = reduced[r, f]
    return basis
