"""Decode reports: one small frozen record per frame and one per run (JSON Lines)."""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field

from bitmend.wording import counted

CLEAN, CORRECTED, DAMAGED, LOST, REBUILT = "clean", "corrected", "damaged", "lost", "rebuilt"
UNAUTHENTICATED = "unauthenticated"  # a frame held back by the key rules: never delivered


@dataclass(frozen=True)
class FrameReport:
    """What happened to one frame.

    offset is the frame's byte offset in the input (None for a lost frame); out_offset and
    bytes say where its data went in the output (bytes = 0 when nothing was written).
    stream is the stream's identity in hex (None for version 1 frames, which carry none)
    and stream_index counts the streams of the input from 0. reordered: the frame arrived
    after one numbered later and was put back in place.

    A lost frame belongs to a run of gap_frames consecutive lost frames; gap_bytes is the
    payload the whole run carried, known from the stream positions of the frames either
    side (None when no frame follows the run, and for version 1). missing_bytes is this
    frame's own payload size when that is known (a run of one). With on_error=zero the
    run's gap_bytes zeros are written at the first lost frame of the run (its `bytes`);
    a run of unknown size is never zero-filled."""

    seq: int
    offset: int | None
    status: str
    blocks: int
    corrected_blocks: int
    corrected_symbols: int
    failed_blocks: list[int]
    crc_ok: bool
    out_offset: int
    bytes: int
    truncated: bool = False
    failed_count: int = 0  # all uncorrectable blocks; failed_blocks lists at most 4096
    missing_bytes: int | None = None  # lost frame: payload bytes it carried, when known
    gap_frames: int | None = None  # lost frame: frames in its run of consecutive lost frames
    gap_bytes: int | None = None  # lost frame: payload bytes of the whole run, when known
    stream: str | None = None  # stream identity (16 hex digits); None for version 1 frames
    stream_index: int = 0  # which stream of the input, counted from 0
    reordered: bool = False  # arrived after a frame numbered later; put back in place
    closing: bool = False  # the stream's closing frame

    @classmethod
    def of_frame(cls, seq: int, offset: int | None, status: str, blocks: int, corrected_blocks: int,
                 corrected_symbols: int, failed_blocks: list[int], crc_ok: bool, out_offset: int, bytes: int,
                 truncated: bool, failed_count: int, stream: str | None, stream_index: int, reordered: bool,
                 closing: bool) -> "FrameReport":
        """The report of a frame that arrived (no lost-run fields), equal to the one the
        constructor makes, made without the frozen constructor's per-field setattr: the
        decoder makes one per frame, and that constructor cost more than the rest of the
        frame's delivery."""
        return cls._of_fields({
            "seq": seq, "offset": offset, "status": status, "blocks": blocks, "corrected_blocks": corrected_blocks,
            "corrected_symbols": corrected_symbols, "failed_blocks": failed_blocks, "crc_ok": crc_ok,
            "out_offset": out_offset, "bytes": bytes, "truncated": truncated, "failed_count": failed_count,
            "missing_bytes": None, "gap_frames": None, "gap_bytes": None, "stream": stream,
            "stream_index": stream_index, "reordered": reordered, "closing": closing})

    @classmethod
    def clean_frames(cls, seqs: list[int], offsets: list[int], blocks: list[int], out_offsets: list[int],
                     sizes: list[int], stream: str | None, stream_index: int) -> list["FrameReport"]:
        """of_frame of each clean frame of a run (status clean, nothing corrected, CRC-32C
        good, not reordered, not closing), i-th from the i-th of each list: one filled-in
        record copied and its five per-frame fields set, at half of of_frame's cost."""
        model = cls.of_frame(0, 0, CLEAN, 0, 0, 0, [], True, 0, 0, False, 0, stream, stream_index, False,
                             False).__dict__
        new, set_fields = object.__new__, object.__setattr__  # as _of_fields, without a call per report
        reports = []
        for seq, offset, count, out_offset, size in zip(seqs, offsets, blocks, out_offsets, sizes):
            fields = model.copy()
            fields["seq"] = seq
            fields["offset"] = offset
            fields["blocks"] = count
            fields["out_offset"] = out_offset
            fields["bytes"] = size
            fields["failed_blocks"] = []  # a list of each report's own
            report = new(cls)
            set_fields(report, "__dict__", fields)
            reports.append(report)
        return reports

    @classmethod
    def run_frames(cls, seqs: list[int], offsets: list[int], blocks: list[int], out_offsets: list[int],
                   sizes: list[int], stream: str | None, stream_index: int,
                   outcomes: list[tuple[int, str, tuple[int, int, int], list[int], bool]]) -> list["FrameReport"]:
        """of_frame of each frame of a run, any status (not truncated, reordered or
        closing): clean_frames' records, then for each frame that is not clean, given in
        outcomes as (its place in the run, status, (corrected blocks, corrected symbols,
        failed blocks), failed_blocks, crc_ok), those fields set in place. Only those
        frames are listed: a damaged run at p = 1e-3 has every frame corrected, a
        clean-looking one few (of_frame's sixteen arguments and dict cost 7 microseconds a
        frame of a damaged run; per-frame lists of every field 4.7; this 3.5, measured)."""
        reports = cls.clean_frames(seqs, offsets, blocks, out_offsets, sizes, stream, stream_index)
        for place, status, (corrected_blocks, symbols, failed_count), failed, crc_ok in outcomes:
            fields = reports[place].__dict__
            fields["status"] = status
            fields["corrected_blocks"] = corrected_blocks
            fields["corrected_symbols"] = symbols
            fields["failed_blocks"] = failed
            fields["crc_ok"] = crc_ok
            fields["failed_count"] = failed_count
        return reports

    @classmethod
    def _of_fields(cls, fields: dict) -> "FrameReport":
        """The report holding `fields` (every field, by name) as its own __dict__."""
        report = object.__new__(cls)
        object.__setattr__(report, "__dict__", fields)
        return report

    def to_json(self) -> str:
        return json.dumps({"type": "frame", **asdict(self)}, separators=(",", ":"))


@dataclass(frozen=True)
class Summary:
    """The whole run. complete is true only when the output is exactly the stream(s) that
    were written: every frame arrived once and verified, every stream's closing frame was
    seen, and no frame of another stream was found among them (duplicates dropped and
    reordered frames put back in place do not spoil it)."""

    frames: int
    clean: int
    corrected: int
    damaged: int
    lost: int
    bytes_out: int
    corrected_symbols: int
    failed_blocks: int
    complete: bool
    end_seen: bool
    skipped_bytes: int
    notes: list[str] = field(default_factory=list)
    symbol_unit: str = "bits"  # what corrected_symbols counts: bits, or bytes for Reed-Solomon
    duplicates: int = 0  # second copies of a frame, dropped
    foreign: int = 0  # frames of another stream found inside a stream, skipped
    reordered: int = 0  # frames that arrived after one numbered later, put back in place
    late: int = 0  # frames that came after they had been declared lost, dropped
    streams: int = 0  # streams found in the input
    rebuilt: int = 0  # data frames that never arrived whole, rebuilt from repair frames and verified
    repair_frames: int = 0  # repair frames that arrived intact
    unauthenticated: int = 0  # frames not delivered: a tag that did not match, or none to check

    def to_json(self) -> str:
        return json.dumps({"type": "summary", **asdict(self)}, separators=(",", ":"))

    def one_line(self) -> str:
        """The human summary printed to stderr."""
        verdict = "all data verified" if self.complete else "INCOMPLETE"
        unit = self.symbol_unit.removesuffix("s")  # what corrected_symbols counts: bit or byte
        parts = [counted(self.frames, "frame"), f"{self.clean} clean", f"{self.corrected} corrected",
                 f"{self.damaged} damaged", f"{self.lost} lost",
                 counted(self.corrected_symbols, unit) + " corrected", counted(self.bytes_out, "byte") + " out"]
        for value, what in ((self.rebuilt, "rebuilt"), (self.unauthenticated, "unauthenticated"),
                            (self.duplicates, None), (self.reordered, "reordered"),
                            (self.foreign, "foreign"), (self.late, "late")):
            if value:
                parts.append(f"{value} {what}" if what else counted(value, "duplicate"))
        if self.streams > 1:
            parts.append(counted(self.streams, "stream"))
        if self.skipped_bytes:
            parts.append(counted(self.skipped_bytes, "byte") + " skipped")
        if not self.end_seen:
            parts.append("end of stream missing")
        return f"bitmend decode: {verdict}: " + ", ".join(parts)


@dataclass
class DecodeReport:
    """Frame reports (kept when asked) and the summary, for the Python API."""

    frames: list[FrameReport]
    summary: Summary

    @property
    def complete(self) -> bool:
        return self.summary.complete

    def to_jsonl(self) -> str:
        return "".join(f.to_json() + "\n" for f in self.frames) + self.summary.to_json() + "\n"
