"""Byte-table kernels for codes whose messages are whole bytes and whose check bits fit in one.

For a systematic code G = [I_k | P] with k = 8 kb (kb <= 8 message bytes per codeword)
and r <= 8, parity is linear in the message bytes:

    p = m P = XOR_{j < kb} T[j, m_j],   T[j, v] = XOR of the P rows of the bits set in v,

where m_j is message byte j in stream order (first byte first, its most significant bit
first). The tables (interleave._check_tables, a (kb, 256) uint8 array) hold p
left-aligned in a byte (p << (8 - r)), so a check byte and a received byte line up
whatever r is. Decoding recomputes the same XOR from the received message:
s = received check XOR recomputed check is the syndrome of the error, and the coset-leader
tables of the code (leader_message, leader_weight; at index s) give the
message bits to flip and the status (0 clean, w corrected, FAILED left as received),
exactly as every other kernel of the engine does.

Depth 1 (r = 8): a codeword is kb message bytes followed by its check byte, so encoding
copies the message (one unaligned word load and store) and adds one byte from kb
lookups; no bit is moved one at a time.

Depth 8 (r <= 8): an octet of 8 codewords takes 8 kb message bytes and gives n = 8 kb + r
coded bytes, byte j holding bit j of the 8 codewords (codeword q at bit 7 - q). Its first
8 kb bytes are kb slices of 8: slice c is message byte c of the 8 codewords, bit
transposed, so one 8x8 byte transpose of the 8 messages and one 8x8 bit transpose per
slice give them; the r check bytes are the 8 check bytes (one per codeword, left-aligned)
bit transposed once. Decoding runs the same transposes backwards.

The layout and bit order are those of kernels.fused and kernels.blockcode (see their
module notes), so these kernels write the same bytes; tests/test_bytetable.py holds them
to the numpy twins in kernels.small. Buffers are plain bytes moved in unaligned words
(kernels.fused.load_be64 / store_be64), passed to helpers by address; outputs need 8
spare bytes (each word store may write past its step; the next step rewrites them).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from bitmend.kernels.blockcode import transpose8
from bitmend.kernels.fused import byte_transpose, load_be64, load_u8, load_u64, store_be64, store_u8
from bitmend.kernels.status import FAILED

U64 = np.uint64


@njit(cache=True, inline="always")
def _word_at(address, length, at):
    """The 8 bytes at address + at as a big-endian word; bytes at or past length read as zero."""
    if at + 8 <= length:
        return load_be64(address, at)
    x = U64(0)
    for b in range(max(0, min(8, length - at))):
        x |= load_u8(address, at + b) << U64(56 - 8 * b)
    return x


@njit(cache=True, inline="always")
def _check(ta, m, kb):
    """XOR over the top kb bytes of m (byte j = message byte j) of T[j, byte]: the check
    byte, left-aligned. ta is the address of the (kb, 256) uint8 tables."""
    c = load_u8(ta, m >> U64(56))
    for j in range(1, kb):
        c ^= load_u8(ta, U64(j << 8) | ((m >> U64(56 - 8 * j)) & U64(0xFF)))
    return c


@njit(cache=True, inline="always")
def _check8(ta, m):
    """_check for kb = 8, written out: eight independent lookups."""
    return (load_u8(ta, m >> U64(56))
            ^ load_u8(ta, U64(0x100) | ((m >> U64(48)) & U64(0xFF)))
            ^ load_u8(ta, U64(0x200) | ((m >> U64(40)) & U64(0xFF)))
            ^ load_u8(ta, U64(0x300) | ((m >> U64(32)) & U64(0xFF)))
            ^ load_u8(ta, U64(0x400) | ((m >> U64(24)) & U64(0xFF)))
            ^ load_u8(ta, U64(0x500) | ((m >> U64(16)) & U64(0xFF)))
            ^ load_u8(ta, U64(0x600) | ((m >> U64(8)) & U64(0xFF)))
            ^ load_u8(ta, U64(0x700) | (m & U64(0xFF))))


@njit(cache=True, inline="always")
def _check_any(ta, m, kb):
    return _check8(ta, m) if kb == 8 else _check(ta, m, kb)


@njit(cache=True, inline="always")
def _corrected_at(m, s, k, lm, lw, st, block):
    """Message m (left-aligned) of codeword `block`, whose syndrome s is not zero: its
    leader's message bits flipped (leader message bit j is integer bit k - 1 - j), or m as
    received when s has no leader (status FAILED); the leader's weight stored as its
    status. Tables and status by address (lm, lw, st: of leader_message, leader_weight
    and status; see kernels.fused)."""
    w = load_u8(lw, s)
    if w != FAILED:
        m ^= load_u64(lm, s) << U64(64 - k)
    store_u8(st, block, w)
    return m


@njit(cache=True, inline="always")
def _load(address, length, at, safe):
    """The word at address + at: one load when the caller knows all 8 bytes lie within
    length (safe, a constant: the test compiles away), else _word_at."""
    return load_be64(address, at) if safe else _word_at(address, length, at)


@njit(cache=True, inline="always")
def _whole(length, count, stride, reach):
    """How many leading steps i < count read only below length, step i reading up to byte
    i stride + reach."""
    if length < reach:
        return 0
    return min(count, (length - reach) // stride + 1)


# ---- depth 1: kb message bytes and one check byte per codeword (r = 8) ---------------------------
#
# Every kernel here runs its loop twice: over the steps whose reads all lie within the
# input (plain loads), then over the rest (bytes past the input read as zero). One loop
# with that test inside ran 1.5x to 1.7x slower (secded-72-64, 1 MiB, one core).

@njit(cache=True, inline="always")
def _encode_codeword(ia, ta, oa, length, i, kb, safe):
    m = _load(ia, length, i * kb, safe)
    at = i * (kb + 1)
    store_be64(oa, at, m)  # its bytes past kb: the check byte and the next codeword rewrite them
    store_u8(oa, at + kb, _check_any(ta, m, kb))


@njit(cache=True)
def encode_depth1(in8, length, blocks, kb, table, out8):
    """blocks codewords from the `length` message bytes of in8 (zeros past them): codeword
    i is message bytes i kb .. i kb + kb - 1, then their check byte, at out8[i (kb + 1)]:
    one word load and store of the message and kb lookups for the check byte."""
    ia, ta, oa = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see kernels.fused
    fast = _whole(length, blocks, kb, 8)
    for i in range(fast):
        _encode_codeword(ia, ta, oa, length, i, kb, True)
    for i in range(fast, blocks):
        _encode_codeword(ia, ta, oa, length, i, kb, False)


@njit(cache=True, inline="always")
def _decode_codeword(ia, ta, oa, length, i, kb, keep, safe):
    """(message, syndrome) of codeword i, the message left-aligned."""
    at = i * (kb + 1)
    m = _load(ia, length, at, safe) & keep
    if safe:
        received = load_u8(ia, at + kb)
    else:
        received = load_u8(ia, at + kb) if at + kb < length else U64(0)
    return m, received ^ _check_any(ta, m, kb)


@njit(cache=True, inline="always")
def _decode_codewords(ia, ta, oa, length, first, last, kb, lm, lw, st, safe):
    """Codewords first .. last - 1 of decode_depth1."""
    k = 8 * kb
    keep = ~(~U64(0) >> U64(k)) if kb < 8 else ~U64(0)  # the message bytes of a loaded word
    for i in range(first, last):
        m, s = _decode_codeword(ia, ta, oa, length, i, kb, keep, safe)
        if s != U64(0):
            m = _corrected_at(m, s, k, lm, lw, st, i)
        store_be64(oa, i * kb, m)


@njit(cache=True)
def decode_depth1(in8, length, blocks, kb, table, leader_message, leader_weight, status, out8):
    """Bounded-distance decoding of encode_depth1's layout: s = received check byte XOR the
    check of the received message, corrected by its leader (see module notes); messages
    written back to back from out8[0]. in8 holds `length` bytes (zeros past them); status
    must be zeroed; out8 needs 8 spare bytes."""
    ia, ta, oa = in8.ctypes.data, table.ctypes.data, out8.ctypes.data
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    fast = _whole(length, blocks, kb + 1, max(8, kb + 1))
    _decode_codewords(ia, ta, oa, length, 0, fast, kb, lm, lw, st, True)
    _decode_codewords(ia, ta, oa, length, fast, blocks, kb, lm, lw, st, False)


# ---- depth 8: octets of 8 codewords, bit-interleaved -------------------------------------------------

@njit(cache=True, inline="always")
def _encode_octet(ia, ta, oa, length, t, kb, r, keep, safe):
    at = t * 8 * kb
    w0 = _load(ia, length, at, safe) & keep
    w1 = _load(ia, length, at + kb, safe) & keep
    w2 = _load(ia, length, at + 2 * kb, safe) & keep
    w3 = _load(ia, length, at + 3 * kb, safe) & keep
    w4 = _load(ia, length, at + 4 * kb, safe) & keep
    w5 = _load(ia, length, at + 5 * kb, safe) & keep
    w6 = _load(ia, length, at + 6 * kb, safe) & keep
    w7 = _load(ia, length, at + 7 * kb, safe) & keep
    checks = ((_check_any(ta, w0, kb) << U64(56)) | (_check_any(ta, w1, kb) << U64(48))
              | (_check_any(ta, w2, kb) << U64(40)) | (_check_any(ta, w3, kb) << U64(32))
              | (_check_any(ta, w4, kb) << U64(24)) | (_check_any(ta, w5, kb) << U64(16))
              | (_check_any(ta, w6, kb) << U64(8)) | _check_any(ta, w7, kb))
    b0, b1, b2, b3, b4, b5, b6, b7 = byte_transpose(w0, w1, w2, w3, w4, w5, w6, w7)
    base = t * (8 * kb + r)
    store_be64(oa, base, transpose8(b0))
    if kb > 1:
        store_be64(oa, base + 8, transpose8(b1))
    if kb > 2:
        store_be64(oa, base + 16, transpose8(b2))
    if kb > 3:
        store_be64(oa, base + 24, transpose8(b3))
    if kb > 4:
        store_be64(oa, base + 32, transpose8(b4))
    if kb > 5:
        store_be64(oa, base + 40, transpose8(b5))
    if kb > 6:
        store_be64(oa, base + 48, transpose8(b6))
    if kb > 7:
        store_be64(oa, base + 56, transpose8(b7))
    store_be64(oa, base + 8 * kb, transpose8(checks))


@njit(cache=True)
def encode_octet8(in8, length, octets, kb, r, table, out8):
    """Depth 8: octet t takes message bytes from t 8 kb (codeword q's from t 8 kb + q kb)
    and writes its n = 8 kb + r bytes from out8[t n]: slice c < kb is transpose8 of row c
    of the byte transpose of the 8 messages, then the 8 check bytes bit transposed (its
    bytes past r are zero and the next octet rewrites them). in8 holds `length` bytes
    (zeros past them); out8 needs 8 spare bytes."""
    ia, ta, oa = in8.ctypes.data, table.ctypes.data, out8.ctypes.data
    keep = ~(~U64(0) >> U64(8 * kb)) if kb < 8 else ~U64(0)
    fast = _whole(length, octets, 8 * kb, 7 * kb + 8)
    for t in range(fast):
        _encode_octet(ia, ta, oa, length, t, kb, r, keep, True)
    for t in range(fast, octets):
        _encode_octet(ia, ta, oa, length, t, kb, r, keep, False)


@njit(cache=True, inline="always")
def _received_octet(ia, ta, length, t, kb, r, safe):
    """The 8 received messages (left-aligned) of octet t and their 8 syndromes (byte q
    of the last word, left-aligned)."""
    base = t * (8 * kb + r)
    zero = U64(0)
    s0 = transpose8(_load(ia, length, base, safe))
    s1 = transpose8(_load(ia, length, base + 8, safe)) if kb > 1 else zero
    s2 = transpose8(_load(ia, length, base + 16, safe)) if kb > 2 else zero
    s3 = transpose8(_load(ia, length, base + 24, safe)) if kb > 3 else zero
    s4 = transpose8(_load(ia, length, base + 32, safe)) if kb > 4 else zero
    s5 = transpose8(_load(ia, length, base + 40, safe)) if kb > 5 else zero
    s6 = transpose8(_load(ia, length, base + 48, safe)) if kb > 6 else zero
    s7 = transpose8(_load(ia, length, base + 56, safe)) if kb > 7 else zero
    check_bytes = ~(~U64(0) >> U64(8 * r)) if r < 8 else ~U64(0)  # the octet's r check bytes of the word
    received = transpose8(_load(ia, length, base + 8 * kb, safe) & check_bytes)
    m0, m1, m2, m3, m4, m5, m6, m7 = byte_transpose(s0, s1, s2, s3, s4, s5, s6, s7)
    syndromes = received ^ ((_check_any(ta, m0, kb) << U64(56)) | (_check_any(ta, m1, kb) << U64(48))
                            | (_check_any(ta, m2, kb) << U64(40)) | (_check_any(ta, m3, kb) << U64(32))
                            | (_check_any(ta, m4, kb) << U64(24)) | (_check_any(ta, m5, kb) << U64(16))
                            | (_check_any(ta, m6, kb) << U64(8)) | _check_any(ta, m7, kb))
    return m0, m1, m2, m3, m4, m5, m6, m7, syndromes


@njit(cache=True, inline="always")
def _decode_octets(ia, ta, oa, length, first, last, kb, r, lm, lw, st, safe):
    """Octets first .. last - 1 of decode_octet8."""
    k = 8 * kb
    for t in range(first, last):
        m0, m1, m2, m3, m4, m5, m6, m7, syndromes = _received_octet(ia, ta, length, t, kb, r, safe)
        if syndromes != U64(0):  # damaged octet: each codeword by its own syndrome
            m0, m1, m2, m3, m4, m5, m6, m7 = _correct_octet(m0, m1, m2, m3, m4, m5, m6, m7, syndromes, 8 * t, k, r,
                                                            lm, lw, st)
        at = t * 8 * kb
        store_be64(oa, at, m0)  # its bytes past kb: the next message rewrites them
        store_be64(oa, at + kb, m1)
        store_be64(oa, at + 2 * kb, m2)
        store_be64(oa, at + 3 * kb, m3)
        store_be64(oa, at + 4 * kb, m4)
        store_be64(oa, at + 5 * kb, m5)
        store_be64(oa, at + 6 * kb, m6)
        store_be64(oa, at + 7 * kb, m7)


@njit(cache=True)
def decode_octet8(in8, length, octets, kb, r, table, leader_message, leader_weight, status, out8):
    """Depth 8 decoding of encode_octet8's layout: per octet, each slice bit transposed
    and the slices byte transposed give the 8 received messages; the r check bytes bit
    transposed give the 8 received checks. One test of all 8 syndromes at once passes a
    clean octet straight through; otherwise each codeword with s != 0 is corrected by its
    leader or flagged. Messages are written back to back (codeword q's kb bytes at
    out8[(8 t + q) kb]). in8 holds `length` bytes (zeros past them); status must be zeroed;
    out8 needs 8 spare bytes."""
    ia, ta, oa = in8.ctypes.data, table.ctypes.data, out8.ctypes.data
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    n = 8 * kb + r
    fast = _whole(length, octets, n, n + 8 - r)  # octet t reads up to its last check byte + 8 - r
    _decode_octets(ia, ta, oa, length, 0, fast, kb, r, lm, lw, st, True)
    _decode_octets(ia, ta, oa, length, fast, octets, kb, r, lm, lw, st, False)


@njit(cache=True, no_cpython_wrapper=True)
def _correct_octet(m0, m1, m2, m3, m4, m5, m6, m7, syndromes, first, k, r, lm, lw, st):
    """The 8 messages of a damaged octet, each with a non-zero syndrome (byte q of
    syndromes, left-aligned) corrected by its leader, statuses stored from block first.
    Leader tables and status by address (lm, lw, st), so a call moves no array. Not
    inlined: it runs only for damaged octets, and keeps the clean loop short."""
    shift = U64(8 - r)
    s = (syndromes >> U64(56)) >> shift
    if s:
        m0 = _corrected_at(m0, s, k, lm, lw, st, first)
    s = ((syndromes >> U64(48)) & U64(0xFF)) >> shift
    if s:
        m1 = _corrected_at(m1, s, k, lm, lw, st, first + 1)
    s = ((syndromes >> U64(40)) & U64(0xFF)) >> shift
    if s:
        m2 = _corrected_at(m2, s, k, lm, lw, st, first + 2)
    s = ((syndromes >> U64(32)) & U64(0xFF)) >> shift
    if s:
        m3 = _corrected_at(m3, s, k, lm, lw, st, first + 3)
    s = ((syndromes >> U64(24)) & U64(0xFF)) >> shift
    if s:
        m4 = _corrected_at(m4, s, k, lm, lw, st, first + 4)
    s = ((syndromes >> U64(16)) & U64(0xFF)) >> shift
    if s:
        m5 = _corrected_at(m5, s, k, lm, lw, st, first + 5)
    s = ((syndromes >> U64(8)) & U64(0xFF)) >> shift
    if s:
        m6 = _corrected_at(m6, s, k, lm, lw, st, first + 6)
    s = (syndromes & U64(0xFF)) >> shift
    if s:
        m7 = _corrected_at(m7, s, k, lm, lw, st, first + 7)
    return m0, m1, m2, m3, m4, m5, m6, m7


# ---- depth 1, short codewords two at a time on whole bytes -------------------------------------
#
# A code with k, n multiples of 4 (k <= 12: one parity lookup per message; n <= 32) puts
# two codewords on whole bytes: a pair takes k/4 message bytes and gives n/4 coded bytes
# (golay-24-12: 3 bytes in, 6 out). So a pair is one unaligned load, two lookups and one
# unaligned store, with no bit-by-bit writer carried from one codeword to the next.

@njit(cache=True, inline="always")
def _encode_pair(ia, oa, length, i, k, r, ptab, safe):
    x = _load(ia, length, i * (k >> 2), safe)
    m0 = x >> U64(64 - k)
    m1 = (x >> U64(64 - 2 * k)) & ((U64(1) << U64(k)) - U64(1))
    n = k + r
    c0 = (m0 << U64(r)) | U64(ptab[0, m0])
    c1 = (m1 << U64(r)) | U64(ptab[0, m1])
    store_be64(oa, i * (n >> 2), ((c0 << U64(n)) | c1) << U64(64 - 2 * n))  # bytes past 2n bits: rewritten


@njit(cache=True)
def encode_pairs(in8, length, blocks, k, r, ptab, out8):
    """Depth 1, k and n = k + r multiples of 4, k <= 12, n <= 32: codewords 2i and 2i+1
    (messages: the k/4 bytes from byte i k/4, first message first) as the n/4 bytes from
    out8[i n/4], each codeword (m << r) | ptab[0, m]. An odd count codes one zero message
    more, whose zero codeword falls in out8's spare bytes. in8 holds `length` bytes (zeros
    past them); out8 needs 8 spare bytes."""
    ia, oa = in8.ctypes.data, out8.ctypes.data
    pairs = (blocks + 1) >> 1
    fast = _whole(length, pairs, k >> 2, 8)
    for i in range(fast):
        _encode_pair(ia, oa, length, i, k, r, ptab, True)
    for i in range(fast, pairs):
        _encode_pair(ia, oa, length, i, k, r, ptab, False)


@njit(cache=True, inline="always")
def _decode_pairs(ia, oa, length, first, last, k, r, ptab, lm, lw, st, safe):
    """Pairs first .. last - 1 of decode_pairs."""
    n = k + r
    word = (U64(1) << U64(n)) - U64(1)
    parity = (U64(1) << U64(r)) - U64(1)
    for i in range(first, last):
        x = _load(ia, length, i * (n >> 2), safe)
        w0 = x >> U64(64 - n)
        w1 = (x >> U64(64 - 2 * n)) & word
        m0 = w0 >> U64(r)
        m1 = w1 >> U64(r)
        s0 = (w0 & parity) ^ U64(ptab[0, m0])
        s1 = (w1 & parity) ^ U64(ptab[0, m1])
        if s0 | s1:
            if s0:
                m0 = _corrected_at(m0 << U64(64 - k), s0, k, lm, lw, st, 2 * i) >> U64(64 - k)
            if s1:
                m1 = _corrected_at(m1 << U64(64 - k), s1, k, lm, lw, st, 2 * i + 1) >> U64(64 - k)
        store_be64(oa, i * (k >> 2), ((m0 << U64(k)) | m1) << U64(64 - 2 * k))


@njit(cache=True)
def decode_pairs(in8, length, blocks, k, r, ptab, leader_message, leader_weight, status, out8):
    """Bounded-distance decoding of encode_pairs' layout, a pair of codewords per n/4
    bytes: s = p XOR ptab[0, m] for each, corrected by its leader (status w) or left as
    received (FAILED); messages written back to back. The extra codeword of an odd count
    reads as zeros (s = 0: no status written). status must be zeroed; out8 needs 8 spare
    bytes."""
    ia, oa = in8.ctypes.data, out8.ctypes.data
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    pairs = (blocks + 1) >> 1
    fast = _whole(length, pairs, (k + r) >> 2, 8)
    _decode_pairs(ia, oa, length, 0, fast, k, r, ptab, lm, lw, st, True)
    _decode_pairs(ia, oa, length, fast, pairs, k, r, ptab, lm, lw, st, False)
