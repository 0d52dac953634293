"""Decode reports: one small frozen record per frame and one per run (JSON Lines)."""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field

CLEAN, CORRECTED, DAMAGED, LOST = "clean", "corrected", "damaged", "lost"


@dataclass(frozen=True)
class FrameReport:
    """What happened to one frame.

    offset is the frame's byte offset in the input (None for a lost frame); out_offset and
    bytes say where its data went in the output (bytes = 0 when nothing was written). For
    a lost frame, missing_bytes is its payload size when the stream's frame size is known:
    the data missing from the output at out_offset (zero-filled there with on_error=zero)."""

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

    def to_json(self) -> str:
        return json.dumps({"type": "frame", **asdict(self)}, separators=(",", ":"))


@dataclass(frozen=True)
class Summary:
    """The whole run. complete is true only when every frame arrived and verified and the
    stream's closing frame was seen."""

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

    def to_json(self) -> str:
        return json.dumps({"type": "summary", **asdict(self)}, separators=(",", ":"))

    def one_line(self) -> str:
        """The human summary printed to stderr."""
        verdict = "all data verified" if self.complete else "INCOMPLETE"
        parts = [f"{self.frames} frames", f"{self.clean} clean", f"{self.corrected} corrected",
                 f"{self.damaged} damaged", f"{self.lost} lost",
                 f"{self.corrected_symbols} {self.symbol_unit} corrected", f"{self.bytes_out} bytes out"]
        if self.skipped_bytes:
            parts.append(f"{self.skipped_bytes} bytes skipped")
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
