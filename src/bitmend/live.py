"""Live links: read what has arrived, send a frame within a deadline, pass data on at once.

A file or a fast pipe still gets full frames: data that keeps arriving fills frames long
before any deadline. A slow source (`tail -f`, a sensor on a serial line) gets a frame at
most `max_delay` seconds after the first byte it carries arrived, so a reader at the far
end sees each line within that delay plus the link's own.
"""

from __future__ import annotations

import io
import os
import select
import time
from collections import deque
from typing import BinaryIO, Callable

DEFAULT_MAX_DELAY = 0.2  # seconds: well under what a person or a control loop notices on a telemetry link
READ_BYTES = 1 << 20
SLACK = 1e-6  # seconds: a deadline this close counts as reached (a clock read back after waiting
              # exactly until a deadline can fall short of it by rounding)


class LiveReader:
    """Reads whatever a binary source holds now, waiting at most a given time.

    Sources with a file descriptor are read with os.read after select(), so a pipe gives
    its bytes as soon as they are written (a buffered read would wait for a full buffer).
    Sources without one (in-memory files) are read directly and never wait. The source
    must not have been read through its buffer before (bytes held there would be skipped)."""

    def __init__(self, source: BinaryIO, read_bytes: int = READ_BYTES) -> None:
        self._source = source
        self._read_bytes = read_bytes
        try:
            self._fd: int | None = source.fileno()
        except (AttributeError, OSError, io.UnsupportedOperation, ValueError):
            self._fd = None

    def read_within(self, timeout: float | None) -> bytes | None:
        """Bytes available now (waiting up to timeout seconds, forever if None); b"" at the
        end of input; None if nothing arrived in time."""
        if self._fd is None:
            read1 = getattr(self._source, "read1", None)
            return read1(self._read_bytes) if read1 else self._source.read(self._read_bytes)
        if timeout is not None:
            ready, _, _ = select.select([self._fd], [], [], max(0.0, timeout))
            if not ready:
                return None
        return os.read(self._fd, self._read_bytes)


class ArrivalClock:
    """When the oldest byte still waiting in an encoder arrived.

    Blocks are recorded with the stream offset where they end and the time they came; the
    encoder says how many bytes it still holds, and the clock answers with the arrival time
    of the first of them."""

    def __init__(self) -> None:
        self._blocks: deque[tuple[int, float]] = deque()  # (stream offset just past the block, arrival)

    def arrived(self, end_offset: int, when: float) -> None:
        self._blocks.append((end_offset, when))

    def oldest_waiting(self, bytes_in: int, pending: int) -> float | None:
        first_waiting = bytes_in - pending
        while self._blocks and self._blocks[0][0] <= first_waiting:
            self._blocks.popleft()
        return self._blocks[0][1] if pending and self._blocks else None


def pump_encode(source: BinaryIO | LiveReader, encoder, max_delay: float | None,
                progress: Callable[[int], None] | None = None,
                clock: Callable[[], float] = time.monotonic) -> None:
    """Copy source into encoder (an api.Encoder) until the end of input, sending a frame at
    most max_delay seconds after its first byte arrived (None: only full frames, and the
    rest at the end) and flushing the output whenever frames went out, so they leave now.
    With repair frames, a group also closes max_delay after its first frame went out."""
    reader = source if hasattr(source, "read_within") else LiveReader(source)
    arrivals = ArrivalClock()
    groups = GroupClock(encoder, clock)
    while True:
        oldest = arrivals.oldest_waiting(encoder.bytes_in, encoder.pending_bytes) if max_delay is not None else None
        deadlines = [t + max_delay for t in (oldest, groups.since()) if t is not None and max_delay is not None]
        timeout = min(deadlines) - clock() if deadlines else None
        if timeout is not None and timeout <= SLACK:
            if oldest is not None and oldest + max_delay <= clock() + SLACK:
                encoder.flush()  # the deadline of the oldest waiting byte: send what is held now
            groups.check(max_delay)
            continue
        block = reader.read_within(timeout)
        if block is None:
            continue  # a deadline passed while waiting: acted on at the top of the loop
        if not block:
            return
        sent_before = encoder.bytes_out
        encoder.write(block)
        arrivals.arrived(encoder.bytes_in, clock())
        groups.check(max_delay)
        if encoder.bytes_out != sent_before:
            encoder.flush_output()
        if progress is not None:
            progress(encoder.bytes_in)


class GroupClock:
    """When the encoder's open repair group got its first frame; closes it when that is
    max_delay ago, so repair frames follow their group within the delay on a slow link."""

    def __init__(self, encoder, clock: Callable[[], float]) -> None:
        self._encoder = encoder
        self._clock = clock
        self._since: float | None = None

    def since(self) -> float | None:
        if not getattr(self._encoder, "group_open", False):
            self._since = None
        elif self._since is None:
            self._since = self._clock()
        return self._since

    def check(self, max_delay: float | None) -> None:
        since = self.since()
        if since is not None and max_delay is not None and self._clock() - since >= max_delay - SLACK:
            self._encoder.end_group()
            self._since = None
