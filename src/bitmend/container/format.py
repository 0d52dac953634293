"""Frame layout, header record and checks of the bitmend container (docs/FORMAT.md).

    frame  = marker (8) | header (33) | coded payload (C) | header copy (33)
    header = golay-24-12 at depth 11 of the 16-byte record
    record = version, flags, code id, depth, sequence (u32), payload length (u32),
             CRC-32C of the first 12 bytes (u32), all big-endian

The coded payload is the payload followed by its CRC-32C, encoded with the frame's code
and interleaved at the frame's depth (bitmend.interleave).
"""

from __future__ import annotations

import struct
from dataclasses import dataclass
from functools import cached_property, lru_cache

import crcmod.predefined

from bitmend.codes.catalog import MAX_DEPTH, code_by_id, get_code
from bitmend.codes.linear import BinaryLinearCode
from bitmend.interleave import decode_segment, encode_segment, layout

FORMAT_VERSION = 1
# 64-bit sync marker: 32 ones, no run longer than 4, and for every shift s the marker
# differs from itself shifted by s in >= 28.5 places counting unknown bits as half
# (found by a seeded search; see docs/FORMAT.md).
MARKER = 0xA4C95BDD8544AE53
MARKER_BYTES = MARKER.to_bytes(8, "big")
MARKER_SEARCH_TOLERANCE = 12  # bits of 64 that may differ while searching for a frame
RECORD_BYTES = 16
HEADER_CODE = "golay-24-12"
HEADER_DEPTH = 11  # 11 codewords of 24 bits carry the 128-bit record (132 with padding)
HEADER_BYTES = 33
MAX_PAYLOAD_BYTES = 1 << 20  # frame payload limit: bounds every allocation a header drives
MAX_FRAME_WIRE_BYTES = 8 + 2 * 33 + 3 * (MAX_PAYLOAD_BYTES + 4 + 255 * 3)  # largest frame (rep-3 at depth 255)
DEFAULT_FRAME_BYTES = 16384
CRC_BYTES = 4
FLAG_LAST = 0x01  # the frame closes its stream

crc32c_reference = crcmod.predefined.mkCrcFun("crc-32c")


def _fastest_crc32c():
    """CRC-32C (Castagnoli, reflected, init and xorout 0xFFFFFFFF). crcmod defines it and
    is the reference; google-crc32c computes the same function with the processor's CRC
    instruction (about 50x faster here), used when its compiled form is present. The
    tests hold both to the catalogue check value and to each other."""
    try:
        import google_crc32c
    except ImportError:
        return crc32c_reference
    if getattr(google_crc32c, "implementation", "") != "c":
        return crc32c_reference
    return google_crc32c.value


crc32c = _fastest_crc32c()


class HeaderError(ValueError):
    """A header that decoded and checked but holds values this reader cannot use."""


class UnsupportedVersionError(HeaderError):
    pass


@dataclass(frozen=True)
class FrameHeader:  # noqa: PLW1641 (cached_property needs __dict__; frozen still blocks assignment)
    """The fields of one frame header."""

    code_id: int
    depth: int
    seq: int
    length: int  # payload bytes carried by the frame
    last: bool = False
    version: int = FORMAT_VERSION

    @property
    def code(self) -> BinaryLinearCode:
        return code_by_id(self.code_id)

    @cached_property
    def coded_bytes(self) -> int:
        return layout(self.code, self.depth, self.length + CRC_BYTES).coded_bytes

    @cached_property
    def frame_bytes(self) -> int:
        """Whole frame size on the wire."""
        return len(MARKER_BYTES) + 2 * HEADER_BYTES + self.coded_bytes

    def record(self) -> bytes:
        flags = FLAG_LAST if self.last else 0
        body = struct.pack(">BBBBII", self.version, flags, self.code_id, self.depth, self.seq, self.length)
        return body + struct.pack(">I", crc32c(body))

    def next(self) -> "FrameHeader":
        """The header a full frame after this one would carry (used to predict a lost header)."""
        return FrameHeader(self.code_id, self.depth, (self.seq + 1) & 0xFFFFFFFF, self.length, False, self.version)


@lru_cache(maxsize=1)
def header_code() -> BinaryLinearCode:
    return get_code(HEADER_CODE)


def encode_header(header: FrameHeader) -> bytes:
    coded = encode_segment(header_code(), HEADER_DEPTH, header.record())
    assert len(coded) == HEADER_BYTES
    return coded


def decode_header(coded: bytes) -> FrameHeader | None:
    """The header in 33 coded bytes, or None when it cannot be corrected or fails its
    CRC. Raises HeaderError for a checked header with values out of range."""
    record, status = decode_segment(header_code(), HEADER_DEPTH, coded, RECORD_BYTES)
    if (status == 255).any():
        return None
    body, check = record[:12], struct.unpack(">I", record[12:])[0]
    if crc32c(body) != check:
        return None
    version, flags, code_id, depth, seq, length = struct.unpack(">BBBBII", body)
    if version != FORMAT_VERSION:
        # a newer writer: say so rather than treating the stream as noise
        raise UnsupportedVersionError(f"frame format version {version}; this bitmend reads version {FORMAT_VERSION}")
    if flags & ~FLAG_LAST:
        raise HeaderError(f"frame header has unknown flags 0x{flags:02x}")
    if not 1 <= depth <= MAX_DEPTH:
        raise HeaderError(f"frame depth {depth} outside 1..{MAX_DEPTH}")
    if length > MAX_PAYLOAD_BYTES:
        raise HeaderError(f"frame payload length {length} exceeds the limit {MAX_PAYLOAD_BYTES}")
    try:
        code_by_id(code_id)
    except KeyError:
        raise HeaderError(f"frame uses unknown code id {code_id}") from None
    return FrameHeader(code_id, depth, seq, length, bool(flags & FLAG_LAST), version)


def encode_frame(header: FrameHeader, payload: bytes) -> bytes:
    """marker | header | coded(payload + CRC-32C) | header copy."""
    if len(payload) != header.length:
        raise ValueError(f"payload is {len(payload)} bytes, header says {header.length}")
    coded_header = encode_header(header)
    message = payload + struct.pack(">I", crc32c(payload))
    return MARKER_BYTES + coded_header + encode_segment(header.code, header.depth, message) + coded_header
