"""Delivery order: put the frames of a stream in sequence, once each, and keep others out.

The scanner yields frames in the order they lie in the input. A link or a disk can repeat
frames, swap them, lose them, or splice in frames of another stream. The sequencer turns
that into the stream as it was written (docs/FORMAT.md, "Delivery rules"):

- frames of the current stream are released in sequence order, each sequence number once;
- a frame that arrives early waits in a window of at most REORDER_WINDOW frames and is put
  back in place; a missing frame is declared lost only when a frame REORDER_WINDOW or more
  places after it has arrived, or when the input ends;
- a second copy of a sequence number is a duplicate: dropped and counted (a damaged copy
  still waiting is replaced by an intact one);
- a frame of another stream while the current one is open is held aside (at most
  REORDER_WINDOW frames); if the current stream goes on, those frames were foreign:
  counted and skipped. A new stream may follow a closed one at once, and an unclosed one
  only when the new stream starts afresh (its frame 0 is among those held aside) and
  REORDER_WINDOW frames of it arrive with none of the current stream (or the input ends);
- version 1 frames name no stream: they form one stream that starts again after a closing
  frame when a frame 0 follows, as version 1 readers did.

Sequence numbers are compared in serial-number arithmetic modulo 2^32 (RFC 1982), so a
stream may wrap. Work per frame is O(1) amortised (dict look-ups); memory is bounded by two
windows of frames.
"""

from __future__ import annotations

from collections import OrderedDict, deque
from dataclasses import dataclass, field, replace

import numpy as np

from bitmend.container import format as fmt
from bitmend.container.reader import DecodedFrame, FrameRun
from bitmend.container.repair import MAX_GROUP, GroupFields, parse_symbol, source_symbol

REORDER_WINDOW = 32  # frames held waiting for an earlier one, and frames of another stream held aside
HALF_SEQ = fmt.SEQ_MODULUS // 2
POSITION_MODULUS = 1 << fmt.POSITION_BITS
_RECENT_STREAMS = 16  # closed streams remembered, so their late copies count as duplicates
_RECENT_LOST = 4096  # sequence numbers declared lost remembered, so a late arrival is named as such
_FOREIGN_STREAMS_KEPT = 1024  # foreign stream ids remembered
_NOTES_KEPT = 20


@dataclass(frozen=True)
class Delivered:
    """The next frame of the stream, in order."""

    frame: DecodedFrame
    stream_index: int  # 0 for the first stream of the input, 1 for the next, ...
    reordered: bool  # it had to wait for an earlier frame that arrived after it
    rebuilt: bool = False  # it never arrived whole: rebuilt from its group's repair frames


@dataclass(frozen=True)
class DeliveredRun:
    """The next frames of the stream, in order, none reordered or rebuilt: what as many
    Delivered events would say, handed on at once."""

    frames: list[DecodedFrame]
    stream_index: int
    data: bytes | None = None  # the frames' payloads end to end, when the run has them so


@dataclass(frozen=True)
class LostRun:
    """Consecutive sequence numbers of the current stream that never arrived.

    gap_bytes is the payload the run carried, known from the stream positions of the
    frames either side (None for version 1 frames, and when no frame follows the run)."""

    stream_index: int
    first_seq: int
    count: int
    gap_bytes: int | None


@dataclass(frozen=True)
class StreamEnded:
    """The current stream ended; closed is False when its closing frame never came."""

    stream_index: int
    stream_id: int | None
    closed: bool


Event = Delivered | DeliveredRun | LostRun | StreamEnded


def _ahead(seq: int, base: int) -> int:
    """How far seq lies after base in serial-number order (negative: before it)."""
    d = (seq - base) % fmt.SEQ_MODULUS
    return d - fmt.SEQ_MODULUS if d >= HALF_SEQ else d


@dataclass
class _Stream:
    key: int | None  # stream id, None for version 1 frames
    index: int
    expected: int = 0  # next sequence number to release
    held: dict[int, DecodedFrame] = field(default_factory=dict)
    overtaken: set[int] = field(default_factory=set)  # held frames that arrived after a higher one
    highest: int | None = None  # highest sequence number seen so far
    end_position: int | None = 0  # stream position just past the last released frame's payload
    lost_from: int | None = None  # first sequence number of a lost run not yet reported
    closed: bool = False
    released: int = 0
    # repair frames (container/repair.py): the stream sends them; good frames released lately
    # (a group's sources), damaged ones waiting for a rebuild, and each group's repair symbols
    uses_repair: bool = False
    recent: OrderedDict = field(default_factory=OrderedDict)  # seq -> DecodedFrame (verified)
    damaged: dict[int, DecodedFrame] = field(default_factory=dict)
    groups: dict[int, "_Group"] = field(default_factory=dict)  # first seq -> group
    rebuilt: set[int] = field(default_factory=set)


@dataclass
class _Group:
    first: int
    fields: GroupFields
    size: int  # repair symbol length
    template: object  # a repair frame's header (code, depth, stream)
    repairs: dict[int, bytes] = field(default_factory=dict)


@dataclass
class DeliveryCounts:
    duplicates: int = 0
    foreign: int = 0
    reordered: int = 0
    late: int = 0  # frames that came after they had been declared lost
    repair_frames: int = 0  # repair frames that arrived intact
    rebuilt: int = 0  # data frames rebuilt from repair frames
    streams: int = 0
    unclosed: int = 0  # streams that ended without their closing frame


class Sequencer:
    """Feed frames in input order with push(); take events in stream order. Call finish()
    at the end of the input for what is still waiting."""

    def __init__(self, window: int = REORDER_WINDOW) -> None:
        if window < 1:
            raise ValueError(f"window must be at least 1 frame, got {window}")
        self.window = window
        self.counts = DeliveryCounts()
        self.notes: list[str] = []
        self._current: _Stream | None = None
        self._aside: list[DecodedFrame] = []  # frames of other streams while the current is open
        self._recent_closed: deque[int] = deque(maxlen=_RECENT_STREAMS)
        self._recent_lost: deque[tuple[int, int]] = deque(maxlen=_RECENT_LOST)
        # stream id (-1: version 1) -> frames skipped as foreign; bounded against hostile input
        # naming a new stream in every frame (those are still counted)
        self._foreign_ids: dict[int, int] = {}

    # ---- public --------------------------------------------------------------------------
    def push(self, frame: DecodedFrame) -> list[Event]:
        events: list[Event] = []
        header = frame.header
        if header.repair:
            self._repair_frame(frame, events)
            return events
        key = header.stream_id if header.identified else None
        current = self._current
        if current is None:
            self._start(key)
        elif key != current.key:
            if key is not None and key in self._recent_closed:
                self.counts.duplicates += 1  # a late copy of a stream already finished
                return events
            if self._is_foreign(key):  # once skipped as foreign, a stream stays foreign
                self._count_foreign(frame)
                return events
            if current.closed:
                self._start(key)
            else:
                self._aside.append(frame)
                if len(self._aside) >= self.window:
                    self._resolve_aside(events)
                return events
        elif current.closed and key is None and header.seq == 0:
            self._start(None)  # version 1: a closed stream followed by another
        self._in_stream(frame, events)
        return events

    def push_run(self, run: FrameRun) -> list[Event]:
        """push() of every frame of a run. When the run is simply the next frames of the
        open stream (nothing waits, nothing is held aside, no lost run to report, no repair
        frames in use, so a frame that failed its CRC-32C is delivered in its place as
        push() would), that is one DeliveredRun and O(1) work; otherwise frame by frame."""
        frames = run.frames
        first, last = frames[0].header, frames[-1].header
        stream = self._current
        if (stream is None or stream.closed or self._aside or stream.held or stream.damaged or stream.uses_repair
                or stream.lost_from is not None or first.repair or first.in_group or last.last
                or (first.stream_id if first.identified else None) != stream.key
                or first.seq != stream.expected
                or (stream.highest is not None and _ahead(first.seq, stream.highest) <= 0)):
            events: list[Event] = []
            for frame in run.loose():
                events.extend(self.push(frame))
            return events
        stream.expected = (last.seq + 1) % fmt.SEQ_MODULUS
        stream.highest = last.seq
        stream.end_position = (last.position + last.length) % POSITION_MODULUS if last.identified else None
        stream.released += len(frames)
        return [DeliveredRun(frames, stream.index, run.data)]

    def finish(self) -> list[Event]:
        """End of input: release what waits, report what never came."""
        events: list[Event] = []
        if self._aside:
            self._resolve_aside(events)
        current = self._current
        if current is not None and not current.closed:
            self._release_all(current, events)
            self._end(current, events)
        self._note_foreign()
        return events

    # ---- streams ---------------------------------------------------------------------------
    def _start(self, key: int | None) -> None:
        self._current = _Stream(key, self.counts.streams)
        self.counts.streams += 1

    def _end(self, stream: _Stream, events: list[Event]) -> None:
        self._flush_lost(stream, None, events)
        if not stream.closed:
            self.counts.unclosed += 1
        events.append(StreamEnded(stream.index, stream.key, stream.closed))

    def _in_stream(self, frame: DecodedFrame, events: list[Event]) -> None:
        stream = self._current
        assert stream is not None
        if self._aside:  # the current stream goes on: what was held aside was foreign
            for other in self._aside:
                self._count_foreign(other)
            self._aside.clear()
        seq = frame.header.seq
        ahead = _ahead(seq, stream.expected)
        if stream.closed or ahead < 0:
            if (stream.key, seq) in self._recent_lost:
                self.counts.late += 1
                self._note(f"frame {seq} came after it had been declared lost; dropped")
            else:
                self.counts.duplicates += 1
            return
        if frame.header.in_group:
            stream.uses_repair = True
        if seq in stream.held:
            self.counts.duplicates += 1
            if not stream.held[seq].crc_ok and frame.crc_ok:
                stream.held[seq] = frame  # an intact copy replaces a damaged one still waiting
            return
        out_of_order = stream.highest is not None and _ahead(seq, stream.highest) < 0
        if stream.highest is None or _ahead(seq, stream.highest) > 0:
            stream.highest = seq
        if seq in stream.damaged:
            self.counts.duplicates += 1
            if not frame.crc_ok:
                return
            del stream.damaged[seq]  # an intact copy of a frame that waits damaged: it takes its place
        elif not frame.crc_ok and stream.uses_repair:
            # a damaged frame of a stream with repair frames waits for its group's repair
            # (or an intact copy); it is delivered damaged only when the window passes it
            stream.damaged[seq] = frame
            self._rebuild_around(stream, seq, events)
            self._slide(stream, seq, events)
            return
        if ahead == 0:
            self._release(stream, frame, out_of_order, events)
            self._drain(stream, events)
            return
        stream.held[seq] = frame
        if out_of_order:
            stream.overtaken.add(seq)
        if stream.groups:
            self._rebuild_around(stream, stream.expected, events)
        self._slide(stream, seq, events)

    def _slide(self, stream: _Stream, seq: int, events: list[Event]) -> None:
        """The window is full: what is more than `window` places behind the newest is not coming."""
        while _ahead(seq, stream.expected) >= self.window and not stream.closed:
            self._advance_one(stream, events)
        self._drain(stream, events)

    def _advance_one(self, stream: _Stream, events: list[Event]) -> None:
        if stream.expected not in stream.held and stream.groups:
            self._rebuild_around(stream, stream.expected, events)  # a last chance before it is lost
        waiting = stream.held.pop(stream.expected, None)
        if waiting is None:
            waiting = stream.damaged.pop(stream.expected, None)  # no rebuild came: deliver it damaged
        if waiting is not None:
            self._release(stream, waiting, self._was_overtaken(stream, stream.expected), events)
        else:
            if stream.lost_from is None:
                stream.lost_from = stream.expected
            self._recent_lost.append((stream.key, stream.expected))
            stream.expected = (stream.expected + 1) % fmt.SEQ_MODULUS

    def _drain(self, stream: _Stream, events: list[Event]) -> None:
        while not stream.closed and stream.expected in stream.held:
            seq = stream.expected
            self._release(stream, stream.held.pop(seq), self._was_overtaken(stream, seq), events)

    @staticmethod
    def _was_overtaken(stream: _Stream, seq: int) -> bool:
        if seq in stream.overtaken:
            stream.overtaken.discard(seq)
            return True
        return False

    def _release_all(self, stream: _Stream, events: list[Event]) -> None:
        """End of input or of the stream: every frame still waiting is released, with the
        frames missing before it declared lost."""
        while (stream.held or stream.damaged) and not stream.closed:
            self._advance_one(stream, events)

    def _release(self, stream: _Stream, frame: DecodedFrame, reordered: bool, events: list[Event]) -> None:
        """reordered: the frame arrived after one with a higher sequence number."""
        header = frame.header
        self._flush_lost(stream, frame, events)
        if reordered:
            self.counts.reordered += 1
        rebuilt = header.seq in stream.rebuilt
        if rebuilt:
            stream.rebuilt.discard(header.seq)
            self.counts.rebuilt += 1
        events.append(Delivered(frame, stream.index, reordered, rebuilt))
        stream.released += 1
        if stream.uses_repair and frame.crc_ok:
            stream.recent[header.seq] = frame  # a source of its group, should a later frame need rebuilding
            while len(stream.recent) > 2 * MAX_GROUP:
                stream.recent.popitem(last=False)
        stream.expected = (header.seq + 1) % fmt.SEQ_MODULUS
        stream.end_position = (header.position + header.length) % POSITION_MODULUS if header.identified else None
        if header.last:
            stream.closed = True
            if stream.key is not None:
                self._recent_closed.append(stream.key)
            for seq in list(stream.held):  # frames numbered after the closing one: not of this stream
                self._count_foreign(stream.held.pop(seq))
            self._end(stream, events)
            if self._aside:  # the next stream may have begun already
                waiting, self._aside = self._aside, []
                for other in waiting:
                    events.extend(self.push(other))

    def _flush_lost(self, stream: _Stream, following: DecodedFrame | None, events: list[Event]) -> None:
        """Report the pending lost run, now that the frame after it (or the end) is known."""
        if stream.lost_from is None:
            return
        first = stream.lost_from
        stream.lost_from = None
        last_missing = (following.header.seq if following is not None else stream.expected)
        count = (last_missing - first) % fmt.SEQ_MODULUS
        gap = None
        if following is not None and following.header.identified and stream.end_position is not None:
            gap = (following.header.position - stream.end_position) % POSITION_MODULUS
        if count:
            events.append(LostRun(stream.index, first, count, gap))

    # ---- repair frames ------------------------------------------------------------------------
    def _repair_frame(self, frame: DecodedFrame, events: list[Event]) -> None:
        """Keep an intact repair frame's symbol with its group and rebuild what it can."""
        header = frame.header
        fields = GroupFields.of(header)
        if not frame.crc_ok or fields is None or not header.identified:
            return  # a damaged repair frame cannot help
        self.counts.repair_frames += 1
        current = self._current
        if current is None:
            self._start(header.stream_id)
            current = self._current
        if current.key != header.stream_id or current.closed:
            return  # another stream's, or one that is already whole: nothing to rebuild
        current.uses_repair = True
        group = current.groups.get(header.seq)
        if group is None or group.fields.count != fields.count or group.size != header.length:
            group = current.groups[header.seq] = _Group(header.seq, fields, header.length, header)
        group.repairs.setdefault(fields.index, frame.payload)
        # forget groups wholly behind the window
        for first in [f for f, g in current.groups.items()
                      if _ahead((f + g.fields.count) % fmt.SEQ_MODULUS, current.expected) < -self.window]:
            del current.groups[first]
        if self._rebuild(current, group, events):
            self._slide(current, (current.highest if current.highest is not None else current.expected), events)

    def _rebuild_around(self, stream: _Stream, seq: int, events: list[Event]) -> None:
        for group in list(stream.groups.values()):
            if 0 <= _ahead(seq, group.first) < group.fields.count:
                self._rebuild(stream, group, events)

    def _rebuild(self, stream: _Stream, group: _Group, events: list[Event]) -> bool:
        """Rebuild the group's data frames still missing (or waiting damaged) when the group
        holds enough symbols: any K' of its K' + R. True if frames were rebuilt."""
        from bitmend.codes.erasure import erasure_code

        count = group.fields.count
        have: dict[int, bytes] = {}
        missing: list[int] = []
        for j in range(count):
            seq = (group.first + j) % fmt.SEQ_MODULUS
            good = stream.recent.get(seq) or stream.held.get(seq)
            if good is not None and good.crc_ok:
                have[j] = source_symbol(good.header, good.payload)
            elif _ahead(seq, stream.expected) >= 0:
                missing.append(j)
        if not missing or len(have) + len(group.repairs) < count:
            return False
        received = {j: np.frombuffer(sym, np.uint8) for j, sym in have.items()}
        received.update({count + i: np.frombuffer(sym, np.uint8) for i, sym in group.repairs.items()})
        sources = erasure_code(count, group.fields.repairs).recover(received, group.size)
        rebuilt_any = False
        for j in missing:
            data = parse_symbol(sources[j].tobytes())
            seq = (group.first + j) % fmt.SEQ_MODULUS
            if data is None:
                self._note(f"frame {seq}: its rebuild from repair frames did not check; not used")
                continue
            header = replace(group.template, seq=seq, length=len(data.payload), last=data.last,
                             position=data.position, repair=False, in_group=True)
            stream.held[seq] = DecodedFrame(header, -1, -1, data.payload, np.zeros(0, np.uint8), True)
            stream.damaged.pop(seq, None)
            stream.rebuilt.add(seq)
            rebuilt_any = True
        if rebuilt_any:
            self._drain(stream, events)
        return rebuilt_any

    # ---- other streams -----------------------------------------------------------------------
    def _resolve_aside(self, events: list[Event]) -> None:
        """Frames of other streams arrived while the current one was open and it has not
        come back (window full, or end of input). A stream among them that starts afresh
        (its frame 0 is there) follows the current one, which ended unclosed; every other
        frame aside is foreign."""
        waiting, self._aside = self._aside, []
        restart = next((f.header.stream_id if f.header.identified else None
                        for f in waiting if f.header.seq == 0), "none")
        if restart == "none" or self._is_foreign(restart):
            for other in waiting:
                self._count_foreign(other)
            return
        current = self._current
        assert current is not None
        self._release_all(current, events)
        self._end(current, events)
        self._note("a stream ended without its closing frame and a new one began")
        self._start(restart)
        for other in waiting:
            key = other.header.stream_id if other.header.identified else None
            if key == restart:
                self._in_stream(other, events)
            else:
                self._count_foreign(other)

    def _is_foreign(self, key: int | None) -> bool:
        return (-1 if key is None else key) in self._foreign_ids

    def _count_foreign(self, frame: DecodedFrame) -> None:
        self.counts.foreign += 1
        key = frame.header.stream_id if frame.header.identified else -1
        if key in self._foreign_ids or len(self._foreign_ids) < _FOREIGN_STREAMS_KEPT:
            self._foreign_ids[key] = self._foreign_ids.get(key, 0) + 1

    def _note_foreign(self) -> None:
        for key, count in list(self._foreign_ids.items())[:10]:
            name = f"stream {key:016x}" if key >= 0 else "a version 1 stream"
            self._note(f"{count} frame{'s' if count != 1 else ''} of {name} skipped: they belong to another stream")

    def _note(self, text: str) -> None:
        """A note for the summary; at most _NOTES_KEPT, so damage cannot grow them without bound."""
        if len(self.notes) < _NOTES_KEPT:
            self.notes.append(text)

