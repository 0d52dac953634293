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
8 kb bytes are kb slices of 8: byte i of slice c holds bit i of message byte c of the 8
codewords. Taking the 8 messages as the rows of an 8 x kb byte matrix, slice c is column c
(message byte c of codewords 0..7) with its 8x8 bits transposed. Both steps run in vector
registers, written as LLVM vector operations that every target lowers (SSE2/AVX2 on
x86-64): the rows, two to a 16-byte vector, are byte transposed by three rounds of
unpacks, and all columns are bit transposed at once by three masked swaps; on a
little-endian machine a column read in memory order needs the transpose about the other
diagonal, which takes it straight to its slice in memory order. The r check bytes are the
8 check bytes (one per codeword, left-aligned) bit transposed once (blockcode.transpose8).
The messages are read as native words, whose bytes the check lookups take in memory order
without a byte swap. Decoding runs the same steps backwards (each is its own inverse):
slices bit transposed, then byte transposed back into the 8 messages. Against the scalar
transposes this replaced (one 8x8 byte transpose and kb + 1 bit transposes of a word per
octet), secded-72-64 encodes 2.0x and decodes 1.45x as fast (16 KiB segments, one core).
The loops are compiled twice, for kb = 8 with kb a constant and for any kb.

Depth 1, pairs: a code with k and n multiples of 4 (k <= 12, one parity lookup per
message; n <= 32) puts two codewords on whole bytes, k/4 message bytes in and n/4 coded
bytes out (golay-24-12: 3 and 6): one unaligned load, two lookups and one store a pair.

The layout and bit order are those of kernels.fused and kernels.blockcode (see their
module notes), so these kernels write the same bytes; tests/test_bytetable.py holds them
to the numpy twins in kernels.small and to kernels.blockcode. Buffers are plain bytes
moved in unaligned words (kernels.fused.load_be64 / store_be64, or load_word / store_word
in memory order) through their addresses; outputs need 8 spare bytes (each word store may
write past its step; the next step rewrites them).

Each kernel runs one loop, written out with plain word loads, over the steps whose reads
lie within the input, and the same loop over a zero-padded copy of what is left (at most
a step or two, unless the input was cut short), so that bytes past the input read as zero
without a test in the loop. Numba inlines the small lookup helpers, nothing else:
inlining the loop bodies into a copy that tests every load ran no faster and took minutes
to compile. The depth-8 encoding loop is one compiled function that LLVM inlines into its
two callers, one of which passes kb = 8 as a constant (secded-72-64: 1.2x, measured);
numba's own inlining of it made the same code and doubled the compile time.
"""

from __future__ import annotations

import numpy as np
from llvmlite import ir

from bitmend.kernels.blockcode import transpose8
from bitmend.kernels.fused import LITTLE_ENDIAN, load_be64, load_u8, load_u64, store_be64, store_u8, swap
from bitmend.kernels.jit import intrinsic, njit, types
from bitmend.kernels.status import FAILED

U64 = np.uint64
_I32 = ir.IntType(32)
_I64 = ir.IntType(64)


def _intp(context, builder, signature, args):
    """An intrinsic's integer arguments as intp values."""
    return [context.cast(builder, a, t, types.intp) for a, t in zip(args, signature.args)]


def _word_at(builder, address, offset):
    """The native uint64 at address + offset (intp values; unaligned)."""
    return builder.load(builder.inttoptr(builder.add(address, offset), _I64.as_pointer()), align=1)


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


@intrinsic
def load_word(typingctx, address, index):
    """The native uint64 at address + index (unaligned): bytes in memory order, so byte j of
    the buffer is bits 8j .. 8j + 7 of it on a little-endian machine."""
    if not (isinstance(address, types.Integer) and isinstance(index, types.Integer)):
        return None

    def codegen(context, builder, signature, args):
        return _word_at(builder, *_intp(context, builder, signature, args))

    return types.uint64(address, index), codegen


@intrinsic
def store_word(typingctx, address, index, value):
    """value to address + index as a native uint64 (unaligned): load_word's inverse."""
    if not all(isinstance(x, types.Integer) for x in (address, index, value)):
        return None

    def codegen(context, builder, signature, args):
        address, index = _intp(context, builder, signature, args)[:2]
        value = context.cast(builder, args[2], signature.args[2], types.uint64)
        builder.store(value, builder.inttoptr(builder.add(address, index), _I64.as_pointer()), align=1)
        return context.get_dummy_value()

    return types.void(address, index, value), codegen


@njit(cache=True, inline="always")
def _native_check(ta, m, kb):
    """_check_any of a message read by load_word (its bytes past kb zero): on a little-endian
    machine message byte j is bits 8j .. 8j + 7 of m, which saves the byte swap of a
    big-endian load."""
    if not LITTLE_ENDIAN:
        return _check_any(ta, m, kb)
    if kb == 8:  # written out, as _check8
        return (load_u8(ta, m & U64(0xFF))
                ^ load_u8(ta, U64(0x100) | ((m >> U64(8)) & U64(0xFF)))
                ^ load_u8(ta, U64(0x200) | ((m >> U64(16)) & U64(0xFF)))
                ^ load_u8(ta, U64(0x300) | ((m >> U64(24)) & U64(0xFF)))
                ^ load_u8(ta, U64(0x400) | ((m >> U64(32)) & U64(0xFF)))
                ^ load_u8(ta, U64(0x500) | ((m >> U64(40)) & U64(0xFF)))
                ^ load_u8(ta, U64(0x600) | ((m >> U64(48)) & U64(0xFF)))
                ^ load_u8(ta, U64(0x700) | (m >> U64(56))))
    c = load_u8(ta, m & U64(0xFF))
    for j in range(1, kb):
        c ^= load_u8(ta, U64(j << 8) | ((m >> U64(8 * j)) & U64(0xFF)))
    return c


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

_PAIR = ir.VectorType(_I64, 2)  # two 8-byte rows (or slices) of an octet
# The lane-wise bit transpose, as three masked swaps (shift, mask): t = (x ^ (x >> shift)) & mask,
# x ^= t ^ (t << shift). A lane whose memory bytes are j = 0..7 holds byte j at bits 8j..8j+7 on a
# little-endian machine: the transpose about the other diagonal (bit 8j + b <-> bit 63 - 8b - j)
# takes such a lane to its slice in memory order. On a big-endian machine byte j lies at the top,
# as in blockcode.transpose8, whose swaps these are.
_LANE_SWAPS = (((9, 0x0055005500550055), (18, 0x0000333300003333), (36, 0x000000000F0F0F0F)) if LITTLE_ENDIAN
               else ((7, 0x00AA00AA00AA00AA), (14, 0x0000CCCC0000CCCC), (28, 0x00000000F0F0F0F0)))


def _unpack(builder, a, b, width, high):
    """The low (or high) halves of two 16-byte vectors in width-bit elements, interleaved: a0
    b0 a1 b1 ... (x86 punpckl/punpckh; any target lowers the shuffle)."""
    count = 128 // width
    first = count // 2 if high else 0
    order = [x for i in range(first, first + count // 2) for x in (i, count + i)]
    vector = ir.VectorType(ir.IntType(width), count)
    return builder.bitcast(builder.shuffle_vector(builder.bitcast(a, vector), builder.bitcast(b, vector),
                                                  ir.Constant(ir.VectorType(_I32, count), order)), _PAIR)


def _byte_transpose_ir(builder, pairs):
    """The 8x8 byte matrix whose row i is lane i: the input pairs hold rows (0, 4), (1, 5),
    (2, 6), (3, 7), the result pairs columns (0, 1), (2, 3), (4, 5), (6, 7); column j
    holds byte j of rows 0..7 in memory order. Three rounds of four unpacks."""
    a0, a1, a2, a3 = pairs
    p0, p1 = _unpack(builder, a0, a1, 8, False), _unpack(builder, a0, a1, 8, True)  # rows 0 1 and 4 5
    p2, p3 = _unpack(builder, a2, a3, 8, False), _unpack(builder, a2, a3, 8, True)  # rows 2 3 and 6 7
    q0, q1 = _unpack(builder, p0, p2, 16, False), _unpack(builder, p0, p2, 16, True)  # rows 0-3: bytes 0-3, 4-7
    q2, q3 = _unpack(builder, p1, p3, 16, False), _unpack(builder, p1, p3, 16, True)  # rows 4-7
    return (_unpack(builder, q0, q2, 32, False), _unpack(builder, q0, q2, 32, True),
            _unpack(builder, q1, q3, 32, False), _unpack(builder, q1, q3, 32, True))


def _lane_transpose_ir(builder, x):
    """_LANE_SWAPS on both lanes of a pair."""
    for shift, mask in _LANE_SWAPS:
        s = ir.Constant(_PAIR, [ir.Constant(_I64, shift)] * 2)
        t = builder.and_(builder.xor(x, builder.lshr(x, s)), ir.Constant(_PAIR, [ir.Constant(_I64, mask)] * 2))
        x = builder.xor(x, builder.xor(t, builder.shl(t, s)))
    return x


def _pairs_of(builder, words):
    """The 8 words as the pairs (0, 4), (1, 5), (2, 6), (3, 7) that _byte_transpose_ir takes."""
    undefined = ir.Constant(_PAIR, ir.Undefined)
    pairs = []
    for i in range(4):
        pair = builder.insert_element(undefined, words[i], ir.Constant(_I32, 0))
        pairs.append(builder.insert_element(pair, words[i + 4], ir.Constant(_I32, 1)))
    return pairs


@intrinsic
def store_slices(typingctx, ia, at, kb, keep, oa, base):
    """The kb slices of the octet whose 8 messages are the kb bytes at ia + at + q kb (q < 8;
    each read as a native word, masked by keep to its first kb bytes) to oa + base ..
    oa + base + 8 kb - 1: byte i of slice c holds bit i (msb first) of message byte c of
    codeword q at bit 7 - q. In vector registers: the 8 messages, rows of an 8x8 byte
    matrix, are byte transposed (column c: message byte c of codewords 0..7), then each
    column is bit transposed (_LANE_SWAPS); column c is slice c. Nothing is stored past
    slice kb - 1."""
    if not all(isinstance(x, types.Integer) for x in (ia, at, kb, keep, oa, base)):
        return None

    def codegen(context, builder, signature, args):
        ia, at, kb, keep, oa, base = _intp(context, builder, signature, args)
        keep = context.cast(builder, args[3], signature.args[3], types.uint64)
        rows = [builder.and_(_word_at(builder, ia, builder.add(at, builder.mul(kb, ir.Constant(kb.type, q)))),
                             keep) for q in range(8)]
        pairs = _byte_transpose_ir(builder, _pairs_of(builder, rows))
        out = builder.add(oa, base)
        slices = [_lane_transpose_ir(builder, pair) for pair in pairs]
        for c in range(8):
            lane = builder.extract_element(slices[c // 2], ir.Constant(_I32, c % 2))
            pointer = builder.inttoptr(builder.add(out, ir.Constant(out.type, 8 * c)), _I64.as_pointer())
            if c == 0:
                builder.store(lane, pointer, align=1)
            else:
                with builder.if_then(builder.icmp_signed(">", kb, ir.Constant(kb.type, c)), likely=True):
                    builder.store(lane, pointer, align=1)
        return context.get_dummy_value()

    return types.void(ia, at, kb, keep, oa, base), codegen


@intrinsic
def load_messages(typingctx, ia, base, kb):
    """The 8 messages of the octet whose kb slices lie at ia + base, as native words (the
    inverse of store_slices: message byte c of codeword q is byte c of word q in memory
    order; bytes c >= kb zero): each slice bit transposed (_LANE_SWAPS is its own inverse),
    then the 8x8 byte matrix of the results transposed back. Slices c >= kb are not read."""
    if not all(isinstance(x, types.Integer) for x in (ia, base, kb)):
        return None

    def codegen(context, builder, signature, args):
        ia, base, kb = _intp(context, builder, signature, args)
        zero = ir.Constant(_I64, 0)
        slices = []
        for c in range(8):
            inside = builder.icmp_signed(">", kb, ir.Constant(kb.type, c)) if c else None
            offset = ir.Constant(base.type, 8 * c)
            if inside is not None:  # past the octet's slices: read slice 0 again and use zero
                offset = builder.select(inside, offset, ir.Constant(base.type, 0))
            word = _word_at(builder, ia, builder.add(base, offset))
            slices.append(word if inside is None else builder.select(inside, word, zero))
        pairs = [_lane_transpose_ir(builder, pair)
                 for pair in _pairs_of(builder, slices)]
        pairs = _byte_transpose_ir(builder, pairs)
        messages = [builder.extract_element(pairs[q // 2], ir.Constant(_I32, q % 2)) for q in range(8)]
        return context.make_tuple(builder, signature.return_type, messages)

    return types.UniTuple(types.uint64, 8)(ia, base, kb), codegen


@njit(cache=True)
def _encode_steps(ia, ta, oa, octets, kb, r):
    """The loop of _encode_octets: per octet, the 8 check bytes from the messages read as
    native words (_native_check), bit transposed into the r check bytes; the slices by
    store_slices from the same bytes. Not numba-inlined: see the module note."""
    keep = swap(~(~U64(0) >> U64(8 * kb))) if kb < 8 else ~U64(0)  # a native word's first kb bytes
    n = 8 * kb + r
    for t in range(octets):
        at = t * 8 * kb
        checks = ((_native_check(ta, load_word(ia, at) & keep, kb) << U64(56))
                  | (_native_check(ta, load_word(ia, at + kb) & keep, kb) << U64(48))
                  | (_native_check(ta, load_word(ia, at + 2 * kb) & keep, kb) << U64(40))
                  | (_native_check(ta, load_word(ia, at + 3 * kb) & keep, kb) << U64(32))
                  | (_native_check(ta, load_word(ia, at + 4 * kb) & keep, kb) << U64(24))
                  | (_native_check(ta, load_word(ia, at + 5 * kb) & keep, kb) << U64(16))
                  | (_native_check(ta, load_word(ia, at + 6 * kb) & keep, kb) << U64(8))
                  | _native_check(ta, load_word(ia, at + 7 * kb) & keep, kb))
        base = t * n
        store_slices(ia, at, kb, keep, oa, base)
        store_be64(oa, base + 8 * kb, transpose8(checks))


@njit(cache=True)
def _encode_octets(ia, ta, oa, octets, kb, r):
    """octets octets of encode_octet8 from the message bytes at ia to oa."""
    _encode_steps(ia, ta, oa, octets, kb, r)


@njit(cache=True)
def _encode_octets8(ia, ta, oa, octets, r):
    """_encode_octets for kb = 8 (secded-72-64), compiled with kb a constant: the slices
    stored whole, the lookups unrolled, no masks (1.3x the loop for any kb run with kb = 8,
    16 KiB segments)."""
    _encode_steps(ia, ta, oa, octets, 8, r)


@njit(cache=True)
def _encode_any(ia, ta, oa, octets, kb, r):
    """_encode_octets8 for kb = 8, else _encode_octets."""
    if kb == 8:
        _encode_octets8(ia, ta, oa, octets, r)
    else:
        _encode_octets(ia, ta, oa, octets, kb, r)


@njit(cache=True)
def encode_octet8(in8, length, octets, kb, r, table, out8):
    """Depth 8: octet t takes message bytes from t 8 kb (codeword q's from t 8 kb + q kb)
    and writes its n = 8 kb + r bytes from out8[t n]: its kb slices (store_slices), then
    the 8 check bytes bit transposed (its bytes past r are zero and the next octet rewrites
    them). in8 holds `length` bytes (zeros past them); out8 needs 8 spare bytes."""
    ta, oa = table.ctypes.data, out8.ctypes.data
    fast = _whole(length, octets, 8 * kb, 7 * kb + 8)
    _encode_any(in8.ctypes.data, ta, oa, fast, kb, r)
    if fast < octets:
        rest = _rest(in8, length, fast * 8 * kb, (octets - fast) * 8 * kb)
        _encode_any(rest.ctypes.data, ta, oa + fast * (8 * kb + r), octets - fast, kb, r)


@njit(cache=True)
def _decode_octets(ia, ta, oa, octets, first, kb, r, lm, lw, st):
    """octets octets of decode_octet8 from the received bytes at ia, messages to oa;
    statuses from octet first. load_messages gives the 8 received messages (native words),
    the r check bytes bit transposed the 8 received checks; corrected messages are stored
    as native words. One loop for every kb: compiled for kb = 8 alone (as
    _encode_octets8) it ran no faster and took as long again to compile."""
    k = 8 * kb
    n = k + r
    zero = U64(0)
    check_bytes = ~(~U64(0) >> U64(8 * r)) if r < 8 else ~U64(0)  # the octet's r check bytes of a word
    for t in range(octets):
        base = t * n
        m0, m1, m2, m3, m4, m5, m6, m7 = load_messages(ia, base, kb)
        received = transpose8(load_be64(ia, base + 8 * kb) & check_bytes)
        syndromes = received ^ ((_native_check(ta, m0, kb) << U64(56)) | (_native_check(ta, m1, kb) << U64(48))
                                | (_native_check(ta, m2, kb) << U64(40)) | (_native_check(ta, m3, kb) << U64(32))
                                | (_native_check(ta, m4, kb) << U64(24)) | (_native_check(ta, m5, kb) << U64(16))
                                | (_native_check(ta, m6, kb) << U64(8)) | _native_check(ta, m7, kb))
        if syndromes != zero:  # damaged octet: each codeword by its own syndrome
            m0, m1, m2, m3, m4, m5, m6, m7 = _correct_octet(m0, m1, m2, m3, m4, m5, m6, m7, syndromes,
                                                            8 * (first + t), k, r, lm, lw, st)
        at = t * 8 * kb
        store_word(oa, at, m0)  # its bytes past kb: the next message rewrites them
        store_word(oa, at + kb, m1)
        store_word(oa, at + 2 * kb, m2)
        store_word(oa, at + 3 * kb, m3)
        store_word(oa, at + 4 * kb, m4)
        store_word(oa, at + 5 * kb, m5)
        store_word(oa, at + 6 * kb, m6)
        store_word(oa, at + 7 * kb, m7)


@njit(cache=True)
def decode_octet8(in8, length, octets, kb, r, table, leader_message, leader_weight, status, out8):
    """Depth 8 decoding of encode_octet8's layout: per octet, load_messages gives the 8
    received messages and the r check bytes bit transposed give the 8 received checks.
    One test of all 8 syndromes at once passes a clean octet straight through; otherwise
    each codeword with s != 0 is corrected by its leader or flagged. Messages are written
    back to back (codeword q's kb bytes at out8[(8 t + q) kb]). in8 holds `length` bytes
    (zeros past them); status must be zeroed; out8 needs 8 spare bytes."""
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
    """The 8 messages of a damaged octet (native words, as load_messages gives them), each
    with a non-zero syndrome (byte q of syndromes, left-aligned) corrected by its leader,
    statuses stored from block first.
    Leader tables and status by address (lm, lw, st), so a call moves no array. Not
    inlined: it runs only for damaged octets, and keeps the clean loop short."""
    shift = U64(8 - r)
    s = (syndromes >> U64(56)) >> shift
    if s:
        m0 = swap(_corrected_at(swap(m0), s, k, lm, lw, st, first))
    s = ((syndromes >> U64(48)) & U64(0xFF)) >> shift
    if s:
        m1 = swap(_corrected_at(swap(m1), s, k, lm, lw, st, first + 1))
    s = ((syndromes >> U64(40)) & U64(0xFF)) >> shift
    if s:
        m2 = swap(_corrected_at(swap(m2), s, k, lm, lw, st, first + 2))
    s = ((syndromes >> U64(32)) & U64(0xFF)) >> shift
    if s:
        m3 = swap(_corrected_at(swap(m3), s, k, lm, lw, st, first + 3))
    s = ((syndromes >> U64(24)) & U64(0xFF)) >> shift
    if s:
        m4 = swap(_corrected_at(swap(m4), s, k, lm, lw, st, first + 4))
    s = ((syndromes >> U64(16)) & U64(0xFF)) >> shift
    if s:
        m5 = swap(_corrected_at(swap(m5), s, k, lm, lw, st, first + 5))
    s = ((syndromes >> U64(8)) & U64(0xFF)) >> shift
    if s:
        m6 = swap(_corrected_at(swap(m6), s, k, lm, lw, st, first + 6))
    s = (syndromes & U64(0xFF)) >> shift
    if s:
        m7 = swap(_corrected_at(swap(m7), s, k, lm, lw, st, first + 7))
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
