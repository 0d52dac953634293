"""Compiled bit-field kernels: read and write fields of up to 64 bits at any bit offset.

Bit order everywhere in bitmend is the transmission order: within a byte the most
significant bit goes first, and a w-bit field read from stream bits b_0 .. b_{w-1} is the
integer  sum_j b_j * 2^(w-1-j)  (first bit is the most significant).

Every buffer handed to these kernels must carry at least 8 spare zero bytes after the last
byte in use, because fields are loaded and stored as whole big-endian 64-bit words.
numba compiles these loops; nothing above the kernels layer imports numba.
"""

from __future__ import annotations

import numpy as np
from numba import njit

U64 = np.uint64
SPARE_BYTES = 8  # slack after the data so a 64-bit load or store never runs off the end


@njit(cache=True, inline="always")
def load_word(buf, byte_index):
    """The 8 bytes from byte_index as one big-endian uint64."""
    v = U64(0)
    for b in range(8):
        v = (v << U64(8)) | U64(buf[byte_index + b])
    return v


@njit(cache=True, inline="always")
def get_short(buf, bit_pos, width):
    """Field of 1..56 bits starting at bit_pos (first bit most significant)."""
    word = load_word(buf, bit_pos >> 3)
    return (word << U64(bit_pos & 7)) >> U64(64 - width)


@njit(cache=True, inline="always")
def get_field(buf, bit_pos, width):
    """Field of 1..64 bits starting at bit_pos."""
    if width <= 56:
        return get_short(buf, bit_pos, width)
    high = get_short(buf, bit_pos, width - 32)
    low = get_short(buf, bit_pos + width - 32, 32)
    return (high << U64(32)) | low


@njit(cache=True, inline="always")
def take_bits(buf, pos, acc, avail, width):
    """Sequential reader step: the next width (<= 56) bits of the stream.

    State is (pos: next byte to load, acc: accumulator, avail: unread bits in acc).
    Returns (value, pos, acc, avail)."""
    while avail < width:
        acc = (acc << U64(8)) | U64(buf[pos])
        pos += 1
        avail += 8
    avail -= width
    value = (acc >> U64(avail)) & ((U64(1) << U64(width)) - U64(1))
    return value, pos, acc, avail


@njit(cache=True, inline="always")
def take_field(buf, pos, acc, avail, width):
    """Sequential reader step for a field of up to 64 bits (two steps above 56)."""
    if width <= 56:
        return take_bits(buf, pos, acc, avail, width)
    high, pos, acc, avail = take_bits(buf, pos, acc, avail, width - 32)
    low, pos, acc, avail = take_bits(buf, pos, acc, avail, 32)
    return (high << U64(32)) | low, pos, acc, avail


@njit(cache=True, inline="always")
def reader_at(buf, start_bit):
    """Reader state (pos, acc, avail) positioned at any bit."""
    pos = start_bit >> 3
    skip = start_bit & 7
    if skip == 0:
        return pos, U64(0), 0
    return pos + 1, U64(buf[pos]) & ((U64(1) << U64(8 - skip)) - U64(1)), 8 - skip


@njit(cache=True, inline="always")
def put_bits(out, pos, acc, held, value, width):
    """Sequential writer step: append width (<= 56) bits; whole bytes go to out[pos..].

    State is (pos: next byte to store, acc: accumulator, held: bits pending in acc)."""
    acc = (acc << U64(width)) | value
    held += width
    while held >= 8:
        held -= 8
        out[pos] = np.uint8((acc >> U64(held)) & U64(0xFF))
        pos += 1
    return pos, acc, held


@njit(cache=True, inline="always")
def put_field(out, pos, acc, held, value, width):
    """Sequential writer step for a field of up to 64 bits."""
    if width <= 56:
        return put_bits(out, pos, acc, held, value, width)
    pos, acc, held = put_bits(out, pos, acc, held, value >> U64(32), width - 32)
    return put_bits(out, pos, acc, held, value & U64(0xFFFFFFFF), 32)


@njit(cache=True, inline="always")
def finish_writer(out, pos, acc, held):
    """Store the last partial byte, zero-padded on the right."""
    if held:
        out[pos] = np.uint8((acc << U64(8 - held)) & U64(0xFF))


@njit(cache=True)
def read_fields(buf, start_bit, count, width):
    """count consecutive width-bit fields (width <= 64) from start_bit, as uint64."""
    out = np.empty(count, dtype=np.uint64)
    pos, acc, avail = reader_at(buf, start_bit)
    for i in range(count):
        out[i], pos, acc, avail = take_field(buf, pos, acc, avail, width)
    return out


@njit(cache=True)
def write_fields(values, width, out, start_byte):
    """Write values as consecutive width-bit fields (width <= 64) into out from start_byte."""
    pos, acc, held = start_byte, U64(0), 0
    for i in range(values.shape[0]):
        pos, acc, held = put_field(out, pos, acc, held, values[i], width)
    finish_writer(out, pos, acc, held)


@njit(cache=True)
def popcount64(x):
    """Number of set bits of a uint64 (SWAR, Hacker's Delight 5-2)."""
    x = x - ((x >> U64(1)) & U64(0x5555555555555555))
    x = (x & U64(0x3333333333333333)) + ((x >> U64(2)) & U64(0x3333333333333333))
    x = (x + (x >> U64(4))) & U64(0x0F0F0F0F0F0F0F0F)
    return (x * U64(0x0101010101010101)) >> U64(56)


@njit(cache=True)
def find_pattern(buf, start_bit, stop_bit, pattern, max_distance):
    """First bit position p in [start_bit, stop_bit) where the 64 bits at p differ from
    pattern in at most max_distance places; -1 if none. The window slides one bit at a
    time as a shift register, so each position costs a shift, an XOR and a popcount.
    buf must hold stop_bit + 64 bits."""
    if stop_bit <= start_bit:
        return -1
    window = get_field(buf, start_bit, 64)
    p = start_bit
    while True:
        if popcount64(window ^ pattern) <= max_distance:
            return p
        p += 1
        if p >= stop_bit:
            return -1
        nxt = p + 63  # the bit that enters the window
        bit = (U64(buf[nxt >> 3]) >> U64(7 - (nxt & 7))) & U64(1)
        window = (window << U64(1)) | bit
