"""Frames for small inputs in plain Python: the same bytes as `FrameWriter`, without numpy.

Importing numpy costs about 0.15 s of a command's start-up here, more than a 200-byte
packet is worth. `SmallFrameWriter` writes exactly the frames `container.writer.FrameWriter`
writes (version 2 headers, the closing flag, stream identity and position, keyed tags) for
the codes of the generic binary engine (`SMALL_CODES`: catalog ids 1..11), at any depth
and frame size; the command line uses it for a small regular-file input and everything
else goes through the normal writer. Repair frames, records, codes defined in the stream,
BCH and Reed-Solomon codes are not handled here.

This module imports nothing from bitmend but the leaf `errors`, so the format constants it
needs are copies; `tests/test_small_frames.py` holds them (and each code's parity part) equal
to `container/format.py` and the catalog, and the frames byte-identical to the normal writer.
The bit order is the one of docs/FORMAT.md: the first bit sent is the most significant.
"""

from __future__ import annotations

import os
import struct
from functools import lru_cache
from typing import BinaryIO, Callable, NamedTuple

from bitmend.errors import SettingError

# ---- copies of container/format.py and codes/catalog.py (held equal by the tests) ----------------
FORMAT_VERSION = 2
MARKER_BYTES = bytes.fromhex("a4c95bdd8544ae53")
HEADER_CODE = "golay-24-12"
HEADER_DEPTH = 20  # version 2: the 30-byte record in one interleaved group of 20 Golay codewords
CRC_BYTES = 4
FLAG_LAST = 0x01
FLAG_KEYED = 0x04
TAG_BYTES = 16
POSITION_BITS = 48
SEQ_MODULUS = 1 << 32
DEFAULT_FRAME_BYTES = 16384
MAX_PAYLOAD_BYTES = 1 << 20
DEFAULT_CODE = "golay-24-12"
DEFAULT_DEPTH = 8
MAX_DEPTH = 255
MIN_KEY_BYTES = 16  # keyfile.MIN_KEY_BYTES


class SmallCode(NamedTuple):
    """A systematic binary code [I_k | P]: its catalog name and id, n, k, and the k rows of
    its parity part P, row i as an r-bit integer whose most significant bit is column 0."""

    name: str
    code_id: int
    n: int
    k: int
    parity_rows: tuple[int, ...]

    @property
    def r(self) -> int:
        return self.n - self.k


def _rows(k: int, r: int, packed: int) -> tuple[int, ...]:
    """The rows of P from all its bits packed row by row, first bit most significant."""
    mask = (1 << r) - 1
    return tuple((packed >> ((k - 1 - i) * r)) & mask for i in range(k))


# P of each catalog code of the generic engine, as `BinaryLinearCode.P` holds it (packed row
# by row); the constructions are codes/families.py's, and the tests compare every bit.
_PARITY_PARTS = (
    ("rep-3", 1, 3, 1, 0x3),
    ("hamming-7-4", 2, 7, 4, 0x777),
    ("hamming-15-11", 3, 15, 11, 0x35679abcdef),
    ("hamming-31-26", 4, 31, 26, 0x6531d2a5b1ae7c653a56d7c675be77df),
    ("hamming-63-57", 5, 63, 57,
     0x31461c928b30d38f4524d45565d865a6dc75e7e18a39259a7a29aabb2dbafc31cb3d35db7e39ebbf3dfbf),
    ("secded-8-4", 6, 8, 4, 0xedb7),
    ("secded-16-11", 7, 16, 11, 0x726ec9f556d97f),
    ("secded-39-32", 8, 39, 32, 0xe03b09c86e03e82d45623b11988dc46a2b41790cd25496a4a525594c),
    ("secded-72-64", 9, 72, 64,
     0xe01c83700ec13807d02c43b00dc2340bc832856816a15886611a45a815a2548a512a25c41992648962138c5229a44c914a31469826499423f8c73ef18f7ce31f),
    ("golay-23-12", 10, 23, 12, 0xae3f274ae3bcd8cd8cddbc5bc5bee32e3),
    ("golay-24-12", 11, 24, 12, 0xae3f92d2bc76cd966d337b785bc2deb8d5c7),
)
SMALL_CODES: dict[str, SmallCode] = {
    name: SmallCode(name, code_id, n, k, _rows(k, n - k, packed)) for name, code_id, n, k, packed in _PARITY_PARTS
}


def small_code(name: str) -> SmallCode | None:
    """The code called name if this module can write its frames, else None."""
    return SMALL_CODES.get(name)


# Plain Python codes about 2-6 microseconds per codeword here (longer codewords cost more),
# numpy's import alone about 0.15 s: up to this many codewords (about 50 ms of coding; 24 KiB
# of golay-24-12, 2 KiB of rep-3, 128 KiB of secded-72-64) the plain path finishes first.
SMALL_CODEWORDS = 1 << 14


def small_enough(name: str, size: int) -> bool:
    """True when `size` payload bytes with the code called name are worth coding here
    rather than loading numpy (False for a code this module does not write)."""
    code = SMALL_CODES.get(name)
    return code is not None and -(-8 * size // code.k) <= SMALL_CODEWORDS


# ---- CRC-32C -----------------------------------------------------------------------------------

def _fastest_crc32c() -> Callable[[bytes], int]:
    """The same choice as format._fastest_crc32c: google-crc32c's compiled form when
    present (the processor's CRC instruction), else crcmod's definition."""
    try:
        import google_crc32c
    except ImportError:
        google_crc32c = None
    if google_crc32c is not None and getattr(google_crc32c, "implementation", "") == "c":
        return google_crc32c.value
    import crcmod.predefined

    return crcmod.predefined.mkCrcFun("crc-32c")


crc32c = _fastest_crc32c()


# ---- coded segments ------------------------------------------------------------------------------

@lru_cache(maxsize=32)
def _parity_tables(code: SmallCode) -> tuple[tuple[int, ...], ...]:
    """For each byte of the message (k bits zero-padded at the end to whole bytes), the XOR
    of the P rows that each of its 256 values selects: parity = XOR of ceil(k/8) look-ups."""
    rows = code.parity_rows + (0,) * (-code.k % 8)
    tables = []
    for first in range(0, len(rows), 8):
        table = [0] * 256
        for value in range(1, 256):
            low = value & -value  # the value's last set bit, row first + 7 - log2(low)
            table[value] = table[value ^ low] ^ rows[first + 8 - low.bit_length()]
        tables.append(tuple(table))
    return tuple(tables)


@lru_cache(maxsize=32)
def _spread_table(depth: int) -> tuple[int, ...]:
    """Each byte value with its bit b moved to bit b * depth: codeword bit j lands at group
    bit j * depth (counted from the end), where interleaving puts it."""
    return tuple(sum(1 << (b * depth) for b in range(8) if value >> b & 1) for value in range(256))


def coded_bytes(code: SmallCode, depth: int, message_bytes: int) -> int:
    """Size of the coded segment that carries message_bytes (interleave.layout's)."""
    groups = max(1, -(-8 * message_bytes // (depth * code.k)))
    return (groups * depth * code.n + 7) // 8


def encode_segment(code: SmallCode, depth: int, message: bytes) -> bytes:
    """interleave.encode_segment in plain Python: the message's k-bit pieces (zero-padded to
    G groups of depth codewords) coded as [m | m P], codeword i of a group placing its bit j
    at group bit j * depth + i, the groups back to back, zero bits to a whole byte."""
    k, n, r = code.k, code.n, code.r
    groups = max(1, -(-8 * len(message) // (depth * k)))
    # a step of `step` groups starts on a byte boundary in both the message and the coded
    # stream (8 / gcd(8, x) is 1, 2, 4 or 8, so the larger of the two is a multiple of both)
    step = max(8 // _gcd8(depth * k), 8 // _gcd8(depth * n))
    steps = -(-groups // step)
    in_bytes, out_bytes = step * depth * k // 8, step * depth * n // 8
    padded = bytes(message) + bytes(steps * in_bytes - len(message))  # zero groups code to zero bits
    tables = _parity_tables(code)
    pad = -k % 8  # message bits are looked up as whole bytes
    spread = _spread_table(depth) if depth > 1 else None
    kmask = (1 << k) - 1
    codewords = step * depth
    out = []
    for s in range(steps):
        bits = int.from_bytes(padded[s * in_bytes:(s + 1) * in_bytes], "big")
        coded = 0
        for c in range(codewords):
            m = (bits >> ((codewords - 1 - c) * k)) & kmask
            padded_m = m << pad
            parity = 0
            for i, table in enumerate(reversed(tables)):
                parity ^= table[(padded_m >> (8 * i)) & 0xFF]
            word = (m << r) | parity
            if spread is None:
                coded = (coded << n) | word
                continue
            i = c % depth
            if i == 0:
                coded <<= depth * n
            placed = 0
            for b in range(0, n, 8):
                placed |= spread[(word >> b) & 0xFF] << (b * depth)
            coded |= placed << (depth - 1 - i)
        out.append(coded.to_bytes(out_bytes, "big"))
    return b"".join(out)[: coded_bytes(code, depth, len(message))]


def _gcd8(x: int) -> int:
    """gcd(8, x) for x >= 1."""
    return 8 if x % 8 == 0 else 4 if x % 4 == 0 else 2 if x % 2 == 0 else 1


# ---- frames --------------------------------------------------------------------------------------

def header_record(code: SmallCode, depth: int, seq: int, length: int, last: bool, stream_id: int,
                  position: int, keyed: bool) -> bytes:
    """The 30-byte version 2 record of a data frame (FrameHeader.record)."""
    flags = (FLAG_LAST if last else 0) | (FLAG_KEYED if keyed else 0)
    body = (struct.pack(">BBBBQI", FORMAT_VERSION, flags, code.code_id, depth, stream_id, seq)
            + (position % (1 << POSITION_BITS)).to_bytes(6, "big") + struct.pack(">I", length))
    return body + struct.pack(">I", crc32c(body))


def encode_frame(code: SmallCode, depth: int, seq: int, payload: bytes, last: bool, stream_id: int,
                 position: int, key: bytes | None = None) -> bytes:
    """marker | header | coded(payload + CRC-32C [+ tag]) | header copy (format.encode_frame)."""
    record = header_record(code, depth, seq, len(payload), last, stream_id, position, key is not None)
    header = encode_segment(SMALL_CODES[HEADER_CODE], HEADER_DEPTH, record)
    message = payload + struct.pack(">I", crc32c(payload))
    if key is not None:
        import hashlib  # here: hashlib loads OpenSSL, which an unkeyed run never needs
        import hmac

        message += hmac.new(key, record[:-CRC_BYTES] + payload, hashlib.sha256).digest()[:TAG_BYTES]
    return MARKER_BYTES + header + encode_segment(code, depth, message) + header


class SmallFrameWriter:
    """FrameWriter's frames for a byte stream, in plain Python (module docstring).

    Cuts what is written into frames of frame_bytes, holds one full frame back until more
    data or close() arrives, so the last frame carries the closing flag, and sends an empty
    closing frame for an empty stream. No flush(), records or repair frames: those need the
    normal writer."""

    def __init__(self, sink: BinaryIO, code: str = DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
                 frame_bytes: int = DEFAULT_FRAME_BYTES, stream_id: int | None = None,
                 key: bytes | None = None) -> None:
        chosen = small_code(code)
        if chosen is None:
            raise SettingError(f"{code!r} is not one of the codes written without numpy: "
                               + ", ".join(SMALL_CODES))
        if not 1 <= depth <= MAX_DEPTH:
            raise SettingError(f"depth must be 1..{MAX_DEPTH}, got {depth}")
        if not 1 <= frame_bytes <= MAX_PAYLOAD_BYTES:
            raise SettingError(f"frame size must be 1..{MAX_PAYLOAD_BYTES} bytes, got {frame_bytes}")
        if stream_id is not None and not 0 <= stream_id < 1 << 64:
            raise SettingError(f"stream id must be 0..2^64 - 1, got {stream_id}")
        if key is not None and len(key) < MIN_KEY_BYTES:
            raise SettingError(f"a key must be at least {MIN_KEY_BYTES} bytes, got {len(key)}")
        self._sink = sink
        self._code = chosen
        self._depth = depth
        self._frame_bytes = frame_bytes
        self._key = None if key is None else bytes(key)
        # the system's secure random source, as FrameWriter's secrets.randbits(64) (without importing
        # secrets, which pulls in random and hashlib)
        self.stream_id = int.from_bytes(os.urandom(8), "big") if stream_id is None else stream_id
        self._pending = bytearray()
        self._seq = 0
        self._position = 0
        self.bytes_in = 0
        self.bytes_out = 0
        self.closed = False

    def _emit(self, payload: bytes, last: bool) -> None:
        frame = encode_frame(self._code, self._depth, self._seq, payload, last, self.stream_id, self._position,
                             self._key)
        self._sink.write(frame)
        self.bytes_out += len(frame)
        self._seq = (self._seq + 1) % SEQ_MODULUS
        self._position += len(payload)

    def write(self, data: bytes) -> int:
        if self.closed:
            raise ValueError("write to a closed frame writer")
        self._pending += data
        self.bytes_in += len(data)
        size, start = self._frame_bytes, 0
        while len(self._pending) - start > size:  # strictly more: keep one frame back
            self._emit(bytes(self._pending[start: start + size]), last=False)
            start += size
        del self._pending[:start]
        return len(data)

    def close(self) -> None:
        """Send the closing frame (the held data, possibly empty) and flush the sink."""
        if self.closed:
            return
        self._emit(bytes(self._pending), last=True)
        self._pending.clear()
        self.closed = True
        self._sink.flush()


def encode_small(data: bytes, code: str = DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
                 frame_bytes: int = DEFAULT_FRAME_BYTES, stream_id: int | None = None,
                 key: bytes | None = None) -> bytes:
    """A whole container for data, as api.encode_bytes would write it with these settings."""
    import io

    sink = io.BytesIO()
    writer = SmallFrameWriter(sink, code, depth, frame_bytes, stream_id, key)
    writer.write(data)
    writer.close()
    return sink.getvalue()
