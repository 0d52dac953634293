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
"""

from __future__ import annotations

import numpy as np
from numba import njit

from bitmend.kernels.bitfields import finish_writer, put_bits, put_field, reader_at, take_bits, take_field

U64 = np.uint64
FAILED = 255  # block status: syndrome has no coset leader of weight <= t


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


@njit(cache=True)
def interleave_into(messages, parity, k, r, depth, out):
    """Write codewords (messages[i], parity[i]) into out from byte 0, depth codewords to
    an interleaved group. len(messages) must be a multiple of depth."""
    n = k + r
    count = messages.shape[0]
    pos, acc, held = 0, U64(0), 0
    if depth == 1:
        for i in range(count):
            pos, acc, held = put_field(out, pos, acc, held, messages[i], k)
            pos, acc, held = put_field(out, pos, acc, held, parity[i], r)
        finish_writer(out, pos, acc, held)
        return
    for first in range(0, count, depth):
        for j in range(n):
            if j < k:
                shift = U64(k - 1 - j)
                src = messages
            else:
                shift = U64(n - 1 - j)
                src = parity
            # column j of the group: bit j of each codeword, at most 56 bits per step
            for i in range(0, depth, 56):
                take = min(56, depth - i)
                col = U64(0)
                for q in range(take):  # independent terms: the compiler can vectorize
                    col |= ((src[first + i + q] >> shift) & U64(1)) << U64(take - 1 - q)
                pos, acc, held = put_bits(out, pos, acc, held, col, take)
    finish_writer(out, pos, acc, held)


@njit(cache=True)
def deinterleave_from(buf, start_bit, k, r, depth, groups):
    """Inverse of interleave_into: read groups*depth codewords, return (messages, parity)."""
    n = k + r
    count = groups * depth
    messages = np.zeros(count, dtype=np.uint64)
    parity = np.zeros(count, dtype=np.uint64)
    pos, acc, avail = reader_at(buf, start_bit)
    if depth == 1:
        for i in range(count):
            messages[i], pos, acc, avail = take_field(buf, pos, acc, avail, k)
            parity[i], pos, acc, avail = take_field(buf, pos, acc, avail, r)
        return messages, parity
    for first in range(0, count, depth):
        for j in range(n):
            if j < k:
                shift = U64(k - 1 - j)
                dst = messages
            else:
                shift = U64(n - 1 - j)
                dst = parity
            for i in range(0, depth, 56):
                take = min(56, depth - i)
                col, pos, acc, avail = take_bits(buf, pos, acc, avail, take)
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
