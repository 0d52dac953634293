"""Find and decode frames in a byte stream, with bounded memory and resynchronisation.

The scanner keeps a window of the input. While locked it expects the next frame right
where the last one ended and accepts it if its header decodes (or, if that header is hit,
if the header copy at the predicted frame end does). Unlocked, it slides a 64-bit window
one bit at a time and stops where the sync marker matches within a tolerance, then
checks the header there. Bit slips and inserted or lost bytes therefore cost the frames
they touch and the scanner resumes at the next marker.
"""

from __future__ import annotations

import io
import os
import stat
from dataclasses import dataclass, field, replace
from typing import BinaryIO, Iterator

import numpy as np
from bitarray import bitarray

from bitmend.container import format as fmt
from bitmend.interleave import decode_segment, decode_segments_tallied, decode_truncated
from bitmend.kernels import small
from bitmend.kernels.loader import compiled, compiled_loaded
from bitmend.kernels.status import FAILED, MarkedRow, all_clean
from bitmend.once import once

READ_CHUNK = 1 << 20
RUN_FRAMES = 256  # frames at most decoded together in a run (see FrameScanner._run_at)
MAX_RUN_BYTES = 2 << 20  # and at most this much of the window
MAX_LISTED_FAILED = 4096  # failed block indexes listed per frame report
SEARCH_PIECE = 1 << 16  # bytes scanned per marker-search step
SMALL_SEARCH_PIECE = 1 << 11  # the same while the compiled kernels are not loaded
LOOKBACK_BITS = 8 * fmt.MAX_FRAME_WIRE_BYTES  # window kept behind a search, for look-back recovery
MARKER_BITS = 64
MAX_HEADER_BITS = 8 * fmt.MAX_HEADER_BYTES  # a header of any version fits in this many bits
V1_HEADER_BYTES = fmt.HEADER_LAYOUTS[1].coded_bytes  # the smallest header of any version


CLEAN_COUNTS = (0, 0, 0)


def block_counts(status: np.ndarray) -> tuple[int, int, int]:
    """(blocks corrected, symbols corrected, blocks failed) of a frame's block statuses."""
    if all_clean(status):  # the clean frame, the common case: one pass at most
        return CLEAN_COUNTS
    failed = status == FAILED
    return (int(np.count_nonzero((status > 0) & ~failed)), int(status[~failed].sum(dtype=np.int64)),
            int(np.count_nonzero(failed)))


def _counts_of_run(status: np.ndarray) -> tuple[list[tuple[int, int, int]], dict[int, list[int]]]:
    """(block_counts per row, DecodedFrame.failed_blocks of the rows with failed blocks
    when they came with the counts, else an empty dict): clean rows found in one test, the
    others in one sparse compiled pass (or by run_block_counts in numpy)."""
    counts = [CLEAN_COUNTS] * status.shape[0]
    if all_clean(status):  # a clean run, the common case: one pass at most
        return counts, {}
    if compiled_loaded():  # counts and failed positions, one sparse compiled pass over every row
        from bitmend.kernels.tally import status_tally

        return _counts_of_tally(status_tally(np.ascontiguousarray(status), MAX_LISTED_FAILED))
    hit = np.flatnonzero(status.any(axis=1))
    for row, value in zip(hit.tolist(), run_block_counts(status[hit])):
        counts[row] = value
    return counts, {}


def _counts_of_tally(tally: tuple[np.ndarray, np.ndarray]) -> tuple[list[tuple[int, int, int]], dict[int, list[int]]]:
    """_counts_of_run's answer from kernels.tally.status_tally's (counts, failed) of a run."""
    table, failed = tally
    rows = table.tolist()
    listed = {i: failed[i, :min(row[2], MAX_LISTED_FAILED)].tolist() for i, row in enumerate(rows) if row[2]}
    return [CLEAN_COUNTS if row == [0, 0, 0] else tuple(row) for row in rows], listed


def _decoded_run(header: fmt.FrameHeader, coded: np.ndarray) -> tuple[np.ndarray, np.ndarray,
                                                                      list[tuple[int, int, int]], dict[int, list[int]]]:
    """The coded payloads of frames shaped as header (rows of coded) decoded together:
    (messages, statuses, block_counts per row, failed blocks of the rows that have some),
    with the tally the kernels made where they made one."""
    messages, status, tally = decode_segments_tallied(header.code, header.depth, coded, header.message_bytes,
                                                      MAX_LISTED_FAILED)
    counts, failed = _counts_of_run(status) if tally is None else _counts_of_tally(tally)
    return messages, status, counts, failed


def run_block_counts(status: np.ndarray) -> list[tuple[int, int, int]]:
    """block_counts of every row of a run's (frames, blocks) statuses, a few whole-array
    passes for all rows: a failed block's status is FAILED, a corrected one's its count."""
    if all_clean(status):
        return [CLEAN_COUNTS] * status.shape[0]
    if compiled_loaded():  # one compiled pass (the kernels are loaded for any sizeable run)
        from bitmend.kernels.tally import status_counts

        return [tuple(row) for row in status_counts(np.ascontiguousarray(status)).tolist()]
    failed = np.count_nonzero(status == FAILED, axis=1)
    blocks = np.count_nonzero(status, axis=1) - failed
    symbols = status.sum(axis=1, dtype=np.int64) - FAILED * failed
    return list(zip(blocks.tolist(), symbols.tolist(), failed.tolist()))


@dataclass
class DecodedFrame:
    """One frame as found in the stream (payload corrected as far as the code allows)."""

    header: fmt.FrameHeader
    offset: int  # byte offset of the frame's marker in the input (rounded down for bit slips)
    bit_offset: int  # exact bit offset
    payload: bytes | memoryview  # a memoryview only inside a FrameRun from items(): a slice of FrameRun.data
    # per block: 0 clean, w corrected, FAILED uncorrectable; for a run decoded with few marks,
    # a MarkedRow of the blocks that are not 0 (np.asarray makes the array; len() is the same)
    block_status: np.ndarray | MarkedRow
    crc_ok: bool
    truncated: bool = False  # the input ended inside the frame
    header_from_copy: bool = False  # the leading header was hit; the copy was used
    marker_distance: int = 0
    authentic: bool | None = None  # keyed frame: its tag matched the reader's key (None: not checked)
    pending: object | None = field(default=None, repr=False, compare=False)  # its batch, until settled

    @once
    def _counts(self) -> tuple[int, int, int]:
        return block_counts(np.asarray(self.block_status))  # once per frame: every count below reads it

    @property
    def corrected_blocks(self) -> int:
        return self._counts[0]

    @property
    def corrected_symbols(self) -> int:
        return self._counts[1]

    @property
    def failed_count(self) -> int:
        return self._counts[2]

    def set_counts(self, counts: tuple[int, int, int], failed: list[int] | None = None) -> None:
        """Take block_counts(block_status) computed elsewhere (by a batch worker, or for a
        whole run of frames at once), and failed_blocks when it came with them."""
        self.__dict__["_counts"] = counts if type(counts) is tuple else tuple(counts)
        if failed is not None:
            self.__dict__["failed_blocks"] = failed

    @once
    def failed_blocks(self) -> list[int]:
        """Indexes of uncorrectable blocks, the first MAX_LISTED_FAILED of them (a report
        line stays small however badly a frame is hit; failed_count has the total)."""
        if not self.failed_count:
            return []
        return [int(i) for i in np.nonzero(np.asarray(self.block_status) == FAILED)[0][:MAX_LISTED_FAILED]]


@dataclass(frozen=True)
class FrameRun:
    """Frames of one stream found one after another (FrameScanner._run_at, or blobs taken
    all at once): the same stream, code, depth and flags, consecutive sequence numbers and
    stream positions, none of them a closing or repair frame. Delivery may then hand them
    on together (container/delivery.py, Sequencer.push_run)."""

    frames: list[DecodedFrame]
    data: bytes | None = None  # the frames' payloads end to end, when made in one piece

    def loose(self) -> list[DecodedFrame]:
        """The frames, each holding its payload as bytes of its own (to be handed on one by
        one: a frame's payload is otherwise a view of the run's data)."""
        for frame in self.frames:
            if isinstance(frame.payload, memoryview):
                frame.payload = bytes(frame.payload)
        return self.frames


def _continues(before: fmt.FrameHeader, header: fmt.FrameHeader) -> bool:
    """Whether header's frame may follow before's in one FrameRun."""
    key = header.run_key
    return key is not None and key == before.run_key and header.seq == (before.seq + 1) % fmt.SEQ_MODULUS


def grouped(frames: list[DecodedFrame]) -> Iterator[DecodedFrame | FrameRun]:
    """frames in the same order, those that follow one another (one stream, consecutive
    sequence numbers, same code, no closing or repair frame) as FrameRuns; a frame alone
    holds its payload as bytes."""
    start = 0
    for end in range(1, len(frames) + 1):
        if end < len(frames) and _continues(frames[end - 1].header, frames[end].header):
            continue
        if end - start > 1:
            yield FrameRun(frames[start:end])
        else:
            yield FrameRun([frames[start]]).loose()[0]  # alone: its payload as bytes of its own
        start = end


def frames_of(items) -> Iterator[DecodedFrame]:
    """The frames of FrameScanner.items(), one at a time, payloads as bytes."""
    for item in items:
        if isinstance(item, FrameRun):
            yield from item.loose()
        else:
            yield item


def decode_payload(code, header: fmt.FrameHeader, coded: bytes,
                   key: bytes | None) -> tuple[bytes, np.ndarray, bool, bool | None]:
    """(payload, block status, CRC-32C matches, tag matches) of a whole frame's coded
    payload; the tag is checked only for a keyed frame, a key and a good CRC (else False
    with a key, None without). The one place a whole payload is decoded, in this process or
    in a worker (container/batch_decode.py)."""
    message, status = decode_segment(code, header.depth, coded, header.message_bytes)
    payload, crc_ok, authentic = checked_message(header, message, key)
    return payload, status, crc_ok, authentic


def checked_message(header: fmt.FrameHeader, message: bytes | np.ndarray,
                    key: bytes | None) -> tuple[bytes, bool, bool | None]:
    """(payload, CRC-32C matches, tag matches) of a decoded message: payload, its CRC-32C,
    then a keyed frame's tag. The tag is checked only for a keyed frame, a key and a good
    CRC (else False with a key, None without)."""
    length = header.length
    payload = bytes(message[:length])
    crc_ok = int.from_bytes(message[length: length + fmt.CRC_BYTES], "big") == fmt.crc32c(payload)
    authentic: bool | None = False if header.keyed and key is not None else None
    if header.keyed and key is not None and crc_ok:
        authentic = fmt.tag_matches(key, header, payload, message[length + fmt.CRC_BYTES:])
    return payload, crc_ok, authentic


def checked_run(headers: list[fmt.FrameHeader], messages: np.ndarray,
                key: bytes | None) -> tuple[bytes, list[memoryview], list[bool], list[bool | None]]:
    """checked_message of every row of a run's decoded messages (count, message bytes),
    whose headers share one length: (the payloads end to end, made with one copy; each
    payload as a view of them; CRC-32C matches; tag matches). The CRC-32C is computed on
    each row in place."""
    length = headers[0].length
    rows = messages[:, length: length + fmt.CRC_BYTES]
    stored = np.ascontiguousarray(rows).view(">u4").ravel().tolist()  # the CRC-32C each message carries
    crc_ok = [crc == want for crc, want in zip(map(fmt.crc32c, messages[:, :length]), stored)]
    data = messages[:, :length].tobytes()
    view = memoryview(data)
    payloads = [view[i * length: (i + 1) * length] for i in range(len(headers))]
    authentic: list[bool | None] = [None] * len(headers)
    if key is not None:
        for i, header in enumerate(headers):
            if header.keyed:
                authentic[i] = crc_ok[i] and fmt.tag_matches(key, header, payloads[i],
                                                             messages[i, length + fmt.CRC_BYTES:])
    return data, payloads, crc_ok, authentic


def _whole_frame(header: fmt.FrameHeader | None, size: int) -> bool:
    """Whether a blob of `size` bytes led by this header (None: none decoded) is what
    single_frames and single_frame take: exactly one frame, version 2, of a catalog code."""
    return (header is not None and header.version == fmt.FORMAT_VERSION and header.code_id != fmt.CUSTOM_CODE_ID
            and header.frame_bytes == size)


def single_frames(blobs: list[bytes], key: bytes | None = None) -> list[DecodedFrame | None]:
    """The frame of each blob that is exactly one frame with an intact version 2 header of
    a catalog code, decoded many at a time (headers in one call, payloads of a shape in
    one call): what FrameScanner would find in that blob alone. None for any other blob
    (a hit header, another size, a custom code, junk), which the caller scans on its own.
    Payloads are views of one piece per shape, as in a FrameRun: hand the frames on
    through grouped(), which gives each frame that is not in a run bytes of its own."""
    found: list[DecodedFrame | None] = [None] * len(blobs)
    start, size = len(fmt.MARKER_BYTES), fmt.HEADER_BYTES
    places = [i for i, blob in enumerate(blobs) if len(blob) >= start + size]
    if not places:
        return found
    leads = np.frombuffer(b"".join(blobs[i][: start + size] for i in places), dtype=np.uint8)
    leads = leads.reshape(len(places), start + size)  # each blob's marker and header
    distances = np.unpackbits(leads[:, :start] ^ np.frombuffer(fmt.MARKER_BYTES, dtype=np.uint8),
                              axis=1).sum(axis=1).tolist()  # bits of each marker off the true one
    shapes: dict[tuple, list[tuple[int, int, fmt.FrameHeader]]] = {}
    for place, (i, header) in enumerate(zip(places, fmt.decode_headers(leads[:, start:]))):
        if _whole_frame(header, len(blobs[i])):
            shapes.setdefault((header.code_id, header.depth, header.length, header.keyed),
                              []).append((i, place, header))
    payload_at = start + size
    for members in shapes.values():
        first = members[0][2]
        coded = np.frombuffer(b"".join(blobs[i][payload_at: payload_at + first.coded_bytes] for i, _, _ in members),
                              dtype=np.uint8).reshape(len(members), first.coded_bytes)
        messages, status, counts, failed = _decoded_run(first, coded)
        _, payloads, crc_ok, authentic = checked_run([header for _, _, header in members], messages, key)
        for row, (i, place, header) in enumerate(members):
            found[i] = DecodedFrame(header, 0, 0, payloads[row], status[row], crc_ok[row], False, False,
                                    distances[place], authentic[row])
            found[i].set_counts(counts[row], failed.get(row))
    return found


def single_frame(blob: bytes, key: bytes | None = None) -> DecodedFrame | None:
    """single_frames for one blob, as a live link receives them: its header and payload
    decoded each in one call, with none of the batch's arrays (on one blob those cost more
    than FrameScanner's search). None where single_frames gives None."""
    start = len(fmt.MARKER_BYTES)
    if len(blob) < start + fmt.HEADER_BYTES:
        return None
    try:
        header = fmt.decode_header(blob[start: start + fmt.MAX_HEADER_BYTES])
    except fmt.HeaderError:  # the scan says what is wrong
        return None
    if not _whole_frame(header, len(blob)):
        return None
    at = start + header.header_bytes
    payload, status, crc_ok, authentic = decode_payload(header.code, header, blob[at: at + header.coded_bytes], key)
    distance = (int.from_bytes(blob[:start], "big") ^ fmt.MARKER).bit_count()  # bits of the marker off the true one
    return DecodedFrame(header, 0, 0, payload, status, crc_ok, False, False, distance, authentic)


def stream_length_at_end(container: bytes) -> int | None:
    """The payload bytes of the stream whose closing frame ends `container` (that frame's
    stream position plus its length), read from the last frame's header alone; None when
    the container does not end with such a frame (a repair frame after it, a version 1
    stream, a cut or damaged tail, a size larger than the container itself, which no
    honest header gives). It is what a complete, undamaged single-stream
    container decodes to: a guess of the output's size, for decode_bytes to fill one
    object of that size rather than join pieces (a wrong guess costs only that join)."""
    start = container.rfind(fmt.MARKER_BYTES, max(0, len(container) - fmt.MAX_FRAME_WIRE_BYTES))
    if start < 0:
        return None
    at = start + len(fmt.MARKER_BYTES)
    try:
        header = fmt.decode_header(container[at: at + fmt.MAX_HEADER_BYTES])
    except fmt.HeaderError:
        return None
    if (header is None or not header.last or header.repair or header.version != fmt.FORMAT_VERSION
            or start + header.frame_bytes != len(container)):
        return None
    size = header.position + header.length
    return size if size <= len(container) else None  # every code adds bytes: more is a forged header


def _reads_whole(source: BinaryIO) -> bool:
    """Whether a read of source returns at once with all it asks for (an in-memory file
    or a regular file), so the scanner may read ahead to make longer runs: nothing waits
    for a peer, as it would on a pipe, socket or terminal."""
    if isinstance(source, io.BytesIO):
        return True
    try:
        return stat.S_ISREG(os.fstat(source.fileno()).st_mode)
    except (AttributeError, OSError, ValueError, io.UnsupportedOperation):
        return False


@dataclass
class ScanStats:
    skipped_bytes: int = 0  # input bytes that belonged to no decodable frame
    header_errors: list[str] = field(default_factory=list)  # checked headers with unusable values


class FrameScanner:
    """Iterate the frames of a container read from a binary file object."""

    def __init__(self, source: BinaryIO | bytes, read_chunk: int = READ_CHUNK, decode_payloads: bool = True,
                 key: bytes | None = None, batches=None) -> None:
        """source: a binary file object, or a whole container in memory (bytes: read in
        place, without copying it into the window).
        key: the shared key that keyed frames' tags are checked with (None: not checked).
        batches: a container.batch_decode.BatchDecoder; whole payloads are then decoded by its
        workers, and a frame's payload fields are filled when it is settled (BatchDecoder.settle)."""
        self._key = key
        self._batches = batches
        self._decode_payloads = decode_payloads
        self._chunk = read_chunk
        self._base = 0  # absolute bit offset of _buf[0]
        self.stats = ScanStats()
        if isinstance(source, bytes):
            self._source = None
            self._buf: bytearray | memoryview = memoryview(source)  # the window slides by slicing
            self._eof = True
            self._whole_reads = True
            self.bytes_read = len(source)
        else:
            self._source = source
            self._read = getattr(source, "read1", None) or source.read
            self._buf = bytearray()
            self._eof = False
            self._whole_reads = _reads_whole(source)
            self.bytes_read = 0
        self._searched_bits = 0  # bits scanned for markers so far (large scans load numba)

    # ---- window management ---------------------------------------------------------
    def _read_once(self) -> bool:
        """One read of whatever the source holds now (a pipe's bytes as soon as they are
        written: read1, not a read that waits for a full chunk); False at end of input."""
        if self._eof:
            return False
        block = self._read(self._chunk)
        if not block:
            self._eof = True
            return False
        self.bytes_read += len(block)
        self._buf += block
        return True

    def _fill(self, end_bit: int) -> bool:
        """Read until the window holds absolute bits up to end_bit; False at end of input."""
        while self._base + 8 * len(self._buf) < end_bit:
            if not self._read_once():
                return False
        return True

    def _drop_before(self, bit: int) -> None:
        """Forget window bytes wholly before absolute bit (keeps memory bounded). Done only
        once a whole read chunk can go, so the memmove of the rest is amortised."""
        cut = (bit - self._base) >> 3
        if cut >= self._chunk:
            if isinstance(self._buf, memoryview):
                self._buf = self._buf[cut:]
            else:
                del self._buf[:cut]
            self._base += 8 * cut

    def _end_bit(self) -> int:
        return self._base + 8 * len(self._buf)

    def _bytes_at(self, bit: int, count: int) -> bytes:
        """count bytes starting at absolute bit (any alignment); zero-filled past the end."""
        rel = bit - self._base
        start, shift = rel >> 3, rel & 7
        raw = bytes(self._buf[start: start + count + 1])
        if shift == 0:
            return raw[:count].ljust(count, b"\0")
        bits = bitarray(endian="big")
        bits.frombytes(raw.ljust(count + 1, b"\0"))
        return bits[shift: shift + 8 * count].tobytes()

    def _search(self, start_bit: int) -> int:
        """First absolute bit >= start_bit where the marker matches within tolerance, or -1
        at end of input. Reads more input as needed; drops what it has passed over."""
        while True:
            kernels = compiled(self._searched_bits)
            piece_bytes = SEARCH_PIECE if kernels else SMALL_SEARCH_PIECE
            if self._end_bit() < start_bit + MARKER_BITS + 8 * piece_bytes:
                # search what has arrived: on a live link the next marker may already be here
                self._read_once()
            stop = min(self._end_bit() - MARKER_BITS + 1, start_bit + 8 * piece_bytes)
            if stop > start_bit:
                first_byte = (start_bit - self._base) >> 3
                last_byte = (stop - self._base + MARKER_BITS + 7) >> 3
                piece = bytes(self._buf[first_byte:last_byte])
                origin = self._base + 8 * first_byte
                if kernels:
                    found = kernels[0].find_pattern(kernels[0].to_words(piece), start_bit - origin, stop - origin,
                                                    np.uint64(fmt.MARKER), fmt.MARKER_SEARCH_TOLERANCE)
                else:
                    found = small.find_pattern(piece.ljust(len(piece) + 8, b"\0"), start_bit - origin,
                                               stop - origin, fmt.MARKER, fmt.MARKER_SEARCH_TOLERANCE)
                self._searched_bits += stop - start_bit
                if found >= 0:
                    return origin + int(found)
                start_bit = stop
            elif self._eof:
                return -1
            self._drop_before(start_bit - LOOKBACK_BITS)

    # ---- header and payload -----------------------------------------------------------
    def _header_at(self, bit: int, coded_bytes: int = fmt.MAX_HEADER_BYTES) -> fmt.FrameHeader | None:
        """The header of any version starting at absolute bit (fmt.decode_header tries each
        layout that fits in coded_bytes)."""
        try:
            return fmt.decode_header(self._bytes_at(bit, coded_bytes))
        except fmt.HeaderError as exc:
            self.stats.header_errors.append(str(exc))
            return None

    def _predicted_header(self, frame_bit: int, predicted: fmt.FrameHeader) -> fmt.FrameHeader | None:
        """Header of a frame whose leading header is hit, read from its trailing copy at the
        place a frame shaped like `predicted` would end; accepted only if it agrees (same
        version, stream, sequence number and frame size)."""
        size = predicted.header_bytes
        copy_bit = frame_bit + 8 * (predicted.frame_bytes - size)
        if not self._fill(copy_bit + 8 * size):
            return None
        found = self._header_at(copy_bit, size)
        if (found and found.version == predicted.version and found.stream_id == predicted.stream_id
                and found.seq == predicted.seq and found.frame_bytes == predicted.frame_bytes):
            return found
        return None

    def _inferred_frame(self, frame_bit: int, predicted: fmt.FrameHeader) -> DecodedFrame | None:
        """While locked, a frame whose header and header copy were both hit: decode it as
        the frame that should follow (same code, depth and length, next sequence number).
        Accepted only if its payload CRC-32C then checks, so a wrong guess is never
        delivered; it costs one decode when the guess fails."""
        if not self._decode_payloads or not self._fill(frame_bit + 8 * predicted.frame_bytes):
            return None
        frame = self._decode_frame(frame_bit, predicted, from_copy=True, here=True)
        return frame if frame.crc_ok else None

    def _look_back(self, gap_start: int, gap_end: int) -> DecodedFrame | None:
        """A frame filling the end of the gap [gap_start, gap_end) whose leading marker or
        header was hit, found through its header copy, which ends right at gap_end (a copy
        of any version's size is tried)."""
        for layout in fmt.HEADER_LAYOUTS.values():
            size_bits = 8 * layout.coded_bytes
            copy_bit = gap_end - size_bits
            if copy_bit - gap_start < MARKER_BITS + size_bits or copy_bit < self._base:
                continue
            header = self._header_at(copy_bit, layout.coded_bytes)
            if header is None or header.version != layout.version:
                continue
            start = gap_end - 8 * header.frame_bytes
            if start < max(gap_start, self._base):
                continue
            return self._decode_frame(start, header, from_copy=True)
        return None

    def _frame_code(self, bit: int, header: fmt.FrameHeader) -> tuple[fmt.FrameHeader, bool]:
        """(header, True) for a catalog code. For code id 0: the header with the code read
        from the frame's definition block, or from its copy before the header copy; if
        neither decodes, (header, False) and a note."""
        if header.code_id != fmt.CUSTOM_CODE_ID or header.defined_code is not None:
            return header, True
        size = header.definition_bytes
        leading = bit + MARKER_BITS + 8 * header.header_bytes
        trailing = bit + 8 * (header.frame_bytes - header.header_bytes - size)
        for place in (leading, trailing):
            if place + 8 * size > self._end_bit():
                continue
            try:
                code = fmt.decode_definition(self._bytes_at(place, size), header.shape, header.version)
            except fmt.HeaderError as exc:
                self.stats.header_errors.append(str(exc))
                code = None
            if code is not None:
                return replace(header, defined_code=code), True
        self.stats.header_errors.append(f"frame {header.seq}: its code definition was hit in both copies; "
                                        "payload read without correction")
        return header, False

    def _decode_frame(self, bit: int, header: fmt.FrameHeader, from_copy: bool, here: bool = False) -> DecodedFrame:
        """The frame at bit. Its payload is decoded now, or by the batch workers unless here
        (the scan needs its CRC at once)."""
        total = header.frame_bytes
        complete = self._fill(bit + 8 * total)
        payload_bit = bit + MARKER_BITS + 8 * (header.header_bytes + header.definition_bytes)
        coded_len = header.coded_bytes
        available_bits = max(0, min(self._end_bit() - payload_bit, 8 * coded_len))
        marker = int.from_bytes(self._bytes_at(bit, 8), "big")
        marker_distance = bin(marker ^ fmt.MARKER).count("1")
        if not self._decode_payloads:  # inspection: headers only
            return DecodedFrame(header, bit >> 3, bit, b"", np.zeros(0, np.uint8), False, not complete,
                                from_copy, marker_distance)
        header, checked = self._frame_code(bit, header)
        code = header.code if checked else fmt.unchecked_reading_code(*header.shape)
        authentic: bool | None = False if header.keyed and self._key is not None else None
        if complete:
            coded = self._bytes_at(payload_bit, coded_len)
            if self._batches is not None and not here:
                frame = DecodedFrame(header, bit >> 3, bit, b"", np.zeros(0, np.uint8), False, False, from_copy,
                                     marker_distance, authentic)
                if self._batches.submit(frame, code, checked, coded):
                    return frame  # its payload fields are filled when it is settled
            payload, status, crc_ok, authentic = decode_payload(code, header, coded, self._key)
        else:
            # the input ended inside the frame: decode only the groups that arrived whole, and
            # for Reed-Solomon the cut group too, its missing tail as erasures (work and
            # memory follow the bytes present, not the length the header claims)
            coded = self._bytes_at(payload_bit, (available_bits + 7) // 8)
            payload, status = decode_truncated(code, header.depth, coded, header.message_bytes,
                                               available_bits, header.length)
            crc_ok = False
        if not checked:  # no block could be checked; only the CRC speaks for the data
            status = np.full(len(status), FAILED, dtype=np.uint8)
        return DecodedFrame(header, bit >> 3, bit, payload, status, crc_ok, not complete, from_copy,
                            marker_distance, authentic)

    def _run_at(self, bit: int, locked: fmt.FrameHeader) -> FrameRun | None:
        """While locked at a byte boundary: the frames that follow `locked` without a break,
        from those already in the window, decoded together (header records in one call,
        payloads with one code plan). A frame joins the run only if its header decodes with
        no uncorrectable codeword to exactly the record its place predicts (locked.next(),
        its next(), ...: same stream, code, depth, length and flags, the next sequence
        number and position, no closing flag), so the run holds what the frame-by-frame
        path would find; the first frame that differs ends the run and is left to it."""
        if (bit & 7 or locked.last or locked.version != fmt.FORMAT_VERSION or locked.code_id == fmt.CUSTOM_CODE_ID
                or not self._decode_payloads):
            return None
        size = locked.frame_bytes
        start = (bit - self._base) >> 3
        wanted = min(RUN_FRAMES, MAX_RUN_BYTES // size)
        while self._whole_reads and (len(self._buf) - start) // size < wanted and self._read_once():
            start = (bit - self._base) >> 3  # a file: read ahead for a whole run (nothing waits)
        count = min(wanted, (len(self._buf) - start) // size)
        if count < 2:
            return None
        expected = locked.next()
        grid = np.frombuffer(self._buf, dtype=np.uint8, count=count * size, offset=start).reshape(count, size)
        header_bytes, record_bytes = expected.header_bytes, fmt.RECORD_BYTES
        records, status = decode_segment(fmt.header_code(), expected.layout.depth,
                                         np.ascontiguousarray(grid[:, 8: 8 + header_bytes]), count * record_bytes)
        records = np.frombuffer(records, dtype=np.uint8).reshape(count, record_bytes)
        matches = (records == fmt.run_records(expected, count)).all(axis=1)
        matches &= (status.reshape(count, -1) != FAILED).all(axis=1)
        count = int(np.argmin(matches)) if not matches.all() else count
        if count < 2:
            return None
        grid = grid[:count]
        coded_at = 8 + header_bytes
        marker_distance = np.unpackbits(grid[:, :8] ^ np.frombuffer(fmt.MARKER_BYTES, dtype=np.uint8),
                                        axis=1).sum(axis=1)
        coded = grid[:, coded_at: coded_at + expected.coded_bytes]
        if self._batches is not None:
            submitted = self._submitted_run(bit, locked, coded, marker_distance)
            if submitted is not None:
                return submitted
        messages, block_status, counts, failed = _decoded_run(expected, coded)
        headers = locked.following(count)
        data, payloads, crc_ok, authentic = checked_run(headers, messages, self._key)
        frames = []
        frame_bit = bit
        for header, payload, status, ok, distance, tag_ok, row_counts in zip(
                headers, payloads, block_status, crc_ok, marker_distance.tolist(), authentic, counts):
            frame = DecodedFrame(header, frame_bit >> 3, frame_bit, payload, status, ok, False, False, distance, tag_ok)
            frame.set_counts(row_counts, failed.get(len(frames)))
            frames.append(frame)
            frame_bit += 8 * size
        return FrameRun(frames, data)

    def _submitted_run(self, bit: int, locked: fmt.FrameHeader, coded: np.ndarray,
                       marker_distance: np.ndarray) -> FrameRun | None:
        """A run's frames with their payloads handed to the batch workers (each filled when
        settled); none when the workers do not take them (the caller decodes them)."""
        size = locked.frame_bytes
        frames = []
        for i, header in enumerate(locked.following(coded.shape[0])):
            frame_bit = bit + 8 * size * i
            authentic: bool | None = False if header.keyed and self._key is not None else None
            frames.append(DecodedFrame(header, frame_bit >> 3, frame_bit, b"", np.zeros(0, np.uint8), False,
                                       marker_distance=int(marker_distance[i]), authentic=authentic))
        return FrameRun(frames) if self._batches.submit_run(frames, locked, coded) else None

    def _damaged(self, frame: DecodedFrame | None) -> bool:
        if frame is None:
            return False
        if self._batches is not None:
            self._batches.settle(frame)
        return not frame.crc_ok

    # ---- the scan ----------------------------------------------------------------------
    def frames(self) -> Iterator[DecodedFrame]:
        """Frames in stream order; see the module docstring for how they are found."""
        return frames_of(self.items())

    def items(self) -> Iterator[DecodedFrame | FrameRun]:
        """Frames in stream order, those found together in a run as one FrameRun."""
        pos = 0  # absolute bit where the next frame is expected or the search resumes
        covered = 0  # absolute bit where the last emitted frame ended
        locked: fmt.FrameHeader | None = None  # last good header while in lock
        fallback: int | None = None  # where to search if the frame after a damaged one is not in place
        fallback_frame: DecodedFrame | None = None  # the frame that may be damaged
        at_start = True  # input should begin with a frame: try its header even if the marker is hit
        while True:
            run = self._run_at(pos, locked) if locked is not None else None
            if run is not None:
                yield run
                last = run.frames[-1]
                pos = covered = last.bit_offset + 8 * last.header.frame_bytes
                locked = last.header
                maybe_damaged = self._batches is not None or not last.crc_ok  # as for one frame, below
                fallback = last.bit_offset + MARKER_BITS if maybe_damaged else None
                fallback_frame = last
                self._drop_before(pos if fallback is None else fallback)
                continue
            searched = locked is None and not at_start
            if searched:
                found = self._search(pos)
                if found < 0:  # end of input: the gap may still end with a frame
                    gap_start = covered  # every byte since the last frame: a false marker match skipped is still skipped
                    tail = self._look_back(gap_start, self._end_bit())
                    if tail is not None:
                        self.stats.skipped_bytes += (tail.bit_offset - gap_start) // 8
                        yield tail
                    else:
                        self.stats.skipped_bytes += max(0, (self._end_bit() - gap_start) // 8)
                    return
                candidate = found
            else:
                if not self._fill(pos + MARKER_BITS + 8 * V1_HEADER_BYTES):
                    if self._end_bit() > pos:
                        locked, at_start = None, False  # a stub too short for a header: search it
                        continue
                    return
                candidate = pos
            was_start, at_start = at_start, False
            self._fill(candidate + MARKER_BITS + MAX_HEADER_BITS)
            header = self._header_at(candidate + MARKER_BITS)
            from_copy = False
            inferred: DecodedFrame | None = None
            if header is None and locked is not None and not locked.last:
                expected = locked.next()
                header = self._predicted_header(candidate, expected)
                from_copy = header is not None
                if header is None:
                    inferred = self._inferred_frame(candidate, expected)
                    if inferred is not None:
                        header, from_copy = inferred.header, True
            if header is None:
                if locked is None:
                    pos = candidate if was_start else candidate + 1
                else:
                    locked = None  # lost lock: search from here (or from inside a damaged frame)
                    if fallback is not None and self._damaged(fallback_frame):
                        pos = fallback
                    fallback = None
                continue
            gap_start = covered  # every byte since the last frame: a false marker match skipped is still skipped
            if searched and candidate > gap_start:
                # the gap before this frame may end with a frame whose leading header was hit
                earlier = self._look_back(gap_start, candidate)
                if earlier is not None:
                    self.stats.skipped_bytes += (earlier.bit_offset - gap_start) // 8
                    gap_start = candidate
                    yield earlier
            self.stats.skipped_bytes += max(0, candidate - gap_start) // 8
            frame = inferred or self._decode_frame(candidate, header, from_copy)
            covered = candidate + 8 * header.frame_bytes
            yield frame
            if frame.truncated:
                return
            pos = covered
            locked = header
            # a damaged frame may hide a slip: if the next frame is not where expected,
            # the search resumes from inside the damaged one (whether it is damaged is asked
            # only then: with batch workers its payload may not be decoded yet)
            maybe_damaged = self._decode_payloads and (self._batches is not None or not frame.crc_ok)
            fallback = candidate + MARKER_BITS if maybe_damaged else None
            fallback_frame = frame
            self._drop_before(pos if fallback is None else fallback)
