"""Frame drops: whole frames of a container vanish.

Finding frames takes the container reader, which sits above this layer, so the stage is
given a *frame finder* by its caller (`bitmend.inject` passes one built on the
container's FrameScanner). The finder reads the stream through a tee and names frames
as (bit offset, bit length, sequence number) in stream order; the stage passes
everything through except the frames its Bernoulli(p) draw (one per frame found) drops.

Memory stays bounded: the tee keeps only the bytes the finder may still name as part of
a frame (`finder.margin_bytes` behind its read position) and hands older bytes on at
once. Until the first frame is found nothing is handed on, so input that holds no frame
is refused with `NoFramesError` rather than passed through unchanged.
"""

from __future__ import annotations

from typing import BinaryIO, Callable, Iterable, Iterator, Protocol

import numpy as np
from bitarray import bitarray

from bitmend.channel.events import Events
from bitmend.channel.ledger import StageRecord
from bitmend.channel.models import FrameDrop
from bitmend.channel.stages import generator
from bitmend.errors import ContainerError


class NoFramesError(ContainerError, ValueError):
    """drop was asked to act on a stream that holds no container frame."""


class FrameFinder(Protocol):
    margin_bytes: int  # how far behind its read position the finder may still name a frame start

    def frames(self, source: BinaryIO) -> Iterator[tuple[int, int, int]]:
        """(bit offset, bit length, sequence number) of each frame, in stream order."""


class _Tee:
    """A read-only file over a chunk iterator that keeps what was read, from `base` on."""

    def __init__(self, chunks: Iterator[np.ndarray]) -> None:
        self._chunks = chunks
        self.buf = bytearray()
        self.base = 0  # absolute byte offset of buf[0]
        self.end = 0  # absolute byte offset of the read position
        self.on_read: Callable[[], None] = lambda: None

    def read(self, size: int = -1) -> bytes:
        chunk = next(self._chunks, None)
        if chunk is None:
            return b""
        data = chunk.tobytes()
        self.buf += data
        self.end += len(data)
        self.on_read()
        return data

    def drain(self) -> None:
        for chunk in self._chunks:
            self.buf += chunk.tobytes()
            self.end += chunk.size

    def forget(self, upto: int) -> None:
        """Drop kept bytes before absolute byte upto."""
        cut = upto - self.base
        if cut > 0:
            del self.buf[:cut]
            self.base = upto


class _BitSink:
    """Hands on bit ranges of the tee as whole bytes; a partial byte waits for the next range
    (frames that follow a slip need not start on a byte boundary)."""

    def __init__(self, emit: Callable[[np.ndarray], None]) -> None:
        self._emit = emit
        self._carry = bitarray(endian="big")
        self.bits_out = 0

    def send(self, tee: _Tee, lo: int, hi: int) -> None:
        """Hand on stream bits [lo, hi) (both within the tee's kept bytes)."""
        if hi <= lo:
            return
        self.bits_out += hi - lo
        first, last = lo >> 3, (hi + 7) >> 3
        raw = bytes(tee.buf[first - tee.base: last - tee.base])
        if not self._carry and lo % 8 == 0 and hi % 8 == 0:
            self._emit(np.frombuffer(raw, np.uint8).copy())
            return
        bits = bitarray(endian="big")
        bits.frombytes(raw)
        self._carry += bits[lo - 8 * first: hi - 8 * first]
        whole = len(self._carry) - len(self._carry) % 8
        if whole:
            self._emit(np.frombuffer(self._carry[:whole].tobytes(), np.uint8).copy())
            del self._carry[:whole]

    def finish(self) -> int:
        """Send the last partial byte padded with zero bits; the number of padding bits."""
        if not self._carry:
            return 0
        pad = 8 - len(self._carry)
        self._emit(np.frombuffer(self._carry.tobytes(), np.uint8).copy())
        self._carry = bitarray(endian="big")
        return pad


class DropStage:
    """Drops whole frames, found by `finder`, each with probability model.p."""

    def __init__(self, model: FrameDrop, record: StageRecord, seed: int, index: int, finder: FrameFinder) -> None:
        self.model = model
        self.record = record
        self.finder = finder
        self.events = Events(model.p, generator(seed, index, 0))
        for name in ("bytes_in", "bits_out", "frames_seen", "frames_dropped", "bytes_dropped", "padding_bits"):
            record.add(name, 0)

    def run(self, chunks: Iterable[np.ndarray], emit: Callable[[np.ndarray], None]) -> None:
        """Read the whole stream from chunks, handing on the surviving bits through emit."""
        tee = _Tee(iter(chunks))
        sink = _BitSink(emit)
        rec = self.record
        done = 0  # absolute bit up to which the stream has been handed on or dropped
        seen = 0
        margin = self.finder.margin_bytes

        def pass_old() -> None:
            nonlocal done
            safe = 8 * (tee.end - margin)
            if seen == 0:
                if tee.end > margin + margin:
                    raise NoFramesError(f"drop: no bitmend frame in the first {tee.end:,} bytes of its input; "
                                        "drop removes frames of a container (bitmend encode output)")
                return
            if safe > done:
                sink.send(tee, done, safe)
                done = safe
                tee.forget(done >> 3)

        tee.on_read = pass_old
        for bit, length, seq in self.finder.frames(tee):
            seen += 1
            rec.add("frames_seen", 1)
            if bit < done:
                rec.add("frames_not_droppable", 1)  # its start was already handed on (see margin)
                continue
            if self.events.take(seen).size:
                end = min(bit + length, 8 * tee.end)
                sink.send(tee, done, bit)
                rec.add("frames_dropped", 1)
                rec.add("bytes_dropped", (end - bit) // 8)
                rec.place("dropped_frames", [{"seq": seq, "offset": bit // 8, "bytes": (end - bit) // 8}])
                done = end
                tee.forget(done >> 3)
        tee.drain()
        rec.add("bytes_in", tee.end)
        if seen == 0 and tee.end > 0:
            raise NoFramesError("drop: no bitmend frame in its input; drop removes frames of a container "
                                "(bitmend encode output)")
        sink.send(tee, done, 8 * tee.end)
        rec.add("padding_bits", sink.finish())
        rec.add("bits_out", sink.bits_out)
