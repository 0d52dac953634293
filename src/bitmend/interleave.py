"""Coded segments: bytes -> k-symbol messages -> codewords -> interleaved groups, and back.

A segment holds G groups of D codewords. Message symbols are taken from the input bytes in
order (k per codeword, zero-padded to G*D*k), and codeword i of a group places its symbol
j at group symbol j*D + i. A symbol is a bit for binary codes (the generic engine and
BCH) and a byte for Reed-Solomon codes. Any run of D*t consecutive channel symbols inside
one group therefore hits every codeword of that group at most t times, which the code
corrects.

Codes of the generic binary engine (`code.generic_engine`, k <= 64) run through the fused
word kernels (kernels.fused, kernels.blockcode). Every other code goes through its row
kernels (`BlockCode.encode_rows`, `decode_rows`): this module moves its symbols between
the stream and codeword rows, bits or bytes by `code.symbol_bits`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from bitmend.codes.base import BlockCode
from bitmend.codes.linear import BinaryLinearCode
from bitmend.kernels import cyclic_small, small
from bitmend.kernels.loader import compiled, compiled_cyclic, compiled_unless_small
from bitmend.kernels.status import FAILED, MarkedRows, kept_statuses, marked_rows, status_buffer, taken_statuses
from bitmend.once import once

Tally = tuple[np.ndarray, np.ndarray]  # kernels.tally.status_tally's (counts per row, failed blocks per row)


@dataclass(frozen=True)
class SegmentLayout:
    """Sizes of the coded segment that carries message_bytes bytes."""

    groups: int
    depth: int
    n: int  # symbols per codeword
    k: int  # message symbols per codeword
    symbol_bits: int = 1  # 1 for binary codes, 8 for Reed-Solomon

    @property
    def blocks(self) -> int:
        return self.groups * self.depth

    @property
    def block_bits(self) -> int:
        """Coded bits of one codeword."""
        return self.n * self.symbol_bits

    @property
    def block_message_bits(self) -> int:
        return self.k * self.symbol_bits

    @property
    def group_bits(self) -> int:
        return self.depth * self.block_bits

    @once
    def coded_bits(self) -> int:
        return self.blocks * self.block_bits

    @once
    def coded_bytes(self) -> int:
        return (self.coded_bits + 7) // 8


def layout(code: BlockCode, depth: int, message_bytes: int) -> SegmentLayout:
    """The layout of a segment of `code` at `depth` carrying message_bytes bytes."""
    return sized_layout(code.n, code.k, code.symbol_bits, depth, message_bytes)


@lru_cache(maxsize=256)
def sized_layout(n: int, k: int, symbol_bits: int, depth: int, message_bytes: int) -> SegmentLayout:
    """G = ceil(8 * message_bytes / (D k s)) groups (s bits per symbol); at least one, so
    every segment carries a check. Needs only the code's sizes (a reader sizes a frame of a
    code defined in the stream before it has read the definition)."""
    per_group = depth * k * symbol_bits
    groups = max(1, -(-8 * message_bytes // per_group))
    return SegmentLayout(groups, depth, n, k, symbol_bits)


CHUNK_BLOCKS = 1 << 16  # codewords per compiled call: bounds the temporary arrays to about 2 MiB


def _chunks(lay: SegmentLayout) -> list[tuple[int, int]]:
    """(first group, group count) pieces of a segment. Pieces start at multiples of 64
    groups, so every piece starts on a word boundary of both the message and the coded
    stream (64 * D * k and 64 * D * n bits)."""
    step = max(64, CHUNK_BLOCKS // lay.depth // 64 * 64)
    return [(first, min(step, lay.groups - first)) for first in range(0, lay.groups, step)]


def encode_segment(code: BlockCode, depth: int, message: bytes) -> bytes:
    """Encode and interleave message; returns layout(...).coded_bytes bytes."""
    coded = _coded(code, depth, message)
    return coded if isinstance(coded, bytes) else coded.tobytes()


def _coded(code: BlockCode, depth: int, message: bytes | np.ndarray) -> bytes | np.ndarray:
    """encode_segment's bytes; from the fused kernels, a uint8 view of their output buffer
    instead (no copy to bytes, which encode_segments would only copy again). The generic
    engine runs in the numpy twins for small work, else in the compiled kernels."""
    lay = layout(code, depth, len(message))
    engine = code.generic_engine
    if engine is None:
        return _encode_rows_segment(code, lay, bytes(message))
    if compiled(lay.coded_bits) is None:
        return small.encode(message, engine.P, depth, lay.groups)
    if (depth == 1 or depth % 8 == 0) and _plan(engine, depth).encode_kind != "words":
        return _encode_fused_words(engine, lay, message).view(np.uint8)[: lay.coded_bytes]
    return _encode_words(engine, lay, message)


def _encode_words(code: BinaryLinearCode, lay: SegmentLayout, message: bytes) -> bytes:
    """encode_segment through kernels.blockcode (any depth)."""
    bitfields, blockcode = compiled(lay.coded_bits)
    depth = lay.depth
    source = bitfields.to_words(message, lay.blocks * code.k)
    out = bitfields.empty_words(lay.coded_bits)
    if lay.blocks <= CHUNK_BLOCKS:  # one call (headers, frames): no piece list
        blockcode.encode_run(source, lay.blocks, code.k, code.r, depth, code.parity_table, out)
        return bitfields.to_bytes(out, lay.coded_bytes)
    for first, groups in _chunks(lay):
        blockcode.encode_run(source[first * depth * code.k // 64:], groups * depth, code.k, code.r, depth,
                             code.parity_table, out[first * depth * code.n // 64:])
    return bitfields.to_bytes(out, lay.coded_bytes)


def encode_segments(code: BlockCode, depth: int, messages: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """encode_segment of every row of messages (count, message_bytes uint8), as the rows of
    out (a (count, coded_bytes) uint8 array or view, made when not given): the same bytes.

    When a segment's groups fill whole bytes, both of message (padded with the zeros it is
    padded with anyway) and of code, the segments laid end to end are one segment of count
    times as many groups: one kernel call codes them all."""
    count, message_bytes = messages.shape
    lay = layout(code, depth, message_bytes)
    if out is None:
        out = np.empty((count, lay.coded_bytes), dtype=np.uint8)
    if count == 0:
        return out
    padded = _padded_message_bytes(lay)
    if padded is not None:
        if padded != message_bytes:  # the zeros a segment is padded with anyway, made explicit
            whole = np.zeros((count, padded), dtype=np.uint8)
            whole[:, :message_bytes] = messages
            messages = whole
        flat = np.ascontiguousarray(messages).reshape(-1)
        if not _encode_in_place(code, lay, flat, out):  # else coded into a buffer of its own, then copied
            out[:] = _coded_array(code, depth, flat).reshape(count, -1)
        return out
    for i in range(count):
        out[i] = _coded_array(code, depth, messages[i])
    return out


def _encode_in_place(code: BlockCode, lay: SegmentLayout, messages: np.ndarray, out: np.ndarray) -> bool:
    """Code the padded messages of out's rows (end to end in messages) straight into
    out's rows when the linear kernels can (_linear_row_steps); False, nothing written,
    otherwise."""
    row_steps = _linear_row_steps(code, lay, out, decoding=False)
    if row_steps is None:
        return False
    engine = code.generic_engine
    plan, m = _plan(engine, lay.depth), _octets_per_step(engine)
    encode = _fused().linear_encoder(m * engine.k, plan.encode_table.shape[2])
    encode(_input(messages), len(messages), out.shape[0] * row_steps, row_steps, out.strides[0], m * engine.k,
           m * engine.n, plan.encode_table, _row_span(out))
    return True


def _linear_row_steps(code: BlockCode, lay: SegmentLayout, rows: np.ndarray, decoding: bool) -> int | None:
    """Table steps per row when the linear kernels code the rows of `rows` (count, coded
    bytes of lay) where they lie, rows apart (frames' coded payloads): the code is on those
    kernels at this depth (n <= LINEAR_MAX_N), they are loaded for work this size, and
    each row is whole table steps, coded and message bytes alike, of consecutive bytes.
    Else None (the rows are gathered into, or copied out of, one segment)."""
    engine = code.generic_engine
    count, width = rows.shape
    if (engine is None or rows.strides[1] != 1 or rows.strides[0] < width or lay.depth % 8 and lay.depth != 1
            or compiled_unless_small(lay.coded_bits * count) is None):
        return None
    plan = _plan(engine, lay.depth)
    m = _octets_per_step(engine)
    if ((plan.decode_kind if decoding else plan.encode_kind) != "linear" or width % (m * engine.n)
            or _padded_message_bytes(lay) % (m * engine.k)):
        return None
    return width // (m * engine.n)


def _row_span(rows: np.ndarray) -> np.ndarray:
    """The bytes of a 2-D array of byte rows (consecutive within a row), from the first
    row's start to the last row's end, as one 1-D view."""
    count, width = rows.shape
    return np.lib.stride_tricks.as_strided(rows, shape=((count - 1) * rows.strides[0] + width,), strides=(1,))


def _input(data: bytes | bytearray | memoryview | np.ndarray) -> np.ndarray:
    """data as a C-contiguous, read-only uint8 array for a kernel to read (a copy only when
    data is a strided array). numba compiles and caches a kernel once per type of its
    arguments, and an array's read-only flag is part of its type: input from bytes (read
    only) and from a bytearray or an array (writable) compiled and cached every kernel
    twice, seconds each on a cold cache and a second cache entry to load in a process that
    met both. The kernels never write their input."""
    raw = np.ascontiguousarray(data if isinstance(data, np.ndarray) else np.frombuffer(data, dtype=np.uint8))
    if raw.flags.writeable:
        raw = raw.view()
        raw.flags.writeable = False
    return raw


def _coded_array(code: BlockCode, depth: int, message: np.ndarray) -> np.ndarray:
    coded = _coded(code, depth, message)
    return np.frombuffer(coded, dtype=np.uint8) if isinstance(coded, bytes) else coded


def message_row_bytes(code: BlockCode, depth: int, message_bytes: int) -> int:
    """The width to give rows of messages for encode_segments so that it codes them as
    they are: message_bytes padded with zeros to whole groups when segments of this layout
    lie end to end (see _padded_message_bytes), else message_bytes. A row of that width,
    its padding zero, codes to the same bytes as the unpadded message."""
    padded = _padded_message_bytes(layout(code, depth, message_bytes))
    return message_bytes if padded is None else padded


def _padded_message_bytes(lay: SegmentLayout) -> int | None:
    """Bytes of a segment's message padded to its whole groups, when both that and the
    coded segment are whole bytes: segments of this layout then lie end to end as one
    segment of as many more groups (each group codes alone), else None."""
    message_bits = lay.groups * lay.depth * lay.block_message_bits
    if message_bits % 8 or lay.coded_bits % 8:
        return None
    return message_bits // 8


def decode_segment(code: BlockCode, depth: int, coded: bytes | np.ndarray,
                   message_bytes: int) -> tuple[bytes, np.ndarray]:
    """De-interleave and correct a segment carrying message_bytes bytes.

    coded may be shorter than the layout (a truncated stream); missing bits read as zero.
    Returns (message bytes, per-block status: 0 clean, w corrected, FAILED uncorrectable).
    """
    message, status = _decoded(code, depth, coded, message_bytes)
    return (message if isinstance(message, bytes) else message.tobytes()), status


def _decoded(code: BlockCode, depth: int, coded: bytes | np.ndarray,
             message_bytes: int) -> tuple[bytes | np.ndarray, np.ndarray]:
    """decode_segment's work; the message as the kernel left it (bytes, or a uint8 array
    that decode_segments uses without another copy)."""
    lay = layout(code, depth, message_bytes)
    raw = np.frombuffer(coded, dtype=np.uint8) if not isinstance(coded, np.ndarray) else coded
    engine = code.generic_engine
    if engine is None:
        return _decode_rows_segment(code, lay, raw, message_bytes)
    return _decode_engine(engine, lay, raw, message_bytes)


def decode_segments(code: BlockCode, depth: int, coded: np.ndarray,
                    message_bytes: int) -> tuple[np.ndarray, np.ndarray]:
    """decode_segment of every row of coded (count, coded_bytes uint8): (messages as a
    (count, message_bytes) array, per-block status as a (count, blocks) array). Rows laid
    end to end are decoded in one call when their groups fill whole bytes (see
    encode_segments); otherwise row by row."""
    messages, status, _ = decode_segments_tallied(code, depth, coded, message_bytes, None)
    return messages, status


def decode_segments_tallied(code: BlockCode, depth: int, coded: np.ndarray, message_bytes: int,
                            listed: int | None) -> tuple[np.ndarray, np.ndarray | MarkedRows, Tally | None]:
    """decode_segments, and when the fused kernels marked statuses, their tally per row
    (kernels.tally.status_tally's, with `listed` failed blocks a row): counted by the linear
    kernels as they mark them, or in the pass that gives the status buffer back. None when
    every block is clean or no fused kernel decoded the rows (the caller counts the statuses).
    The statuses of a run the linear kernels decoded with few marks come as MarkedRows
    (indexed and iterated as the array; np.asarray makes it)."""
    count = coded.shape[0]
    lay = layout(code, depth, message_bytes)
    padded = _padded_message_bytes(lay)
    if padded is not None and count and coded.shape[1] == lay.coded_bytes:
        row_steps = _linear_row_steps(code, lay, coded, decoding=True)
        tally = None
        if row_steps is not None:  # the rows read where they lie: no gathered copy of them
            message, status, tally = _decode_linear(code.generic_engine, layout(code, depth, count * padded),
                                                    _row_span(coded), row_steps, coded.strides[0], count * padded,
                                                    listed)
        else:
            message, status, tally = _decoded_tallied(code, depth, np.ascontiguousarray(coded).reshape(-1),
                                                      count * padded, count, listed)
        if isinstance(message, bytes):
            message = np.frombuffer(message, dtype=np.uint8)
        messages = message.reshape(count, padded)[:, :message_bytes]
        return messages, status if isinstance(status, MarkedRows) else status.reshape(count, -1), tally
    messages = np.empty((count, message_bytes), dtype=np.uint8)
    status = np.empty((count, lay.blocks), dtype=np.uint8)
    for i in range(count):
        message, status[i] = decode_segment(code, depth, coded[i], message_bytes)
        messages[i] = np.frombuffer(message, dtype=np.uint8)
    return messages, status, None


def _decoded_tallied(code: BlockCode, depth: int, raw: np.ndarray, message_bytes: int, rows: int,
                     listed: int | None) -> tuple[bytes | np.ndarray, np.ndarray, Tally | None]:
    """_decoded of `rows` segments end to end, with their statuses' tally per row when the
    fused kernels marked some (see decode_segments_tallied)."""
    engine = code.generic_engine
    lay = layout(code, depth, message_bytes)
    if (listed is None or engine is None or depth != 1 and depth % 8
            or compiled_unless_small(lay.coded_bits) is None):
        return (*_decoded(code, depth, raw, message_bytes), None)
    return _decode_fused(engine, lay, raw, message_bytes, (rows, listed))


def _decode_engine(code: BinaryLinearCode, lay: SegmentLayout, raw: np.ndarray,
                   message_bytes: int) -> tuple[bytes | np.ndarray, np.ndarray]:
    """decode_segment for the generic engine: numpy twins for small work, else fused kernels."""
    depth = lay.depth
    kernels = compiled(lay.coded_bits)
    if kernels is None:
        lead_m, _, weight = code.leader_tables
        return small.decode(raw[: lay.coded_bytes], code.P, depth, lay.groups, lead_m, weight, message_bytes)
    if depth == 1 or depth % 8 == 0:
        return _decode_fused(code, lay, raw, message_bytes)[:2]
    return _decode_words(code, lay, raw, message_bytes)


def _decode_words(code: BinaryLinearCode, lay: SegmentLayout, raw: np.ndarray,
                  message_bytes: int) -> tuple[bytes, np.ndarray]:
    """decode_segment through kernels.blockcode (any depth)."""
    depth = lay.depth
    lead_m, lead_p, weight = code.leader_tables
    bitfields, blockcode = compiled(lay.coded_bits)
    source = bitfields.to_words(raw[: lay.coded_bytes], lay.coded_bits)
    out = bitfields.empty_words(lay.blocks * code.k)
    if lay.blocks <= CHUNK_BLOCKS:  # one call (headers, frames): no piece list
        status = blockcode.decode_run(source, code.k, code.r, depth, lay.blocks, code.parity_table, lead_m, lead_p,
                                      weight, code.word_table, out)
        return bitfields.to_bytes(out, message_bytes), status
    status = [blockcode.decode_run(source[first * depth * code.n // 64:], code.k, code.r, depth, groups * depth,
                                   code.parity_table, lead_m, lead_p, weight, code.word_table,
                                   out[first * depth * code.k // 64:])
              for first, groups in _chunks(lay)]
    return bitfields.to_bytes(out, message_bytes), status[0] if len(status) == 1 else np.concatenate(status)


# ---- the fused kernels: depth 1 and depths that are multiples of 8 ----------------------------------
#
# An octet is 8 consecutive codewords: k message bytes in, n coded bytes out, both at depth 1
# (codewords concatenated) and at depth 8 (byte j of the octet is bit j of its 8 codewords).
# Short codes (n <= LINEAR_MAX_N[depth]) treat an octet as one linear map of its bytes
# (kernels.fused.encode_linear / decode_linear, tables of at most 147 KiB); codes of whole
# message bytes and at most 8 check bits take byte tables (kernels.bytetable: at depth 1
# when r = 8, and at depth 8); at depth 1, codes whose pairs of codewords are whole bytes
# (k, n multiples of 4, k <= 12) go a pair at a time; other longer codes at depth 1 go
# codeword by codeword (unaligned loads and stores); at depths 8L they encode by 8x8
# transposes, and at depth 8 with n <= 64 decode that way too; the rest (n > 57 at depth 1 off the byte tables,
# decoding at depths 16, 24, ... and of n > 64) through kernels.blockcode.

LINEAR_MAX_N = {1: 16, 8: 24}  # per depth: measured faster than the codeword kernels up to this n
TABLE_MESSAGE_BITS = 12  # a message of up to 12 bits finds its parity in one lookup


@dataclass(frozen=True)
class _Plan:
    """How one code at one depth runs, with its tables. Kinds in kernels.fused: "linear"
    (byte tables of the octet map), "depth1" (codeword by codeword through unaligned
    loads), "octets" (encoding by 8x8 transposes); in kernels.bytetable, "bytes" (check
    bytes from byte tables) and "pairs" (two codewords on whole bytes); or "words"
    (kernels.blockcode, through byte-swapped word buffers)."""

    encode_kind: str
    decode_kind: str
    encode_table: np.ndarray  # linear: (k, 256, words); bytes: (k / 8, 256) check bytes; else the parity table
    decode_table: np.ndarray  # linear: (n, 256, words); else unused
    syndrome_mask: np.ndarray  # linear only
    chunk_bits: int
    leader_message: np.ndarray
    leader_weight: np.ndarray


@lru_cache(maxsize=128)
def _plan(code: BinaryLinearCode, depth: int) -> _Plan:
    lead_m, _, weight = code.leader_tables
    empty = np.zeros(1, dtype=np.uint64)
    k, n = code.k, code.n
    if n <= LINEAR_MAX_N.get(depth, 0):
        encode, decode, mask = _linear_tables(code, depth)
        return _Plan("linear", "linear", encode, decode, mask, 0, lead_m, weight)
    chunked = code.parity_table
    if k <= TABLE_MESSAGE_BITS:  # one lookup: the parity of every k-bit message
        values = np.arange(1 << k, dtype=np.uint64)
        whole = np.zeros(1 << k, dtype=np.uint64)
        for c in range(chunked.shape[0]):
            whole ^= chunked[c, (values >> np.uint64(8 * c)) & np.uint64(0xFF)]
        ptab, chunk_bits = whole.reshape(1, -1), k
    else:
        ptab, chunk_bits = chunked, 8
    if code.r <= 32:  # half the cache footprint (golay's 4096 parities: 16 KiB)
        ptab = ptab.astype(np.uint32)
    # measured on 1 MiB segments (one core, A/B in one process): codeword by codeword
    # through unaligned loads beat kernels.blockcode at depth 1 by 1.3x to 1.5x (golay,
    # hamming-31-26, secded-39-32: a codeword is one load, n <= 57); at depths 8L
    # encode_octets beat it by 1.2x to 1.7x (encode_octet8 at depth 8 by another 1.3x to 1.6x), and
    # decode_octet8 beat it by 1.4x to 1.6x at depth 8 (the linear tables still beat both
    # up to n = 24). Longer codes stay on kernels.blockcode at depth 1: the codeword
    # kernel reads them as two fields and ran 0.9x to 1.0x of it (hamming-63-57).
    # Codes of whole message bytes and one check byte (secded-72-64 at depths 1 and 8,
    # secded-39-32 at depth 8) take kernels.bytetable: against the kernels above, in 1 MiB
    # segments, secded-72-64 encoded and decoded about 4x faster at depth 1 and 2.5x / 3.5x
    # at depth 8, secded-39-32 at depth 8 1.6x / 1.4x (before the depth-8 transposes moved
    # to vector registers, which doubled secded-72-64's encoding there again).
    if _byte_code(code, depth):
        return _Plan("bytes", "bytes", _check_tables(code), empty, empty, 8, lead_m, weight)
    # Two codewords on whole bytes (golay-24-12 at depth 1: 3 message bytes, 6 coded bytes)
    # take kernels.bytetable's pair kernels: 4.8x / 3.5x the codeword kernel (enc / dec, 1 MiB).
    if depth == 1 and k % 4 == 0 and n % 4 == 0 and chunk_bits == k and n <= 32:
        return _Plan("pairs", "pairs", ptab, empty, empty, chunk_bits, lead_m, weight)
    if depth == 1:
        kind = "depth1" if n <= 57 else "words"
        return _Plan(kind, kind, ptab, empty, empty, chunk_bits, lead_m, weight)
    decode = "octets" if depth == 8 and n <= 64 else "words"  # decode_octet8: depth 8, a codeword per word
    return _Plan("octets", decode, ptab, empty, empty, chunk_bits, lead_m, weight)


def _byte_code(code: BinaryLinearCode, depth: int) -> bool:
    """Whether `code` at `depth` runs on kernels.bytetable: messages of whole bytes and the
    check bits in one byte, at depth 1 (r = 8: a codeword is whole bytes) or depth 8 (r <= 8:
    an octet is k message slices of 8 bytes and r check bytes)."""
    if code.k % 8 or code.n <= LINEAR_MAX_N.get(depth, 0):
        return False
    return code.r == 8 if depth == 1 else depth == 8 and code.r <= 8


@lru_cache(maxsize=64)
def _check_tables(code: BinaryLinearCode) -> np.ndarray:
    """kernels.bytetable's tables T[j, v]: the parity of message byte j (stream order) holding
    v, left-aligned in a byte, as (k / 8, 256) uint8. The parity table's chunk c holds
    integer bits 8c .. 8c+7 of the message, so stream byte j is its chunk k / 8 - 1 - j."""
    return np.ascontiguousarray((code.parity_table[::-1] << np.uint64(8 - code.r)).astype(np.uint8))


def _octet_position(q: int, j: int, n: int, depth: int) -> int:
    """Stream bit, within a step of octets, of bit j of the step's codeword q: codewords
    concatenated at depth 1; at depth 8, octet q // 8 takes n bytes, and its byte j holds
    bit j of its 8 codewords."""
    return q * n + j if depth == 1 else 8 * n * (q // 8) + 8 * j + q % 8


def _vector_words(bits: list[int], nbits: int = 192) -> np.ndarray:
    """A set of bit positions (0 = first) as a 3-word vector, first bit most significant."""
    value = 0
    for b in bits:
        value ^= 1 << (nbits - 1 - b)
    return np.array([(value >> (128 - 64 * w)) & ((1 << 64) - 1) for w in range(3)], dtype=np.uint64)


def _byte_tables(units: np.ndarray, words: int) -> np.ndarray:
    """(8 * count, 3) unit vectors, one per input bit (first bit of each byte most
    significant) -> (4 * ceil(count / 4), 256, words) tables: the XOR of the units of the
    bits set in a byte value, first `words` words; rows past count are zero, so the
    kernels may look up whole quads of bytes."""
    count = units.shape[0] // 8
    table = np.zeros((-(-count // 4) * 4, 256, 3), dtype=np.uint64)
    values = np.arange(256)
    for pos in range(count):
        for b in range(8):
            has = ((values >> (7 - b)) & 1).astype(bool)
            table[pos, has] ^= units[8 * pos + b]
    return np.ascontiguousarray(table[:, :, :words])


def _octets_per_step(code: BinaryLinearCode) -> int:
    """Octets coded per table step. One, except for codes of n <= 3 (rep-3), whose octet
    is a single message byte: they take as many octets as fill 24 coded bytes (three
    words), trading wider table rows for fewer steps. For hamming-7-4 and secded-8-4 the
    wider rows cost more than the steps they save (one word per input byte instead of
    three)."""
    return 24 // code.n if code.n <= 3 else 1


@lru_cache(maxsize=64)
def _linear_tables(code: BinaryLinearCode, depth: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(encode table, decode table, syndrome mask) of the octet maps of a short code at
    depth 1 or 8; an octet's n bytes fill ceil(n / 8) words.

    Encode: message bit i of the octet (codeword q = i // k, bit j = i % k) is row j of
    G = [I | P], placed at codeword q's stream positions. Decode: received bit j of
    codeword q goes to message bit q*k + j (j < k) and, as P row j (j < k) or as parity
    bit j - k, into syndrome q at bits 8k + q*r .. 8k + q*r + r - 1 of the result, so
    the result is the 8 received messages followed by their 8 syndromes."""
    k, r, n = code.k, code.r, code.n
    m = _octets_per_step(code)
    P = code.P
    enc_units = np.zeros((8 * m * k, 3), dtype=np.uint64)
    for i in range(8 * m * k):
        q, j = divmod(i, k)
        bits = [_octet_position(q, j, n, depth)]
        bits += [_octet_position(q, k + c, n, depth) for c in range(r) if P[j, c]]
        enc_units[i] = _vector_words(bits)
    dec_units = np.zeros((8 * m * n, 3), dtype=np.uint64)
    syndromes = 8 * m * k  # first bit of the syndromes in a decoded step
    for q in range(8 * m):
        for j in range(n):
            if j < k:
                bits = [q * k + j] + [syndromes + q * r + c for c in range(r) if P[j, c]]
            else:
                bits = [syndromes + q * r + (j - k)]
            dec_units[_octet_position(q, j, n, depth)] = _vector_words(bits)
    words = -(-m * n // 8)
    return (_byte_tables(enc_units, words), _byte_tables(dec_units, words),
            _vector_words(list(range(syndromes, 8 * m * n))))


@lru_cache(maxsize=None)
def _bytetable():
    """kernels.bytetable, imported once it is needed (it loads numba)."""
    from bitmend.kernels import bytetable

    return bytetable


@lru_cache(maxsize=None)
def _fused():
    """kernels.fused, imported once it is needed (it loads numba)."""
    from bitmend.kernels import fused

    return fused


def _native(nbits: int) -> np.ndarray:
    """Uninitialised native word buffer for nbits; the fused writers store every word."""
    return np.empty((nbits + 63) // 64 + 2, dtype=np.uint64)


def _encode_fused_words(code: BinaryLinearCode, lay: SegmentLayout, message: bytes | np.ndarray) -> np.ndarray:
    """The fused kernels' native word buffer holding the coded segment (plans other than "words")."""
    fused = _fused()
    plan = _plan(code, lay.depth)
    k, n = code.k, code.n
    raw = _input(message)  # contiguous: most kernels read through the buffer's address
    if plan.encode_kind == "bytes":
        out = _native(lay.coded_bits)
        bytetable = _bytetable()
        if lay.depth == 1:
            bytetable.encode_depth1(raw, len(raw), lay.blocks, k // 8, plan.encode_table, out.view(np.uint8))
        else:
            bytetable.encode_octet8(raw, len(raw), lay.groups, k // 8, code.r, plan.encode_table, out.view(np.uint8))
    elif plan.encode_kind == "linear":
        m = _octets_per_step(code)
        steps = -(-lay.blocks // (8 * m))
        out = _native(steps * 8 * m * n)
        encode = fused.linear_encoder(m * k, plan.encode_table.shape[2])
        encode(raw, len(raw), steps, steps, steps * m * n, m * k, m * n, plan.encode_table, out.view(np.uint8))
    elif plan.encode_kind == "pairs":
        out = _native(lay.coded_bits)
        _bytetable().encode_pairs(raw, len(raw), lay.blocks, k, code.r, plan.encode_table, out.view(np.uint8))
    elif plan.encode_kind == "depth1":
        out = _native(lay.coded_bits)
        fused.encode_depth1(raw, len(raw), lay.blocks, k, code.r, plan.encode_table, plan.chunk_bits,
                            out.view(np.uint8))
    elif lay.depth == 8:  # one octet per group, its bytes consecutive: whole-word stores
        out = _native(lay.coded_bits)
        fused.encode_octet8(raw, len(raw), lay.groups, k, code.r, plan.encode_table, plan.chunk_bits,
                            out.view(np.uint8))
    else:
        src = fused.native_words(raw, lay.blocks * k)
        out = _native(lay.coded_bits)
        fused.encode_octets(src, lay.groups, lay.depth // 8, k, code.r, plan.encode_table, plan.chunk_bits, out)
    return out


def _decode_fused(code: BinaryLinearCode, lay: SegmentLayout, raw: np.ndarray, message_bytes: int,
                  tally_rows: tuple[int, int] | None = None) -> tuple[bytes | np.ndarray, np.ndarray, Tally | None]:
    """(message, statuses, tally): with tally_rows = (rows, listed), the statuses' tally
    as that many rows when some were marked (taken_statuses; the linear kind: see
    _decode_linear), else None."""
    fused = _fused()
    plan = _plan(code, lay.depth)
    k, n = code.k, code.n
    if plan.decode_kind == "words":
        return (*_decode_words(code, lay, raw, message_bytes), None)
    if plan.decode_kind == "linear":  # gives its status buffer back itself, and tallies its marks
        steps = -(-lay.blocks // (8 * _octets_per_step(code)))
        rows, listed = tally_rows if tally_rows is not None else (1, None)
        return _decode_linear(code, lay, raw, steps, steps * _octets_per_step(code) * n, message_bytes, listed, rows)
    if plan.decode_kind == "pairs":
        status = status_buffer(lay.blocks)
        out = _native(lay.blocks * k)
        _bytetable().decode_pairs(_input(raw), min(len(raw), lay.coded_bytes), lay.blocks, k, code.r,
                                  plan.encode_table, plan.leader_message, plan.leader_weight, status,
                                  out.view(np.uint8))
    elif plan.decode_kind == "bytes":
        status = status_buffer(lay.blocks)
        out = _native(lay.blocks * k)
        bytetable = _bytetable()
        if lay.depth == 1:
            bytetable.decode_depth1(_input(raw), min(len(raw), lay.coded_bytes), lay.blocks, k // 8,
                                    plan.encode_table, plan.leader_message, plan.leader_weight, status,
                                    out.view(np.uint8))
        else:
            bytetable.decode_octet8(_input(raw), min(len(raw), lay.coded_bytes), lay.groups, k // 8,
                                    code.r, plan.encode_table, plan.leader_message, plan.leader_weight, status,
                                    out.view(np.uint8))
    elif plan.decode_kind == "octets":
        status = status_buffer(lay.blocks)
        out = _native(lay.blocks * k)
        fused.decode_octet8(_input(raw), min(len(raw), lay.coded_bytes), lay.groups, k, code.r,
                            plan.encode_table, plan.chunk_bits, plan.leader_message, plan.leader_weight, status,
                            out.view(np.uint8))
    else:  # depth1
        status = status_buffer(lay.blocks)
        out = _native(lay.blocks * k)
        fused.decode_depth1(_input(raw), min(len(raw), lay.coded_bytes), lay.blocks, k, code.r,
                            plan.encode_table, plan.chunk_bits, plan.leader_message, plan.leader_weight, status,
                            out.view(np.uint8))
    # every kind here marked a status_buffer of lay.blocks statuses
    message = out.view(np.uint8)[:message_bytes]
    if tally_rows is not None and np.count_nonzero(status):
        kept, tally = taken_statuses(status, *tally_rows)
        return message, kept, tally
    return message, kept_statuses(status, marked=None if tally_rows is None else False), None


# counts and failed places of one row that nobody reads (segments decoded one at a time):
# two arrays made per 16 KiB segment cost 8% of its decoding (hamming-7-4, measured)
_UNREAD_TALLY = (np.zeros((1, 3), dtype=np.uint64), np.zeros((1, 1), dtype=np.uint64))
_UNLISTED = np.zeros(1, dtype=np.uint64)  # a list of no marks: the kernel writes every status


def _decode_linear(code: BinaryLinearCode, lay: SegmentLayout, raw: np.ndarray, row_steps: int, row_stride: int,
                   message_bytes: int, listed: int | None = None, frames: int | None = None
                   ) -> tuple[np.ndarray, np.ndarray | MarkedRows, Tally | None]:
    """_decode_fused for the linear kind, its rows of row_steps table steps row_stride bytes
    apart in raw (one row: a plain segment; several: frames' coded payloads where they lie,
    raw spanning the first row's start to the last row's end).

    With `listed`, when some statuses were marked: the statuses' tally per frame (the
    rows, or `frames` equal parts of a plain segment: frames' payloads gathered end to
    end), with `listed` failed blocks each, and the statuses as MarkedRows when the
    kernel's list of marks held them all (up to one mark per 8 codewords: no more memory
    than the statuses), else as the array. The kernel counts the tally as it marks, row
    by row, when its rows are the frames and whole steps; else it is counted from the
    marks; else (too many to list) it is None, as without `listed`."""
    plan = _plan(code, lay.depth)
    m, n = _octets_per_step(code), code.n
    steps = -(-lay.blocks // (8 * m))
    status = status_buffer(steps * 8 * m)
    out = _native(steps * 8 * m * code.k)
    decode = _fused().linear_decoder(m * n, plan.decode_table.shape[2])
    length = min(len(raw), lay.coded_bytes) if row_steps == steps else len(raw)
    rows = -(-steps // row_steps)
    parts = frames or rows  # the rows of the statuses and tally
    kernel_rows = parts == rows and rows * row_steps * 8 * m == lay.blocks  # whole steps (no padding): tallied
    if listed is None and rows == 1:  # a segment alone, its tally not wanted: the kernel counts into scratch
        counts, failed = _UNREAD_TALLY
    else:
        counts = np.zeros((rows, 3), dtype=np.uint64)  # the kernel counts what it marks, row by row
        failed = np.empty((rows, max(listed or 0, 1)), dtype=np.uint64)  # and lists the first failed blocks
    if listed is not None:
        marks = np.empty(1 + max(lay.blocks // 8, 64), dtype=np.uint64)
        marks[0] = 0  # the kernel counts its marks here
    else:
        marks = _UNLISTED  # nothing listed, every status written (the count there is never read)
    marked = decode(_input(raw), length, steps, row_steps, row_stride, m * code.k, m * n, code.k, code.r, plan.decode_table,
                    plan.syndrome_mask, plan.leader_message, plan.leader_weight, status, marks, counts, failed,
                    out.view(np.uint8))
    message = out.view(np.uint8)[:message_bytes]
    if not marked:
        return message, kept_statuses(status, marked=False)[: lay.blocks], None
    kernel_tally = (counts.view(np.int64), failed.view(np.int64)) if listed is not None and kernel_rows else None
    if listed is None or int(marks[0]) >= len(marks):  # statuses written to the array
        return message, kept_statuses(status, marked=True)[: lay.blocks], kernel_tally
    kept = marked_rows(status, marks[1: 1 + int(marks[0])], parts, lay.blocks)
    return message, kept, kernel_tally if kernel_tally is not None else kept.tally(listed)


# ---- codes with their own row kernels (BCH, Reed-Solomon) ------------------------------------------

def _symbol_rows(raw: np.ndarray, groups: int, depth: int, n: int) -> np.ndarray:
    """(groups*depth, n) byte-symbol rows from interleaved groups: row g*D + i, symbol j
    is group g's byte j*D + i. Missing bytes read as zero."""
    size = groups * depth * n
    data = raw[:size]
    if data.size < size:
        data = np.concatenate([data, np.zeros(size - data.size, dtype=np.uint8)])
    if depth == 1:
        return data.reshape(groups, n).copy()
    return np.ascontiguousarray(data.reshape(groups, n, depth).transpose(0, 2, 1)).reshape(groups * depth, n)


def _interleave_symbol_rows(rows: np.ndarray, depth: int) -> bytes:
    if depth == 1:
        return rows.tobytes()
    blocks, n = rows.shape
    return rows.reshape(blocks // depth, depth, n).transpose(0, 2, 1).tobytes()


def _bit_rows(code: BlockCode, data: bytes | np.ndarray, blocks: int, width: int, depth: int, kernels) -> np.ndarray:
    """Packed rows of `width` bits for `blocks` codewords read from the stream at depth."""
    if kernels is None:
        return cyclic_small.gather_bits(data, blocks, width, depth, code.row_bytes)
    from bitmend.kernels import bitfields

    return kernels.gather_bits(bitfields.to_words(data, blocks * width), 0, blocks, width, depth, code.row_bytes)


def _bit_stream(rows: np.ndarray, width: int, depth: int, nbytes: int, kernels) -> bytes:
    """The first `width` bits of every row, interleaved at depth, as nbytes stream bytes."""
    if kernels is None:
        return cyclic_small.scatter_bits(rows, width, depth)[:nbytes]
    from bitmend.kernels import bitfields

    out = bitfields.empty_words(rows.shape[0] * width)
    kernels.scatter_bits(rows, width, depth, out)
    return bitfields.to_bytes(out, nbytes)


def _encode_rows_segment(code: BlockCode, lay: SegmentLayout, message: bytes) -> bytes:
    if lay.symbol_bits == 8:
        rows = np.empty((lay.blocks, lay.n), dtype=np.uint8)  # the kernel writes every parity symbol
        rows[:, : lay.k] = np.frombuffer(message.ljust(lay.blocks * lay.k, b"\0"), np.uint8).reshape(lay.blocks, lay.k)
        return _interleave_symbol_rows(code.encode_rows(rows), lay.depth)
    kernels = compiled_cyclic(lay.coded_bits)
    rows = _bit_rows(code, message, lay.blocks, lay.k, 1, kernels)
    code.encode_rows(rows)
    return _bit_stream(rows, lay.n, lay.depth, lay.coded_bytes, kernels)


def _decode_rows_segment(code: BlockCode, lay: SegmentLayout, raw: np.ndarray,
                         message_bytes: int) -> tuple[bytes, np.ndarray]:
    if lay.symbol_bits == 8:
        rows = _symbol_rows(raw, lay.groups, lay.depth, lay.n)
        status = code.decode_rows(rows)
        return rows[:, : lay.k].tobytes()[:message_bytes], status
    kernels = compiled_cyclic(lay.coded_bits)
    rows = _bit_rows(code, raw[: lay.coded_bytes], lay.blocks, lay.n, lay.depth, kernels)
    status = code.decode_rows(rows)
    return _bit_stream(rows, lay.k, 1, message_bytes, kernels), status


def decode_truncated(code: BlockCode, depth: int, coded: bytes | np.ndarray, message_bytes: int,
                     received_bits: int, wanted_bytes: int | None = None) -> tuple[bytes, np.ndarray]:
    """Decode what arrived of a segment cut short after received_bits coded bits.

    Returns (message prefix, status of the blocks decoded). The prefix holds at most
    wanted_bytes (default message_bytes) bytes, all carried by leading blocks that were
    decoded: blocks of the groups that arrived whole and, for Reed-Solomon codes, blocks
    of the group the cut went through, decoded with their missing symbols as erasures
    (2e + f <= n - k) up to the first one that could not be rebuilt. Work and memory
    follow the bits present, not the length the segment would have had."""
    lay = layout(code, depth, message_bytes)
    wanted = message_bytes if wanted_bytes is None else min(wanted_bytes, message_bytes)
    whole = min(lay.groups, received_bits // lay.group_bits)
    raw = np.frombuffer(coded, dtype=np.uint8) if not isinstance(coded, np.ndarray) else coded
    if (code.supports_erasures and lay.symbol_bits == 8 and whole < lay.groups
            and received_bits // 8 > whole * lay.group_bits // 8):
        n, D = lay.n, lay.depth
        rows = _symbol_rows(raw, whole + 1, D, n)
        status = np.empty(rows.shape[0], dtype=np.uint8)
        status[: whole * D] = code.decode_rows(rows[: whole * D])
        arrived = received_bits // 8 - whole * D * n  # symbols of the cut group that arrived
        missing = (np.arange(n)[None, :] * D + np.arange(D)[:, None]) >= arrived
        status[whole * D:] = code.decode_rows(rows[whole * D:], missing)
        failed = np.nonzero(status[whole * D:] == FAILED)[0]
        usable = whole * D + (int(failed[0]) if failed.size else D)
        return rows[:usable, : lay.k].tobytes()[:wanted], status
    covered = min(wanted, whole * lay.depth * lay.block_message_bits // 8)
    if not covered:
        return b"", np.zeros(0, dtype=np.uint8)
    return decode_segment(code, depth, raw, covered)
