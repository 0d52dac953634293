"""Repair frames across frames: the group bookkeeping of the writer and the reader.

A stream encoded with `--repair R/K` follows each group of K data frames (fewer for a group
that a deadline or the end of the stream closes) with R repair frames. Across the group's
data frames, byte b of repair symbol i is sum_j C[i, j] * s_j[b] over GF(2^8) (the MDS
erasure code of codes/erasure.py), where the source symbol of data frame j is

    s_j = flags (1) | position (6) | length (4) | payload | CRC-32C(payload) (4)

zero-padded to S, the longest source symbol of the group; a repair frame's payload is its
repair symbol (length S). Any R of the group's K + R frames that are lost, damaged or
foreign can be rebuilt from the others, whole with their place in the stream, and are
verified by their own CRC-32C. The header fields are in docs/FORMAT.md ("Repair frames").
"""

from __future__ import annotations

import struct
from dataclasses import dataclass, field

import numpy as np

from bitmend.container import format as fmt
from bitmend.errors import SettingError

SYMBOL_HEAD = 11  # flags, position, length
SYMBOL_OVERHEAD = SYMBOL_HEAD + fmt.CRC_BYTES
MAX_GROUP = 32  # data frames per group: a group fits the reader's reorder window
MAX_REPAIR = 32


class RepairSpecError(SettingError):
    """A --repair R/K that cannot be used."""


def parse_repair(spec: str | tuple[int, int] | None) -> tuple[int, int] | None:
    """(R, K) from 'R/K' (e.g. '4/32'), or None."""
    if spec is None:
        return None
    if isinstance(spec, tuple):
        r, k = spec
    else:
        text = spec.strip()
        left, sep, right = text.partition("/")
        if not sep or not left.strip().isdigit() or not right.strip().isdigit():
            raise RepairSpecError(f"--repair takes R/K, e.g. 4/32 (R repair frames after every K data frames), "
                                  f"got {spec!r}")
        r, k = int(left), int(right)
    if not 1 <= k <= MAX_GROUP or not 1 <= r <= MAX_REPAIR:
        raise RepairSpecError(f"--repair R/K needs 1 <= K <= {MAX_GROUP} and 1 <= R <= {MAX_REPAIR}, got {r}/{k}")
    return r, k


def source_symbol(header: fmt.FrameHeader, payload: bytes) -> bytes:
    """The source symbol of a data frame (unpadded)."""
    flags = fmt.FLAG_LAST if header.last else 0
    return (bytes([flags]) + (header.position % (1 << fmt.POSITION_BITS)).to_bytes(6, "big")
            + struct.pack(">I", len(payload)) + payload + struct.pack(">I", fmt.crc32c(payload)))


@dataclass(frozen=True)
class RebuiltData:
    last: bool
    position: int
    payload: bytes


def parse_symbol(symbol: bytes) -> RebuiltData | None:
    """A rebuilt source symbol's data frame, or None if its length or CRC-32C does not check
    (the group's symbols were not what the repair frames were made from)."""
    if len(symbol) < SYMBOL_OVERHEAD:
        return None
    flags = symbol[0]
    position = int.from_bytes(symbol[1:7], "big")
    (length,) = struct.unpack(">I", symbol[7:11])
    end = SYMBOL_HEAD + length
    if flags & ~fmt.FLAG_LAST or end + fmt.CRC_BYTES > len(symbol):
        return None
    payload = bytes(symbol[SYMBOL_HEAD:end])
    (check,) = struct.unpack(">I", symbol[end:end + fmt.CRC_BYTES])
    if fmt.crc32c(payload) != check or any(symbol[end + fmt.CRC_BYTES:]):
        return None
    return RebuiltData(bool(flags & fmt.FLAG_LAST), position, payload)


def pack_group_fields(count: int, repairs: int, index: int, group: int) -> int:
    """A repair frame's position field: K', R, its index, K, then two zero bytes."""
    return int.from_bytes(bytes([count, repairs, index, group, 0, 0]), "big")


@dataclass(frozen=True)
class GroupFields:
    count: int  # K': data frames in this group
    repairs: int  # R
    index: int  # this repair frame's index
    group: int  # K: data frames in a full group

    @classmethod
    def of(cls, header: fmt.FrameHeader) -> "GroupFields | None":
        raw = header.position.to_bytes(6, "big")
        fields = cls(raw[0], raw[1], raw[2], raw[3])
        if raw[4:] != b"\0\0" or not (1 <= fields.count <= 255 and 1 <= fields.repairs
                                      and fields.count + fields.repairs <= 255 and fields.index < fields.repairs):
            return None
        return fields


@dataclass
class GroupBuilder:
    """The writer's side: source symbols of the open group, and the repair frames they make."""

    repairs: int
    group: int
    first_seq: int | None = None
    symbols: list[bytes] = field(default_factory=list)

    def add(self, header: fmt.FrameHeader, payload: bytes) -> bool:
        """Record a data frame; True when the group is full."""
        if self.first_seq is None:
            self.first_seq = header.seq
        self.symbols.append(source_symbol(header, payload))
        return len(self.symbols) >= self.group

    def repair_frames(self, template: fmt.FrameHeader) -> list[tuple[fmt.FrameHeader, bytes]]:
        """(header, payload) of the R repair frames of the open group; the group is closed."""
        from bitmend.codes.erasure import erasure_code

        if not self.symbols:
            return []
        count, size = len(self.symbols), max(len(s) for s in self.symbols)
        code = erasure_code(count, self.repairs)
        repair = code.repair_symbols([np.frombuffer(s, np.uint8) for s in self.symbols], size)
        frames = []
        for i in range(self.repairs):
            header = fmt.FrameHeader(template.code_id, template.depth, self.first_seq, size, False,
                                     shape=template.shape, defined_code=template.defined_code,
                                     stream_id=template.stream_id,
                                     position=pack_group_fields(count, self.repairs, i, self.group),
                                     repair=True, keyed=template.keyed)
            frames.append((header, repair[i].tobytes()))
        self.first_seq, self.symbols = None, []
        return frames
