"""Cut a byte stream into frames and write them; the last frame carries the closing flag."""

from __future__ import annotations

import secrets
from dataclasses import replace
from typing import BinaryIO

from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import catalog_id, code_id, definable_form
from bitmend.codes.linear import BinaryLinearCode
from bitmend.container import format as fmt
from bitmend.container.repair import SYMBOL_OVERHEAD, GroupBuilder, parse_repair
from bitmend.errors import SettingError


def resolve_code(code: str | BlockCode) -> tuple[int, BinaryLinearCode | None]:
    """(catalog id, None) for a catalog name or a code equal to a catalog code; else
    (CUSTOM_CODE_ID, the code's generic-engine form), which travels in the frames'
    definition blocks. UnknownCodeError for an unknown name, CodeError for a code that
    cannot travel (catalog.definable_form)."""
    if isinstance(code, str):
        return code_id(code), None
    if not isinstance(code, BlockCode):
        raise TypeError(f"a code is a catalog name or a code object (BlockCode), got {type(code).__name__}")
    identifier = catalog_id(code)
    if identifier is not None:
        return identifier, None
    return fmt.CUSTOM_CODE_ID, definable_form(code)


RUN_BYTES = 1 << 20  # payload bytes coded in one run of frames (bounds its arrays to a few times this)
RUN_FRAMES = 4096  # and at most this many frames, however small


class FrameWriter:
    """Frames bytes written to it onto sink, frame_bytes of payload per frame.

    One full frame is held back until more data or close() arrives, so the final frame
    can carry the closing flag; flush() sends what is held as a (possibly short) frame.
    An empty stream still gets one empty closing frame, which decodes to empty output.

    Every frame names the stream (`stream_id`, 64 bits drawn from the system's secure
    random source unless given) and the stream offset of its first payload byte, so a
    reader can drop replayed and foreign frames and knows exactly how many bytes a lost
    frame carried.
    """

    def __init__(self, sink: BinaryIO, code: str | BlockCode, depth: int,
                 frame_bytes: int = fmt.DEFAULT_FRAME_BYTES, stream_id: int | None = None,
                 repair: tuple[int, int] | str | None = None, key: bytes | None = None, jobs: int = 1) -> None:
        """jobs: worker processes that code the frames (1: all in this process). The bytes
        written are the same for any number; with more than one, frames leave in batches
        (flush() waits for every frame queued; container/batch_encode.py)."""
        fmt.check_depth(depth)
        fmt.check_frame_bytes(frame_bytes)
        self._sink = sink
        self._code_id, self._defined_code = resolve_code(code)
        if self._defined_code is not None:
            largest = fmt.FrameHeader.for_defined_code(self._defined_code, depth, 0, frame_bytes).frame_bytes
            if largest > fmt.MAX_FRAME_WIRE_BYTES:
                raise SettingError(f"frames of {frame_bytes} bytes coded with {self._defined_code.name} would take "
                                   f"{largest} bytes, above the {fmt.MAX_FRAME_WIRE_BYTES} a reader accepts; "
                                   "use a smaller frame size")
        if stream_id is not None and not 0 <= stream_id < 1 << 64:
            raise SettingError(f"stream id must be 0..2^64 - 1, got {stream_id}")
        self.stream_id = secrets.randbits(64) if stream_id is None else stream_id
        self._depth = depth
        self._frame_bytes = frame_bytes
        self._pending = bytearray()
        self._seq = 0
        self._position = 0  # stream offset of the next frame's first payload byte
        self._key = key  # frames carry a tag under this shared key (flag 0x04)
        # repair frames: R after every K data frames (container/repair.py), or none
        spec = parse_repair(repair)
        if spec and frame_bytes + SYMBOL_OVERHEAD > fmt.MAX_PAYLOAD_BYTES:
            # a repair frame carries a data frame's payload and 15 bytes of its place and CRC
            raise SettingError(f"with repair frames a frame holds at most {fmt.MAX_PAYLOAD_BYTES - SYMBOL_OVERHEAD} "
                               f"bytes, got --frame-bytes {frame_bytes}")
        self._group = GroupBuilder(*spec) if spec else None
        self.repair_frames = 0
        self.bytes_in = 0
        self._bytes_written = 0  # by this process (one job, or frames too big for a batch)
        self.closed = False
        self._batches = None
        if jobs > 1:
            from bitmend.container.batch_encode import BatchEncoder

            self._batches = BatchEncoder(sink, jobs, key, self._defined_code)

    @property
    def bytes_out(self) -> int:
        """Container bytes written to the sink so far."""
        return self._bytes_written + (self._batches.bytes_out if self._batches is not None else 0)

    def _header(self, length: int, last: bool) -> fmt.FrameHeader:
        """The header of the next data frame (the writer's code, depth, stream and flags)."""
        position = self._position % (1 << fmt.POSITION_BITS)
        flags = {"in_group": self._group is not None, "keyed": self._key is not None}
        if self._defined_code is not None:
            header = fmt.FrameHeader.for_defined_code(self._defined_code, self._depth, self._seq, length, last,
                                                      self.stream_id, position)
            return replace(header, **flags)
        return fmt.FrameHeader(self._code_id, self._depth, self._seq, length, last,
                               stream_id=self.stream_id, position=position, **flags)

    def _emit(self, payload: bytes, last: bool) -> None:
        header = self._header(len(payload), last)
        self._send(header, payload)
        self._seq = (self._seq + 1) % fmt.SEQ_MODULUS
        self._position += len(payload)
        if self._group is not None and (self._group.add(header, payload) or last):
            self.end_group()

    def _emit_run(self, pending: memoryview) -> int:
        """Without repair groups: every full frame pending but the one held back, coded in
        runs (format.encode_frames: the same bytes _emit would make frame by frame, without
        a Python step per frame) or handed to the workers in one piece; the bytes sent."""
        size = self._frame_bytes
        count = (len(pending) - 1) // size  # keep one frame back
        if count < 2:
            return 0
        first = self._header(size, False)
        if self._batches is not None:
            self._batches.send_run(first, pending[: count * size])
        else:
            step = max(2, min(RUN_FRAMES, RUN_BYTES // size))  # bounds the run's arrays
            reserve = getattr(self._sink, "reserve_frames", None)  # a sink that gives the memory to code into (api)
            for done in range(0, count, step):
                take = min(step, count - done)
                region = None if reserve is None else reserve(take * first.frame_bytes)
                frames = fmt.encode_frames(first, pending[done * size: (done + take) * size], self._key, region)
                if region is None:
                    self._sink.write(frames)
                self._bytes_written += len(frames)
                first = replace(first, seq=(first.seq + take) % fmt.SEQ_MODULUS,
                                position=(first.position + take * size) % (1 << fmt.POSITION_BITS))
        self._seq = (self._seq + count) % fmt.SEQ_MODULUS
        self._position += count * size
        return count * size

    def container_bytes(self, payload_bytes: int) -> int | None:
        """Bytes of the frames a new writer sends for payload_bytes written, then closed
        (full frames, then the closing frame: a short one, or an empty one for no data);
        None with repair frames, which this does not count."""
        if self._group is not None:
            return None
        full, rest = divmod(payload_bytes, self._frame_bytes)
        if rest == 0 and full:
            full, rest = full - 1, self._frame_bytes  # the last full frame closes the stream
        return (full * self._header(self._frame_bytes, False).frame_bytes
                + self._header(rest, True).frame_bytes)

    def _send(self, header: fmt.FrameHeader, payload: bytes) -> None:
        if self._batches is not None:
            self._batches.send(header, payload)
            return
        frame = fmt.encode_frame(header, payload, self._key)
        self._sink.write(frame)
        self._bytes_written += len(frame)

    @property
    def group_open(self) -> bool:
        """Data frames were sent whose repair frames are not yet sent."""
        return self._group is not None and bool(self._group.symbols)

    def end_group(self) -> None:
        """Send the repair frames of the open group now (a full group does so by itself; a
        deadline or the end of the stream closes a short one)."""
        if not self.group_open:
            return
        # repair frames take the stream's code, depth, identity and key from a data header
        for header, payload in self._group.repair_frames(self._header(0, False)):
            self._send(header, payload)
            self.repair_frames += 1

    def write(self, data: bytes) -> int:
        if self.closed:
            raise ValueError("write to a closed frame writer")
        size = self._frame_bytes
        self.bytes_in += len(data)
        if self._group is None and not self._pending and len(data) > 2 * size:
            # code straight from the caller's buffer; only the tail is kept
            with memoryview(data) as view, view.cast("B") as flat:
                self._pending += flat[self._emit_run(flat):]
            return len(data)
        self._pending += data
        start = 0
        if self._group is None:
            with memoryview(self._pending) as pending:
                start = self._emit_run(pending)
        while len(self._pending) - start > size:  # strictly more: keep one frame back
            self._emit(bytes(self._pending[start: start + size]), last=False)
            start += size
        del self._pending[:start]
        return len(data)

    @property
    def pending_bytes(self) -> int:
        """Bytes written but not yet sent in a frame (at most one frame's worth)."""
        return len(self._pending)

    def flush_sink(self) -> None:
        """Push frames already made out of the sink's buffer, without cutting a frame."""
        if self._batches is not None:
            self._batches.write_finished()
        self._sink.flush()

    def flush(self) -> None:
        """Send held data now as a frame (packet boundaries), then flush the sink."""
        if self._pending:
            self._emit(bytes(self._pending), last=False)
            self._pending.clear()
        if self._batches is not None:
            self._batches.drain()
        self._sink.flush()

    def send_record(self, record: bytes) -> None:
        """Send record as one frame of its own, now (an empty record too): the frame
        boundaries are the record boundaries. Raises ValueError for a record longer than a
        frame, or when bytes written with write() are still waiting."""
        if self.closed:
            raise ValueError("record sent to a closed frame writer")
        if self._pending:
            raise ValueError("records and a byte stream cannot be mixed in one frame writer")
        if len(record) > self._frame_bytes:
            raise SettingError(f"a record of {len(record)} bytes does not fit a frame of {self._frame_bytes} bytes")
        self.bytes_in += len(record)
        self._emit(bytes(record), last=False)
        self.flush_sink()

    def send_records(self, records: list[bytes]) -> None:
        """send_record for each record, coded together (format.encode_record_frames) when the
        stream has no repair frames, no workers and a catalog code: the same frames. A record
        too long for a frame raises SettingError after the records before it were sent."""
        if self._group is not None or self._batches is not None or self._defined_code is not None or len(records) < 2:
            for record in records:
                self.send_record(record)
            return
        if self.closed:
            raise ValueError("record sent to a closed frame writer")
        if self._pending:
            raise ValueError("records and a byte stream cannot be mixed in one frame writer")
        too_long = next((i for i, record in enumerate(records) if len(record) > self._frame_bytes), None)
        if too_long is not None:  # the records before it still go, as they would one by one
            self.send_records(records[:too_long])
            self.send_record(records[too_long])  # raises SettingError
        first = self._header(len(records[0]), False)
        for frame in fmt.encode_record_frames(first, records, self._key):
            self._sink.write(frame)
            self._bytes_written += len(frame)
        total = sum(len(record) for record in records)
        self.bytes_in += total
        self._seq = (self._seq + len(records)) % fmt.SEQ_MODULUS
        self._position += total
        self.flush_sink()

    def close(self) -> None:
        """Send the closing frame (the held data, possibly empty). After abandon(), only
        writes the frames already queued and stops the workers."""
        if self.closed:
            self._stop_workers()
            return
        try:
            self._emit(bytes(self._pending), last=True)
            self._pending.clear()
            self.closed = True
            if self._batches is not None:
                self._batches.drain()
        finally:
            self._stop_workers()
        self._sink.flush()

    def abandon(self) -> None:
        """End without the closing frame (after a failure): frames queued so far are still
        written, as with one job; a reader sees a stream that ended early."""
        if self.closed:
            return
        self.closed = True
        try:
            if self._batches is not None:
                self._batches.drain()
        finally:
            self._stop_workers()

    def _stop_workers(self) -> None:
        batches, self._batches = self._batches, None
        if batches is not None:
            self._bytes_written += batches.bytes_out
            batches.close()
