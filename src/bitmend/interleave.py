"""Coded segments: bytes -> k-bit messages -> codewords -> bit-interleaved groups, and back.

A segment holds G groups of D codewords. Message bits are taken from the input bytes in
order (k per codeword, zero-padded to G*D*k), and codeword i of a group places its bit j
at group bit j*D + i. Any run of D*t consecutive channel bits inside one group therefore
hits every codeword of that group at most t times, which the code corrects.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from bitmend.codes.linear import BinaryLinearCode
from bitmend.kernels import small
from bitmend.kernels.loader import compiled


@dataclass(frozen=True)
class SegmentLayout:
    """Sizes of the coded segment that carries message_bytes bytes."""

    groups: int
    depth: int
    n: int
    k: int

    @property
    def blocks(self) -> int:
        return self.groups * self.depth

    @property
    def coded_bits(self) -> int:
        return self.blocks * self.n

    @property
    def coded_bytes(self) -> int:
        return (self.coded_bits + 7) // 8


@lru_cache(maxsize=256)
def layout(code: BinaryLinearCode, depth: int, message_bytes: int) -> SegmentLayout:
    """G = ceil(8 * message_bytes / (D k)) groups; at least one, so every segment carries a check."""
    per_group = depth * code.k
    groups = max(1, -(-8 * message_bytes // per_group))
    return SegmentLayout(groups, depth, code.n, code.k)


CHUNK_BLOCKS = 1 << 16  # codewords per compiled call: bounds the temporary arrays to about 2 MiB


def _chunks(lay: SegmentLayout) -> list[tuple[int, int]]:
    """(first group, group count) pieces of a segment. Pieces start at multiples of 64
    groups, so every piece starts on a word boundary of both the message and the coded
    stream (64 * D * k and 64 * D * n bits)."""
    step = max(64, CHUNK_BLOCKS // lay.depth // 64 * 64)
    return [(first, min(step, lay.groups - first)) for first in range(0, lay.groups, step)]


def encode_segment(code: BinaryLinearCode, depth: int, message: bytes) -> bytes:
    """Encode and interleave message; returns layout(...).coded_bytes bytes."""
    lay = layout(code, depth, len(message))
    kernels = compiled(lay.coded_bits)
    if kernels is None:
        return small.encode(message, code.P, depth, lay.groups)
    bitfields, blockcode = kernels
    source = bitfields.to_words(message, lay.blocks * code.k)
    out = bitfields.empty_words(lay.coded_bits)
    for first, groups in _chunks(lay):
        blockcode.encode_run(source[first * depth * code.k // 64:], groups * depth, code.k, code.r, depth,
                             code.parity_table, out[first * depth * code.n // 64:])
    return bitfields.to_bytes(out, lay.coded_bytes)


def decode_segment(code: BinaryLinearCode, depth: int, coded: bytes | np.ndarray,
                   message_bytes: int) -> tuple[bytes, np.ndarray]:
    """De-interleave and correct a segment carrying message_bytes bytes.

    coded may be shorter than the layout (a truncated stream); missing bits read as zero.
    Returns (message bytes, per-block status: 0 clean, w corrected, 255 uncorrectable).
    """
    lay = layout(code, depth, message_bytes)
    raw = np.frombuffer(coded, dtype=np.uint8) if not isinstance(coded, np.ndarray) else coded
    lead_m, lead_p, weight = code.leader_tables
    kernels = compiled(lay.coded_bits)
    if kernels is None:
        return small.decode(raw[: lay.coded_bytes], code.P, depth, lay.groups, lead_m, weight, message_bytes)
    bitfields, blockcode = kernels
    source = bitfields.to_words(raw[: lay.coded_bytes], lay.coded_bits)
    out = bitfields.empty_words(lay.blocks * code.k)
    status = [blockcode.decode_run(source[first * depth * code.n // 64:], code.k, code.r, depth, groups * depth,
                                   code.parity_table, lead_m, lead_p, weight, code.word_table,
                                   out[first * depth * code.k // 64:])
              for first, groups in _chunks(lay)]
    return bitfields.to_bytes(out, message_bytes), status[0] if len(status) == 1 else np.concatenate(status)
