"""Plain-numpy twins of the kernels in kernels.cyclic, for small inputs.

Same algorithms, same bit order, same verdicts (tested bit-identical): the shift register
runs across all rows at once (one numpy step per byte position), and only rows with a
non-zero remainder go through the algebra (Berlekamp-Massey, Chien search, Forney) one
at a time in Python. That is slow per damaged row but needs no compiled code, so a small
packet never pays for loading numba.
"""

from __future__ import annotations

import numpy as np

from bitmend.kernels.status import FAILED

_U64 = np.uint64


# ---- shift register ----------------------------------------------------------------------------

def _feed(reg: np.ndarray, v: int, u: np.ndarray, table: np.ndarray) -> np.ndarray:
    index = (reg[:, 0] >> _U64(64 - v)) ^ u.astype(np.uint64)
    out = reg << _U64(v)
    out[:, :-1] |= reg[:, 1:] >> _U64(64 - v)
    return out ^ table[index.astype(np.intp)]


def registers(rows: np.ndarray, nbits: int, table: np.ndarray) -> np.ndarray:
    """(rows, W) remainder registers after the first nbits bits of each packed row."""
    reg = np.zeros((rows.shape[0], table.shape[1]), dtype=np.uint64)
    full, rest = nbits >> 3, nbits & 7
    for c in range(full):
        reg = _feed(reg, 8, rows[:, c], table)
    if rest:
        reg = _feed(reg, rest, rows[:, full] >> (8 - rest), table)
    return reg


def _register_bytes(reg: np.ndarray) -> np.ndarray:
    """Register words as bytes, top byte first: (rows, 8W) uint8."""
    return np.ascontiguousarray(reg.astype(">u8")).view(np.uint8).reshape(reg.shape[0], -1)


# ---- encoders ----------------------------------------------------------------------------------

def bch_encode_rows(rows: np.ndarray, k: int, r: int, table: np.ndarray) -> None:
    reg = registers(rows, k, table)
    parity = np.unpackbits(_register_bytes(reg), axis=1)[:, :r]
    bits = np.unpackbits(rows, axis=1)
    bits[:, k:k + r] = parity
    rows[:] = np.packbits(bits, axis=1)


def rs_encode_rows(rows: np.ndarray, k: int, r: int, table: np.ndarray) -> None:
    reg = registers(rows, 8 * k, table)
    rows[:, k:k + r] = _register_bytes(reg)[:, :r]


# ---- algebra (one row at a time, plain Python integers) -------------------------------------------

def _berlekamp_massey(syn, nsyn, lam, f, mul, inv) -> int:
    size = len(lam)
    bpoly = list(lam)
    L = f
    for r in range(f + 1, nsyn + 1):
        delta = 0
        for j in range(min(r, size)):
            if lam[j]:
                delta ^= int(mul[lam[j], syn[r - 1 - j]])
        if delta == 0:
            bpoly = [0] + bpoly[:-1]
        elif 2 * L <= r + f - 1:
            dinv = int(inv[delta])
            new = [lam[0]] + [lam[j] ^ int(mul[delta, bpoly[j - 1]]) for j in range(1, size)]
            bpoly = [int(mul[c, dinv]) for c in lam]
            lam[:] = new
            L = r - L + f
        else:
            for j in range(size - 1, 0, -1):
                lam[j] ^= int(mul[delta, bpoly[j - 1]])
            bpoly = [0] + bpoly[:-1]
    return L


def _degree(poly) -> int:
    for j in range(len(poly) - 1, -1, -1):
        if poly[j]:
            return j
    return -1


def _chien(lam, L, npos, mul, exp, order) -> list[int]:
    """Degrees i < npos with Lambda(alpha^-i) = 0 (all of them, ascending)."""
    i = np.arange(npos)
    value = np.zeros(npos, dtype=np.int64)
    for j in range(L + 1):
        if lam[j]:
            powers = exp[(-i * j) % order]
            value ^= mul[lam[j], powers].astype(np.int64)
    return np.nonzero(value == 0)[0].tolist()


def _syndromes(symbols, beta, mul) -> list[int]:
    """S = sum_p s_p beta^(p+1) for each beta (Horner from the last register position)."""
    out = []
    for bj in beta:
        acc = 0
        for sp in reversed(symbols):
            acc = int(mul[acc ^ int(sp), bj])
        out.append(acc)
    return out


def bch_decode_rows(rows, n, r, t, table, mul, inv, exp, order, status) -> None:
    reg = registers(rows, n, table)
    status[:] = 0
    nsyn = 2 * t
    beta = [int(exp[(order - j % order) % order]) for j in range(1, nsyn + 1)]
    for b in np.nonzero(reg.any(axis=1))[0]:
        bits = np.unpackbits(_register_bytes(reg[b:b + 1])[0])[:r]
        syn = _syndromes(bits, beta, mul)
        lam = [1] + [0] * (nsyn + 1)
        L = _berlekamp_massey(syn, nsyn, lam, 0, mul, inv)
        if L > t or _degree(lam) != L:
            status[b] = FAILED
            continue
        roots = _chien(lam, L, n, mul, exp, order)
        if len(roots) != L:
            status[b] = FAILED
            continue
        for i in roots:
            j = n - 1 - i
            rows[b, j >> 3] ^= 0x80 >> (j & 7)
        status[b] = L


def rs_decode_rows(rows, r, first_root, table, mul, inv, exp, order, erasures, status) -> None:
    count, n = rows.shape
    reg = registers(rows, 8 * n, table)
    status[:] = 0
    nsyn = r
    beta = [int(exp[(order - (first_root + idx) % order) % order]) for idx in range(nsyn)]
    has_erasures = erasures.shape[0] == count
    for b in np.nonzero(reg.any(axis=1))[0]:
        lam = [1] + [0] * (nsyn + 1)
        f = 0
        if has_erasures:
            for pos in np.nonzero(erasures[b])[0]:
                f += 1
                if f > nsyn:
                    break
                x = int(exp[(n - 1 - int(pos)) % order])
                for j in range(f, 0, -1):
                    lam[j] ^= int(mul[x, lam[j - 1]])
        if f > nsyn:
            status[b] = FAILED
            continue
        syn = _syndromes(_register_bytes(reg[b:b + 1])[0][:r], beta, mul)
        L = _berlekamp_massey(syn, nsyn, lam, f, mul, inv)
        if 2 * L - f > nsyn or _degree(lam) != L:
            status[b] = FAILED
            continue
        roots = _chien(lam, L, n, mul, exp, order)
        if len(roots) != L:
            status[b] = FAILED
            continue
        omega = [0] * nsyn
        for i in range(nsyn):
            for j in range(min(i, L) + 1):
                omega[i] ^= int(mul[lam[j], syn[i - j]])
        values = []
        for i in roots:
            xinv = int(exp[(order - i % order) % order])
            num = 0
            for j in range(nsyn - 1, -1, -1):
                num = int(mul[num, xinv]) ^ omega[j]
            x2 = int(mul[xinv, xinv])
            den = 0
            for j in range(L - (1 - L % 2), 0, -2):
                den = int(mul[den, x2]) ^ lam[j]
            if den == 0:
                values = None
                break
            y = int(mul[num, inv[den]])
            values.append(int(mul[y, exp[(i * ((1 - first_root) % order)) % order]]))
        if values is None or not any(values):
            status[b] = FAILED
            continue
        for i, y in zip(roots, values):
            rows[b, n - 1 - i] ^= y
        status[b] = sum(1 for y in values if y)


# ---- moving bits between the stream and packed rows ---------------------------------------------

def gather_bits(data: bytes | np.ndarray, blocks: int, width: int, depth: int, row_bytes: int) -> np.ndarray:
    """Twin of cyclic.gather_bits reading from bytes (from bit 0); missing bits read as 0."""
    raw = np.frombuffer(data, dtype=np.uint8) if not isinstance(data, np.ndarray) else data
    nbits = blocks * width
    bits = np.unpackbits(raw)[:nbits]
    if bits.size < nbits:
        bits = np.concatenate([bits, np.zeros(nbits - bits.size, dtype=np.uint8)])
    if depth > 1:
        bits = bits.reshape(blocks // depth, width, depth).transpose(0, 2, 1)
    rows = np.zeros((blocks, 8 * row_bytes), dtype=np.uint8)
    rows[:, :width] = bits.reshape(blocks, width)
    return np.packbits(rows, axis=1)


def scatter_bits(rows: np.ndarray, width: int, depth: int) -> bytes:
    """Twin of cyclic.scatter_bits: the first width bits of every row, as stream bytes."""
    blocks = rows.shape[0]
    bits = np.unpackbits(rows, axis=1)[:, :width]
    if depth > 1:
        bits = bits.reshape(blocks // depth, depth, width).transpose(0, 2, 1)
    return np.packbits(bits.reshape(-1)).tobytes()
