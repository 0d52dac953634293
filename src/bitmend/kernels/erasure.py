"""Compiled kernel of the erasure code across frames: rows of bytes combined in GF(2^8).

`combine_rows` computes, for each group g of k input symbols (byte rows of length S),

    out[g, targets[g, i]] = sum_j c[g, i, j] * inputs[g, j]      (GF(2^8) mod 0x11D, bytewise)

and copies the input rows named by `copies` into place. Making repair symbols is the case
c = the code's r x k matrix; rebuilding e lost sources is the case c = an e x k recovery
matrix over the k symbols that arrived (codes/erasure.py builds both).

How one coefficient is applied. Multiplication by a fixed c is linear over GF(2): for a
byte s = sum_b s_b x^b, c * s = XOR_b s_b (c * x^b). With the eight bytes c * x^b
replicated across a 64-bit word ("masks", kernels.erasure_small.coefficient_masks) and
eight source bytes in one word w:

    bits  = (w >> b) & 0x0101010101010101        bit b of each byte, moved to bit 0
    full  = (bits << 8) - bits                   0x00 or 0xFF in each byte (bits * 255,
                                                  no borrow crosses a byte)
    acc  ^= full & mask_b

The "full" words of an input row depend on the row only, so they are computed once per
row (`_spread`, eight words per input word) and shared by every output row that uses it;
each output row then costs eight AND and eight XOR per word (`_multiply_add`). The loops
over words have no table lookups and no data-dependent branches, so LLVM vectorizes them
(four words per AVX2 instruction). The bytes of a word never mix, so the host's byte
order does not matter. A coefficient 1 is a plain XOR of the row, 0 is skipped.

Memory: a group is processed in column chunks of CHUNK_BYTES. The input row of a chunk is
copied into a word-aligned scratch row (which also lets S be any length, not only a
multiple of 8), its spread bits fill 8 scratch rows, and the m outputs accumulate in m
scratch rows: (9 + m) * CHUNK_BYTES bytes, in the first-level cache for small m. Nothing
else grows with the input.

numba compiles these loops; nothing above the kernels layer imports numba, and this module
loads late (codes/erasure.py imports it inside a function, for work of 2^16 bits or more
or once compiled kernels are loaded anyway; smaller work uses kernels.erasure_small).
"""

from __future__ import annotations

import numpy as np
from bitmend.kernels.jit import njit

CHUNK_BYTES = 2048  # columns per pass: 2 KiB scratch rows (input, spread bits, outputs)

_LOW = np.uint64(0x0101010101010101)
_EIGHT = np.uint64(8)


@njit(cache=True)
def _spread(src, spread, nwords):
    """spread[b, w] = bit b of every byte of src[w], as 0x00 or 0xFF per byte."""
    for b in range(8):
        out = spread[b]
        for w in range(nwords):
            bits = (src[w] >> np.uint64(b)) & _LOW
            out[w] = (bits << _EIGHT) - bits  # bits * 255: no borrow crosses a byte


@njit(cache=True)
def _multiply_add(spread, acc, nwords, m0, m1, m2, m3, m4, m5, m6, m7):
    """acc[w] ^= c * src[w] bytewise for w < nwords: c by its eight masks, src by its
    spread bits (_spread)."""
    s0, s1, s2, s3 = spread[0], spread[1], spread[2], spread[3]
    s4, s5, s6, s7 = spread[4], spread[5], spread[6], spread[7]
    for w in range(nwords):
        acc[w] ^= ((s0[w] & m0) ^ (s1[w] & m1) ^ (s2[w] & m2) ^ (s3[w] & m3)
                   ^ (s4[w] & m4) ^ (s5[w] & m5) ^ (s6[w] & m6) ^ (s7[w] & m7))


@njit(cache=True)
def _xor_into(src, acc, nwords):
    """acc[w] ^= src[w]: the coefficient 1."""
    for w in range(nwords):
        acc[w] ^= src[w]


@njit(cache=True)
def combine_rows(inputs, masks, targets, copies, out):
    """Linear combinations of byte rows over GF(2^8), group by group.

    inputs  (G, k, S) uint8: k input symbols per group
    masks   (1 or G, m, k, 8) uint64: coefficient c[g, i, j] as its eight masks
            (mask b = c * x^b in all bytes); a leading 1 shares one matrix by all groups
    targets (1 or G, m) int64: output row of combination i (negative: skipped)
    copies  (1 or G, T) int64: copies[g, t] >= 0 puts input row copies[g, t] at output row t
    out     (G, T, S) uint8: only the rows named by targets and copies are written

    out[g, targets[g, i]] = sum_j c[g, i, j] * inputs[g, j] (bytewise, XOR for +)."""
    groups, k, size = inputs.shape
    m = masks.shape[1]
    chunk_words = CHUNK_BYTES // 8
    row = np.zeros(chunk_words, dtype=np.uint64)  # one input row of a chunk, word-aligned
    row8 = row.view(np.uint8)
    spread = np.zeros((8, chunk_words), dtype=np.uint64)
    acc = np.zeros((max(m, 1), chunk_words), dtype=np.uint64)
    acc8 = acc.view(np.uint8)
    for g in range(groups):
        gm = 0 if masks.shape[0] == 1 else g
        gt = 0 if targets.shape[0] == 1 else g
        gc = 0 if copies.shape[0] == 1 else g
        live = 0
        for i in range(m):
            if targets[gt, i] >= 0:
                live += 1
        if live > 0:
            for b0 in range(0, size, CHUNK_BYTES):
                nbytes = min(CHUNK_BYTES, size - b0)
                nwords = (nbytes + 7) // 8
                acc[:, :nwords] = 0
                for j in range(k):
                    row8[:nbytes] = inputs[g, j, b0:b0 + nbytes]
                    row8[nbytes:nwords * 8] = 0  # the last word's spare bytes
                    spread_done = False
                    for i in range(m):
                        if targets[gt, i] < 0:
                            continue
                        first = masks[gm, i, j, 0]  # c * x^0: zero iff c = 0
                        if first == 0:
                            continue
                        if first == _LOW:  # c = 1
                            _xor_into(row, acc[i], nwords)
                            continue
                        if not spread_done:  # once per input row, shared by all outputs
                            _spread(row, spread, nwords)
                            spread_done = True
                        _multiply_add(spread, acc[i], nwords, first, masks[gm, i, j, 1],
                                      masks[gm, i, j, 2], masks[gm, i, j, 3], masks[gm, i, j, 4],
                                      masks[gm, i, j, 5], masks[gm, i, j, 6], masks[gm, i, j, 7])
                for i in range(m):
                    t = targets[gt, i]
                    if t >= 0:
                        out[g, t, b0:b0 + nbytes] = acc8[i, :nbytes]
        for t in range(copies.shape[1]):
            p = copies[gc, t]
            if p >= 0:
                out[g, t, :] = inputs[g, p, :]


@njit(cache=True)
def recovery_masks(matrix, indices, mul, inv, masks, targets, copies):
    """The recovery plan of each group, for symbols stacked in the order they arrived.

    matrix  (r, k) uint8: the code's C
    indices (G, k) int64: the symbol index of each stacked row (0..k-1 source, k.. repair)
    mul, inv: GF(2^8) product and inverse tables (kernels.gf2m.field(8))
    masks   (G, r, k, 8) uint64, targets (G, r) int64, copies (G, k) int64: written here,
            the arguments of combine_rows that rebuild the k sources of each group
    returns (G,) int64: 0 planned; 1 an index out of range or repeated (the group is left
            unplanned; the caller raises).

    With e sources lost, the stacked repair symbols a = 0..e-1 (rows p_a, repair rows
    i_a) and the e x e matrix D[a, b] = C[i_a, lost_b], lost source lost_t =
    sum_a Dinv[t, a] * (repair a + sum_{known j} C[i_a, j] * source j): the coefficient of
    a repair row is Dinv[t, a], that of a known source j is sum_a Dinv[t, a] C[i_a, j]."""
    groups, k = indices.shape
    r = matrix.shape[0]
    n = k + r
    status = np.zeros(groups, dtype=np.int64)
    seen = np.zeros(n, dtype=np.int64)
    row_of = np.zeros(n, dtype=np.int64)
    lost = np.zeros(k, dtype=np.int64)
    rep_rows = np.zeros(k, dtype=np.int64)
    work = np.zeros((r, 2 * r), dtype=np.int64)
    coef = np.zeros((r, k), dtype=np.int64)
    for g in range(groups):
        seen[:] = 0
        bad = False
        for p in range(k):
            t = indices[g, p]
            if t < 0 or t >= n or seen[t] != 0:
                bad = True
                break
            seen[t] = 1
            row_of[t] = p
        masks[g] = 0
        targets[g] = -1
        if bad:
            copies[g] = -1
            status[g] = 1
            continue
        e = 0
        for j in range(k):
            if seen[j] != 0:
                copies[g, j] = row_of[j]
            else:
                copies[g, j] = -1
                lost[e] = j
                e += 1
        if e == 0:
            continue
        a = 0
        for t in range(k, n):  # exactly e repair symbols arrived (k distinct symbols)
            if seen[t] != 0:
                rep_rows[a] = t
                a += 1
        # [D | I] -> [I | Dinv] by Gauss-Jordan; D is a Cauchy matrix, so always invertible
        for x in range(e):
            for y in range(e):
                work[x, y] = matrix[rep_rows[x] - k, lost[y]]
                work[x, e + y] = 1 if x == y else 0
        for col in range(e):
            pivot = col
            while work[pivot, col] == 0:
                pivot += 1
            if pivot != col:
                for y in range(2 * e):
                    tmp = work[col, y]
                    work[col, y] = work[pivot, y]
                    work[pivot, y] = tmp
            scale = inv[work[col, col]]
            for y in range(2 * e):
                work[col, y] = mul[scale, work[col, y]]
            for x in range(e):
                f = work[x, col]
                if x != col and f != 0:
                    for y in range(2 * e):
                        work[x, y] ^= mul[f, work[col, y]]
        # coefficients by stacked row
        for t in range(e):
            for p in range(k):
                coef[t, p] = 0
            for x in range(e):
                coef[t, row_of[rep_rows[x]]] = work[t, e + x]
            for j in range(k):
                if seen[j] != 0:
                    acc = 0
                    for x in range(e):
                        acc ^= mul[work[t, e + x], matrix[rep_rows[x] - k, j]]
                    coef[t, row_of[j]] = acc
            targets[g, t] = lost[t]
            for p in range(k):
                c = coef[t, p]
                for b in range(8):
                    masks[g, t, p, b] = np.uint64(mul[c, 1 << b]) * _LOW
    return status
