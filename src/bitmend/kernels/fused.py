"""Fused segment kernels for the generic binary engine at depth 1 and depths that are multiples of 8.

One compiled call per segment reads the messages, computes the parity, interleaves and
writes the coded stream (or the reverse, with syndrome correction), with no intermediate
arrays. The layout and bit order are those of kernels.blockcode (transmission order, a
codeword is the k message bits then the r = n - k parity bits, most significant first;
codeword i of a group of D puts its bit j at group bit j*D + i), so the bytes on the wire
are the same; tests hold both kernels and the numpy twins in kernels.small bit-identical.

Native word buffers. The stream lives in a uint64 array whose *memory* holds the stream
bytes in order (the array is a view of the bytes, no byte swap on the way in or out), so
a kernel reads stream word w as bswap(words[w]) on a little-endian machine. Callers make
them with native_words / read them with stream_bytes; both are one copy at most.

Byte buffers and unaligned words. The newer kernels (encode_linear, decode_linear, the
depth-1 codeword kernels, encode_octet8, decode_octet8) take the stream as plain bytes and
move it in whole 64-bit words at any byte offset (load_be64, store_be64: one unaligned
load or store and a bswap), writing each step's bytes with a full-word store whose tail
the next step rewrites; their output buffers keep 8 spare bytes. Inside hot loops they
pass buffers to helpers by address (arr.ctypes.data taken once), never as arrays: numba
counts references on every array handed to a helper, two atomic operations per call.

Parity by table: p = XOR_c ptab[c, chunk_c(m)] with chunks of `chunk_bits` bits (the whole
message in one lookup when k <= 12, else bytes).

Depth a multiple of 8 (D = 8L): the D codewords of a group are L octets of 8; octet l
holds codewords 8l .. 8l+7, whose group bits j*D + 8l + q (q = 0..7) are the bits of
group byte j*L + l. So byte j of the octet is bit j of its eight codewords, and eight such
bytes are one 8x8 bit transpose (Hacker's Delight 7-3) away from bytes of the codewords.
The messages of an octet are 8k consecutive message bits (k bytes), so octets run in
order through the message and the kernels never hold more than eight codewords.
"""

from __future__ import annotations

import sys

import numpy as np
from llvmlite import ir
from bitmend.kernels.jit import intrinsic, njit, types

from bitmend.kernels.blockcode import codeword_words, transpose8  # shared with the word-buffer kernels
from bitmend.kernels.status import FAILED

U64 = np.uint64
SPARE_WORDS = 2  # zero words after the data, so a two-word load never runs off the end
LITTLE_ENDIAN = sys.byteorder == "little"


def native_words(data: bytes | np.ndarray, nbits: int) -> np.ndarray:
    """A zero-padded native word buffer holding the stream bytes data (at least nbits)."""
    raw = np.frombuffer(data, dtype=np.uint8) if not isinstance(data, np.ndarray) else data
    count = (max(8 * len(raw), nbits) + 63) // 64 + SPARE_WORDS
    words = np.zeros(count, dtype=np.uint64)
    words.view(np.uint8)[: len(raw)] = raw
    return words


def empty_native_words(nbits: int) -> np.ndarray:
    return np.zeros((nbits + 63) // 64 + SPARE_WORDS, dtype=np.uint64)


def stream_bytes(words: np.ndarray, nbytes: int) -> bytes:
    """The first nbytes stream bytes of a native word buffer."""
    return words.view(np.uint8)[:nbytes].tobytes()


@njit(cache=True, inline="always")
def swap(x):
    """Stream word <-> native word: a byte swap on little-endian machines (LLVM emits one
    bswap instruction for this pattern), nothing on big-endian ones."""
    if LITTLE_ENDIAN:
        x = ((x & U64(0x00FF00FF00FF00FF)) << U64(8)) | ((x >> U64(8)) & U64(0x00FF00FF00FF00FF))
        x = ((x & U64(0x0000FFFF0000FFFF)) << U64(16)) | ((x >> U64(16)) & U64(0x0000FFFF0000FFFF))
        x = (x << U64(32)) | (x >> U64(32))
    return x


# ---- unaligned big-endian words of a byte buffer -----------------------------------------------

def _byte_pointer(context, builder, signature, args):
    """address + index as an i64*, for the two intrinsics below."""
    address = context.cast(builder, args[0], signature.args[0], types.intp)
    index = context.cast(builder, args[1], signature.args[1], types.intp)
    return builder.inttoptr(builder.add(address, index), ir.IntType(64).as_pointer())


def _to_big_endian(builder, value):
    if not LITTLE_ENDIAN:
        return value
    return builder.call(builder.module.declare_intrinsic("llvm.bswap", [ir.IntType(64)]), [value])


# The intrinsics take a buffer's address (arr.ctypes.data), not the array: an array passed
# through an inlined call in a loop costs a reference count increment and decrement per
# iteration (measured: golay-24-12 at 30 MB/s instead of hundreds). The caller keeps the
# array alive (it is the kernel's argument) and index + 8 within it.

@intrinsic
def load_be64(typingctx, address, index):
    """The 8 bytes at address + index as a big-endian integer (first byte most
    significant): one unaligned load and a bswap."""
    if not (isinstance(address, types.Integer) and isinstance(index, types.Integer)):
        return None

    def codegen(context, builder, signature, args):
        return _to_big_endian(builder, builder.load(_byte_pointer(context, builder, signature, args), align=1))

    return types.uint64(address, index), codegen


@intrinsic
def store_be64(typingctx, address, index, value):
    """The 8 bytes of value, most significant first, to address + index (one unaligned store)."""
    if not (isinstance(address, types.Integer) and isinstance(index, types.Integer)
            and isinstance(value, types.Integer)):
        return None

    def codegen(context, builder, signature, args):
        value = context.cast(builder, args[2], signature.args[2], types.uint64)
        builder.store(_to_big_endian(builder, value), _byte_pointer(context, builder, signature, args), align=1)
        return context.get_dummy_value()

    return types.void(address, index, value), codegen


@intrinsic
def load_u8(typingctx, address, index):
    """The byte at address + index."""
    if not (isinstance(address, types.Integer) and isinstance(index, types.Integer)):
        return None

    def codegen(context, builder, signature, args):
        address = context.cast(builder, args[0], signature.args[0], types.intp)
        index = context.cast(builder, args[1], signature.args[1], types.intp)
        byte = builder.load(builder.inttoptr(builder.add(address, index), ir.IntType(8).as_pointer()))
        return builder.zext(byte, ir.IntType(64))

    return types.uint64(address, index), codegen


@intrinsic
def load_u64(typingctx, address, index):
    """The native uint64 at address + 8 * index (an aligned table entry)."""
    if not (isinstance(address, types.Integer) and isinstance(index, types.Integer)):
        return None

    def codegen(context, builder, signature, args):
        address = context.cast(builder, args[0], signature.args[0], types.intp)
        index = context.cast(builder, args[1], signature.args[1], types.intp)
        pointer = builder.inttoptr(address, ir.IntType(64).as_pointer())
        return builder.load(builder.gep(pointer, [index]))

    return types.uint64(address, index), codegen


@intrinsic
def store_u64(typingctx, address, index, value):
    """The native uint64 at address + 8 * index = value (an aligned table entry)."""
    if not all(isinstance(x, types.Integer) for x in (address, index, value)):
        return None

    def codegen(context, builder, signature, args):
        address = context.cast(builder, args[0], signature.args[0], types.intp)
        index = context.cast(builder, args[1], signature.args[1], types.intp)
        value = context.cast(builder, args[2], signature.args[2], types.uint64)
        pointer = builder.inttoptr(address, ir.IntType(64).as_pointer())
        builder.store(value, builder.gep(pointer, [index]))
        return context.get_dummy_value()

    return types.void(address, index, value), codegen


@intrinsic
def store_u8(typingctx, address, index, value):
    """The byte at address + index = value (its low 8 bits)."""
    if not all(isinstance(x, types.Integer) for x in (address, index, value)):
        return None

    def codegen(context, builder, signature, args):
        address = context.cast(builder, args[0], signature.args[0], types.intp)
        index = context.cast(builder, args[1], signature.args[1], types.intp)
        value = context.cast(builder, args[2], signature.args[2], types.uint64)
        pointer = builder.inttoptr(builder.add(address, index), ir.IntType(8).as_pointer())
        builder.store(builder.trunc(value, ir.IntType(8)), pointer)
        return context.get_dummy_value()

    return types.void(address, index, value), codegen


@intrinsic
def leading_zeros(typingctx, value):
    """Count of leading zero bits of a uint64 (64 for zero): one lzcnt."""
    if not isinstance(value, types.Integer):
        return None

    def codegen(context, builder, signature, args):
        value = context.cast(builder, args[0], signature.args[0], types.uint64)
        i64 = ir.IntType(64)
        ctlz = builder.module.declare_intrinsic("llvm.ctlz", [i64], ir.FunctionType(i64, [i64, ir.IntType(1)]))
        return builder.call(ctlz, [value, ir.Constant(ir.IntType(1), 0)])

    return types.uint64(value), codegen


@njit(cache=True, inline="always")
def read_bits(address, length, bit, width):
    """Stream field of 1..57 bits at bit, first bit most significant, from the `length`
    bytes at address (bytes past them read as zero): one load when 8 bytes are there.
    Addresses, not arrays: an array passed to a helper in a hot loop costs two atomic
    reference count updates per call (measured ten times slower)."""
    at = bit >> 3
    if at + 8 <= length:
        x = load_be64(address, at)
    else:
        x = U64(0)
        for b in range(min(8, length - at)):
            x |= load_u8(address, at + b) << U64(56 - 8 * b)
    return (x << U64(bit & 7)) >> U64(64 - width)


@njit(cache=True, inline="always")
def emit(address, at, acc, held, value, width):
    """Branch-free sequential writer of 1..56-bit values (no stray high bits): acc holds
    held < 8 pending bits at its top, at is the byte they belong to. Every call stores
    the whole word at address + at (later calls rewrite its tail), so the buffer needs
    8 spare bytes."""
    total = held + width
    acc |= value << U64(64 - total)
    store_be64(address, at, acc)
    whole = total >> 3
    return at + whole, acc << U64(8 * whole), total & 7


@njit(cache=True, inline="always")
def field(words, bit_pos, width):
    """Stream field of 1..64 bits at bit_pos, first bit most significant."""
    i = bit_pos >> 6
    offset = U64(bit_pos & 63)
    joined = (swap(words[i]) << offset) | ((swap(words[i + 1]) >> U64(1)) >> (U64(63) - offset))
    return joined >> U64(64 - width)


@njit(cache=True, inline="always")
def put(words, index, acc, held, value, width):
    """Sequential writer: append a width-bit value (1..64 bits, no stray high bits).
    State (index: next word, acc: word being filled from the top, held: bits in acc)."""
    free = 64 - held
    if width < free:
        return index, acc | (value << U64(free - width)), held + width
    rest = width - free
    words[index] = swap(acc | (value >> U64(rest)))
    if rest == 0:
        return index + 1, U64(0), 0
    return index + 1, value << U64(64 - rest), rest


@njit(cache=True, inline="always")
def finish(words, index, acc, held):
    if held:
        words[index] = swap(acc)


@njit(cache=True, inline="always")
def parity(m, ptab, chunk_bits):
    """p = m P: one lookup per chunk of chunk_bits message bits (low chunk first)."""
    mask = (U64(1) << U64(chunk_bits)) - U64(1)
    p = ptab[0, m & mask]
    for c in range(1, ptab.shape[0]):
        p ^= ptab[c, (m >> U64(chunk_bits * c)) & mask]
    return p


# ---- depth a multiple of 8 -------------------------------------------------------------------

@njit(cache=True, inline="always")
def _swap_blocks(a, b, mask, shift):
    """One stage of the 8x8 byte-matrix transpose between rows a and b."""
    s = U64(shift)
    return (a & mask) | ((b >> s) & ~mask), ((a << s) & mask) | (b & ~mask)


@njit(cache=True, inline="always")
def byte_transpose(a0, a1, a2, a3, a4, a5, a6, a7):
    """Transpose the 8x8 byte matrix whose row i is the word ai (byte 0 most significant):
    row j of the result holds byte j of a0 .. a7. Three stages of block swaps (32-, 16-
    and 8-bit blocks), each a masked shift between a pair of rows."""
    high32 = U64(0xFFFFFFFF00000000)
    high16 = U64(0xFFFF0000FFFF0000)
    high8 = U64(0xFF00FF00FF00FF00)
    a0, a4 = _swap_blocks(a0, a4, high32, 32)
    a1, a5 = _swap_blocks(a1, a5, high32, 32)
    a2, a6 = _swap_blocks(a2, a6, high32, 32)
    a3, a7 = _swap_blocks(a3, a7, high32, 32)
    a0, a2 = _swap_blocks(a0, a2, high16, 16)
    a1, a3 = _swap_blocks(a1, a3, high16, 16)
    a4, a6 = _swap_blocks(a4, a6, high16, 16)
    a5, a7 = _swap_blocks(a5, a7, high16, 16)
    a0, a1 = _swap_blocks(a0, a1, high8, 8)
    a2, a3 = _swap_blocks(a2, a3, high8, 8)
    a4, a5 = _swap_blocks(a4, a5, high8, 8)
    a6, a7 = _swap_blocks(a6, a7, high8, 8)
    return a0, a1, a2, a3, a4, a5, a6, a7


@njit(cache=True, inline="always")
def _codeword(src, bit, k, r, ptab, chunk_bits):
    m = field(src, bit, k)
    return codeword_words(m, U64(parity(m, ptab, chunk_bits)), k, r)


@njit(cache=True, inline="always")
def _emit_slice(out, out8, index, acc, held, x, c, n, lanes, base):
    """Octet bytes 8c .. 8c+7 (x, first byte most significant) to the stream: in order
    when the octet's bytes are consecutive (lanes == 1), else each to its group byte."""
    count = min(8, n - 8 * c)
    if lanes == 1:
        return put(out, index, acc, held, x >> U64(64 - 8 * count), 8 * count)
    for i in range(count):
        out8[base + (8 * c + i) * lanes] = np.uint8((x >> U64(56 - 8 * i)) & U64(0xFF))
    return index, acc, held


@njit(cache=True)
def encode_octets(src, groups, lanes, k, r, ptab, chunk_bits, out):
    """Encode groups * 8 * lanes messages at depth 8 * lanes into the native word buffer
    out. Per octet: the 8 codewords left-aligned in words (and a second word each when
    n > 64), an 8x8 byte transpose, then one 8x8 bit transpose per byte slice."""
    n = k + r
    slices = (n + 7) // 8
    out8 = out.view(np.uint8)
    index, acc, held = 0, U64(0), 0
    for g in range(groups):
        for lane in range(lanes):
            bit = (g * lanes + lane) * 8 * k
            c0, d0 = _codeword(src, bit, k, r, ptab, chunk_bits)
            c1, d1 = _codeword(src, bit + k, k, r, ptab, chunk_bits)
            c2, d2 = _codeword(src, bit + 2 * k, k, r, ptab, chunk_bits)
            c3, d3 = _codeword(src, bit + 3 * k, k, r, ptab, chunk_bits)
            c4, d4 = _codeword(src, bit + 4 * k, k, r, ptab, chunk_bits)
            c5, d5 = _codeword(src, bit + 5 * k, k, r, ptab, chunk_bits)
            c6, d6 = _codeword(src, bit + 6 * k, k, r, ptab, chunk_bits)
            c7, d7 = _codeword(src, bit + 7 * k, k, r, ptab, chunk_bits)
            b0, b1, b2, b3, b4, b5, b6, b7 = byte_transpose(c0, c1, c2, c3, c4, c5, c6, c7)
            base = g * lanes * n + lane
            index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b0), 0, n, lanes, base)
            if slices > 1:
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b1), 1, n, lanes, base)
            if slices > 2:
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b2), 2, n, lanes, base)
            if slices > 3:
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b3), 3, n, lanes, base)
            if slices > 4:
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b4), 4, n, lanes, base)
            if slices > 5:
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b5), 5, n, lanes, base)
            if slices > 6:
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b6), 6, n, lanes, base)
            if slices > 7:
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(b7), 7, n, lanes, base)
            if slices > 8:
                e0, e1, e2, e3, e4, e5, e6, e7 = byte_transpose(d0, d1, d2, d3, d4, d5, d6, d7)
                index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(e0), 8, n, lanes, base)
                if slices > 9:
                    index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(e1), 9, n, lanes, base)
                if slices > 10:
                    index, acc, held = _emit_slice(out, out8, index, acc, held, transpose8(e2), 10, n, lanes, base)
    if lanes == 1:
        finish(out, index, acc, held)


# ---- short codes: the whole octet as one linear map of its bytes ------------------------------

@njit(cache=True, inline="always")
def vector_field(x0, x1, x2, pos, width):
    """Bits pos .. pos+width-1 (width <= 64) of the bit vector x0, x1, x2."""
    w = pos >> 6
    offset = pos & 63
    a = x0 if w == 0 else (x1 if w == 1 else x2)
    b = x1 if w == 0 else (x2 if w == 1 else U64(0))
    joined = (a << U64(offset)) | ((b >> U64(1)) >> U64(63 - offset))
    return joined >> U64(64 - width)


@njit(cache=True, inline="always")
def vector_xor(x0, x1, x2, pos, width, value):
    """x XOR value placed at bits pos .. pos+width-1 (width <= 64)."""
    w = pos >> 6
    offset = pos & 63
    top = value << U64(64 - width)  # left-aligned
    a = top >> U64(offset)
    b = (top << U64(1)) << U64(63 - offset) if offset else U64(0)
    if w == 0:
        return x0 ^ a, x1 ^ b, x2
    if w == 1:
        return x0, x1 ^ a, x2 ^ b
    return x0, x1, x2 ^ a


@njit(cache=True, inline="always")
def _linear_step(in8, length, base, count, table, safe):
    """XOR over count input bytes from base of table[pos, byte] (its three words; words
    the table does not have are zero). Bytes past length read as zero unless safe."""
    nw = table.shape[2]
    byte = in8[base] if safe or base < length else 0
    x0 = table[0, byte, 0]
    x1 = table[0, byte, 1] if nw > 1 else U64(0)
    x2 = table[0, byte, 2] if nw > 2 else U64(0)
    for pos in range(1, count):
        byte = in8[base + pos] if safe or base + pos < length else 0
        x0 ^= table[pos, byte, 0]
        if nw > 1:
            x1 ^= table[pos, byte, 1]
        if nw > 2:
            x2 ^= table[pos, byte, 2]
    return x0, x1, x2


@njit(cache=True, inline="always")
def _store_vector(address, at, x0, x1, x2, nbytes):
    """The first nbytes (<= 24) bytes of the bit vector x0, x1, x2 to out8[at ..], as
    whole-word stores: bytes past nbytes are written too (the next step rewrites them),
    so the buffer needs 8 spare bytes."""
    store_be64(address, at, x0)
    if nbytes > 8:
        store_be64(address, at + 8, x1)
    if nbytes > 16:
        store_be64(address, at + 16, x2)


@njit(cache=True, inline="always")
def _store_exact(address, at, x0, x1, x2, nbytes):
    """The first nbytes of the bit vector x0, x1, x2 to address + at, and not a byte more:
    the last step of a row, whose next bytes are not the kernel's (frames coded in place)."""
    for i in range(nbytes):
        word = x0 if i < 8 else (x1 if i < 16 else x2)
        store_u8(address, at + i, word >> U64(56 - 8 * (i & 7)))


@njit(cache=True)
def _quad(ta, ia, b, row, nw, w):
    """XOR of table[row + i, in[b + i], w] for i = 0..3: the table (rows of 256 entries
    of nw words) at address ta, the input bytes at address ia. Addresses and constants
    only, so that the four lookups compile straight-line (see load_be64)."""
    return (load_u64(ta, ((row << 8) + load_u8(ia, b)) * nw + w)
            ^ load_u64(ta, (((row + 1) << 8) + load_u8(ia, b + 1)) * nw + w)
            ^ load_u64(ta, (((row + 2) << 8) + load_u8(ia, b + 2)) * nw + w)
            ^ load_u64(ta, (((row + 3) << 8) + load_u8(ia, b + 3)) * nw + w))


@njit(cache=True, inline="always")
def _quads(ta, ia, b, quads, nw, w):
    """Word w of the XOR over 4 * quads (<= 24) input bytes from b of their table rows."""
    x = _quad(ta, ia, b, 0, nw, w)
    if quads > 1:
        x ^= _quad(ta, ia, b + 4, 4, nw, w)
    if quads > 2:
        x ^= _quad(ta, ia, b + 8, 8, nw, w)
    if quads > 3:
        x ^= _quad(ta, ia, b + 12, 12, nw, w)
    if quads > 4:
        x ^= _quad(ta, ia, b + 16, 16, nw, w)
    if quads > 5:
        x ^= _quad(ta, ia, b + 20, 20, nw, w)
    return x


@njit(cache=True, inline="always")
def _unrolled_step(ta, ia, b, quads, nw):
    """_linear_step over 4 * quads bytes for literal quads and nw (rows past the step's
    bytes are zero in the table, so the bytes they read add nothing)."""
    x0 = _quads(ta, ia, b, quads, nw, 0)
    x1 = _quads(ta, ia, b, quads, nw, 1) if nw > 1 else U64(0)
    x2 = _quads(ta, ia, b, quads, nw, 2) if nw > 2 else U64(0)
    return x0, x1, x2


@njit(cache=True, inline="always")
def _whole_steps(length, steps, size, quads):
    """Steps t < steps whose 4 * quads bytes from t * size all lie within length."""
    if length < 4 * quads:
        return 0
    return min(steps, (length - 4 * quads) // size + 1)


@njit(cache=True, inline="always")
def _whole_row_steps(length, steps, size, quads, row_steps, row_stride):
    """Steps t < steps whose 4 * quads bytes from row_offset(t) all lie within length.
    Offsets grow with t (row_stride >= row_steps * size), so these are a prefix: every
    step of the rows that start at or before the last offset that fits, and the steps of
    that row up to it."""
    reach = length - 4 * quads
    if reach < 0 or steps == 0:
        return 0
    row = reach // row_stride
    return min(steps, row * row_steps + min(row_steps, (reach - row * row_stride) // size + 1))


@njit(cache=True, inline="always")
def row_offset(t, size, row_steps, row_stride):
    """Input offset of step t when rows of row_steps steps of `size` bytes lie row_stride
    bytes apart (coded payloads in frames, read where they lie): t * size when rows touch."""
    return (t // row_steps) * row_stride + (t % row_steps) * size


@njit(cache=True)
def encode_linear(in8, length, octets, row_steps, row_stride, k, n, table, out8):
    """Short codes, a step of whole octets at a time: step t (8m codewords, k = 8m k_code
    bits of message in k bytes, n coded bytes out) is the XOR over its k message bytes of
    table[pos, byte] (its n stream bytes as table.shape[2] <= 3 words): parity, the
    codeword layout and interleaving are all linear in the message bits, so one table
    does them at once. in8 holds `length` message bytes; bytes past them read as zero.
    The table has 4 * ceil(k / 4) rows (zeros past k). out8 is a byte view of a native
    word buffer with 8 spare bytes.

    This is the loop for any step shape; the catalog's shapes have loops of their own with
    the lookups written out (linear_encoder), measured 1.5x to 3x faster. Each is its own
    compiled function, so that a code compiles only its own on first use.

    Rows: step t's coded bytes go to row_offset(t, n, row_steps, row_stride), rows of
    row_steps steps row_stride bytes apart (the coded payloads of a run of frames, written
    where they go in the frames; row_steps = octets, row_stride = octets * n: one plain
    segment). A row's last step stores exactly its n bytes, never past the row."""
    # np.int64(0), not 0: a literal 0 would compile (and cache) the loop a second time for it
    _encode_linear_steps(in8, length, np.int64(0), octets, row_steps, row_stride, k, n, table, out8.ctypes.data)


@njit(cache=True)
def _encode_linear_steps(in8, length, first, octets, row_steps, row_stride, k, n, table, out_address):
    """Steps first .. octets-1 of encode_linear, bytes past length read as zero."""
    for t in range(first, octets):
        x0, x1, x2 = _linear_step(in8, length, t * k, k, table, False)
        at = row_offset(t, n, row_steps, row_stride)
        if t % row_steps == row_steps - 1:
            _store_exact(out_address, at, x0, x1, x2, n)
        else:
            _store_vector(out_address, at, x0, x1, x2, n)


@njit(cache=True)
def encode_linear_1x1(in8, length, octets, row_steps, row_stride, k, n, table, out8):
    """encode_linear for steps of one quad of lookups into one word (hamming-7-4, secded-8-4)."""
    ia, ta, out_address = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see load_be64
    fast = _whole_steps(length, octets, k, 1)
    first = 0
    row_start = 0
    while first < fast:  # row by row (see encode_linear)
        at = row_start
        stop = min(fast, first + row_steps - 1)  # the row's last step stores exactly n bytes
        for t in range(first, stop):
            store_be64(out_address, at, _quads(ta, ia, t * k, 1, 1, 0))
            at += n
        if stop < fast:
            _store_exact(out_address, at, _quads(ta, ia, stop * k, 1, 1, 0), U64(0), U64(0), n)
        first += row_steps
        row_start += row_stride
    _encode_linear_steps(in8, length, fast, octets, row_steps, row_stride, k, n, table, out_address)


@njit(cache=True)
def encode_linear_3x2(in8, length, octets, row_steps, row_stride, k, n, table, out8):
    """encode_linear for steps of three quads into two words (hamming-15-11, secded-16-11)."""
    ia, ta, out_address = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see load_be64
    fast = _whole_steps(length, octets, k, 3)
    first = 0
    row_start = 0
    while first < fast:  # row by row (see encode_linear)
        at = row_start
        stop = min(fast, first + row_steps - 1)  # the row's last step stores exactly n bytes
        for t in range(first, stop):
            x0, x1, x2 = _unrolled_step(ta, ia, t * k, 3, 2)
            _store_vector(out_address, at, x0, x1, x2, n)
            at += n
        if stop < fast:
            x0, x1, x2 = _unrolled_step(ta, ia, stop * k, 3, 2)
            _store_exact(out_address, at, x0, x1, x2, n)
        first += row_steps
        row_start += row_stride
    _encode_linear_steps(in8, length, fast, octets, row_steps, row_stride, k, n, table, out_address)


@njit(cache=True)
def encode_linear_2x3(in8, length, octets, row_steps, row_stride, k, n, table, out8):
    """encode_linear for steps of two quads into three words (rep-3: 8 bytes to 24)."""
    ia, ta, out_address = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see load_be64
    fast = _whole_steps(length, octets, k, 2)
    first = 0
    row_start = 0
    while first < fast:  # row by row (see encode_linear)
        at = row_start
        stop = min(fast, first + row_steps - 1)  # the row's last step stores exactly n bytes
        for t in range(first, stop):
            x0, x1, x2 = _unrolled_step(ta, ia, t * k, 2, 3)
            _store_vector(out_address, at, x0, x1, x2, n)
            at += n
        if stop < fast:
            x0, x1, x2 = _unrolled_step(ta, ia, stop * k, 2, 3)
            _store_exact(out_address, at, x0, x1, x2, n)
        first += row_steps
        row_start += row_stride
    _encode_linear_steps(in8, length, fast, octets, row_steps, row_stride, k, n, table, out_address)


@njit(cache=True)
def encode_linear_3x3(in8, length, octets, row_steps, row_stride, k, n, table, out8):
    """encode_linear for steps of three quads into three words (golay codes at depth 8)."""
    ia, ta, out_address = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see load_be64
    fast = _whole_steps(length, octets, k, 3)
    first = 0
    row_start = 0
    while first < fast:  # row by row (see encode_linear)
        at = row_start
        stop = min(fast, first + row_steps - 1)  # the row's last step stores exactly n bytes
        for t in range(first, stop):
            x0, x1, x2 = _unrolled_step(ta, ia, t * k, 3, 3)
            _store_vector(out_address, at, x0, x1, x2, n)
            at += n
        if stop < fast:
            x0, x1, x2 = _unrolled_step(ta, ia, stop * k, 3, 3)
            _store_exact(out_address, at, x0, x1, x2, n)
        first += row_steps
        row_start += row_stride
    _encode_linear_steps(in8, length, fast, octets, row_steps, row_stride, k, n, table, out_address)


ENCODE_SHAPES = {(1, 1): encode_linear_1x1, (3, 2): encode_linear_3x2, (2, 3): encode_linear_2x3,
                 (3, 3): encode_linear_3x3}


def linear_encoder(k: int, nw: int):
    """The encode_linear loop for steps of k message bytes into nw words: its own unrolled
    loop for a catalog shape (quads of lookups, words), else the general one."""
    return ENCODE_SHAPES.get(((k + 3) // 4, nw), encode_linear)


@njit(cache=True, inline="always")
def reciprocal(r):
    """ceil(2^16 / r), so that (x * reciprocal(r)) >> 16 == x // r for 0 <= x < 2^16 / r:
    it is (2^16 + e) / r with 0 <= e < r, so x * it / 2^16 exceeds x / r by x e / (r 2^16),
    under 1 / r when x e < 2^16, and the fraction of x / r is at most (r - 1) / r."""
    return ((1 << 16) + r - 1) // r


@njit(cache=True, inline="always")
def _mark(index, weight, status, marks, mark_limit, counts_row, failed_row, row_first, limit):
    """Keep codeword `index`'s status `weight` (see _correct_step: listed in marks, or in
    the status array once the list is full) and count it in its row's tally."""
    marked = load_u64(marks, 0)
    if marked < U64(mark_limit):
        store_u64(marks, marked + U64(1), (U64(index) << U64(8)) | U64(weight))
    else:
        if marked == U64(mark_limit):  # the list is full: the statuses go to the array from now on
            for i in range(1, mark_limit + 1):
                mark = load_u64(marks, i)
                store_u8(status, mark >> U64(8), mark & U64(0xFF))
        store_u8(status, index, weight)
    store_u64(marks, 0, marked + U64(1))
    if weight == FAILED:
        lost = load_u64(counts_row, 2)
        if lost < U64(limit):
            store_u64(failed_row, lost, index - row_first)
        store_u64(counts_row, 2, lost + U64(1))
    else:
        store_u64(counts_row, 0, load_u64(counts_row, 0) + U64(1))
        store_u64(counts_row, 1, load_u64(counts_row, 1) + weight)


@njit(cache=True, no_cpython_wrapper=True)
def _correct_step(x0, x1, x2, t, per, k, code_k, r, by_r, leader_message, leader_weight, status, marks, mark_limit,
                  counts_row, failed_row, row_first, limit):
    """Correct the per codewords of a decoded step by their syndromes (r bits each from
    bit 8k), visiting only the non-zero ones: the next set syndrome bit is found by a
    leading-zero count, so a step with one bad codeword of 64 costs one correction.
    leader_message, leader_weight and status are the addresses of the uint64, uint8 and
    uint8 arrays (see load_be64: no arrays through helpers in hot loops). Not inlined:
    it runs only for damaged steps, and inlined it slowed the clean ones by a third.
    by_r = reciprocal(r): the codeword of a syndrome bit is found with a multiply, not a
    division (exact: offsets in a step and r are below 192, their product below 2^16),
    a tenth of a damaged step's time on hamming-7-4, measured.

    Each status marked is listed and counted, so that a damaged run's statuses need no
    scan, copy or count after:
    - marks is the address of 1 + mark_limit uint64: marks[0] counts the statuses marked,
      and the i-th goes to marks[1 + i] as (codeword index << 8) | status while
      i < mark_limit. Past that, the listed ones are written to the status array and every
      later one with them (the count goes on), so the array is touched only when the list
      is full: a few scattered writes into a run's statuses miss the cache every time;
    - counts_row is the address of the row's three uint64 counts (blocks corrected,
      symbols corrected, blocks failed), as kernels.tally.status_tally would count them,
      failed_row that of its `limit` uint64 places of failed blocks (counted from the
      row's first status, row_first)."""
    start = 8 * k
    end = start + per * r
    if end <= 64:  # messages and syndromes all in x0 (hamming-7-4, secded-8-4): a shorter loop, measured
        syndromes = x0 << U64(start)  # 17% faster a damaged step; one turn per codeword to correct
        fix = U64(0)
        while syndromes:
            q = (int(leading_zeros(syndromes)) * by_r) >> 16  # // r
            s = (x0 << U64(start + q * r)) >> U64(64 - r)
            weight = load_u8(leader_weight, s)
            fix ^= load_u64(leader_message, s) << U64(64 - (q + 1) * code_k)  # 0 for a FAILED syndrome
            _mark(per * t + q, weight, status, marks, mark_limit, counts_row, failed_row, row_first, limit)
            syndromes &= (~U64(0) >> U64((q + 1) * r - 1)) >> U64(1)  # this codeword's syndrome and those before
        return x0 ^ fix, x1, x2
    pos = start
    while pos < end:
        w = pos >> 6
        word = (x0 if w == 0 else (x1 if w == 1 else x2)) & (~U64(0) >> U64(pos & 63))
        if word == U64(0):
            pos = (w + 1) << 6
            continue
        q = (((w << 6) + int(leading_zeros(word)) - start) * by_r) >> 16  # // r
        if q >= per:
            break
        s = vector_field(x0, x1, x2, start + q * r, r)
        weight = load_u8(leader_weight, s)
        if weight != FAILED:
            x0, x1, x2 = vector_xor(x0, x1, x2, q * code_k, code_k, load_u64(leader_message, s))
        _mark(per * t + q, weight, status, marks, mark_limit, counts_row, failed_row, row_first, limit)
        pos = start + (q + 1) * r
    return x0, x1, x2


@njit(cache=True)
def decode_linear(in8, length, octets, row_steps, row_stride, k, n, code_k, r, table, syndrome_mask,
                  leader_message, leader_weight, status, marks, counts, failed, out8):
    """Short codes decoded a step of whole octets at a time (n received bytes, k message
    bytes, per = 8k / code_k codewords): XOR over the n received bytes of table[pos, byte]
    gives the per received messages (bits 0 .. 8k-1, concatenated) and their syndromes
    (r bits each, concatenated from bit 8k). All-zero syndromes: the messages go out as
    they are; otherwise each codeword with s != 0 is corrected by its coset leader
    (status w) or left as received (status FAILED). status must be zeroed. in8 holds
    `length` received bytes; bytes past them read as zero. The table has 4 * ceil(n / 4)
    rows (zeros past n). out8 is a byte view of a native word buffer with 8 spare bytes.
    This is the loop for any step shape; the catalog's shapes have their own unrolled
    loops, each its own compiled function (linear_decoder), as for encode_linear.

    Rows: the received bytes of step t are at row_offset(t, n, row_steps, row_stride), so
    the coded payloads of a run of frames are read where they lie in the input, rows of
    row_steps steps row_stride bytes apart (row_steps = octets, row_stride = octets * n:
    one plain segment). Messages and statuses go out in step order, rows end to end.
    Returns the number of steps that had a codeword to correct or give up on. marks
    (uint64, marks[0] zeroed) gets the number of statuses marked in marks[0]; up to
    len(marks) - 1, they are listed after it in codeword order and status is not written,
    else status has them all (see _correct_step: marks of length 1, status always).
    counts (uint64, zeroed, three per row of steps) and failed (uint64, `limit` per row)
    get each row's tally."""
    # np.int64(0), not 0: a literal 0 would compile (and cache) the loop a second time for it
    return _decode_linear_steps(in8, length, np.int64(0), octets, row_steps, row_stride, k, n, code_k, r, table,
                                syndrome_mask, leader_message, leader_weight, status, marks, counts, failed,
                                out8.ctypes.data)


@njit(cache=True)
def _decode_linear_steps(in8, length, first, octets, row_steps, row_stride, k, n, code_k, r, table, syndrome_mask,
                         leader_message, leader_weight, status, marks, counts, failed, out_address):
    """Steps first .. octets-1 of decode_linear, bytes past length read as zero; the
    number of them that had a codeword to correct."""
    per = 8 * k // code_k
    m0, m1, m2 = syndrome_mask[0], syndrome_mask[1], syndrome_mask[2]
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    limit = failed.shape[1]
    by_r = reciprocal(r)
    ma, mark_limit = marks.ctypes.data, marks.shape[0] - 1
    marked = 0
    for t in range(first, octets):
        x0, x1, x2 = _linear_step(in8, length, row_offset(t, n, row_steps, row_stride), n, table, False)
        if (x0 & m0) | (x1 & m1) | (x2 & m2):
            marked += 1
            row = t // row_steps
            x0, x1, x2 = _correct_step(x0, x1, x2, t, per, k, code_k, r, by_r, lm, lw, st, ma, mark_limit,
                                       counts.ctypes.data + U64(24 * row),
                                       failed.ctypes.data + U64(8 * row * limit), row * row_steps * per, limit)
        _store_vector(out_address, t * k, x0, x1, x2, k)
    return marked


@njit(cache=True)
def decode_linear_2x1(in8, length, octets, row_steps, row_stride, k, n, code_k, r, table, syndrome_mask,
                      leader_message, leader_weight, status, marks, counts, failed, out8):
    """decode_linear for steps of two quads of lookups into one word (hamming-7-4, secded-8-4)."""
    per = 8 * k // code_k
    m0 = syndrome_mask[0]
    ia, ta, out_address = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see load_be64
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    ma, mark_limit = marks.ctypes.data, marks.shape[0] - 1
    fast = _whole_row_steps(length, octets, n, 2, row_steps, row_stride)
    zero = U64(0)
    marked = 0
    first = 0
    row_start = 0
    limit = failed.shape[1]
    by_r = reciprocal(r)
    counts_row, failed_row = counts.ctypes.data, failed.ctypes.data
    while first < fast:  # row by row: the input offset moves on by n, and by row_stride at a row's start
        at = row_start
        for t in range(first, min(fast, first + row_steps)):
            x0 = _quads(ta, ia, at, 2, 1, 0)
            if x0 & m0:
                marked += 1
                x0, _, _ = _correct_step(x0, zero, zero, t, per, k, code_k, r, by_r, lm, lw, st, ma, mark_limit,
                                         counts_row, failed_row, first * per, limit)
            store_be64(out_address, t * k, x0)
            at += n
        first += row_steps
        row_start += row_stride
        counts_row += U64(24)  # unsigned, as the addresses (a signed step would make them floats)
        failed_row += U64(8 * limit)
    return marked + _decode_linear_steps(in8, length, fast, octets, row_steps, row_stride, k, n, code_k, r, table,
                                         syndrome_mask, leader_message, leader_weight, status, marks, counts, failed,
                                         out_address)


@njit(cache=True)
def decode_linear_4x2(in8, length, octets, row_steps, row_stride, k, n, code_k, r, table, syndrome_mask,
                      leader_message, leader_weight, status, marks, counts, failed, out8):
    """decode_linear for steps of four quads into two words (hamming-15-11, secded-16-11)."""
    per = 8 * k // code_k
    m0, m1 = syndrome_mask[0], syndrome_mask[1]
    ia, ta, out_address = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see load_be64
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    ma, mark_limit = marks.ctypes.data, marks.shape[0] - 1
    fast = _whole_row_steps(length, octets, n, 4, row_steps, row_stride)
    marked = 0
    first = 0
    row_start = 0
    limit = failed.shape[1]
    by_r = reciprocal(r)
    counts_row, failed_row = counts.ctypes.data, failed.ctypes.data
    while first < fast:  # row by row: the input offset moves on by n, and by row_stride at a row's start
        at = row_start
        for t in range(first, min(fast, first + row_steps)):
            x0, x1, x2 = _unrolled_step(ta, ia, at, 4, 2)
            if (x0 & m0) | (x1 & m1):
                marked += 1
                x0, x1, x2 = _correct_step(x0, x1, x2, t, per, k, code_k, r, by_r, lm, lw, st, ma, mark_limit,
                                           counts_row, failed_row, first * per, limit)
            _store_vector(out_address, t * k, x0, x1, x2, k)
            at += n
        first += row_steps
        row_start += row_stride
        counts_row += U64(24)  # unsigned, as the addresses (a signed step would make them floats)
        failed_row += U64(8 * limit)
    return marked + _decode_linear_steps(in8, length, fast, octets, row_steps, row_stride, k, n, code_k, r, table,
                                         syndrome_mask, leader_message, leader_weight, status, marks, counts, failed,
                                         out_address)


@njit(cache=True)
def decode_linear_6x3(in8, length, octets, row_steps, row_stride, k, n, code_k, r, table, syndrome_mask,
                      leader_message, leader_weight, status, marks, counts, failed, out8):
    """decode_linear for steps of six quads into three words (rep-3, golay codes at depth 8)."""
    per = 8 * k // code_k
    m0, m1, m2 = syndrome_mask[0], syndrome_mask[1], syndrome_mask[2]
    ia, ta, out_address = in8.ctypes.data, table.ctypes.data, out8.ctypes.data  # once: see load_be64
    lm, lw, st = leader_message.ctypes.data, leader_weight.ctypes.data, status.ctypes.data
    ma, mark_limit = marks.ctypes.data, marks.shape[0] - 1
    fast = _whole_row_steps(length, octets, n, 6, row_steps, row_stride)
    marked = 0
    first = 0
    row_start = 0
    limit = failed.shape[1]
    by_r = reciprocal(r)
    counts_row, failed_row = counts.ctypes.data, failed.ctypes.data
    while first < fast:  # row by row: the input offset moves on by n, and by row_stride at a row's start
        at = row_start
        for t in range(first, min(fast, first + row_steps)):
            x0, x1, x2 = _unrolled_step(ta, ia, at, 6, 3)
            if (x0 & m0) | (x1 & m1) | (x2 & m2):
                marked += 1
                x0, x1, x2 = _correct_step(x0, x1, x2, t, per, k, code_k, r, by_r, lm, lw, st, ma, mark_limit,
                                           counts_row, failed_row, first * per, limit)
            _store_vector(out_address, t * k, x0, x1, x2, k)
            at += n
        first += row_steps
        row_start += row_stride
        counts_row += U64(24)  # unsigned, as the addresses (a signed step would make them floats)
        failed_row += U64(8 * limit)
    return marked + _decode_linear_steps(in8, length, fast, octets, row_steps, row_stride, k, n, code_k, r, table,
                                         syndrome_mask, leader_message, leader_weight, status, marks, counts, failed,
                                         out_address)


DECODE_SHAPES = {(2, 1): decode_linear_2x1, (4, 2): decode_linear_4x2, (6, 3): decode_linear_6x3}


def linear_decoder(n: int, nw: int):
    """The decode_linear loop for steps of n received bytes into nw words (see linear_encoder)."""
    return DECODE_SHAPES.get(((n + 3) // 4, nw), decode_linear)


# ---- depth 1, codeword by codeword through unaligned loads ---------------------------------------

@njit(cache=True, inline="always")
def read_wide(address, length, bit, width):
    """read_bits for fields of 1..64 bits (two loads past 57)."""
    if width <= 57:
        return read_bits(address, length, bit, width)
    return (read_bits(address, length, bit, width - 32) << U64(32)) | read_bits(address, length, bit + width - 32, 32)


@njit(cache=True, inline="always")
def emit_wide(address, at, acc, held, value, width):
    """emit for values of 1..64 bits (two stores past 56)."""
    if width <= 56:
        return emit(address, at, acc, held, value, width)
    at, acc, held = emit(address, at, acc, held, value >> U64(32), width - 32)
    return emit(address, at, acc, held, value & U64(0xFFFFFFFF), 32)


@njit(cache=True)
def encode_depth1(in8, length, blocks, k, r, ptab, chunk_bits, out8):
    """Depth 1: blocks codewords, each the k message bits read from in8 (`length`
    bytes, zeros past them) then p = m P, written back to back into out8 (8 spare bytes)."""
    n = k + r
    at, acc, held = 0, U64(0), 0
    in_address, out_address = in8.ctypes.data, out8.ctypes.data  # once: see load_be64
    for i in range(blocks):
        m = read_wide(in_address, length, i * k, k)
        p = U64(parity(m, ptab, chunk_bits))
        if n <= 56:
            at, acc, held = emit(out_address, at, acc, held, (m << U64(r)) | p, n)
        else:
            at, acc, held = emit_wide(out_address, at, acc, held, m, k)
            at, acc, held = emit_wide(out_address, at, acc, held, p, r)


@njit(cache=True)
def decode_depth1(in8, length, blocks, k, r, ptab, chunk_bits, leader_message, leader_weight, status, out8):
    """Depth 1 bounded-distance decoding codeword by codeword: s = p XOR m P; a syndrome
    with a leader of weight w <= t flips the leader's message bits (status w), one without
    is left as received (status FAILED). status must be zeroed; out8 needs 8 spare bytes."""
    n = k + r
    parity_mask = (U64(1) << U64(r)) - U64(1)
    at, acc, held = 0, U64(0), 0
    in_address, out_address = in8.ctypes.data, out8.ctypes.data  # once: see load_be64
    for i in range(blocks):
        if n <= 57:
            word = read_bits(in_address, length, i * n, n)
            m = word >> U64(r)
            p = word & parity_mask
        else:
            m = read_wide(in_address, length, i * n, k)
            p = read_wide(in_address, length, i * n + k, r)
        s = p ^ U64(parity(m, ptab, chunk_bits))
        if s != U64(0):
            w = leader_weight[s]
            if w != FAILED:
                m ^= leader_message[s]
            status[i] = w
        at, acc, held = emit_wide(out_address, at, acc, held, m, k)


# ---- depth 8 exactly, through unaligned loads and stores ---------------------------------------

@njit(cache=True, inline="always")
def _word_at(address, length, at):
    """The 8 bytes at address + at as a big-endian word, bytes past length as zero."""
    if at + 8 <= length:
        return load_be64(address, at)
    x = U64(0)
    for b in range(max(0, min(8, length - at))):
        x |= load_u8(address, at + b) << U64(56 - 8 * b)
    return x


@njit(cache=True, inline="always")
def _read_codeword(address, length, bit, k, r, ptab, chunk_bits):
    m = read_wide(address, length, bit, k)
    return codeword_words(m, U64(parity(m, ptab, chunk_bits)), k, r)


@njit(cache=True)
def encode_octet8(in8, length, octets, k, r, ptab, chunk_bits, out8):
    """encode_octets at depth 8 (one octet per group, its n bytes consecutive): the 8
    codewords left-aligned in words (two when n > 64), an 8x8 byte transpose, one 8x8 bit
    transpose per byte slice, each slice one whole-word store at byte 8c of the octet
    (bytes past n are zeros that the next octet rewrites; out8 needs 8 spare bytes)."""
    n = k + r
    slices = (n + 7) // 8
    ia, oa = in8.ctypes.data, out8.ctypes.data  # once: see load_be64
    c = np.empty(8, dtype=np.uint64)  # the octet's codewords, left-aligned (first 64 bits)
    d = np.empty(8, dtype=np.uint64)  # and their bits past 64
    for t in range(octets):
        bit = t * 8 * k
        for q in range(8):  # one call site: eight inlined copies took 3x the compile time
            c[q], d[q] = _read_codeword(ia, length, bit + q * k, k, r, ptab, chunk_bits)
        c0, c1, c2, c3, c4, c5, c6, c7 = c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]
        d0, d1, d2, d3, d4, d5, d6, d7 = d[0], d[1], d[2], d[3], d[4], d[5], d[6], d[7]
        b0, b1, b2, b3, b4, b5, b6, b7 = byte_transpose(c0, c1, c2, c3, c4, c5, c6, c7)
        base = t * n
        store_be64(oa, base, transpose8(b0))
        if slices > 1:
            store_be64(oa, base + 8, transpose8(b1))
        if slices > 2:
            store_be64(oa, base + 16, transpose8(b2))
        if slices > 3:
            store_be64(oa, base + 24, transpose8(b3))
        if slices > 4:
            store_be64(oa, base + 32, transpose8(b4))
        if slices > 5:
            store_be64(oa, base + 40, transpose8(b5))
        if slices > 6:
            store_be64(oa, base + 48, transpose8(b6))
        if slices > 7:
            store_be64(oa, base + 56, transpose8(b7))
        if slices > 8:
            e0, e1, e2, _, _, _, _, _ = byte_transpose(d0, d1, d2, d3, d4, d5, d6, d7)
            store_be64(oa, base + 64, transpose8(e0))
            if slices > 9:
                store_be64(oa, base + 72, transpose8(e1))
            if slices > 10:
                store_be64(oa, base + 80, transpose8(e2))


@njit(cache=True)
def decode_octet8(in8, length, octets, k, r, ptab, chunk_bits, leader_message, leader_weight, status, out8):
    """Depth 8, n <= 64: octet t is the n received bytes from byte t n; slice c (bytes
    8c .. 8c+7, bit j of the 8 codewords per byte) is one load and one 8x8 bit transpose
    (its byte q: codeword q's bits 8c .. 8c+7), and an 8x8 byte transpose of the slices
    gives each codeword left-aligned in a word (bits past n, from the next octet, are
    shifted out). Then bounded-distance decoding by syndrome, messages written in
    order. in8 holds `length` bytes (zeros past them); status must be zeroed; out8
    needs 8 spare bytes."""
    n = k + r
    slices = (n + 7) // 8
    parity_mask = (U64(1) << U64(r)) - U64(1)
    ia, oa = in8.ctypes.data, out8.ctypes.data  # once: see load_be64
    at, acc, held = 0, U64(0), 0
    zero = U64(0)
    for t in range(octets):
        base = t * n
        s0 = transpose8(_word_at(ia, length, base))
        s1 = transpose8(_word_at(ia, length, base + 8)) if slices > 1 else zero
        s2 = transpose8(_word_at(ia, length, base + 16)) if slices > 2 else zero
        s3 = transpose8(_word_at(ia, length, base + 24)) if slices > 3 else zero
        s4 = transpose8(_word_at(ia, length, base + 32)) if slices > 4 else zero
        s5 = transpose8(_word_at(ia, length, base + 40)) if slices > 5 else zero
        s6 = transpose8(_word_at(ia, length, base + 48)) if slices > 6 else zero
        s7 = transpose8(_word_at(ia, length, base + 56)) if slices > 7 else zero
        rows = byte_transpose(s0, s1, s2, s3, s4, s5, s6, s7)
        for q in range(8):  # written out here: a helper taking the leader arrays ran 4x slower
            word = rows[q] >> U64(64 - n)
            m = word >> U64(r)
            s = (word & parity_mask) ^ U64(parity(m, ptab, chunk_bits))
            if s != U64(0):
                w = leader_weight[s]
                if w != FAILED:
                    m ^= leader_message[s]
                status[8 * t + q] = w
            at, acc, held = emit_wide(oa, at, acc, held, m, k)
