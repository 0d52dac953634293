"""Compiled bit-field kernels over word buffers: bit streams held in uint64 arrays.

Bit order everywhere in bitmend is the transmission order: within a byte the most
significant bit goes first, and a w-bit field read from stream bits b_0 .. b_{w-1} is the
integer  sum_j b_j * 2^(w-1-j)  (first bit is the most significant).

Kernels work on "word buffers": the stream packed big-endian into native uint64 words
(stream bit p is bit 63 - p % 64 of word p // 64), so a field at any bit offset costs two
aligned loads and a few shifts, and no per-bit or per-byte loop. to_words / to_bytes
convert with numpy in one pass. Every word buffer carries SPARE_WORDS zero words after
the data so a two-word load never runs off the end.
numba compiles these loops; nothing above the kernels layer imports numba.
"""

from __future__ import annotations

import numpy as np
from bitmend.kernels.jit import njit

U64 = np.uint64
SPARE_WORDS = 2


def to_words(data: bytes | bytearray | memoryview | np.ndarray, nbits: int | None = None) -> np.ndarray:
    """Word buffer holding data (zero-padded to nbits if given), plus spare words."""
    raw = data.tobytes() if isinstance(data, np.ndarray) else bytes(data)
    total_bits = max(8 * len(raw), nbits or 0)
    words = (total_bits + 63) // 64 + SPARE_WORDS
    # one byte string then one swapping copy: fewer numpy calls, which dominate small segments
    return np.frombuffer(raw + bytes(8 * words - len(raw)), dtype=">u8").astype(np.uint64)


def empty_words(nbits: int) -> np.ndarray:
    """Zeroed word buffer for nbits of output."""
    return np.zeros((nbits + 63) // 64 + SPARE_WORDS, dtype=np.uint64)


def to_bytes(words: np.ndarray, nbytes: int) -> bytes:
    """The first nbytes bytes of the stream held in a word buffer."""
    return words.astype(">u8").tobytes()[:nbytes]


@njit(cache=True, inline="always")
def get_field(words, bit_pos, width):
    """Field of 1..64 bits starting at stream bit bit_pos."""
    i = bit_pos >> 6
    offset = U64(bit_pos & 63)
    # (w >> 1) >> (63 - offset) is w >> (64 - offset) without a shift by 64 when offset is 0
    joined = (words[i] << offset) | ((words[i + 1] >> U64(1)) >> (U64(63) - offset))
    return joined >> U64(64 - width)


@njit(cache=True, inline="always")
def get_bit(words, bit_pos):
    return (words[bit_pos >> 6] >> U64(63 - (bit_pos & 63))) & U64(1)


@njit(cache=True, inline="always")
def put_field(words, index, acc, held, value, width):
    """Sequential writer step: append a width-bit value (1..64 bits, no stray high bits).

    State is (index: next word to store, acc: the word being filled from its top,
    held: bits already in acc). Returns the new state."""
    free = 64 - held
    if width < free:
        return index, acc | (value << U64(free - width)), held + width
    rest = width - free  # bits that spill into the next word
    words[index] = acc | (value >> U64(rest))
    if rest == 0:
        return index + 1, U64(0), 0
    return index + 1, value << U64(64 - rest), rest


@njit(cache=True, inline="always")
def finish_writer(words, index, acc, held):
    """Store the last partial word."""
    if held:
        words[index] = acc


@njit(cache=True, inline="always")
def or_byte(words, byte_index, value):
    """OR one byte into a zeroed word buffer at a byte position."""
    words[byte_index >> 3] |= value << U64(56 - 8 * (byte_index & 7))


@njit(cache=True, inline="always")
def get_byte(words, byte_index):
    return (words[byte_index >> 3] >> U64(56 - 8 * (byte_index & 7))) & U64(0xFF)


@njit(cache=True)
def read_fields(words, start_bit, count, width):
    """count consecutive width-bit fields (width <= 64) from start_bit, as uint64."""
    out = np.empty(count, dtype=np.uint64)
    for i in range(count):
        out[i] = get_field(words, start_bit + i * width, width)
    return out


@njit(cache=True)
def write_fields(values, width, words):
    """Write values as consecutive width-bit fields from bit 0 of the zeroed buffer."""
    index, acc, held = 0, U64(0), 0
    for i in range(values.shape[0]):
        index, acc, held = put_field(words, index, acc, held, values[i], width)
    finish_writer(words, index, acc, held)


@njit(cache=True)
def popcount64(x):
    """Number of set bits of a uint64 (SWAR, Hacker's Delight 5-2)."""
    x = x - ((x >> U64(1)) & U64(0x5555555555555555))
    x = (x & U64(0x3333333333333333)) + ((x >> U64(2)) & U64(0x3333333333333333))
    x = (x + (x >> U64(4))) & U64(0x0F0F0F0F0F0F0F0F)
    return (x * U64(0x0101010101010101)) >> U64(56)


@njit(cache=True)
def find_pattern(words, start_bit, stop_bit, pattern, max_distance):
    """First bit position p in [start_bit, stop_bit) where the 64 bits at p differ from
    pattern in at most max_distance places; -1 if none. The window slides one bit at a
    time as a shift register, so each position costs a shift, an XOR and a popcount.
    words must hold stop_bit + 63 bits."""
    if stop_bit <= start_bit:
        return -1
    window = get_field(words, start_bit, 64)
    p = start_bit
    while True:
        if popcount64(window ^ pattern) <= max_distance:
            return p
        p += 1
        if p >= stop_bit:
            return -1
        window = (window << U64(1)) | get_bit(words, p + 63)
