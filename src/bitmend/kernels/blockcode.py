"""Compiled kernels for systematic binary linear block codes with k <= 64 and n - k <= 64.

A codeword of an (n, k) systematic code is held as two integers: the message m (k bits)
and the parity p = m P (r = n - k bits), with P the k x r parity part of G = [I_k | P].
Transmission order is the k message bits, then the r parity bits, each most significant
bit first, so codeword bit j is  m >> (k-1-j)  for j < k  and  p >> (n-1-j)  for j >= k.

Parity is table driven: the message is cut into 8-bit chunks (chunk c holds integer bits
8c .. 8c+7) and  p = XOR_c table[c, chunk_c],  one lookup per chunk instead of k row XORs.

Interleaving at depth D works on groups of D codewords: codeword i of a group puts its
bit j at group bit  j*D + i,  so a burst of b consecutive channel bits touches each
codeword of the group at most ceil(b / D) times.

All buffers are word buffers (see bitfields): streams packed big-endian into uint64.
"""

from __future__ import annotations

import numpy as np
from bitmend.kernels.jit import njit

from bitmend.kernels.bitfields import finish_writer, get_byte, get_field, or_byte, put_field
from bitmend.kernels.status import FAILED

U64 = np.uint64


@njit(cache=True, inline="always")
def parity_of(message, table):
    """p = m P by table lookup, one 8-bit chunk of m at a time."""
    p = U64(0)
    for c in range(table.shape[0]):
        p ^= table[c, (message >> U64(8 * c)) & U64(0xFF)]
    return p


@njit(cache=True)
def parities(messages, table):
    """Parity integers for a uint64 array of messages."""
    out = np.empty(messages.shape[0], dtype=np.uint64)
    for i in range(messages.shape[0]):
        out[i] = parity_of(messages[i], table)
    return out


@njit(cache=True, inline="always")
def transpose8(x):
    """Transpose the 8x8 bit matrix held in x (byte 0 = most significant = row 0, bit 7 of
    each byte = column 0), by three rounds of masked swaps (Hacker's Delight, 7-3)."""
    t = (x ^ (x >> U64(7))) & U64(0x00AA00AA00AA00AA)
    x = x ^ t ^ (t << U64(7))
    t = (x ^ (x >> U64(14))) & U64(0x0000CCCC0000CCCC)
    x = x ^ t ^ (t << U64(14))
    t = (x ^ (x >> U64(28))) & U64(0x00000000F0F0F0F0)
    return x ^ t ^ (t << U64(28))


@njit(cache=True, inline="always")
def codeword_words(message, parity, k, r):
    """The n <= 128 codeword bits, left-aligned in two words (w0 holds bits 0..63)."""
    room = 64 - k  # bits left in w0 after the message
    if r <= room:
        w0 = (message << U64(room)) | (parity << U64(room - r)) if room > 0 else message
        return w0, U64(0)
    spill = r - room  # parity bits that go to w1
    w0 = ((message << U64(room)) | (parity >> U64(spill))) if room > 0 else message
    return w0, parity << U64(64 - spill)


@njit(cache=True, inline="always")
def split_codeword(w0, w1, k, r):
    """Inverse of codeword_words: (message, parity)."""
    n = k + r
    if n <= 64:
        bits = w0 >> U64(64 - n)
        return bits >> U64(r), bits & ((U64(1) << U64(r)) - U64(1))
    room = 64 - k
    message = w0 >> U64(room) if room > 0 else w0
    spill = r - room
    high = (w0 & ((U64(1) << U64(room)) - U64(1))) if room > 0 else U64(0)
    parity = (high << U64(spill)) | (w1 >> U64(64 - spill))
    return message, parity


@njit(cache=True)
def interleave_bytewise(messages, parity, k, r, depth, out):
    """Interleave for depth a multiple of 8: eight codewords at a time, each 8-bit slice
    of their bits transposed as one 8x8 bit matrix, so bits move 64 at a time."""
    n = k + r
    slices = (n + 7) // 8
    lanes = depth // 8  # output bytes per column of a group
    count = messages.shape[0]
    words = np.empty((8, 2), dtype=np.uint64)
    group_bytes = depth * n // 8
    for first in range(0, count, depth):
        base = (first // depth) * group_bytes
        for lane in range(lanes):
            row0 = first + 8 * lane
            for q in range(8):
                w0, w1 = codeword_words(messages[row0 + q], parity[row0 + q], k, r)
                words[q, 0] = w0
                words[q, 1] = w1
            for c in range(slices):
                word = c >> 3
                shift = U64(56 - 8 * (c & 7))
                x = U64(0)
                for q in range(8):
                    x = (x << U64(8)) | ((words[q, word] >> shift) & U64(0xFF))
                x = transpose8(x)
                for i in range(8):
                    j = 8 * c + i
                    if j < n:
                        or_byte(out, base + j * lanes + lane, (x >> U64(56 - 8 * i)) & U64(0xFF))


@njit(cache=True)
def deinterleave_bytewise(buf, k, r, depth, groups):
    """Inverse of interleave_bytewise."""
    n = k + r
    slices = (n + 7) // 8
    lanes = depth // 8
    count = groups * depth
    messages = np.empty(count, dtype=np.uint64)
    parity = np.empty(count, dtype=np.uint64)
    words = np.empty((8, 2), dtype=np.uint64)
    group_bytes = depth * n // 8
    for g in range(groups):
        base = g * group_bytes
        for lane in range(lanes):
            words[:, :] = 0
            for c in range(slices):
                x = U64(0)
                for i in range(8):
                    j = 8 * c + i
                    byte = get_byte(buf, base + j * lanes + lane) if j < n else U64(0)
                    x = (x << U64(8)) | byte
                x = transpose8(x)
                word = c >> 3
                shift = U64(56 - 8 * (c & 7))
                for q in range(8):
                    words[q, word] |= ((x >> U64(56 - 8 * q)) & U64(0xFF)) << shift
            row0 = g * depth + 8 * lane
            for q in range(8):
                m, p = split_codeword(words[q, 0], words[q, 1], k, r)
                messages[row0 + q] = m
                parity[row0 + q] = p
    return messages, parity


@njit(cache=True)
def interleave_into(messages, parity, k, r, depth, out):
    """Write codewords (messages[i], parity[i]) into the zeroed word buffer out, depth
    codewords to an interleaved group. len(messages) must be a multiple of depth."""
    if depth % 8 == 0 and k + r <= 128:
        interleave_bytewise(messages, parity, k, r, depth, out)
        return
    n = k + r
    count = messages.shape[0]
    index, acc, held = 0, U64(0), 0
    if depth == 1:
        for i in range(count):
            index, acc, held = put_field(out, index, acc, held, messages[i], k)
            index, acc, held = put_field(out, index, acc, held, parity[i], r)
        finish_writer(out, index, acc, held)
        return
    for first in range(0, count, depth):
        for j in range(n):
            if j < k:
                shift = U64(k - 1 - j)
                src = messages
            else:
                shift = U64(n - 1 - j)
                src = parity
            # column j of the group: bit j of each codeword, at most 64 bits per step
            for i in range(0, depth, 64):
                take = min(64, depth - i)
                col = U64(0)
                for q in range(take):  # independent terms: the compiler can vectorize
                    col |= ((src[first + i + q] >> shift) & U64(1)) << U64(take - 1 - q)
                index, acc, held = put_field(out, index, acc, held, col, take)
    finish_writer(out, index, acc, held)


@njit(cache=True)
def deinterleave_from(buf, k, r, depth, groups):
    """Inverse of interleave_into: read groups*depth codewords, return (messages, parity)."""
    if depth % 8 == 0 and k + r <= 128:
        return deinterleave_bytewise(buf, k, r, depth, groups)
    n = k + r
    count = groups * depth
    messages = np.zeros(count, dtype=np.uint64)
    parity = np.zeros(count, dtype=np.uint64)
    if depth == 1:
        for i in range(count):
            messages[i] = get_field(buf, i * n, k)
            parity[i] = get_field(buf, i * n + k, r)
        return messages, parity
    for first in range(0, count, depth):
        base = first * n
        for j in range(n):
            if j < k:
                shift = U64(k - 1 - j)
                dst = messages
            else:
                shift = U64(n - 1 - j)
                dst = parity
            for i in range(0, depth, 64):
                take = min(64, depth - i)
                col = get_field(buf, base + j * depth + i, take)
                for q in range(take):
                    dst[first + i + q] |= ((col >> U64(take - 1 - q)) & U64(1)) << shift
    return messages, parity


@njit(cache=True)
def syndrome_correct(messages, parity, table, leader_message, leader_parity, leader_weight):
    """Bounded-distance syndrome decoding in place.

    s = p_received XOR (m_received P)  equals  e_m P XOR e_p  for error e = (e_m, e_p).
    A syndrome with a coset leader of weight w <= t is corrected by XOR with the leader;
    one without (leader_weight == FAILED) is left as received and flagged.
    Returns per-block status: 0 clean, w corrected bits, FAILED uncorrectable.
    """
    count = messages.shape[0]
    status = np.zeros(count, dtype=np.uint8)
    for i in range(count):
        s = parity[i] ^ parity_of(messages[i], table)
        if s == U64(0):
            continue
        w = leader_weight[s]
        if w == FAILED:
            status[i] = FAILED
        else:
            messages[i] ^= leader_message[s]
            parity[i] ^= leader_parity[s]
            status[i] = w
    return status


@njit(cache=True)
def encode_short_bytewise(source, blocks, k, r, depth, table, out):
    """encode_run for n <= 16 at a depth that is a multiple of 8: each codeword fits in
    two bytes, so eight codewords are eight rows of an 8x8 bit matrix per byte slice and
    go out by two transposes without intermediate arrays."""
    n = k + r
    lanes = depth // 8
    group_bytes = depth * n // 8
    for first in range(0, blocks, depth):
        base = (first // depth) * group_bytes
        for lane in range(lanes):
            high = U64(0)  # codeword bits 0..7 of the eight rows, row 0 in the top byte
            low = U64(0)  # codeword bits 8..15
            for q in range(8):
                m = get_field(source, (first + 8 * lane + q) * k, k)
                word = ((m << U64(r)) | parity_of(m, table)) << U64(16 - n)  # left-aligned in 16 bits
                high = (high << U64(8)) | (word >> U64(8))
                low = (low << U64(8)) | (word & U64(0xFF))
            high = transpose8(high)
            for j in range(min(n, 8)):
                or_byte(out, base + j * lanes + lane, (high >> U64(56 - 8 * j)) & U64(0xFF))
            if n > 8:
                low = transpose8(low)
                for j in range(8, n):
                    or_byte(out, base + j * lanes + lane, (low >> U64(56 - 8 * (j - 8))) & U64(0xFF))


@njit(cache=True)
def decode_short_bytewise(coded, k, n, depth, blocks, word_table, out):
    """decode_run for n <= 16 at a depth that is a multiple of 8: transpose eight
    codewords back out of their byte columns and decode each by one word-table lookup."""
    lanes = depth // 8
    group_bytes = depth * n // 8
    status = np.empty(blocks, dtype=np.uint8)
    message_mask = (U64(1) << U64(k)) - U64(1)
    index, acc, held = 0, U64(0), 0
    for first in range(0, blocks, depth):
        base = (first // depth) * group_bytes
        for lane in range(lanes):
            high = U64(0)
            low = U64(0)
            for j in range(min(n, 8)):
                high = (high << U64(8)) | get_byte(coded, base + j * lanes + lane)
            high = transpose8(high << U64(8 * (8 - min(n, 8))))
            if n > 8:
                for j in range(8, n):
                    low = (low << U64(8)) | get_byte(coded, base + j * lanes + lane)
                low = transpose8(low << U64(8 * (16 - n)))
            for q in range(8):
                shift = U64(56 - 8 * q)
                word = ((((high >> shift) & U64(0xFF)) << U64(8)) | ((low >> shift) & U64(0xFF))) >> U64(16 - n)
                entry = word_table[word]
                status[first + 8 * lane + q] = np.uint8(entry >> U64(56))
                index, acc, held = put_field(out, index, acc, held, entry & message_mask, k)
    finish_writer(out, index, acc, held)
    return status


@njit(cache=True)
def encode_run(source, blocks, k, r, depth, table, out):
    """Whole encoder in one compiled call: blocks k-bit messages from the word buffer
    source, parity added, interleaved into the zeroed word buffer out."""
    n = k + r
    if depth == 1 and n <= 64:
        # short codewords without interleaving: one load and one store per codeword
        index, acc, held = 0, U64(0), 0
        for i in range(blocks):
            m = get_field(source, i * k, k)
            index, acc, held = put_field(out, index, acc, held, (m << U64(r)) | parity_of(m, table), n)
        finish_writer(out, index, acc, held)
        return
    if depth % 8 == 0 and n <= 16:
        encode_short_bytewise(source, blocks, k, r, depth, table, out)
        return
    messages = np.empty(blocks, dtype=np.uint64)
    for i in range(blocks):
        messages[i] = get_field(source, i * k, k)
    parity = parities(messages, table)
    interleave_into(messages, parity, k, r, depth, out)


@njit(cache=True)
def decode_run(coded, k, r, depth, blocks, table, leader_message, leader_parity, leader_weight,
               word_table, out):
    """Whole decoder in one compiled call: de-interleave, correct, write the messages to
    the zeroed word buffer out; returns the per-block status (see syndrome_correct).

    word_table, when it has 2^n entries (short codes), maps every received n-bit word to
    its decoded message (low bits) and status (top byte) in one lookup."""
    n = k + r
    if depth % 8 == 0 and n <= 16 and word_table.shape[0] == (1 << n):
        return decode_short_bytewise(coded, k, n, depth, blocks, word_table, out)
    if depth == 1 and n < 64 and word_table.shape[0] == (1 << n):  # (1 << 64 wraps to 1: a placeholder's size)
        status = np.empty(blocks, dtype=np.uint8)
        message_mask = (U64(1) << U64(k)) - U64(1)
        index, acc, held = 0, U64(0), 0
        for i in range(blocks):
            entry = word_table[get_field(coded, i * n, n)]
            status[i] = np.uint8(entry >> U64(56))
            index, acc, held = put_field(out, index, acc, held, entry & message_mask, k)
        finish_writer(out, index, acc, held)
        return status
    if depth == 1 and n <= 64:
        status = np.zeros(blocks, dtype=np.uint8)
        parity_mask = (U64(1) << U64(r)) - U64(1)
        index, acc, held = 0, U64(0), 0
        for i in range(blocks):
            word = get_field(coded, i * n, n)
            m = word >> U64(r)
            s = (word & parity_mask) ^ parity_of(m, table)
            if s != U64(0):
                w = leader_weight[s]
                if w == FAILED:
                    status[i] = FAILED
                else:
                    m ^= leader_message[s]
                    status[i] = w
            index, acc, held = put_field(out, index, acc, held, m, k)
        finish_writer(out, index, acc, held)
        return status
    messages, parity = deinterleave_from(coded, k, r, depth, blocks // depth)
    status = syndrome_correct(messages, parity, table, leader_message, leader_parity, leader_weight)
    index, acc, held = 0, U64(0), 0
    for i in range(messages.shape[0]):
        index, acc, held = put_field(out, index, acc, held, messages[i], k)
    finish_writer(out, index, acc, held)
    return status
