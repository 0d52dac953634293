"""Turn found frames into output bytes and frame reports, applying the on-error policy.

Sequence numbers reveal lost frames; the closing flag tells a finished stream from a
truncated one; a stream that starts again at sequence 0 (concatenated containers) is
decoded as a continuation.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import BinaryIO, Iterator

from bitmend.container.reader import DecodedFrame, FrameScanner
from bitmend.report import CLEAN, CORRECTED, DAMAGED, LOST, FrameReport, Summary

ON_ERROR_CHOICES = ("keep", "zero", "drop", "fail")
MAX_LOST_LISTED = 100_000  # a gap wider than this is listed only up to this many frames


class NotAContainerError(ValueError):
    """The input holds no bitmend frame at all."""


class DamagedDataError(ValueError):
    """on_error='fail' and a frame was damaged or lost."""


@dataclass
class _Counts:
    frames: int = 0
    clean: int = 0
    corrected: int = 0
    damaged: int = 0
    lost: int = 0
    bytes_out: int = 0
    corrected_symbols: int = 0
    failed_blocks: int = 0


def _symbol_bits(header) -> int:
    """1 for binary codes, 8 for Reed-Solomon; 1 when the frame's code is unknown."""
    try:
        return getattr(header.code, "symbol_bits", 1)
    except ValueError:  # a defined code whose definition block was lost
        return 1


class Assembler:
    """Iterate (data, FrameReport) pairs for a container; summary() when done."""

    def __init__(self, source: BinaryIO, on_error: str = "keep") -> None:
        if on_error not in ON_ERROR_CHOICES:
            raise ValueError(f"on_error must be one of {', '.join(ON_ERROR_CHOICES)}, got {on_error!r}")
        self.on_error = on_error
        self.scanner = FrameScanner(source)
        self._counts = _Counts()
        self._notes: list[str] = []
        self._expected: int | None = None  # next sequence number expected
        self._end_seen = False
        self._full_length: int | None = None  # payload size of the stream's full frames
        self._any_frame = False
        self._truncated = False
        self._symbol_bits: set[int] = set()  # symbol sizes of the codes seen (1 binary, 8 RS)

    # ---- per-frame bookkeeping ---------------------------------------------------------
    def _record(self, report: FrameReport) -> None:
        c = self._counts
        c.frames += 1
        setattr(c, report.status, getattr(c, report.status) + 1)
        c.bytes_out += report.bytes
        c.corrected_symbols += report.corrected_symbols
        c.failed_blocks += report.failed_count

    def _lost(self, first: int, stop: int) -> Iterator[tuple[bytes, FrameReport]]:
        count = stop - first
        if count > MAX_LOST_LISTED:
            self._notes.append(f"{count} frames lost from sequence {first}; the first {MAX_LOST_LISTED} are listed")
        for seq in range(first, first + min(count, MAX_LOST_LISTED)):
            length = self._full_length  # lost frames inside a stream are full-size ones
            data = bytes(length or 0) if self.on_error == "zero" else b""
            report = FrameReport(seq, None, LOST, 0, 0, 0, [], False, self._counts.bytes_out, len(data),
                                 missing_bytes=length)
            self._record(report)
            yield data, report
            if self.on_error == "fail":
                raise DamagedDataError(f"frame {seq} lost")

    def _status(self, frame: DecodedFrame) -> str:
        if not frame.crc_ok:
            return DAMAGED
        # CRC-verified; blocks that failed can only lie in the zero padding, still worth a flag
        return CORRECTED if frame.corrected_symbols or frame.failed_blocks else CLEAN

    def __iter__(self) -> Iterator[tuple[bytes, FrameReport]]:
        for frame in self.scanner.frames():
            self._any_frame = True
            header = frame.header
            if self._expected is not None and header.seq != self._expected:
                if header.seq > self._expected:
                    yield from self._lost(self._expected, header.seq)
                elif header.seq == 0:
                    self._notes.append("a stream ended without its closing frame; a new one began")
                else:
                    self._notes.append(f"frame {header.seq} arrived out of order")
            elif self._expected is None and header.seq > 0:
                yield from self._lost(0, header.seq)
            if not header.last:
                self._full_length = max(self._full_length or 0, header.length)
            self._symbol_bits.add(_symbol_bits(header))
            status = self._status(frame)
            data = frame.payload
            if status == DAMAGED:
                if self.on_error == "zero":
                    data = bytes(len(frame.payload))
                elif self.on_error in ("drop", "fail"):
                    data = b""
            report = FrameReport(header.seq, frame.offset, status, len(frame.block_status),
                                 frame.corrected_blocks, frame.corrected_symbols, frame.failed_blocks,
                                 frame.crc_ok, self._counts.bytes_out, len(data), frame.truncated,
                                 frame.failed_count)
            self._record(report)
            yield data, report
            if status == DAMAGED and self.on_error == "fail":
                raise DamagedDataError(f"frame {header.seq} at byte {frame.offset} is damaged")
            self._truncated = self._truncated or frame.truncated
            self._end_seen = header.last
            self._expected = 0 if header.last else (header.seq + 1) & 0xFFFFFFFF
        if not self._any_frame:
            errors = self.scanner.stats.header_errors
            detail = f" ({errors[0]})" if errors else ""
            raise NotAContainerError(f"no decodable bitmend frame found in the input{detail}")
        if not self._end_seen and self.on_error == "fail":
            raise DamagedDataError("the stream ends without its closing frame (truncated?)")

    def summary(self) -> Summary:
        c = self._counts
        complete = self._end_seen and c.damaged == 0 and c.lost == 0 and not self._truncated
        notes = list(self._notes) + list(dict.fromkeys(self.scanner.stats.header_errors))[:10]
        units = {"bytes" if bits == 8 else "bits" for bits in self._symbol_bits} or {"bits"}
        return Summary(c.frames, c.clean, c.corrected, c.damaged, c.lost, c.bytes_out,
                       c.corrected_symbols, c.failed_blocks, complete, self._end_seen,
                       self.scanner.stats.skipped_bytes, notes,
                       units.pop() if len(units) == 1 else "symbols (bits or bytes)")
