"""Compiled kernels of the cyclic codes: binary BCH and Reed-Solomon over GF(2^8).

Both families are systematic cyclic codes: a codeword is the message followed by the
remainder p(x) = m(x) x^r mod g(x), highest degree first (codeword position j holds the
coefficient of x^(n-1-j), n the possibly shortened length). One shift-register kernel
serves both (see gf2m.binary_register_table / symbol_register_table): it feeds a packed
row 8 bits (one byte: 8 bits of a BCH word, or one RS symbol) at a time.

Decoding a row:

1. the register over all n received positions gives s(x) = r(x) x^r mod g(x); zero
   means a codeword (status 0), and most rows stop here, so only rows with a non-zero
   remainder pay for the algebra below;
2. syndromes S_j = r(alpha^j) = s(alpha^j) alpha^(-jr) = sum_p s_p alpha^(-j(p+1)) for the
   2t roots alpha^j of g (s_p = register position p, p = 0 the top), by Horner;
3. Berlekamp-Massey gives the error locator Lambda(x) = prod (1 - X_l x), X_l = alpha^i
   for an error at degree i; for Reed-Solomon it starts from the erasure locator, which
   makes it an errata locator (errors and erasures, 2e + f <= n - k);
4. Chien search: degree i is in error when Lambda(alpha^-i) = 0, for i < n only; a
   locator of degree L that does not have L distinct roots there means more errors
   than the code corrects: the row is left as received and flagged FAILED (255);
5. Reed-Solomon error values by Forney: Y = X^(1-c) Omega(X^-1) / Lambda'(X^-1), with
   Omega = S Lambda mod x^(2t) and c the first root exponent.

Packed bit rows (BCH) hold codeword bit j at byte j >> 3, bit 7 - (j & 7): the first bit
sent is the most significant, as everywhere in bitmend. numba compiles these loops; nothing
above the kernels layer imports numba.
"""

from __future__ import annotations

import numpy as np
from bitmend.kernels.jit import njit

from bitmend.kernels.bitfields import finish_writer, get_byte, get_field, or_byte, put_field
from bitmend.kernels.blockcode import transpose8
from bitmend.kernels.status import FAILED

U64 = np.uint64


# ---- shift register ----------------------------------------------------------------------------

@njit(cache=True, inline="always")
def _feed(reg, v, u, table):
    """reg <- reg x^v + u x^R mod g, for 1 <= v <= 8 bits u (u < 2^v)."""
    W = reg.shape[0]
    index = (reg[0] >> U64(64 - v)) ^ u
    for w in range(W - 1):
        reg[w] = (reg[w] << U64(v)) | (reg[w + 1] >> U64(64 - v))
    reg[W - 1] = reg[W - 1] << U64(v)
    for w in range(W):
        reg[w] ^= table[index, w]


@njit(cache=True, inline="always")
def _register(row, nbits, table, reg):
    """reg = remainder register after the first nbits bits of the packed row. Tables of
    four words (every BCH code here, Reed-Solomon with n - k <= 32) keep the register in
    four scalars, which the compiler holds in machine registers: about 3x faster than
    the array form used for wider registers."""
    full = nbits >> 3
    rest = nbits & 7
    if table.shape[1] == 4:
        r0, r1, r2, r3 = U64(0), U64(0), U64(0), U64(0)
        for c in range(full):
            index = (r0 >> U64(56)) ^ U64(row[c])
            r0 = ((r0 << U64(8)) | (r1 >> U64(56))) ^ table[index, 0]
            r1 = ((r1 << U64(8)) | (r2 >> U64(56))) ^ table[index, 1]
            r2 = ((r2 << U64(8)) | (r3 >> U64(56))) ^ table[index, 2]
            r3 = (r3 << U64(8)) ^ table[index, 3]
        if rest:
            v = U64(rest)
            index = (r0 >> (U64(64) - v)) ^ (U64(row[full]) >> (U64(8) - v))
            r0 = ((r0 << v) | (r1 >> (U64(64) - v))) ^ table[index, 0]
            r1 = ((r1 << v) | (r2 >> (U64(64) - v))) ^ table[index, 1]
            r2 = ((r2 << v) | (r3 >> (U64(64) - v))) ^ table[index, 2]
            r3 = (r3 << v) ^ table[index, 3]
        reg[0], reg[1], reg[2], reg[3] = r0, r1, r2, r3
        return
    for w in range(reg.shape[0]):
        reg[w] = U64(0)
    for c in range(full):
        _feed(reg, 8, U64(row[c]), table)
    if rest:
        _feed(reg, rest, U64(row[full]) >> U64(8 - rest), table)


@njit(cache=True, inline="always")
def _is_zero(reg):
    for w in range(reg.shape[0]):
        if reg[w] != U64(0):
            return False
    return True


# ---- encoders ------------------------------------------------------------------------------------

@njit(cache=True)
def bch_encode_rows(rows, k, r, table):
    """Fill in the r parity bits (bits k .. k+r-1, zero on entry) of packed rows whose
    first k bits hold the messages."""
    reg = np.zeros(table.shape[1], dtype=np.uint64)
    for b in range(rows.shape[0]):
        row = rows[b]
        _register(row, k, table, reg)
        for q in range(r):
            bit = (reg[q >> 6] >> U64(63 - (q & 63))) & U64(1)
            p = k + q
            row[p >> 3] |= np.uint8(bit << U64(7 - (p & 7)))


@njit(cache=True)
def rs_encode_rows(rows, k, r, table):
    """Fill in the r parity symbols (symbols k .. k+r-1) of rows whose first k symbols
    hold the messages."""
    reg = np.zeros(table.shape[1], dtype=np.uint64)
    for b in range(rows.shape[0]):
        row = rows[b]
        _register(row, 8 * k, table, reg)
        for p in range(r):
            row[k + p] = np.uint8((reg[p >> 3] >> U64(56 - 8 * (p & 7))) & U64(0xFF))


# ---- algebra shared by both decoders -------------------------------------------------------------

@njit(cache=True)
def _berlekamp_massey(syn, nsyn, lam, bpoly, tmp, f, mul, inv):
    """Errata locator from nsyn syndromes (syn[i] = S_(c+i)); lam holds the erasure
    locator of degree f on entry (1 without erasures) and Lambda on return, lowest degree
    first. Returns the register length L (= e + f when decodable)."""
    size = lam.shape[0]
    for j in range(size):
        bpoly[j] = lam[j]
    L = f
    for r in range(f + 1, nsyn + 1):  # step r uses S_1 .. S_r (1-based)
        # before step r both Lambda and B have degree < r: loops stop at degree r
        top = min(r + 1, size)
        delta = 0
        for j in range(min(r, size)):
            if lam[j]:
                delta ^= np.int64(mul[lam[j], syn[r - 1 - j]])
        if delta == 0:
            for j in range(top - 1, 0, -1):
                bpoly[j] = bpoly[j - 1]
            bpoly[0] = 0
        elif 2 * L <= r + f - 1:
            dinv = np.int64(inv[delta])
            tmp[0] = lam[0]
            for j in range(1, top):
                tmp[j] = lam[j] ^ np.int64(mul[delta, bpoly[j - 1]])
            for j in range(top):
                bpoly[j] = np.int64(mul[lam[j], dinv])
                lam[j] = tmp[j]
            L = r - L + f
        else:
            for j in range(top - 1, 0, -1):
                lam[j] ^= np.int64(mul[delta, bpoly[j - 1]])
            for j in range(top - 1, 0, -1):
                bpoly[j] = bpoly[j - 1]
            bpoly[0] = 0
    return L


@njit(cache=True)
def _degree(poly):
    for j in range(poly.shape[0] - 1, -1, -1):
        if poly[j]:
            return j
    return -1


@njit(cache=True)
def _chien(lam, L, npos, mul, exp, order, terms, steps, roots):
    """Degrees i < npos with Lambda(alpha^-i) = 0, into roots; returns how many (stops at L)."""
    for j in range(L + 1):
        terms[j] = lam[j]
        steps[j] = exp[(order - j % order) % order]  # alpha^-j
    count = 0
    for i in range(npos):
        s = 0
        for j in range(L + 1):
            s ^= terms[j]
        if s == 0:
            roots[count] = i
            count += 1
            if count == L:
                break
        for j in range(1, L + 1):
            terms[j] = np.int64(mul[terms[j], steps[j]])
    return count


# ---- decoders ------------------------------------------------------------------------------------

@njit(cache=True)
def bch_decode_rows(rows, n, r, t, table, mul, inv, exp, order, status):
    """Correct packed bit rows of a binary BCH code (length n, n - k = r, designed t) in
    place; status[b] = bits corrected, or FAILED."""
    reg = np.zeros(table.shape[1], dtype=np.uint64)
    nsyn = 2 * t
    syn = np.zeros(nsyn, dtype=np.int64)
    beta = np.zeros(nsyn, dtype=np.int64)
    for idx in range(nsyn):
        beta[idx] = exp[(order - (idx + 1) % order) % order]  # alpha^-(j), j = idx + 1
    size = nsyn + 2
    lam = np.zeros(size, dtype=np.int64)
    bpoly = np.zeros(size, dtype=np.int64)
    tmp = np.zeros(size, dtype=np.int64)
    terms = np.zeros(size, dtype=np.int64)
    steps = np.zeros(size, dtype=np.int64)
    roots = np.zeros(size, dtype=np.int64)
    for b in range(rows.shape[0]):
        row = rows[b]
        _register(row, n, table, reg)
        if _is_zero(reg):
            status[b] = 0
            continue
        for idx in range(nsyn):
            syn[idx] = 0
        for p in range(r - 1, -1, -1):  # Horner, all syndromes side by side
            bit = np.int64((reg[p >> 6] >> U64(63 - (p & 63))) & U64(1))
            for idx in range(nsyn):
                syn[idx] = np.int64(mul[syn[idx] ^ bit, beta[idx]])
        for j in range(size):
            lam[j] = 0
        lam[0] = 1
        L = _berlekamp_massey(syn, nsyn, lam, bpoly, tmp, 0, mul, inv)
        if L > t or _degree(lam) != L:
            status[b] = FAILED
            continue
        if _chien(lam, L, n, mul, exp, order, terms, steps, roots) != L:
            status[b] = FAILED
            continue
        for e in range(L):
            j = n - 1 - roots[e]
            row[j >> 3] ^= np.uint8(0x80 >> (j & 7))
        status[b] = L


@njit(cache=True)
def rs_decode_rows(rows, r, first_root, table, mul, inv, exp, order, erasures, status):
    """Correct Reed-Solomon rows (symbols, length n) in place, errors and erasures.

    erasures is a (rows, n) 0/1 array marking symbols known to be unreliable, or an empty
    (0, n) array for none. status[b] = symbols changed, or FAILED."""
    count, n = rows.shape
    has_erasures = erasures.shape[0] == count
    reg = np.zeros(table.shape[1], dtype=np.uint64)
    nsyn = r
    syn = np.zeros(nsyn, dtype=np.int64)
    beta = np.zeros(nsyn, dtype=np.int64)
    for idx in range(nsyn):
        beta[idx] = exp[(order - (first_root + idx) % order) % order]  # alpha^-(c + idx)
    size = nsyn + 2
    lam = np.zeros(size, dtype=np.int64)
    bpoly = np.zeros(size, dtype=np.int64)
    tmp = np.zeros(size, dtype=np.int64)
    terms = np.zeros(size, dtype=np.int64)
    steps = np.zeros(size, dtype=np.int64)
    roots = np.zeros(size, dtype=np.int64)
    omega = np.zeros(nsyn, dtype=np.int64)
    values = np.zeros(size, dtype=np.int64)
    for b in range(count):
        row = rows[b]
        _register(row, 8 * n, table, reg)
        if _is_zero(reg):
            status[b] = 0  # a codeword, whatever was erased
            continue
        for j in range(size):
            lam[j] = 0
        lam[0] = 1
        f = 0
        if has_erasures:
            for pos in range(n):
                if erasures[b, pos]:
                    f += 1
                    if f > nsyn:
                        break
                    x = exp[(n - 1 - pos) % order]  # locator alpha^degree
                    for j in range(f, 0, -1):
                        lam[j] ^= np.int64(mul[x, lam[j - 1]])
        if f > nsyn:
            status[b] = FAILED
            continue
        for idx in range(nsyn):
            syn[idx] = 0
        for p in range(r - 1, -1, -1):  # Horner, all syndromes side by side
            sp = np.int64((reg[p >> 3] >> U64(56 - 8 * (p & 7))) & U64(0xFF))
            for idx in range(nsyn):
                syn[idx] = np.int64(mul[syn[idx] ^ sp, beta[idx]])
        L = _berlekamp_massey(syn, nsyn, lam, bpoly, tmp, f, mul, inv)
        if 2 * L - f > nsyn or _degree(lam) != L:
            status[b] = FAILED
            continue
        if _chien(lam, L, n, mul, exp, order, terms, steps, roots) != L:
            status[b] = FAILED
            continue
        for i in range(nsyn):  # Omega = S Lambda mod x^(2t)
            acc = 0
            for j in range(min(i, L) + 1):
                acc ^= np.int64(mul[lam[j], syn[i - j]])
            omega[i] = acc
        ok = True
        changed = 0
        for e in range(L):
            i = roots[e]
            xinv = exp[(order - i % order) % order]
            num = 0
            for j in range(nsyn - 1, -1, -1):
                num = np.int64(mul[num, xinv]) ^ omega[j]
            den = 0  # Lambda'(x) = sum over odd j of lam_j x^(j-1) in characteristic 2
            for j in range(L - (1 - L % 2), 0, -2):
                den = np.int64(mul[den, mul[xinv, xinv]]) ^ lam[j]
            if den == 0:
                ok = False
                break
            y = np.int64(mul[num, inv[den]])
            y = np.int64(mul[y, exp[(i * ((1 - first_root) % order)) % order]])  # X^(1-c)
            values[e] = y
            if y:
                changed += 1
        if not ok or changed == 0:
            status[b] = FAILED
            continue
        for e in range(L):
            row[n - 1 - roots[e]] ^= np.uint8(values[e])
        status[b] = changed


# ---- moving bits between the stream and packed rows ---------------------------------------------

@njit(cache=True)
def gather_bits(words, start_bit, blocks, width, depth, row_bytes):
    """Packed rows (blocks x row_bytes) from a word buffer: block b = group g, place i
    takes its bit j from stream bit start_bit + g*depth*width + j*depth + i (at depth 1,
    simply the next width bits). Bits of a row beyond width are zero."""
    rows = np.zeros((blocks, row_bytes), dtype=np.uint8)
    if depth % 8 == 0 and start_bit % 8 == 0:
        # bit j of codewords 8l .. 8l+7 of a group is byte j*D/8 + l: eight such bytes
        # (j = 8c .. 8c+7) transposed as an 8x8 bit matrix are byte c of those 8 rows
        lanes = depth // 8
        group_bytes = lanes * width
        for g in range(blocks // depth):
            base = (start_bit >> 3) + g * group_bytes
            for lane in range(lanes):
                first = g * depth + 8 * lane
                for c in range((width + 7) >> 3):
                    x = U64(0)
                    for i in range(8):
                        j = 8 * c + i
                        x = (x << U64(8)) | (get_byte(words, base + j * lanes + lane) if j < width else U64(0))
                    x = transpose8(x)
                    for q in range(8):
                        rows[first + q, c] = np.uint8((x >> U64(56 - 8 * q)) & U64(0xFF))
        return rows
    if depth == 1:
        for b in range(blocks):
            base = start_bit + b * width
            for c in range(0, width, 64):
                w = min(64, width - c)
                v = get_field(words, base + c, w) << U64(64 - w)
                for q in range((w + 7) >> 3):
                    rows[b, (c >> 3) + q] = np.uint8((v >> U64(56 - 8 * q)) & U64(0xFF))
        return rows
    for g in range(blocks // depth):
        base = start_bit + g * depth * width
        first = g * depth
        for j in range(width):
            byte = j >> 3
            shift = U64(7 - (j & 7))
            for i0 in range(0, depth, 64):
                take = min(64, depth - i0)
                col = get_field(words, base + j * depth + i0, take)
                for q in range(take):
                    rows[first + i0 + q, byte] |= np.uint8(((col >> U64(take - 1 - q)) & U64(1)) << shift)
    return rows


@njit(cache=True)
def scatter_bits(rows, width, depth, out):
    """Inverse of gather_bits for the first width bits of every row, written from bit 0
    of the zeroed word buffer out."""
    blocks = rows.shape[0]
    index, acc, held = 0, U64(0), 0
    if depth == 1:
        for b in range(blocks):
            for c in range(0, width, 64):
                w = min(64, width - c)
                nbytes = (w + 7) >> 3
                v = U64(0)
                for q in range(8):
                    v = v << U64(8)
                    if q < nbytes:
                        v |= U64(rows[b, (c >> 3) + q])
                index, acc, held = put_field(out, index, acc, held, v >> U64(64 - w), w)
        finish_writer(out, index, acc, held)
        return
    if depth % 8 == 0:  # the 8x8 transposes of gather_bits, backwards
        lanes = depth // 8
        group_bytes = lanes * width
        last = rows.shape[1]
        for g in range(blocks // depth):
            base = g * group_bytes
            for lane in range(lanes):
                first = g * depth + 8 * lane
                for c in range(min(last, (width + 7) >> 3)):
                    x = U64(0)
                    for q in range(8):
                        x = (x << U64(8)) | U64(rows[first + q, c])
                    x = transpose8(x)
                    for i in range(8):
                        j = 8 * c + i
                        if j < width:
                            or_byte(out, base + j * lanes + lane, (x >> U64(56 - 8 * i)) & U64(0xFF))
        return
    for g in range(blocks // depth):
        first = g * depth
        for j in range(width):
            byte = j >> 3
            shift = 7 - (j & 7)
            for i0 in range(0, depth, 64):
                take = min(64, depth - i0)
                col = U64(0)
                for q in range(take):
                    col = (col << U64(1)) | U64((rows[first + i0 + q, byte] >> shift) & 1)
                index, acc, held = put_field(out, index, acc, held, col, take)
    finish_writer(out, index, acc, held)
