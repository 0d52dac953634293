"""Frame layout, header record and checks of the bitmend container (docs/FORMAT.md).

    frame  = marker (8) | header (33) | coded payload (C) | header copy (33)
    header = golay-24-12 at depth 11 of the 16-byte record
    record = version, flags, code id, depth, sequence (u32), payload length (u32),
             CRC-32C of the first 12 bytes (u32), all big-endian

The coded payload is the payload followed by its CRC-32C, encoded with the frame's code
and interleaved at the frame's depth (bitmend.interleave).

A frame whose code id is 0 (CUSTOM_CODE_ID) carries its own code: the record's length
field also holds k - 1 and n - k - 1, and a code-definition block (golay-24-12, one
interleaved group) follows the header, with a copy before the header copy:

    frame  = marker | header | definition | coded payload | definition copy | header copy
"""

from __future__ import annotations

import struct
from dataclasses import dataclass, field, replace
from functools import cached_property, lru_cache
from typing import NamedTuple

import crcmod.predefined
import numpy as np

from bitmend.codes.catalog import MAX_DEPTH, code_by_id, get_code
from bitmend.codes.linear import MAX_MESSAGE_BITS, MAX_PARITY_BITS, BinaryLinearCode, CodeDefinitionError
from bitmend.interleave import decode_segment, encode_segment, layout

FORMAT_VERSION = 1
# 64-bit sync marker: 32 ones, no run longer than 4, and for every shift s the marker
# differs from itself shifted by s in >= 28.5 places counting unknown bits as half
# (found by the seeded search in tools/choose_marker.py; see docs/FORMAT.md).
MARKER = 0xA4C95BDD8544AE53
MARKER_BYTES = MARKER.to_bytes(8, "big")
MARKER_SEARCH_TOLERANCE = 12  # bits of 64 that may differ while searching for a frame
RECORD_BYTES = 16
HEADER_CODE = "golay-24-12"
HEADER_DEPTH = 11  # 11 codewords of 24 bits carry the 128-bit record (132 with padding)
HEADER_BYTES = 33
MAX_PAYLOAD_BYTES = 1 << 20  # frame payload limit: bounds every allocation a header drives
# a bound on any frame's size on the wire (the largest catalog frames, rep-3 and bch-15-5 at
# depth 255, stay under it; custom-code frames are refused above it): sizes the look-back window
MAX_FRAME_WIRE_BYTES = 8 + 2 * 33 + 3 * (MAX_PAYLOAD_BYTES + 4 + 255 * 3)
DEFAULT_FRAME_BYTES = 16384
CRC_BYTES = 4
FLAG_LAST = 0x01  # the frame closes its stream
CUSTOM_CODE_ID = 0  # the frame carries its own code in a code-definition block
CUSTOM_LENGTH_BITS = 21  # code id 0: the length field is (k-1) << 26 | (r-1) << 21 | length
DEFINITION_KIND_BINARY = 1  # definition block kind: binary linear code, systematic parity part P

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


class _Geometry(NamedTuple):
    """n and k of a code defined in the stream, before its definition block is read: all
    that `layout` needs to size the coded payload."""

    n: int
    k: int


@dataclass(frozen=True)
class FrameHeader:  # noqa: PLW1641 (cached_property needs __dict__; frozen still blocks assignment)
    """The fields of one frame header.

    For code id 0 (CUSTOM_CODE_ID) `shape` = (k, n - k) comes from the record and fixes
    the frame's size; `defined_code` is the code itself, known to a writer and to a
    reader once it has decoded the frame's code-definition block."""

    code_id: int
    depth: int
    seq: int
    length: int  # payload bytes carried by the frame
    last: bool = False
    version: int = FORMAT_VERSION
    shape: tuple[int, int] | None = None  # (k, r) of a code defined in the frame (code id 0 only)
    defined_code: BinaryLinearCode | None = field(default=None, compare=False, repr=False)

    @classmethod
    def for_defined_code(cls, code: BinaryLinearCode, depth: int, seq: int, length: int,
                         last: bool = False) -> "FrameHeader":
        """The header of a frame that carries `code` in its own definition block."""
        return cls(CUSTOM_CODE_ID, depth, seq, length, last, FORMAT_VERSION, (code.k, code.r), code)

    @property
    def code(self) -> BinaryLinearCode:
        if self.code_id == CUSTOM_CODE_ID:
            if self.defined_code is None:
                raise HeaderError("the frame's code is defined in its definition block, which has not been read")
            return self.defined_code
        return code_by_id(self.code_id)

    @property
    def code_name(self) -> str:
        """Catalog name, or custom-N-K for a code defined in the stream."""
        if self.code_id == CUSTOM_CODE_ID:
            k, r = self.shape or (0, 0)
            return f"custom-{k + r}-{k}"
        return self.code.name

    @cached_property
    def definition_bytes(self) -> int:
        """Size of one code-definition block (0 for catalog codes)."""
        if self.code_id != CUSTOM_CODE_ID:
            return 0
        return definition_coded_bytes(*self._shape())

    @cached_property
    def coded_bytes(self) -> int:
        if self.code_id == CUSTOM_CODE_ID:
            k, r = self._shape()
            return layout(_Geometry(k + r, k), self.depth, self.length + CRC_BYTES).coded_bytes
        return layout(self.code, self.depth, self.length + CRC_BYTES).coded_bytes

    @cached_property
    def frame_bytes(self) -> int:
        """Whole frame size on the wire."""
        return len(MARKER_BYTES) + 2 * HEADER_BYTES + 2 * self.definition_bytes + self.coded_bytes

    def _shape(self) -> tuple[int, int]:
        if self.shape is None:
            raise ValueError("a frame with code id 0 needs the shape (k, n - k) of its code")
        k, r = self.shape
        if not (1 <= k <= MAX_MESSAGE_BITS and 1 <= r <= MAX_PARITY_BITS):
            raise ValueError(f"code shape k = {k}, n - k = {r} outside 1..{MAX_MESSAGE_BITS}, 1..{MAX_PARITY_BITS}")
        return k, r

    def record(self) -> bytes:
        flags = FLAG_LAST if self.last else 0
        length = self.length
        if self.code_id == CUSTOM_CODE_ID:
            k, r = self._shape()
            if length >= 1 << CUSTOM_LENGTH_BITS:
                raise ValueError(f"payload length {length} does not fit a frame with code id 0")
            length |= (k - 1) << 26 | (r - 1) << CUSTOM_LENGTH_BITS
        body = struct.pack(">BBBBII", self.version, flags, self.code_id, self.depth, self.seq, length)
        return body + struct.pack(">I", crc32c(body))

    def next(self) -> "FrameHeader":
        """The header a full frame after this one would carry (used to predict a lost header)."""
        return replace(self, seq=(self.seq + 1) & 0xFFFFFFFF, last=False)


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
    shape = None
    if version != FORMAT_VERSION:
        # a newer writer: say so rather than treating the stream as noise
        raise UnsupportedVersionError(f"frame format version {version}; this bitmend reads version {FORMAT_VERSION}")
    if flags & ~FLAG_LAST:
        raise HeaderError(f"frame header has unknown flags 0x{flags:02x}")
    if not 1 <= depth <= MAX_DEPTH:
        raise HeaderError(f"frame depth {depth} outside 1..{MAX_DEPTH}")
    if code_id == CUSTOM_CODE_ID:
        k, r = (length >> 26) + 1, ((length >> CUSTOM_LENGTH_BITS) & 0x1F) + 1
        length &= (1 << CUSTOM_LENGTH_BITS) - 1
        if r > MAX_PARITY_BITS:
            raise HeaderError(f"frame defines a code with n - k = {r}, above the limit {MAX_PARITY_BITS}")
        shape = (k, r)
    if length > MAX_PAYLOAD_BYTES:
        raise HeaderError(f"frame payload length {length} exceeds the limit {MAX_PAYLOAD_BYTES}")
    if code_id != CUSTOM_CODE_ID:
        try:
            code_by_id(code_id)
        except KeyError:
            raise HeaderError(f"frame uses unknown code id {code_id}") from None
    header = FrameHeader(code_id, depth, seq, length, bool(flags & FLAG_LAST), version, shape)
    if shape is not None and header.frame_bytes > MAX_FRAME_WIRE_BYTES:
        raise HeaderError(f"frame of {header.frame_bytes} bytes exceeds the limit {MAX_FRAME_WIRE_BYTES}")
    return header


# ---- code-definition block (frames with code id 0) ------------------------------------------

def definition_message_bytes(k: int, r: int) -> int:
    """kind (1) | k (1) | r (1) | P, k rows of r bits, MSB first, zero-padded | CRC-32C (4)."""
    return 3 + (k * r + 7) // 8 + CRC_BYTES


def definition_depth(k: int, r: int) -> int:
    """Golay codewords in the block, all in one interleaved group; at least the header's
    11, so that the block survives every burst the header survives (33 bits)."""
    message_bits = 8 * definition_message_bytes(k, r)
    return max(HEADER_DEPTH, -(-message_bits // header_code().k))


def definition_coded_bytes(k: int, r: int) -> int:
    return layout(header_code(), definition_depth(k, r), definition_message_bytes(k, r)).coded_bytes


def definition_record(code: BinaryLinearCode) -> bytes:
    """The block's message: what a reader needs to rebuild the code, and its CRC-32C."""
    parity = np.packbits(code.P.reshape(-1)).tobytes()
    body = bytes([DEFINITION_KIND_BINARY, code.k, code.r]) + parity
    return body + struct.pack(">I", crc32c(body))


@lru_cache(maxsize=16)
def encode_definition(code: BinaryLinearCode) -> bytes:
    """The coded code-definition block of a frame with code id 0."""
    return encode_segment(header_code(), definition_depth(code.k, code.r), definition_record(code))


def decode_definition(coded: bytes, shape: tuple[int, int]) -> BinaryLinearCode | None:
    """The code in a coded definition block, or None if the block cannot be corrected,
    fails its CRC or disagrees with the header's (k, r). Raises HeaderError for a checked
    block of a kind this reader does not know."""
    k, r = shape
    size = definition_message_bytes(k, r)
    message, status = decode_segment(header_code(), definition_depth(k, r), coded, size)
    if (status == 255).any():
        return None
    body, check = message[:-CRC_BYTES], struct.unpack(">I", message[-CRC_BYTES:])[0]
    if crc32c(body) != check:
        return None
    if body[0] != DEFINITION_KIND_BINARY:
        raise HeaderError(f"frame code definition of unknown kind {body[0]}")
    if (body[1], body[2]) != (k, r):
        return None
    return _code_from_definition(bytes(body))


@lru_cache(maxsize=16)
def _code_from_definition(body: bytes) -> BinaryLinearCode | None:
    """Built once per distinct definition: a stream repeats its definition in every frame."""
    k, r = body[1], body[2]
    bits = np.unpackbits(np.frombuffer(body[3:], dtype=np.uint8), count=k * r)
    try:
        return BinaryLinearCode(f"custom-{k + r}-{k}", bits.reshape(k, r), description="defined in the stream")
    except CodeDefinitionError:
        return None


@lru_cache(maxsize=4)
def unchecked_reading_code(k: int, r: int) -> BinaryLinearCode:
    """A stand-in with parity part 0 and t = 0, for reading the systematic message bits
    of a frame whose code definition was lost in both copies: nothing is corrected."""
    return BinaryLinearCode(f"unknown-{k + r}-{k}", np.zeros((k, r), dtype=np.uint8),
                            description="stand-in: message bits read without correction")


def encode_frame(header: FrameHeader, payload: bytes) -> bytes:
    """marker | header | coded(payload + CRC-32C) | header copy."""
    if len(payload) != header.length:
        raise ValueError(f"payload is {len(payload)} bytes, header says {header.length}")
    coded_header = encode_header(header)
    message = payload + struct.pack(">I", crc32c(payload))
    definition = encode_definition(header.code) if header.code_id == CUSTOM_CODE_ID else b""
    return (MARKER_BYTES + coded_header + definition + encode_segment(header.code, header.depth, message)
            + definition + coded_header)
