"""A survey of a container without decoding payloads: one row per frame found, then totals.

`bitmend inspect` prints what this module counts. Frames are found by the scanner alone
(markers, headers and their copies), so a survey costs a marker search and the header
decodes, never a payload decode. Memory stays bounded: rows are handed out as they are
found; the survey keeps only its totals and one frame count per stream.

Overhead is container bytes per payload byte, less one: wire / payload - 1. Repair frames
carry no payload of their own, so they count as wire bytes only.
"""

from __future__ import annotations

import io
import json
from dataclasses import asdict, dataclass
from typing import BinaryIO, Iterator

from bitmend.codes.catalog import CATALOG
from bitmend.container.assembler import NotAContainerError
from bitmend.container.reader import FrameScanner
from bitmend.wording import counted

_CATALOG_NAMES = {entry.code_id: entry.name for entry in CATALOG}

#: the column titles above `SurveyedFrame.table_row()`
TABLE_HEADER = f"{'seq':>8} {'offset':>12} {'stream':<17}{'code':<14}{'depth':>6}{'payload':>9}{'frame':>9}  notes"


@dataclass(frozen=True)
class SurveyedFrame:
    """One frame as its header describes it.

    stream is the stream identity in hex (None for version 1 frames, which carry none);
    position is the frame's payload offset within its stream (None for version 1 and for
    repair frames); payload_bytes is the header's length field (a repair frame's symbol
    size); marker_distance is how many marker bits differed from the pattern."""

    seq: int
    offset: int
    stream: str | None
    version: int
    position: int | None
    code: str
    depth: int
    payload_bytes: int
    frame_bytes: int
    last: bool
    repair: bool
    keyed: bool
    truncated: bool
    marker_distance: int
    header_from_copy: bool = False  # the header was hit; its copy was read instead

    @property
    def notes(self) -> list[str]:
        """The flags worth a word in a table: last, repair, keyed, truncated, header from copy."""
        return [word for word, on in (("last", self.last), ("repair", self.repair), ("keyed", self.keyed),
                                      ("truncated", self.truncated),
                                      ("header from copy", self.header_from_copy)) if on]

    def table_row(self) -> str:
        """One line under TABLE_HEADER."""
        return (f"{self.seq:>8} {self.offset:>12} {self.stream or '(version 1)':<17}{self.code:<14}{self.depth:>6}"
                f"{self.payload_bytes:>9}{self.frame_bytes:>9}  {', '.join(self.notes)}")

    def to_json(self) -> str:
        """One JSON Lines object, type "frame" (header_from_copy is left out, as it always was)."""
        record = asdict(self)
        del record["header_from_copy"]
        return json.dumps({"type": "frame", **record}, separators=(",", ":"))


@dataclass(frozen=True)
class SurveySummary:
    """The totals of a survey. stream_frames: (stream identity or None, frames) in the order
    the streams were first seen; repair frames add to container_bytes only."""

    frames: int
    payload_bytes: int
    container_bytes: int
    skipped_bytes: int
    stream_frames: tuple[tuple[str | None, int], ...]

    @property
    def streams(self) -> int:
        return len(self.stream_frames)

    @property
    def overhead(self) -> float:
        """container_bytes / payload_bytes - 1 (inf when no payload was found)."""
        return self.container_bytes / self.payload_bytes - 1 if self.payload_bytes else float("inf")

    def one_line(self) -> str:
        """The human summary under the table."""
        return (f"{counted(self.frames, 'frame')} in {counted(self.streams, 'stream')}, "
                f"{counted(self.payload_bytes, 'payload byte')} in {counted(self.container_bytes, 'container byte')} "
                f"(overhead {self.overhead:.1%}), {counted(self.skipped_bytes, 'byte')} outside frames")

    def to_json(self) -> str:
        """The closing JSON Lines object, type "summary"."""
        return json.dumps({"type": "summary", "frames": self.frames, "payload_bytes": self.payload_bytes,
                           "container_bytes": self.container_bytes, "skipped_bytes": self.skipped_bytes,
                           "streams": self.streams,
                           "stream_frames": [{"stream": s, "frames": n} for s, n in self.stream_frames]},
                          separators=(",", ":"))


class ContainerSurvey:
    """Walk a container once: `frames()` hands out a SurveyedFrame per frame found, and
    `summary()` afterwards gives the totals (NotAContainerError when no frame was found)."""

    def __init__(self, source: BinaryIO) -> None:
        self._scanner = FrameScanner(source, decode_payloads=False)
        self._frames = self._payload = self._wire = 0
        self._streams: dict[str | None, int] = {}  # stream identity (None: version 1) -> frames
        self._done = False

    def frames(self) -> Iterator[SurveyedFrame]:
        for found in self._scanner.frames():
            h = found.header
            stream = f"{h.stream_id:016x}" if h.identified else None
            self._frames += 1
            self._payload += 0 if h.repair else h.length
            self._wire += h.frame_bytes
            self._streams[stream] = self._streams.get(stream, 0) + 1
            yield SurveyedFrame(seq=h.seq, offset=found.offset, stream=stream, version=h.version,
                                position=h.position if h.identified and not h.repair else None,
                                code=_CATALOG_NAMES.get(h.code_id) or h.code_name, depth=h.depth,
                                payload_bytes=h.length, frame_bytes=h.frame_bytes, last=h.last, repair=h.repair,
                                keyed=h.keyed, truncated=found.truncated, marker_distance=found.marker_distance,
                                header_from_copy=found.header_from_copy)
        self._done = True

    def summary(self) -> SurveySummary:
        """The totals of the whole input (the frames not yet taken are walked first)."""
        if not self._done:
            for _ in self.frames():
                pass
        if self._frames == 0:
            errors = self._scanner.stats.header_errors
            raise NotAContainerError("no decodable bitmend frame found in the input" +
                                     (f" ({errors[0]})" if errors else ""))
        return SurveySummary(self._frames, self._payload, self._wire, self._scanner.stats.skipped_bytes,
                             tuple(self._streams.items()))


def survey_bytes(data: bytes) -> tuple[list[SurveyedFrame], SurveySummary]:
    """Every frame of a container held in memory, and the totals."""
    survey = ContainerSurvey(io.BytesIO(data))
    return list(survey.frames()), survey.summary()


__all__ = ["TABLE_HEADER", "SurveyedFrame", "SurveySummary", "ContainerSurvey", "survey_bytes"]
