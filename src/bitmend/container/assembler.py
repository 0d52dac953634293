"""Turn found frames into output bytes and frame reports, applying the on-error policy.

The scanner finds frames in input order; the sequencer (container/delivery.py) puts each
stream's frames in sequence order, once each, keeps other streams' frames out and names
the frames that never came. This module turns those events into output bytes and
FrameReports, and keeps the counts for the summary.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import accumulate
from typing import BinaryIO, Iterator

from bitmend.container import format as fmt
from bitmend.container.delivery import Delivered, DeliveredRun, Event, LostRun, Sequencer, StreamEnded
from bitmend.container.reader import CLEAN_COUNTS, DecodedFrame, FrameRun, FrameScanner
from bitmend.errors import ContainerError, SettingError
from bitmend.report import CLEAN, CORRECTED, DAMAGED, LOST, REBUILT, UNAUTHENTICATED, FrameReport, Summary
from bitmend.wording import counted

ON_ERROR_CHOICES = ("keep", "zero", "drop", "fail")
MAX_LOST_LISTED = 100_000  # a gap wider than this is listed only up to this many frames
ZERO_CHUNK = 1 << 20  # zeros for a lost run are produced in pieces of this size
MAX_NOTES = 20


class NotAContainerError(ContainerError, ValueError):
    """The input holds no bitmend frame at all."""


class DamagedDataError(ContainerError, ValueError):
    """on_error='fail' and a frame was damaged or lost."""


@dataclass
class _Counts:
    frames: int = 0
    clean: int = 0
    corrected: int = 0
    damaged: int = 0
    lost: int = 0
    rebuilt: int = 0
    unauthenticated: int = 0
    bytes_out: int = 0
    corrected_symbols: int = 0
    failed_blocks: int = 0


def _symbol_bits(header: fmt.FrameHeader) -> int:
    """1 for binary codes, 8 for Reed-Solomon; 1 when the frame's code is unknown."""
    try:
        return header.code.symbol_bits
    except ValueError:  # a defined code whose definition block was lost
        return 1


_UNNAMED = object()  # a stream index not yet given its name in _stream_names


def _stream_name(header: fmt.FrameHeader) -> str | None:
    return f"{header.stream_id:016x}" if header.identified else None


Piece = tuple[bytes, list[FrameReport]]


class Assembler:
    """Iterate (data, reports) pieces of a container, in stream order: the output bytes of
    the frames whose FrameReports are listed, laid end to end (each report's `bytes` says
    how many are its own). Usually one frame a piece; a run of frames delivered together
    is one piece; a piece with no report carries more data of the frame reported just
    before (zeros of a long lost run). summary() when done."""

    def __init__(self, source: BinaryIO | bytes | None, on_error: str = "keep", scanner=None,
                 key: bytes | None = None, accept_unauthenticated: bool = False, jobs: int = 1) -> None:
        """source: a container byte stream, or a whole container as bytes (read in place);
        or give `scanner`, anything with `frames()` (and, to hand on runs, `items()`),
        `stats` and `bytes_read` like FrameScanner (e.g. one over separate datagrams).

        key: the shared key of keyed frames. With a key, only frames whose tag matches are
        delivered (or used to rebuild others); frames without a tag are not delivered either
        unless accept_unauthenticated. Without a key, keyed frames cannot be checked and are
        delivered only with accept_unauthenticated. Frames held back are reported with
        status 'unauthenticated' and count as missing for their stream.

        jobs: worker processes that decode whole payloads (1: all in this process; the
        output and reports are the same for any number). Applies to a source, not to a
        scanner given."""
        if on_error not in ON_ERROR_CHOICES:
            raise SettingError(f"on_error must be one of {', '.join(ON_ERROR_CHOICES)}, got {on_error!r}")
        self.on_error = on_error
        self.key = key
        self.accept_unauthenticated = accept_unauthenticated
        self._batches = None
        if scanner is None and jobs > 1:
            from bitmend.container.batch_decode import BatchDecoder

            self._batches = BatchDecoder(jobs, key)
        self.scanner = scanner if scanner is not None else FrameScanner(source, key=key, batches=self._batches)
        self.keyed_without_key = 0  # keyed frames held back: no key to check them with
        self.untagged_with_key = 0  # frames without a tag held back: a key was given
        self.sequencer = Sequencer()
        self._counts = _Counts()
        self._notes: list[str] = []
        self._any_frame = False
        self._truncated = False
        self._streams_closed = 0
        self._streams_ended = 0
        self._stream_names: dict[int, str | None] = {}
        self._symbol_bits: set[int] = set()  # symbol sizes of the codes seen (1 binary, 8 RS)
        self._codes_seen: set[int] = set()  # code ids whose symbol size is in _symbol_bits

    def _note(self, text: str) -> None:
        if len(self._notes) < MAX_NOTES:  # damage must not grow the summary without bound
            self._notes.append(text)

    # ---- per-frame bookkeeping ---------------------------------------------------------
    def _record(self, report: FrameReport) -> None:
        c = self._counts
        c.frames += 1
        setattr(c, report.status, getattr(c, report.status) + 1)
        c.bytes_out += report.bytes
        c.corrected_symbols += report.corrected_symbols
        c.failed_blocks += report.failed_count

    def _status(self, frame: DecodedFrame) -> str:
        if not frame.crc_ok:
            return DAMAGED
        # CRC-verified; blocks that failed can only lie in the zero padding, still worth a flag
        return CORRECTED if frame.corrected_symbols or frame.failed_blocks else CLEAN

    def _stream_of(self, stream_index: int, header: fmt.FrameHeader) -> str | None:
        """The name of the stream a delivered frame belongs to (made once per stream index:
        an index is one stream), and its code noted for the summary's units."""
        stream_name = self._stream_names.get(stream_index, _UNNAMED)
        if stream_name is _UNNAMED:
            stream_name = self._stream_names[stream_index] = _stream_name(header)
        if header.code_id not in self._codes_seen:
            self._codes_seen.add(header.code_id)
            self._symbol_bits.add(_symbol_bits(header))
        return stream_name

    def _delivered(self, event: Delivered) -> Iterator[Piece]:
        frame = event.frame
        header = frame.header
        stream_name = self._stream_of(event.stream_index, header)
        status = REBUILT if event.rebuilt else self._status(frame)
        data = frame.payload
        if status == DAMAGED:
            if self.on_error == "zero":
                data = bytes(len(frame.payload))
            elif self.on_error in ("drop", "fail"):
                data = b""
        report = FrameReport.of_frame(header.seq, None if event.rebuilt else frame.offset, status,
                                      len(frame.block_status), frame.corrected_blocks, frame.corrected_symbols,
                                      frame.failed_blocks, frame.crc_ok, self._counts.bytes_out, len(data),
                                      frame.truncated, frame.failed_count, stream_name, event.stream_index,
                                      event.reordered, header.last)
        self._record(report)
        yield data, [report]
        self._truncated = self._truncated or frame.truncated
        if status == DAMAGED and self.on_error == "fail":
            raise DamagedDataError(f"frame {header.seq} at byte {frame.offset} is damaged")

    def _delivered_run(self, event: DeliveredRun) -> Iterator[Piece]:
        """A run of frames delivered in order (see DeliveredRun): the reports _delivered
        would make, and their payloads as one piece (a damaged frame's as corrected as far
        as the code allows, as on_error='keep' delivers it); frame by frame through
        _delivered when a frame failed its CRC-32C under another policy."""
        frames = event.frames
        if self.on_error != "keep" and not all(frame.crc_ok for frame in frames):
            for frame in FrameRun(frames).loose():
                yield from self._delivered(Delivered(frame, event.stream_index, False))
            return
        stream_name = self._stream_of(event.stream_index, frames[0].header)  # a run is of one stream and code
        c = self._counts
        out = c.bytes_out
        if all([frame.crc_ok and frame._counts == CLEAN_COUNTS for frame in frames]):  # the common case
            sizes = [len(frame.payload) for frame in frames]
            reports = FrameReport.clean_frames([frame.header.seq for frame in frames],
                                               [frame.offset for frame in frames],
                                               [len(frame.block_status) for frame in frames],
                                               list(accumulate(sizes[:-1], initial=out)), sizes, stream_name,
                                               event.stream_index)
            c.clean += len(frames)
            c.frames += len(frames)
            c.bytes_out = out + sum(sizes)
        else:
            reports = self._run_reports(frames, stream_name, event.stream_index)
        yield (event.data if event.data is not None else b"".join([frame.payload for frame in frames])), reports

    def _run_reports(self, frames: list[DecodedFrame], stream_name: str | None,
                     stream_index: int) -> list[FrameReport]:
        """The reports of a run's frames, some of them corrected or damaged, counted."""
        c = self._counts
        outcomes = []  # the frames that are not clean: (place, status, counts, failed blocks, CRC-32C good)
        for place, frame in enumerate(frames):
            counts, crc_ok = frame._counts, frame.crc_ok
            if crc_ok and (counts is CLEAN_COUNTS or counts == CLEAN_COUNTS):
                c.clean += 1
                continue
            outcomes.append((place, CORRECTED if crc_ok else DAMAGED, counts,
                             frame.failed_blocks if counts[2] else [], crc_ok))
            if crc_ok:
                c.corrected += 1
            else:
                c.damaged += 1
            c.corrected_symbols += counts[1]
            c.failed_blocks += counts[2]
        sizes = [len(frame.payload) for frame in frames]
        reports = FrameReport.run_frames([frame.header.seq for frame in frames], [frame.offset for frame in frames],
                                         [len(frame.block_status) for frame in frames],
                                         list(accumulate(sizes[:-1], initial=c.bytes_out)), sizes, stream_name,
                                         stream_index, outcomes)
        c.frames += len(frames)
        c.bytes_out += sum(sizes)
        return reports

    def _lost(self, run: LostRun) -> Iterator[Piece]:
        count, gap = run.count, run.gap_bytes
        if gap is not None and gap > count * fmt.MAX_PAYLOAD_BYTES:
            # positions either side disagree with any legal frame sizes: not believed
            self._note(f"frames {run.first_seq}..: stream positions do not fit {count} lost frames; "
                               "missing bytes unknown")
            gap = None
        if count > MAX_LOST_LISTED:
            self._note(f"{count} frames lost from sequence {run.first_seq}; the first {MAX_LOST_LISTED} "
                               "are listed")
        stream = self._stream_names.get(run.stream_index)
        fill = gap if (self.on_error == "zero" and gap is not None) else 0
        for i in range(min(count, MAX_LOST_LISTED)):
            seq = (run.first_seq + i) % fmt.SEQ_MODULUS
            written = fill if i == 0 else 0
            report = FrameReport(seq, None, LOST, 0, 0, 0, [], False, self._counts.bytes_out, written,
                                 missing_bytes=gap if count == 1 else None, gap_frames=count, gap_bytes=gap,
                                 stream=stream, stream_index=run.stream_index)
            self._record(report)
            first = min(written, ZERO_CHUNK)
            yield bytes(first), [report]
            for start in range(first, written, ZERO_CHUNK):  # a long run's zeros, in bounded pieces
                yield bytes(min(ZERO_CHUNK, written - start)), []
            if self.on_error == "fail":
                raise DamagedDataError(f"frame {seq} lost")

    def _handle(self, event: Event) -> Iterator[Piece]:
        if isinstance(event, DeliveredRun):
            yield from self._delivered_run(event)
        elif isinstance(event, Delivered):
            yield from self._delivered(event)
        elif isinstance(event, LostRun):
            yield from self._lost(event)
        elif isinstance(event, StreamEnded):
            self._streams_ended += 1
            if event.closed:
                self._streams_closed += 1
            else:
                name = f"stream {event.stream_id:016x}" if event.stream_id is not None else "the stream"
                self._note(f"{name} ended without its closing frame")

    def _admit(self, frame: DecodedFrame) -> bool:
        """Whether a found frame may take part in delivery, by the key rules (see __init__)."""
        header = frame.header
        if self.accept_unauthenticated and not (self.key is not None and header.keyed):
            return True
        if self.key is None:
            if not header.keyed:
                return True
            self.keyed_without_key += 1
        elif not header.keyed:
            self.untagged_with_key += 1
        elif frame.authentic:
            return True
        return False

    def _unauthenticated(self, frame: DecodedFrame) -> FrameReport:
        header = frame.header
        report = FrameReport(header.seq, frame.offset, UNAUTHENTICATED, len(frame.block_status),
                             frame.corrected_blocks, frame.corrected_symbols, frame.failed_blocks, frame.crc_ok,
                             self._counts.bytes_out, 0, frame.truncated, frame.failed_count,
                             stream=_stream_name(header), closing=header.last)
        self._record(report)
        return report

    def _found(self) -> Iterator[DecodedFrame | FrameRun]:
        """The scanner's frames in the order found, each with its payload decoded; frames
        found together as a FrameRun when the scanner finds them so (items())."""
        items = self.scanner.items() if hasattr(self.scanner, "items") else self.scanner.frames()
        if self._batches is None:
            yield from items
            return
        try:
            yield from self._batches.in_order(items)
        finally:
            self.close()

    def _admits_run(self, run: FrameRun) -> bool:
        """Whether every frame of a run may be delivered by the key rules (_admit), so the
        run may go to the sequencer whole; counts nothing."""
        frames = run.frames
        header = frames[0].header  # the frames of a run share every flag; the rules of _admit
        if self.accept_unauthenticated and not (self.key is not None and header.keyed):
            return True
        if self.key is None or not header.keyed:
            return self.key is None and not header.keyed
        return all(frame.authentic for frame in frames)

    def close(self) -> None:
        """Stop the payload workers, if any (done by itself at the end of the input)."""
        batches, self._batches = self._batches, None
        if batches is not None:
            batches.close()

    def __iter__(self) -> Iterator[Piece]:
        for item in self._found():
            self._any_frame = True
            if isinstance(item, FrameRun):
                if self._admits_run(item):
                    for event in self.sequencer.push_run(item):
                        yield from self._handle(event)
                    continue
                frames = item.loose()
            else:
                frames = [item]
            for frame in frames:
                if not self._admit(frame):
                    yield b"", [self._unauthenticated(frame)]
                    continue
                for event in self.sequencer.push(frame):
                    yield from self._handle(event)
        for event in self.sequencer.finish():
            yield from self._handle(event)
        if not self._any_frame:
            errors = self.scanner.stats.header_errors
            detail = f" ({errors[0]})" if errors else ""
            raise NotAContainerError(f"no decodable bitmend frame found in the input{detail}")
        if self._streams_closed < self._streams_ended and self.on_error == "fail":
            raise DamagedDataError("the stream ends without its closing frame (truncated?)")

    def summary(self) -> Summary:
        c = self._counts
        d = self.sequencer.counts
        end_seen = self._streams_ended > 0 and self._streams_closed == self._streams_ended
        complete = (end_seen and c.damaged == 0 and c.lost == 0 and not self._truncated
                    and d.foreign == 0 and d.late == 0 and c.unauthenticated == 0)
        notes = list(self._notes) + list(self.sequencer.notes)
        if self.keyed_without_key:
            notes.insert(0, f"{counted(self.keyed_without_key, 'keyed frame')} not delivered: "
                            "no key to check their tags "
                            "(give the key file, or accept unauthenticated frames explicitly)")
        if self.untagged_with_key:
            notes.insert(0, f"{counted(self.untagged_with_key, 'frame')} without a tag not delivered: a key was given "
                            "(accept unauthenticated frames explicitly to take them)")
        notes += list(dict.fromkeys(self.scanner.stats.header_errors))[:10]
        units = {"bytes" if bits == 8 else "bits" for bits in self._symbol_bits} or {"bits"}
        return Summary(c.frames, c.clean, c.corrected, c.damaged, c.lost, c.bytes_out,
                       c.corrected_symbols, c.failed_blocks, complete, end_seen,
                       self.scanner.stats.skipped_bytes, notes,
                       units.pop() if len(units) == 1 else "symbols (bits or bytes)",
                       duplicates=d.duplicates, foreign=d.foreign, reordered=d.reordered, late=d.late,
                       streams=d.streams, rebuilt=c.rebuilt, repair_frames=d.repair_frames,
                       unauthenticated=c.unauthenticated)


class AssemblerReadings:
    """What a reader built on an Assembler (the API's Decoder, the RecordReader) tells its
    user about the stream so far; the reader keeps the assembler as self._assembler."""

    _assembler: Assembler

    @property
    def summary(self) -> Summary:
        """What the stream held so far (final once it is read to the end)."""
        return self._assembler.summary()

    @property
    def keyed_without_key(self) -> int:
        """Frames held back because they carry a tag and no key was given to check it."""
        return self._assembler.keyed_without_key

    @property
    def untagged_with_key(self) -> int:
        """Frames held back because they carry no tag while a key was given."""
        return self._assembler.untagged_with_key

    @property
    def bytes_read(self) -> int:
        """Container bytes consumed from the source so far."""
        return self._assembler.scanner.bytes_read
