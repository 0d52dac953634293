"""Plain-numpy twins of the compiled segment kernels, for small inputs.

Loading numba and its cached kernels costs about a quarter of a second per process, more
than a 200-byte packet is worth. Until a large segment has paid that cost, small segments
take these array-at-once forms instead. They produce bit-identical results to the compiled
kernels (tested), using the same bit order and layout:

    codeword bits C = [M | M P mod 2]   (blocks x n, message bits first)
    interleaved group g: bit j*D + i = C[g*D + i, j]
"""

from __future__ import annotations

import numpy as np

from bitmend.kernels.status import FAILED


def _bits(data: bytes | np.ndarray, nbits: int) -> np.ndarray:
    """The first nbits stream bits of data (zero-padded), as a 0/1 uint8 vector."""
    raw = np.frombuffer(data, dtype=np.uint8) if not isinstance(data, np.ndarray) else data
    bits = np.unpackbits(raw)[:nbits]
    if bits.size < nbits:
        bits = np.concatenate([bits, np.zeros(nbits - bits.size, dtype=np.uint8)])
    return bits


def _mod2_product(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return ((a.astype(np.int32) @ b.astype(np.int32)) & 1).astype(np.uint8)


def encode(message: bytes, parity_part: np.ndarray, depth: int, groups: int) -> bytes:
    """Encode and interleave groups*depth codewords of the systematic code [I | P]."""
    k, r = parity_part.shape
    n = k + r
    blocks = groups * depth
    M = _bits(message, blocks * k).reshape(blocks, k)
    C = np.hstack([M, _mod2_product(M, parity_part)])
    if depth > 1:
        C = C.reshape(groups, depth, n).transpose(0, 2, 1)
    return np.packbits(C.reshape(-1)).tobytes()


def decode(coded: bytes | np.ndarray, parity_part: np.ndarray, depth: int, groups: int,
           leader_message: np.ndarray, leader_weight: np.ndarray, message_bytes: int) -> tuple[bytes, np.ndarray]:
    """De-interleave and bounded-distance decode; (message bytes, per-block status)."""
    k, r = parity_part.shape
    n = k + r
    blocks = groups * depth
    bits = _bits(coded, blocks * n)
    C = bits.reshape(groups, n, depth).transpose(0, 2, 1).reshape(blocks, n) if depth > 1 else bits.reshape(blocks, n)
    M = C[:, :k].copy()
    syndrome_bits = _mod2_product(M, parity_part) ^ C[:, k:]
    powers = np.uint64(1) << np.arange(r - 1, -1, -1, dtype=np.uint64)
    syndromes = (syndrome_bits.astype(np.uint64) * powers).sum(axis=1).astype(np.int64)
    status = leader_weight[syndromes].astype(np.uint8)
    fix = (status > 0) & (status != FAILED)
    if fix.any():
        masks = leader_message[syndromes[fix]]
        shifts = np.arange(k - 1, -1, -1, dtype=np.uint64)
        M[fix] ^= ((masks[:, None] >> shifts) & np.uint64(1)).astype(np.uint8)
    return np.packbits(M.reshape(-1)).tobytes()[:message_bytes], status


def find_pattern(data: bytes, start_bit: int, stop_bit: int, pattern: int, max_distance: int) -> int:
    """First p in [start_bit, stop_bit) where the 64 bits at p are within max_distance of
    pattern; -1 if none. data must hold stop_bit + 63 bits."""
    if stop_bit <= start_bit:
        return -1
    bits = np.unpackbits(np.frombuffer(data, dtype=np.uint8))[start_bit: stop_bit + 63]
    target = np.unpackbits(np.frombuffer(pattern.to_bytes(8, "big"), dtype=np.uint8))
    windows = np.lib.stride_tricks.sliding_window_view(bits, 64)
    hits = np.nonzero((windows != target).sum(axis=1) <= max_distance)[0]
    return start_bit + int(hits[0]) if hits.size else -1
