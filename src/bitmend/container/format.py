"""Frame layout, header record and checks of the bitmend container (docs/FORMAT.md).

Version 2 (written now):

    frame  = marker (8) | header (60) | coded payload (C) | header copy (60)
    header = golay-24-12 at depth 20 of the 30-byte record
    record = version, flags, code id, depth, stream id (u64), sequence (u32),
             position (u48), payload length (u32), CRC-32C of the first 26 bytes (u32),
             all big-endian

Version 1 (read forever): the 16-byte record (version, flags, code id, depth, sequence,
length, CRC-32C) coded at depth 11 into a 33-byte header; no stream id, no position.

The coded payload is the payload followed by its CRC-32C, encoded with the frame's code
and interleaved at the frame's depth (bitmend.interleave).

A frame whose code id is 0 (CUSTOM_CODE_ID) carries its own code: the record's length
field also holds k - 1 and n - k - 1, and a code-definition block (golay-24-12, one
interleaved group) follows the header, with a copy before the header copy:

    frame  = marker | header | definition | coded payload | definition copy | header copy
"""

from __future__ import annotations

import hashlib
import hmac
import struct
from dataclasses import dataclass, field, replace
from functools import lru_cache
from typing import NamedTuple

import crcmod.predefined
import numpy as np

from bitmend.codes.base import FAILED, BlockCode
from bitmend.codes.catalog import MAX_DEPTH, code_by_id, get_code
from bitmend.codes.linear import MAX_MESSAGE_BITS, MAX_PARITY_BITS, BinaryLinearCode, CodeDefinitionError
from bitmend.errors import ContainerError, SettingError
from bitmend.interleave import (decode_segment, encode_segment, encode_segments, layout, message_row_bytes,
                                sized_layout)
from bitmend.once import once

FORMAT_VERSION = 2  # the version this bitmend writes; it reads every version in HEADER_LAYOUTS
# 64-bit sync marker: 32 ones, no run longer than 4, and for every shift s the marker
# differs from itself shifted by s in >= 28.5 places counting unknown bits as half
# (found by the seeded search in tools/choose_marker.py; see docs/FORMAT.md).
MARKER = 0xA4C95BDD8544AE53
MARKER_BYTES = MARKER.to_bytes(8, "big")
MARKER_SEARCH_TOLERANCE = 12  # bits of 64 that may differ while searching for a frame
HEADER_CODE = "golay-24-12"


class HeaderLayout(NamedTuple):
    """Size of a version's header record, and its coding: golay-24-12, all codewords in one
    interleaved group of `depth`, so any burst of up to 3 * depth bits inside it is corrected."""

    version: int
    record_bytes: int
    depth: int
    coded_bytes: int


HEADER_LAYOUTS = {
    2: HeaderLayout(2, 30, 20, 60),  # 240 record bits = exactly 20 Golay messages; 60-bit bursts
    1: HeaderLayout(1, 16, 11, 33),  # 128 record bits + 4 padding bits in 11 messages; 33-bit bursts
}
RECORD_BYTES = HEADER_LAYOUTS[FORMAT_VERSION].record_bytes
HEADER_DEPTH = HEADER_LAYOUTS[FORMAT_VERSION].depth
HEADER_BYTES = HEADER_LAYOUTS[FORMAT_VERSION].coded_bytes
MAX_HEADER_BYTES = max(layout_.coded_bytes for layout_ in HEADER_LAYOUTS.values())
MAX_PAYLOAD_BYTES = 1 << 20  # frame payload limit: bounds every allocation a header drives
# a bound on any frame's size on the wire (the largest catalog frames, rep-3 and bch-15-5 at
# depth 255, stay under it; custom-code frames are refused above it): sizes the look-back window
MAX_FRAME_WIRE_BYTES = 8 + 2 * 60 + 3 * (MAX_PAYLOAD_BYTES + 4 + 255 * 3)
DEFAULT_FRAME_BYTES = 16384


def check_depth(depth: int) -> int:
    """depth itself if a header can carry it (1..MAX_DEPTH), else SettingError."""
    if not 1 <= depth <= MAX_DEPTH:
        raise SettingError(f"depth must be 1..{MAX_DEPTH}, got {depth}")
    return depth


def check_frame_bytes(frame_bytes: int) -> int:
    """frame_bytes itself if a frame may carry that much payload (1..MAX_PAYLOAD_BYTES), else SettingError."""
    if not 1 <= frame_bytes <= MAX_PAYLOAD_BYTES:
        raise SettingError(f"frame size must be 1..{MAX_PAYLOAD_BYTES} bytes, got {frame_bytes}")
    return frame_bytes


CRC_BYTES = 4
FLAG_LAST = 0x01  # the frame closes its stream
FLAG_REPAIR = 0x02  # (version 2) a repair frame across the data frames of a group: docs/FORMAT.md
FLAG_KEYED = 0x04  # (version 2) the message carries a tag under a shared key after its CRC-32C
FLAG_IN_GROUP = 0x08  # (version 2) a data frame of a stream that sends repair frames
KNOWN_FLAGS = {1: FLAG_LAST, 2: FLAG_LAST | FLAG_REPAIR | FLAG_KEYED | FLAG_IN_GROUP}
TAG_BYTES = 16  # HMAC-SHA-256 truncated to 128 bits (RFC 2104 section 5; RFC 4231 test case 5)
POSITION_BITS = 48  # (version 2) stream byte offset of a data frame's first payload byte, mod 2^48
SEQ_MODULUS = 1 << 32
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


class HeaderError(ContainerError, ValueError):
    """A header that decoded and checked but holds values this reader cannot use."""


class UnsupportedVersionError(HeaderError):
    pass


@dataclass(frozen=True)
class FrameHeader:  # noqa: PLW1641 (`once` needs __dict__; frozen still blocks assignment)
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
    stream_id: int = 0  # (version 2) the stream's identity, drawn at random by its encoder
    position: int = 0  # (version 2) stream offset of the first payload byte, mod 2^48
    repair: bool = False  # (version 2) a repair frame: `position` holds its group fields
    in_group: bool = False  # (version 2) a data frame whose stream sends repair frames
    keyed: bool = False  # (version 2) the coded message ends with a tag under a shared key

    @classmethod
    def for_defined_code(cls, code: BinaryLinearCode, depth: int, seq: int, length: int,
                         last: bool = False, stream_id: int = 0, position: int = 0) -> "FrameHeader":
        """The header of a frame that carries `code` in its own definition block."""
        return cls(CUSTOM_CODE_ID, depth, seq, length, last, FORMAT_VERSION, (code.k, code.r), code,
                   stream_id, position)

    @property
    def layout(self) -> HeaderLayout:
        return HEADER_LAYOUTS[self.version]

    @property
    def header_bytes(self) -> int:
        """Size of one coded header (and of its copy) in this frame's version."""
        return self.layout.coded_bytes

    @property
    def identified(self) -> bool:
        """True when the frame names its stream (version 2 on); version 1 frames do not."""
        return self.version >= 2

    @property
    def code(self) -> BlockCode:
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

    @once
    def definition_bytes(self) -> int:
        """Size of one code-definition block (0 for catalog codes)."""
        if self.code_id != CUSTOM_CODE_ID:
            return 0
        return definition_coded_bytes(*self._shape(), version=self.version)

    @once
    def coded_bytes(self) -> int:
        if self.code_id == CUSTOM_CODE_ID:
            k, r = self._shape()
            return sized_layout(k + r, k, 1, self.depth, self.message_bytes).coded_bytes
        return _catalog_coded_bytes(self.code_id, self.depth, self.message_bytes)

    @property
    def message_bytes(self) -> int:
        """Bytes of the coded message: payload, its CRC-32C, and the tag of a keyed frame."""
        return self.length + CRC_BYTES + (TAG_BYTES if self.keyed else 0)

    @once
    def frame_bytes(self) -> int:
        """Whole frame size on the wire."""
        return len(MARKER_BYTES) + 2 * self.header_bytes + 2 * self.definition_bytes + self.coded_bytes

    @once
    def run_key(self) -> tuple[int, int, bool] | None:
        """(stream id, code id, keyed), which the frames of one run share (reader.FrameRun),
        or None for a frame that is never in a run: version 1 (no stream id), a closing,
        repair or grouped data frame."""
        if not self.identified or self.last or self.repair or self.in_group:
            return None
        return self.stream_id, self.code_id, self.keyed

    def _shape(self) -> tuple[int, int]:
        if self.shape is None:
            raise ValueError("a frame with code id 0 needs the shape (k, n - k) of its code")
        k, r = self.shape
        if not (1 <= k <= MAX_MESSAGE_BITS and 1 <= r <= MAX_PARITY_BITS):
            raise ValueError(f"code shape k = {k}, n - k = {r} outside 1..{MAX_MESSAGE_BITS}, 1..{MAX_PARITY_BITS}")
        return k, r

    def record(self) -> bytes:
        flags = ((FLAG_LAST if self.last else 0) | (FLAG_REPAIR if self.repair else 0)
                 | (FLAG_KEYED if self.keyed else 0) | (FLAG_IN_GROUP if self.in_group else 0))
        length = self.length
        if self.code_id == CUSTOM_CODE_ID:
            k, r = self._shape()
            if length >= 1 << CUSTOM_LENGTH_BITS:
                raise ValueError(f"payload length {length} does not fit a frame with code id 0")
            length |= (k - 1) << 26 | (r - 1) << CUSTOM_LENGTH_BITS
        if self.version == 1:
            body = struct.pack(">BBBBII", self.version, flags, self.code_id, self.depth, self.seq, length)
        else:
            body = (struct.pack(">BBBBQI", self.version, flags, self.code_id, self.depth, self.stream_id, self.seq)
                    + (self.position % (1 << POSITION_BITS)).to_bytes(6, "big") + struct.pack(">I", length))
        return body + struct.pack(">I", crc32c(body))

    def following(self, count: int) -> list["FrameHeader"]:
        """next(), next().next(), ... count headers: made by copying this header's fields
        (its sizes, computed once, come along) and setting the counters; a run of frames
        needs one per frame and replace() costs more than the frame's other bookkeeping."""
        seq, position, length = self.seq, self.position, self.length
        model = self if not self.last else self._copied(self.seq, self.position, False)
        return [model._copied((seq + i) % SEQ_MODULUS, (position + i * length) % (1 << POSITION_BITS))
                for i in range(1, count + 1)]

    def _copied(self, seq: int, position: int, last: bool | None = None) -> "FrameHeader":
        """This header with other counters (and closing flag, if given), its computed sizes
        kept (they do not depend on them): what replace() gives, at a fraction of its
        cost (a run makes one per frame)."""
        fields = self.__dict__.copy()
        fields["seq"] = seq
        fields["position"] = position
        if last is not None:
            fields["last"] = last
            fields.pop("run_key", None)  # depends on last
        header = object.__new__(FrameHeader)
        object.__setattr__(header, "__dict__", fields)
        return header

    def next(self) -> "FrameHeader":
        """The header a full frame after this one would carry (used to predict a lost header):
        same stream, code, depth and length, the next sequence number and stream position."""
        return replace(self, seq=(self.seq + 1) % SEQ_MODULUS, last=False,
                       position=(self.position + self.length) % (1 << POSITION_BITS))


@lru_cache(maxsize=1024)
def _catalog_coded_bytes(code_id: int, depth: int, message_bytes: int) -> int:
    """Coded payload size of a catalog code's frame (asked once per frame read: cached)."""
    return layout(code_by_id(code_id), depth, message_bytes).coded_bytes


@lru_cache(maxsize=1)
def header_code() -> BlockCode:
    return get_code(HEADER_CODE)


def encode_header(header: FrameHeader) -> bytes:
    layout_ = header.layout
    coded = encode_segment(header_code(), layout_.depth, header.record())
    assert len(coded) == layout_.coded_bytes
    return coded


def _checked_record(coded: bytes, layout_: HeaderLayout) -> bytes | None:
    """The record in a coded header of this layout, or None if a Golay codeword is
    uncorrectable or the record's CRC-32C fails."""
    record, status = decode_segment(header_code(), layout_.depth, coded[: layout_.coded_bytes], layout_.record_bytes)
    if (status == FAILED).any():
        return None
    body, check = record[:-CRC_BYTES], struct.unpack(">I", record[-CRC_BYTES:])[0]
    return bytes(body) if crc32c(body) == check else None


def decode_header(coded: bytes) -> FrameHeader | None:
    """The header at the start of `coded` (at least MAX_HEADER_BYTES, or 33 for a version 1
    header), or None when no version's header corrects and checks there. The version 2
    layout is tried first, then version 1: a record is believed only after its Golay
    decoding and its CRC-32C pass, so a header of one layout is never taken for the other
    (short of a 2^-32 CRC collision). Raises HeaderError for a checked header with values
    out of range, UnsupportedVersionError for a newer writer's."""
    for layout_ in HEADER_LAYOUTS.values():
        if len(coded) < layout_.coded_bytes:
            continue
        body = _checked_record(coded, layout_)
        if body is not None:
            return _parse_record(body, layout_)
    return None


def decode_headers(coded: np.ndarray) -> list[FrameHeader | None]:
    """decode_header for many version 2 headers at once: coded holds one coded header per
    row (HEADER_BYTES each), decoded in one call. A row whose Golay decoding fails, whose
    record fails its CRC-32C or holds values this reader cannot use gives None; the caller
    reads that one alone (decode_header), which also names what is wrong."""
    count = coded.shape[0]
    if count == 0:
        return []
    layout_ = HEADER_LAYOUTS[FORMAT_VERSION]
    records, status = decode_segment(header_code(), layout_.depth, np.ascontiguousarray(coded).reshape(-1),
                                     count * layout_.record_bytes)
    usable = (status.reshape(count, -1) != FAILED).all(axis=1)
    headers: list[FrameHeader | None] = [None] * count
    size, body = layout_.record_bytes, layout_.record_bytes - CRC_BYTES
    # the columns every row needs, taken out for all rows at once (big-endian fields)
    table = np.frombuffer(records, dtype=np.uint8).reshape(count, size)
    stored = np.ascontiguousarray(table[:, body:]).view(">u4").ravel().tolist()
    seqs = np.ascontiguousarray(table[:, 12:16]).view(">u4").ravel().tolist()
    positions = (np.ascontiguousarray(table[:, 16:22]).astype(np.uint64)
                 << np.arange(40, -8, -8, dtype=np.uint64)).sum(axis=1, dtype=np.uint64).tolist()
    fields = np.concatenate([table[:, :12], table[:, 22:body]], axis=1).tobytes()  # version .. stream id, length
    width = 12 + body - 22
    parsed: dict[bytes, FrameHeader | None] = {}  # by the fields other than sequence and position
    for i in np.flatnonzero(usable).tolist():
        at = i * size
        if crc32c(records[at: at + body]) != stored[i]:
            continue
        key = fields[i * width: (i + 1) * width]
        model = parsed.get(key, _UNPARSED)
        if model is _UNPARSED:
            try:
                model = _parse_record(records[at: at + body], layout_)
                if model.code_id != CUSTOM_CODE_ID:
                    model.frame_bytes  # noqa: B018 (computed once here, so every copy carries them)
                    model.run_key  # noqa: B018
            except HeaderError:
                model = None
            parsed[key] = model
        if model is not None:  # the same fields with this record's counters
            headers[i] = model._copied(seqs[i], positions[i])
    return headers


_UNPARSED = object()  # decode_headers: fields not met before


def _parse_record(body: bytes, layout_: HeaderLayout) -> FrameHeader:
    version = body[0]
    if version != layout_.version:
        # a newer writer (or a record size this bitmend does not know): say so rather than
        # treating the stream as noise
        known = " and ".join(str(v) for v in sorted(HEADER_LAYOUTS))
        raise UnsupportedVersionError(f"frame format version {version}; this bitmend reads versions {known}")
    stream_id = position = 0
    if version == 1:
        _, flags, code_id, depth, seq, length = struct.unpack(">BBBBII", body)
    else:
        _, flags, code_id, depth, stream_id, seq = struct.unpack(">BBBBQI", body[:16])
        position = int.from_bytes(body[16:22], "big")
        (length,) = struct.unpack(">I", body[22:26])
    shape = None
    if flags & ~KNOWN_FLAGS[version]:
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
    header = FrameHeader(code_id, depth, seq, length, bool(flags & FLAG_LAST), version, shape, None,
                         stream_id, position, bool(flags & FLAG_REPAIR), bool(flags & FLAG_IN_GROUP),
                         bool(flags & FLAG_KEYED))
    if shape is not None and header.frame_bytes > MAX_FRAME_WIRE_BYTES:
        raise HeaderError(f"frame of {header.frame_bytes} bytes exceeds the limit {MAX_FRAME_WIRE_BYTES}")
    return header


# ---- code-definition block (frames with code id 0) ------------------------------------------

def definition_message_bytes(k: int, r: int) -> int:
    """kind (1) | k (1) | r (1) | P, k rows of r bits, MSB first, zero-padded | CRC-32C (4)."""
    return 3 + (k * r + 7) // 8 + CRC_BYTES


def definition_depth(k: int, r: int, version: int = FORMAT_VERSION) -> int:
    """Golay codewords in the block, all in one interleaved group; at least the header's
    depth (20 in version 2, 11 in version 1), so that the block survives every burst the
    header survives."""
    message_bits = 8 * definition_message_bytes(k, r)
    return max(HEADER_LAYOUTS[version].depth, -(-message_bits // header_code().k))


def definition_coded_bytes(k: int, r: int, version: int = FORMAT_VERSION) -> int:
    return layout(header_code(), definition_depth(k, r, version), definition_message_bytes(k, r)).coded_bytes


def definition_record(code: BinaryLinearCode) -> bytes:
    """The block's message: what a reader needs to rebuild the code, and its CRC-32C."""
    parity = np.packbits(code.P.reshape(-1)).tobytes()
    body = bytes([DEFINITION_KIND_BINARY, code.k, code.r]) + parity
    return body + struct.pack(">I", crc32c(body))


@lru_cache(maxsize=16)
def encode_definition(code: BinaryLinearCode, version: int = FORMAT_VERSION) -> bytes:
    """The coded code-definition block of a frame with code id 0."""
    return encode_segment(header_code(), definition_depth(code.k, code.r, version), definition_record(code))


def decode_definition(coded: bytes, shape: tuple[int, int], version: int = FORMAT_VERSION) -> BinaryLinearCode | None:
    """The code in a coded definition block, or None if the block cannot be corrected,
    fails its CRC or disagrees with the header's (k, r). Raises HeaderError for a checked
    block of a kind this reader does not know."""
    k, r = shape
    size = definition_message_bytes(k, r)
    message, status = decode_segment(header_code(), definition_depth(k, r, version), coded, size)
    if (status == FAILED).any():
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


def code_from_definition_body(body: bytes) -> BinaryLinearCode | None:
    """The code of a checked definition block's body (its message without the CRC-32C);
    built once per distinct body."""
    return _code_from_definition(bytes(body))


@lru_cache(maxsize=4)
def unchecked_reading_code(k: int, r: int) -> BinaryLinearCode:
    """A stand-in with parity part 0 and t = 0, for reading the systematic message bits
    of a frame whose code definition was lost in both copies: nothing is corrected."""
    return BinaryLinearCode(f"unknown-{k + r}-{k}", np.zeros((k, r), dtype=np.uint8),
                            description="stand-in: message bits read without correction")


def frame_tag(key: bytes, header: FrameHeader, payload: bytes) -> bytes:
    """The tag of a keyed frame: HMAC-SHA-256 under the shared key, truncated to its first
    16 bytes, over the header record without its CRC (version, flags, code id, depth,
    stream identity, sequence number, position, length) followed by the payload."""
    return record_tag(key, header.record()[:-CRC_BYTES], payload)


def record_tag(key: bytes, record_body: bytes, payload: bytes) -> bytes:
    """frame_tag from the header record without its CRC, when that is at hand already."""
    return hmac.new(key, record_body + payload, hashlib.sha256).digest()[:TAG_BYTES]


def tag_matches(key: bytes, header: FrameHeader, payload: bytes, tag: bytes) -> bool:
    """True if tag is the frame's tag under key (compared in constant time)."""
    return hmac.compare_digest(frame_tag(key, header, payload), bytes(tag))


def encode_frame(header: FrameHeader, payload: bytes, key: bytes | None = None) -> bytes:
    """marker | header | coded(payload + CRC-32C [+ tag]) | header copy; a keyed header
    needs the key its tag is made with."""
    if len(payload) != header.length:
        raise ValueError(f"payload is {len(payload)} bytes, header says {header.length}")
    if header.keyed and key is None:
        raise ValueError("a keyed frame needs its key")
    coded_header = encode_header(header)
    message = payload + struct.pack(">I", crc32c(payload))
    if header.keyed:
        message += frame_tag(key, header, payload)
    definition = encode_definition(header.code, header.version) if header.code_id == CUSTOM_CODE_ID else b""
    return (MARKER_BYTES + coded_header + definition + encode_segment(header.code, header.depth, message)
            + definition + coded_header)


def run_records(first: FrameHeader, count: int, lengths: np.ndarray | None = None) -> np.ndarray:
    """The header records of `count` frames in a row, the first one's header `first` and
    each next one `FrameHeader.next()` of the one before (sequence number + 1, position +
    length, mod 2^32 and 2^48), as a (count, RECORD_BYTES) array: the fixed fields once,
    the counters as columns, one CRC-32C per row. lengths: each frame's payload length
    (records of any size, catalog codes only), else all first.length. Version 2 headers only."""
    if first.version != FORMAT_VERSION or first.last:
        raise ValueError("a run of frames has version 2 headers and no closing flag")
    records = np.tile(np.frombuffer(first.record(), dtype=np.uint8), (count, 1))
    steps = np.arange(count, dtype=np.uint64)
    seq = (np.uint64(first.seq) + steps) % np.uint64(SEQ_MODULUS)
    if lengths is None:
        offsets = steps * np.uint64(first.length)
    else:
        if first.code_id == CUSTOM_CODE_ID:
            raise ValueError("frames of a code defined in the stream carry its shape in the length field")
        offsets = np.concatenate([[0], np.cumsum(lengths[:-1], dtype=np.uint64)]).astype(np.uint64)
        records[:, 22:26] = lengths.astype(">u4").view(np.uint8).reshape(count, 4)
    position = (np.uint64(first.position) + offsets) % np.uint64(1 << POSITION_BITS)
    records[:, 12:16] = seq.astype(">u4").view(np.uint8).reshape(count, 4)
    records[:, 16:22] = position.astype(">u8").view(np.uint8).reshape(count, 8)[:, 2:]
    body = RECORD_BYTES - CRC_BYTES
    flat = records.tobytes()
    checks = np.fromiter((crc32c(flat[i * RECORD_BYTES: i * RECORD_BYTES + body]) for i in range(count)),
                         dtype=np.uint32, count=count)
    records[:, body:] = checks.astype(">u4").view(np.uint8).reshape(count, 4)
    return records


def encode_frames(first: FrameHeader, payloads: bytes | memoryview | np.ndarray, key: bytes | None = None,
                  out: np.ndarray | None = None) -> np.ndarray:
    """The frames of a run of full data frames (run_records), payloads back to back,
    first.length bytes each, as one uint8 array: the bytes encode_frame would give frame
    by frame, made with one header-coding call and one payload-coding plan for all.
    out: the uint8 array to make them in (count * first.frame_bytes), else a new one."""
    length = first.length
    flat = np.frombuffer(payloads, dtype=np.uint8) if not isinstance(payloads, np.ndarray) else payloads
    if length == 0 or len(flat) % length:
        raise ValueError(f"a run holds whole payloads of {length} bytes, got {len(flat)} bytes")
    if first.keyed and key is None:
        raise ValueError("a keyed frame needs its key")
    count = len(flat) // length
    records = run_records(first, count)
    # each record is exactly one header group (20 Golay messages), so the records end to end
    # code as one segment whose groups are the frames' headers
    headers = encode_segments(header_code(), first.layout.depth, records.reshape(1, -1)).reshape(count, -1)
    # rows as wide as encode_segments codes them (padded to whole groups), so it takes them
    # without another copy; the padding is the zeros a segment is padded with anyway
    width = message_row_bytes(first.code, first.depth, first.message_bytes)
    messages = np.empty((count, width), dtype=np.uint8)
    messages[:, first.message_bytes:] = 0
    payload_rows = flat.reshape(count, length)
    messages[:, :length] = payload_rows
    checks = np.fromiter((crc32c(row) for row in payload_rows), dtype=np.uint32, count=count)
    messages[:, length: length + CRC_BYTES] = checks.astype(">u4").view(np.uint8).reshape(count, 4)
    if first.keyed:
        body = RECORD_BYTES - CRC_BYTES
        for i in range(count):
            messages[i, length + CRC_BYTES: first.message_bytes] = np.frombuffer(
                record_tag(key, records[i, :body].tobytes(), payload_rows[i].tobytes()), dtype=np.uint8)
    definition = (np.frombuffer(encode_definition(first.code, first.version), dtype=np.uint8)
                  if first.code_id == CUSTOM_CODE_ID else np.zeros(0, dtype=np.uint8))
    header_bytes, definition_bytes = first.header_bytes, first.definition_bytes
    run = np.empty(count * first.frame_bytes, dtype=np.uint8) if out is None else out
    if len(run) != count * first.frame_bytes:
        raise ValueError(f"{count} frames take {count * first.frame_bytes} bytes, out has {len(run)}")
    frames = run.reshape(count, first.frame_bytes)
    frames[:, : len(MARKER_BYTES)] = np.frombuffer(MARKER_BYTES, dtype=np.uint8)
    at = len(MARKER_BYTES)
    coded_at = at + header_bytes + definition_bytes
    encode_segments(first.code, first.depth, messages, out=frames[:, coded_at: coded_at + first.coded_bytes])
    for part in (headers, definition, None, definition, headers):
        width = first.coded_bytes if part is None else part.shape[-1]
        if part is not None:
            frames[:, at: at + width] = part
        at += width
    return run


def encode_record_frames(first: FrameHeader, payloads: list[bytes], key: bytes | None = None) -> list[bytes]:
    """One frame per payload, of its own length: the frames encode_frame would give for
    `first` and the headers after it (FrameHeader.next(), each with its payload's length
    and the stream position after the one before). Headers are coded in one call, the
    payloads of each length with one code plan. Catalog codes, version 2."""
    count = len(payloads)
    if count == 0:
        return []
    if first.keyed and key is None:
        raise ValueError("a keyed frame needs its key")
    lengths = np.fromiter((len(p) for p in payloads), dtype=np.uint64, count=count)
    if int(lengths.max()) > MAX_PAYLOAD_BYTES:
        raise ValueError(f"a frame carries at most {MAX_PAYLOAD_BYTES} bytes")
    records = run_records(first, count, lengths)
    headers = encode_segments(header_code(), first.layout.depth, records.reshape(1, -1)).reshape(count, -1).tobytes()
    header_bytes = first.header_bytes
    extra = CRC_BYTES + (TAG_BYTES if first.keyed else 0)
    by_length: dict[int, list[int]] = {}
    for i, payload in enumerate(payloads):
        by_length.setdefault(len(payload), []).append(i)
    frames: list[bytes] = [b""] * count
    body = RECORD_BYTES - CRC_BYTES
    for length, members in by_length.items():
        messages = np.empty((len(members), length + extra), dtype=np.uint8)
        for row, i in enumerate(members):
            payload = bytes(payloads[i])
            message = payload + crc32c(payload).to_bytes(CRC_BYTES, "big")
            if first.keyed:
                message += record_tag(key, records[i, :body].tobytes(), payload)
            messages[row] = np.frombuffer(message, dtype=np.uint8)
        coded = encode_segments(first.code, first.depth, messages)
        for row, i in enumerate(members):
            header = headers[i * header_bytes: (i + 1) * header_bytes]
            frames[i] = b"".join((MARKER_BYTES, header, coded[row].tobytes(), header))
    return frames
