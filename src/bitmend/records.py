"""Records: keep message boundaries across the link, one record per frame.

A record is a newline-ended line (`line`), or a message behind a big-endian 2- or 4-byte
length (`u16`, `u32`). The encoder sends each record as a frame of its own, so a frame
boundary is a record boundary; the decoder gives back each verified record whole and in
order, and a record that did not arrive is missing whole: nothing partial, shifted or
zero-filled takes its place. A record longer than a frame is refused (raise --frame-bytes,
up to 1 MiB): splitting it would make one lost frame cost a half record.

    blobs = bitmend.encode_records([b"G07 stage=1.42m\\n", b"G07 stage=1.44m\\n"], code="hamming-15-11")
    reader = bitmend.decode_records(blobs)        # any iterable of blobs, e.g. datagrams
    for record in reader:
        ...
    reader.report.summary.one_line()
"""

from __future__ import annotations

import io
import struct
import time
from typing import BinaryIO, Callable, Iterable, Iterator

from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH
from bitmend.container.assembler import Assembler, AssemblerReadings, DamagedDataError
from bitmend.container.format import DEFAULT_FRAME_BYTES, MAX_PAYLOAD_BYTES
from bitmend.container.reader import (DecodedFrame, FrameRun, FrameScanner, ScanStats, frames_of, grouped,
                                     single_frame, single_frames)
from bitmend.container.writer import FrameWriter
from bitmend.errors import SettingError
from bitmend.report import CLEAN, CORRECTED, DAMAGED, REBUILT, DecodeReport, FrameReport

FRAMINGS = ("line", "u16", "u32")
RECORD_ON_ERROR = ("drop", "keep", "fail")  # zero-filling a record would invent one
_PREFIX = {"u16": struct.Struct(">H"), "u32": struct.Struct(">I")}
BLOB_BATCH = 512  # blobs given all at once are checked and decoded this many at a time
RECORD_BATCH = 512  # records given all at once are coded this many at a time
MAX_HELD_LINE = MAX_PAYLOAD_BYTES  # a line longer than the largest frame is refused, not buffered


class RecordError(SettingError):
    """Records that cannot be made or read as asked: an unknown framing or on_error choice,
    or input that cannot be cut into records of the framing asked for."""


def check_framing(framing: str) -> str:
    if framing not in FRAMINGS:
        raise RecordError(f"record framing must be one of {', '.join(FRAMINGS)}, got {framing!r}")
    return framing


class RecordSplitter:
    """Cuts a byte stream into records as its bytes arrive. Records are returned without
    their length prefix (u16, u32) and with their newline (line)."""

    def __init__(self, framing: str, max_record: int = MAX_PAYLOAD_BYTES) -> None:
        self.framing = check_framing(framing)
        self.max_record = max_record
        self._held = bytearray()
        self.records = 0

    def feed(self, data: bytes) -> list[bytes]:
        self._held += data
        out: list[bytes] = []
        if self.framing == "line":
            end = self._held.rfind(b"\n")
            if end >= 0:
                out = [line + b"\n" for line in bytes(self._held[: end]).split(b"\n")]
                del self._held[: end + 1]
            for record in out:
                self._check(len(record))
            if len(self._held) > self.max_record:
                self._check(len(self._held))
        else:
            prefix = _PREFIX[self.framing]
            start = 0
            while len(self._held) - start >= prefix.size:
                (size,) = prefix.unpack_from(self._held, start)
                self._check(size)  # before waiting for it: a hostile length never makes us buffer it
                if len(self._held) - start - prefix.size < size:
                    break
                out.append(bytes(self._held[start + prefix.size: start + prefix.size + size]))
                start += prefix.size + size
            del self._held[:start]
        self.records += len(out)
        return out

    def finish(self) -> list[bytes]:
        """The end of input: a last line without its newline is a record; a length-prefixed
        record cut short is an error."""
        held, self._held = bytes(self._held), bytearray()
        if not held:
            return []
        if self.framing == "line":
            self.records += 1
            return [held]
        raise RecordError(f"the input ends inside record {self.records}: {len(held)} bytes of a "
                          f"{self.framing} record (prefix included) arrived")

    def _check(self, size: int) -> None:
        if size > self.max_record:
            raise RecordError(f"record {self.records} is {size} bytes, longer than a frame "
                              f"({self.max_record} bytes): raise --frame-bytes (up to {MAX_PAYLOAD_BYTES})")


def framed(record: bytes, framing: str) -> bytes:
    """A record as it goes back into a byte stream of the framing."""
    if framing == "line":
        return record
    return _PREFIX[framing].pack(len(record)) + record


class _FrameCollector:
    """A sink that keeps each frame the writer sends (one write per frame)."""

    def __init__(self) -> None:
        self.frames: list[bytes] = []

    def write(self, frame: bytes) -> int:
        self.frames.append(frame if isinstance(frame, bytes) else bytes(frame))
        return len(frame)

    def flush(self) -> None:
        pass

    def take(self) -> list[bytes]:
        frames, self.frames = self.frames, []
        return frames


def encode_records(records: Iterable[bytes], code=DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
                   frame_bytes: int = DEFAULT_FRAME_BYTES, stream_id: int | None = None,
                   repair: str | tuple[int, int] | None = None, key: bytes | None = None) -> Iterator[bytes]:
    """One protected blob (a whole frame) per record, as each record comes, then the
    stream's closing frame (empty); with repair 'R/K', R repair blobs after every K
    records. Send each blob as one datagram, or write them back to back: either way
    `decode_records` gives the records back."""
    collector = _FrameCollector()
    writer = FrameWriter(collector, code, depth, frame_bytes, stream_id, repair, key)
    if isinstance(records, (list, tuple)):  # all here already: code them in batches
        for start in range(0, len(records), RECORD_BATCH):
            try:
                writer.send_records(records[start: start + RECORD_BATCH])
            except SettingError:  # a record too long: the ones before it were sent, and leave first
                yield from collector.take()
                raise
            yield from collector.take()
    else:
        for record in records:  # as they come: each at once
            writer.send_record(record)
            yield from collector.take()
    writer.close()
    yield from collector.take()


class BlobScanner:
    """FrameScanner's interface over separate blobs (datagrams): each blob is searched for
    frames on its own, so a damaged or foreign datagram costs only itself."""

    def __init__(self, blobs: Iterable[bytes], on_blob: Callable[[int], None] | None = None,
                 key: bytes | None = None) -> None:
        self._key = key
        self._blobs = blobs
        self._on_blob = on_blob
        self.stats = ScanStats()
        self.bytes_read = 0
        self.blobs = 0

    def frames(self) -> Iterator[DecodedFrame]:
        return frames_of(self.items())

    def items(self) -> Iterator[DecodedFrame | FrameRun]:
        """The frames found, in order; blobs given all at once that follow one another as
        FrameRuns (reader.grouped), which delivery may take together."""
        if isinstance(self._blobs, (list, tuple)):  # all here already: take them in batches
            for start in range(0, len(self._blobs), BLOB_BATCH):
                batch = self._blobs[start: start + BLOB_BATCH]
                found: list[DecodedFrame] = []  # whole single frames in a row
                for blob, frame in zip(batch, single_frames(batch, self._key)):
                    if frame is None:
                        yield from grouped(found)
                        found = []
                        yield from self._scan(blob)
                    else:
                        self.blobs += 1
                        self.bytes_read += len(blob)
                        found.append(frame)
                yield from grouped(found)
            return
        for blob in self._blobs:  # as they come: each at once
            frame = single_frame(blob, self._key)
            if frame is None:
                yield from self._scan(blob)
            else:
                self.blobs += 1
                self.bytes_read += len(blob)
                yield frame

    def _scan(self, blob: bytes):
        """The frames found in one blob, searched on its own."""
        self.blobs += 1
        self.bytes_read += len(blob)
        scanner = FrameScanner(io.BytesIO(blob), key=self._key)
        found = False
        for frame in scanner.frames():
            found = True
            yield frame
        self.stats.skipped_bytes += scanner.stats.skipped_bytes
        if len(self.stats.header_errors) < 100:
            self.stats.header_errors.extend(scanner.stats.header_errors[:10])
        if not found and self._on_blob is not None:
            self._on_blob(len(blob))


class RecordReader(AssemblerReadings):
    """Iterate the verified records of a stream of frames, in order, each once.

    on_error: 'drop' (default) leaves damaged records out, 'keep' delivers them as
    corrected as far as the code allows (flagged in the report), 'fail' raises
    DamagedDataError at the first damaged or lost record. A lost record is never replaced.
    Record numbers are the frames' sequence numbers."""

    def __init__(self, assembler: Assembler, on_frame: Callable[[FrameReport], None] | None = None,
                 keep_frame_reports: bool = True) -> None:
        self._assembler = assembler
        self._on_frame = on_frame
        self._keep = keep_frame_reports
        self.frames: list[FrameReport] = []
        self.missing: list[int] = []  # record numbers (sequence numbers) that never arrived

    def __iter__(self) -> Iterator[bytes]:
        for _, record, _ in self.with_reports():
            yield record

    def with_reports(self) -> Iterator[tuple[int, bytes, FrameReport]]:
        """(record number, record, its frame report) for each record delivered."""
        keep_damaged = self._assembler.on_error == "keep"
        for data, reports in self._assembler:
            if self._keep:
                self.frames.extend(reports)
            if len(reports) > 1:  # frames delivered together: each report's `bytes` are its record
                view, at = memoryview(data), 0
                for report in reports:
                    if self._on_frame is not None:
                        self._on_frame(report)
                    yield report.seq, bytes(view[at: at + report.bytes]), report
                    at += report.bytes
                continue
            for report in reports:  # none: more data of the frame before (never for records)
                if self._on_frame is not None:
                    self._on_frame(report)
                if report.status == "lost":
                    if len(self.missing) < 100_000:
                        self.missing.append(report.seq)
                    continue
                if report.closing and report.bytes == 0 and report.status in (CLEAN, CORRECTED, REBUILT):
                    continue  # the stream's empty closing frame ends it; it is not a record
                if report.status in (CLEAN, CORRECTED, REBUILT) or (report.status == DAMAGED and keep_damaged):
                    yield report.seq, data, report

    @property
    def report(self) -> DecodeReport:
        return DecodeReport(list(self.frames), self.summary)


def record_assembler(source, on_error: str, key: bytes | None = None, accept_unauthenticated: bool = False) -> Assembler:
    if on_error not in RECORD_ON_ERROR:
        raise RecordError(f"on_error for records must be one of {', '.join(RECORD_ON_ERROR)} "
                         f"(a zero-filled record would be an invented one), got {on_error!r}")
    # the assembler drops damaged frames' bytes under 'drop'; 'keep' hands them on as they are
    keys = {"key": key, "accept_unauthenticated": accept_unauthenticated}
    if isinstance(source, (bytes, bytearray, memoryview)):
        return Assembler(io.BytesIO(bytes(source)), on_error, **keys)
    if hasattr(source, "read"):
        return Assembler(source, on_error, **keys)
    return Assembler(None, on_error, scanner=BlobScanner(source, key=key), **keys)


def decode_records(source: Iterable[bytes] | BinaryIO | bytes, on_error: str = "drop",
                   on_frame: Callable[[FrameReport], None] | None = None, key: bytes | None = None,
                   accept_unauthenticated: bool = False) -> RecordReader:
    """The records of a protected stream: `source` is an iterable of blobs (datagrams, or
    the blobs encode_records gave), a binary file, or one container in memory. key and
    accept_unauthenticated as for bitmend.Decoder."""
    return RecordReader(record_assembler(source, on_error, key, accept_unauthenticated), on_frame)


def pump_records(source: BinaryIO, encoder, framing: str, progress: Callable[[int], None] | None = None,
                 max_delay: float | None = None) -> int:
    """Cut source into records as its bytes arrive and send each through encoder (an
    api.Encoder) as a frame of its own, at once. With repair frames, a group closes
    max_delay after its first record. Returns the number of records."""
    from bitmend.live import GroupClock, LiveReader

    reader = source if hasattr(source, "read_within") else LiveReader(source)
    splitter = RecordSplitter(framing, encoder.frame_bytes)
    groups = GroupClock(encoder, time.monotonic)
    done = 0
    while True:
        since = groups.since()
        timeout = None if since is None or max_delay is None else max(0.0, since + max_delay - time.monotonic())
        block = reader.read_within(timeout)
        groups.check(max_delay)
        if block is None:
            continue
        if not block:
            break
        for record in splitter.feed(block):
            encoder.send_record(record)
        done += len(block)
        if progress is not None:
            progress(done)
    for record in splitter.finish():
        encoder.send_record(record)
    return splitter.records


__all__ = ["FRAMINGS", "RecordError", "RecordSplitter", "RecordReader", "BlobScanner", "encode_records",
           "decode_records", "framed", "pump_records", "DamagedDataError"]
