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


def encode_segment(code: BinaryLinearCode, depth: int, message: bytes) -> bytes:
    """Encode and interleave message; returns layout(...).coded_bytes bytes."""
    lay = layout(code, depth, len(message))
    kernels = compiled(lay.coded_bits)
    if kernels is None:
        return small.encode(message, code.P, depth, lay.groups)
    bitfields, blockcode = kernels
    source = bitfields.to_words(message, lay.blocks * code.k)
    out = bitfields.empty_words(lay.coded_bits)
    blockcode.encode_run(source, lay.blocks, code.k, code.r, depth, code.parity_table, out)
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
    status = blockcode.decode_run(source, code.k, code.r, depth, lay.blocks, code.parity_table,
                                  lead_m, lead_p, weight, code.word_table, out)
    return bitfields.to_bytes(out, message_bytes), status
