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

Depth 1, pairs: a code with k and n multiples of 4 (k <= 12, one parity lookup per
message; n <= 32) puts two codewords on whole bytes, k/4 message bytes in and n/4 coded
bytes out (golay-24-12: 3 and 6): one unaligned load, two lookups and one store a pair.

The layout and bit order are those of kernels.fused and kernels.blockcode (see their
module notes), so these kernels write the same bytes; tests/test_bytetable.py holds them
to the numpy twins in kernels.small and to kernels.blockcode. Buffers are plain bytes
moved in unaligned words (kernels.fused.load_be64 / store_be64) through their addresses;
outputs need 8 spare bytes (each word store may write past its step; the next step
rewrites them).

Each kernel runs one loop, written out with plain word loads, over the steps whose reads
lie within the input, and the same loop over a zero-padded copy of what is left (at most
a step or two, unless the input was cut short), so that bytes past the input read as zero
without a test in the loop. Only the small lookup helpers are inlined by numba: inlining
the loop bodies (two copies each, one testing every load) ran no faster and took minutes
to compile.
"""

from __future__ import annotations

import numpy as np
from llvmlite import ir
from bitmend.kernels.jit import intrinsic, njit, types

from bitmend.kernels.blockcode import transpose8
from bitmend.kernels.fused import byte_transpose, load_be64, load_u8, load_u64, store_be64, store_u8
from bitmend.kernels.status import FAILED

U64 = np.uint64


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


@intrinsic
def load_u32(typingctx, address, index):
    """The native uint32 at address + 4 * index (an aligned table entry), as a uint64."""
    if not (isinstance(address, types.Integer) and isinstance(index, types.Integer)):
        return None

    def codegen(context, builder, signature, args):
        address = context.cast(builder, args[0], signature.args[0], types.intp)
        index = context.cast(builder, args[1], signature.args[1], types.intp)
        pointer = builder.inttoptr(address, ir.IntType(32).as_pointer())
        return builder.zext(builder.load(builder.gep(pointer, [index])), ir.IntType(64))

    return types.uint64(address, index), codegen


@njit(cache=True)
def _whole(length, count, stride, reach):
    """How many leading steps i < count read only below length, step i reading up to byte
    i stride + reach."""
    if length < reach:
        return 0
    return min(count, (length - reach) // stride + 1)


@njit(cache=True)
def _rest(in8, length, start, nbytes):
    """A zeroed copy of nbytes + 8 bytes holding in8[start:length] (the input past the
    steps that read only within it; zeros past length)."""
    rest = np.zeros(nbytes + 8, dtype=np.uint8)
    if start < length:
        rest[: length - start] = in8[start:length]
    return rest


# ---- depth 1: kb message bytes and one check byte per codeword (r = 8) ---------------------------

@njit(cache=True)
def _encode_codewords(ia, ta, oa, blocks, kb):
    """blocks codewords of encode_depth1 from the message bytes at ia to oa."""
    for i in range(blocks):
        m = load_be64(ia, i * kb)
        at = i * (kb + 1)
        store_be64(oa, at, m)  # its bytes past kb: the check byte and the next codeword rewrite them
        store_u8(oa, at + kb, _check_any(ta, m, kb))


@njit(cache=True)
def encode_depth1(in8, length, blocks, kb, table, out8):
    """blocks codewords from the `length` message bytes of in8 (zeros past them): codeword
    i is message bytes i kb .. i kb + kb - 1, then their check byte, at out8[i (kb + 1)]:
    one word load and store of the message and kb lookups for the check byte."""
    ta, oa = table.ctypes.data, out8.ctypes.data  # once: see kernels.fused
    fast = _whole(length, blocks, kb, 8)
    _encode_codewords(in8.ctypes.data, ta, oa, fast, kb)
    if fast < blocks:
        rest = _rest(in8, length, fast * kb, (blocks - fast) * kb)
        _encode_codewords(rest.ctypes.data, ta, oa + fast * (kb + 1), blocks - fast, kb)


@njit(cache=True)
def _decode_codewords(ia, ta, oa, blocks, first, kb, lm, lw, st):
    """blocks codewords of decode_depth1 from the received bytes at ia, messages to oa;
    statuses from block first."""
    k = 8 * kb
    keep = ~(~U64(0) >> U64(k)) if kb < 8 else ~U64(0)  # the message bytes of a loaded word
    for i in range(blocks):
        at = i * (kb + 1)
        m = load_be64(ia, at) & keep
        s = load_u8(ia, at + kb) ^ _check_any(ta, m, kb)
        if s != U64(0):
            m = _corrected_at(m, s, k, lm, lw, st, first + i)
        store_be64(oa, i * kb, m)


@njit(cache=True)
def decode_depth1(in8, length, blocks, kb, table, leader_message, leader_weight, status, out8):
    """Bounded-distance decoding of encode_depth1's layout: s = received check byte XOR the
    check of the received message, corrected by its leader (see module notes); messages
    written back to back from out8[0]. in8 holds `length` bytes (zeros past them); status
    must be zeroed; out8 needs 8 spare bytes."""
    ta, oa = table.ctypes.data, out8.ctypes.data
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    nb = kb + 1
    fast = _whole(length, blocks, nb, max(8, nb))
    _decode_codewords(in8.ctypes.data, ta, oa, fast, 0, kb, lm, lw, st)
    if fast < blocks:
        rest = _rest(in8, length, fast * nb, (blocks - fast) * nb)
        _decode_codewords(rest.ctypes.data, ta, oa + fast * kb, blocks - fast, fast, kb, lm, lw, st)


# ---- depth 8: octets of 8 codewords, bit-interleaved -------------------------------------------------

@njit(cache=True)
def _encode_octets(ia, ta, oa, octets, kb, r):
    """octets octets of encode_octet8 from the message bytes at ia to oa."""
    keep = ~(~U64(0) >> U64(8 * kb)) if kb < 8 else ~U64(0)
    n = 8 * kb + r
    for t in range(octets):
        at = t * 8 * kb
        w0 = load_be64(ia, at) & keep
        w1 = load_be64(ia, at + kb) & keep
        w2 = load_be64(ia, at + 2 * kb) & keep
        w3 = load_be64(ia, at + 3 * kb) & keep
        w4 = load_be64(ia, at + 4 * kb) & keep
        w5 = load_be64(ia, at + 5 * kb) & keep
        w6 = load_be64(ia, at + 6 * kb) & keep
        w7 = load_be64(ia, at + 7 * kb) & keep
        checks = ((_check_any(ta, w0, kb) << U64(56)) | (_check_any(ta, w1, kb) << U64(48))
                  | (_check_any(ta, w2, kb) << U64(40)) | (_check_any(ta, w3, kb) << U64(32))
                  | (_check_any(ta, w4, kb) << U64(24)) | (_check_any(ta, w5, kb) << U64(16))
                  | (_check_any(ta, w6, kb) << U64(8)) | _check_any(ta, w7, kb))
        b0, b1, b2, b3, b4, b5, b6, b7 = byte_transpose(w0, w1, w2, w3, w4, w5, w6, w7)
        base = t * n
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
    ta, oa = table.ctypes.data, out8.ctypes.data
    fast = _whole(length, octets, 8 * kb, 7 * kb + 8)
    _encode_octets(in8.ctypes.data, ta, oa, fast, kb, r)
    if fast < octets:
        rest = _rest(in8, length, fast * 8 * kb, (octets - fast) * 8 * kb)
        _encode_octets(rest.ctypes.data, ta, oa + fast * (8 * kb + r), octets - fast, kb, r)


@njit(cache=True)
def _decode_octets(ia, ta, oa, octets, first, kb, r, lm, lw, st):
    """octets octets of decode_octet8 from the received bytes at ia, messages to oa;
    statuses from octet first."""
    k = 8 * kb
    n = k + r
    zero = U64(0)
    check_bytes = ~(~U64(0) >> U64(8 * r)) if r < 8 else ~U64(0)  # the octet's r check bytes of a word
    for t in range(octets):
        base = t * n
        s0 = transpose8(load_be64(ia, base))
        s1 = transpose8(load_be64(ia, base + 8)) if kb > 1 else zero
        s2 = transpose8(load_be64(ia, base + 16)) if kb > 2 else zero
        s3 = transpose8(load_be64(ia, base + 24)) if kb > 3 else zero
        s4 = transpose8(load_be64(ia, base + 32)) if kb > 4 else zero
        s5 = transpose8(load_be64(ia, base + 40)) if kb > 5 else zero
        s6 = transpose8(load_be64(ia, base + 48)) if kb > 6 else zero
        s7 = transpose8(load_be64(ia, base + 56)) if kb > 7 else zero
        received = transpose8(load_be64(ia, base + 8 * kb) & check_bytes)
        m0, m1, m2, m3, m4, m5, m6, m7 = byte_transpose(s0, s1, s2, s3, s4, s5, s6, s7)
        syndromes = received ^ ((_check_any(ta, m0, kb) << U64(56)) | (_check_any(ta, m1, kb) << U64(48))
                                | (_check_any(ta, m2, kb) << U64(40)) | (_check_any(ta, m3, kb) << U64(32))
                                | (_check_any(ta, m4, kb) << U64(24)) | (_check_any(ta, m5, kb) << U64(16))
                                | (_check_any(ta, m6, kb) << U64(8)) | _check_any(ta, m7, kb))
        if syndromes != zero:  # damaged octet: each codeword by its own syndrome
            m0, m1, m2, m3, m4, m5, m6, m7 = _correct_octet(m0, m1, m2, m3, m4, m5, m6, m7, syndromes,
                                                            8 * (first + t), k, r, lm, lw, st)
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
    ta, oa = table.ctypes.data, out8.ctypes.data
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    n = 8 * kb + r
    fast = _whole(length, octets, n, n + 8 - r)  # octet t reads up to its last check byte + 8 - r
    _decode_octets(in8.ctypes.data, ta, oa, fast, 0, kb, r, lm, lw, st)
    if fast < octets:
        rest = _rest(in8, length, fast * n, (octets - fast) * n)
        _decode_octets(rest.ctypes.data, ta, oa + fast * 8 * kb, octets - fast, fast, kb, r, lm, lw, st)


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

@njit(cache=True)
def _encode_pairs(ia, pa, oa, pairs, k, r):
    """pairs pairs of encode_pairs from the message bytes at ia to oa (pa: parity table)."""
    n = k + r
    low = (U64(1) << U64(k)) - U64(1)
    for i in range(pairs):
        x = load_be64(ia, i * (k >> 2))
        m0 = x >> U64(64 - k)
        m1 = (x >> U64(64 - 2 * k)) & low
        c0 = (m0 << U64(r)) | load_u32(pa, m0)
        c1 = (m1 << U64(r)) | load_u32(pa, m1)
        store_be64(oa, i * (n >> 2), ((c0 << U64(n)) | c1) << U64(64 - 2 * n))  # bytes past 2n bits: rewritten


@njit(cache=True)
def encode_pairs(in8, length, blocks, k, r, ptab, out8):
    """Depth 1, k and n = k + r multiples of 4, k <= 12, n <= 32: codewords 2i and 2i+1
    (messages: the k/4 bytes from byte i k/4, first message first) as the n/4 bytes from
    out8[i n/4], each codeword (m << r) | ptab[0, m] (ptab: uint32). An odd count codes
    one zero message more, whose zero codeword falls in out8's spare bytes. in8 holds
    `length` bytes (zeros past them); out8 needs 8 spare bytes."""
    pa, oa = ptab.ctypes.data, out8.ctypes.data
    pairs = (blocks + 1) >> 1
    fast = _whole(length, pairs, k >> 2, 8)
    _encode_pairs(in8.ctypes.data, pa, oa, fast, k, r)
    if fast < pairs:
        rest = _rest(in8, length, fast * (k >> 2), (pairs - fast) * (k >> 2))
        _encode_pairs(rest.ctypes.data, pa, oa + fast * ((k + r) >> 2), pairs - fast, k, r)


@njit(cache=True)
def _decode_pairs(ia, pa, oa, pairs, first, k, r, lm, lw, st):
    """pairs pairs of decode_pairs from the received bytes at ia, messages to oa;
    statuses from pair first."""
    n = k + r
    word = (U64(1) << U64(n)) - U64(1)
    parity = (U64(1) << U64(r)) - U64(1)
    for i in range(pairs):
        x = load_be64(ia, i * (n >> 2))
        w0 = x >> U64(64 - n)
        w1 = (x >> U64(64 - 2 * n)) & word
        m0 = w0 >> U64(r)
        m1 = w1 >> U64(r)
        s0 = (w0 & parity) ^ load_u32(pa, m0)
        s1 = (w1 & parity) ^ load_u32(pa, m1)
        if s0 | s1:
            block = 2 * (first + i)
            if s0:
                m0 = _corrected_at(m0 << U64(64 - k), s0, k, lm, lw, st, block) >> U64(64 - k)
            if s1:
                m1 = _corrected_at(m1 << U64(64 - k), s1, k, lm, lw, st, block + 1) >> U64(64 - k)
        store_be64(oa, i * (k >> 2), ((m0 << U64(k)) | m1) << U64(64 - 2 * k))


@njit(cache=True)
def decode_pairs(in8, length, blocks, k, r, ptab, leader_message, leader_weight, status, out8):
    """Bounded-distance decoding of encode_pairs' layout, a pair of codewords per n/4
    bytes: s = p XOR ptab[0, m] for each, corrected by its leader (status w) or left as
    received (FAILED); messages written back to back. The extra codeword of an odd count
    reads as zeros (s = 0: no status written). status must be zeroed; out8 needs 8 spare
    bytes."""
    pa, oa = ptab.ctypes.data, out8.ctypes.data
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    nb = (k + r) >> 2
    pairs = (blocks + 1) >> 1
    fast = _whole(length, pairs, nb, 8)
    _decode_pairs(in8.ctypes.data, pa, oa, fast, 0, k, r, lm, lw, st)
    if fast < pairs:
        rest = _rest(in8, length, fast * nb, (pairs - fast) * nb)
        _decode_pairs(rest.ctypes.data, pa, oa + fast * (k >> 2), pairs - fast, fast, k, r, lm, lw, st)
