"""Frames coded by worker processes in batches and written in sequence order (`--jobs N`).

The frame writer decides every header (sequence number, position, closing flag, repair
groups) exactly as with one job; only `format.encode_frame` moves to the workers, so the
bytes written are the same. At most `SlotPool.slots` batches are in flight: memory stays
bounded whatever the input size.
"""

from __future__ import annotations

import io
from collections import deque
from dataclasses import dataclass, field, replace
from typing import BinaryIO

from bitmend.container import format as fmt
from bitmend.container.workers import SlotBatch, SlotPool, shared_views

# sinks that copy (or write out) what they are given before write() returns, and for which
# one write of many frames is the same as many writes (not a datagram socket): a slot's
# memory can be handed to them directly, a batch at once, and reused afterwards. Others
# say so with a true `whole_writes` attribute (the command line's outputs.Output).
_COPYING_SINKS = (io.BufferedWriter, io.FileIO, io.BytesIO, io.BufferedRandom)


@dataclass(frozen=True)
class _Context:
    """What every worker needs and the parent never changes: inherited at fork."""

    key: bytes | None
    defined_code: object | None  # the code of frames with code id 0, sent once rather than per frame


@dataclass(frozen=True)
class Run:
    """`count` full frames in a row: the first one's header, the rest follow it (next
    sequence numbers and stream positions), as FrameWriter would make them one by one."""

    first: fmt.FrameHeader
    count: int

    def header_at(self, i: int) -> fmt.FrameHeader:
        first = self.first
        if i == 0:
            return first
        return replace(first, seq=(first.seq + i) % fmt.SEQ_MODULUS,
                       position=(first.position + i * first.length) % (1 << fmt.POSITION_BITS))

    def headers(self) -> list[fmt.FrameHeader]:
        return [self.header_at(i) for i in range(self.count)]


def _encode_batch(token: int, slot: int, items: list[fmt.FrameHeader | Run]) -> list[int]:
    """In a worker: encode the batch's frames (payloads back to back in the slot's input)
    into the slot's output, back to back; their sizes."""
    inputs, outputs, context = shared_views(token, slot)
    sizes = []
    read = written = 0
    for item in items:
        header = item.first if isinstance(item, Run) else item
        if header.code_id == fmt.CUSTOM_CODE_ID:
            header = replace(header, defined_code=context.defined_code)
        if isinstance(item, Run) and item.count > 1:  # coded as a run: the same bytes, fewer steps
            frames = fmt.encode_frames(header, inputs[read: read + item.count * header.length], context.key)
            read += item.count * header.length
            outputs[written: written + len(frames)] = frames
            written += len(frames)
            sizes += [len(frames) // item.count] * item.count
            continue
        payload = bytes(inputs[read: read + header.length])
        read += header.length
        frame = fmt.encode_frame(header, payload, context.key)
        outputs[written: written + len(frame)] = frame
        written += len(frame)
        sizes.append(len(frame))
    return sizes


@dataclass
class _Batch(SlotBatch):
    headers: list[fmt.FrameHeader | Run] = field(default_factory=list)


class BatchEncoder:
    """Takes (header, payload) in sequence order and writes the frames to sink in the same
    order, coded by a pool of `jobs` worker processes."""

    def __init__(self, sink: BinaryIO, jobs: int, key: bytes | None, defined_code) -> None:
        self._sink = sink
        self._key = key
        self._context = _Context(key, defined_code)
        # forked now, before this process loads numba: each worker loads the kernels it needs
        # while the others do the same and this process cuts frames (it codes only frames too
        # big for a slot)
        self._pool = SlotPool(jobs, self._context)
        self._open: _Batch | None = None
        self._queue: deque[_Batch | bytes] = deque()  # batches in flight and frames coded here, in order
        self._sizes: dict[tuple[int, bool, bool], int] = {}
        self._direct = isinstance(sink, _COPYING_SINKS) or getattr(sink, "whole_writes", False) is True
        self.bytes_out = 0

    def _frame_size(self, header: fmt.FrameHeader) -> int:
        """Wire size of a frame like header (the same for every frame of a length and kind)."""
        kind = (header.length, header.repair, header.keyed)
        size = self._sizes.get(kind)
        if size is None:
            size = self._sizes[kind] = header.frame_bytes
        return size

    def send(self, header: fmt.FrameHeader, payload: bytes) -> None:
        """Queue one frame; writes those finished before it without waiting."""
        size = self._frame_size(header)
        if len(payload) > self._pool.input_bytes or size > self._pool.output_bytes:
            self._dispatch()  # too big for a slot: coded here, still in its place
            self._queue.append(fmt.encode_frame(header, payload, self._key))
            self._write_ready(wait=False)
            return
        batch = self._open
        if batch is not None and not batch.has_room(self._pool, len(payload), size):
            self._dispatch()
            batch = None
        if batch is None:
            while not self._pool.has_free_slot:
                self._write_head()
            batch = self._open = _Batch(self._pool.take_slot())
        view = self._pool.input_view(batch.slot)
        view[batch.input_bytes: batch.input_bytes + len(payload)] = payload
        if header.defined_code is not None:
            header = replace(header, defined_code=None)  # the workers have it (_Context)
        batch.headers.append(header)
        batch.input_bytes += len(payload)
        batch.output_bytes += size

    def send_run(self, first: fmt.FrameHeader, payloads: memoryview) -> None:
        """Queue full frames in a row: `payloads` holds them back to back, first.length bytes
        each, and `first` is the first one's header (Run). Nothing of payloads is kept."""
        length = first.length
        count = len(payloads) // length
        size = self._frame_size(first)
        done = 0
        while done < count:
            if length > self._pool.input_bytes or size > self._pool.output_bytes:
                self.send(Run(first, count).header_at(done), bytes(payloads[done * length: (done + 1) * length]))
                done += 1
                continue
            batch = self._open
            room = 0 if batch is None else min((self._pool.input_bytes - batch.input_bytes) // length,
                                               (self._pool.output_bytes - batch.output_bytes) // size)
            if room == 0:
                self._dispatch()
                while not self._pool.has_free_slot:
                    self._write_head()
                batch = self._open = _Batch(self._pool.take_slot())
                room = min(self._pool.input_bytes // length, self._pool.output_bytes // size)
            take = min(room, count - done)
            start = batch.input_bytes
            self._pool.input_view(batch.slot)[start: start + take * length] = \
                payloads[done * length: (done + take) * length]
            header = Run(first, count).header_at(done)
            if header.defined_code is not None:
                header = replace(header, defined_code=None)  # the workers have it (_Context)
            batch.headers.append(Run(header, take))
            batch.input_bytes += take * length
            batch.output_bytes += take * size
            done += take

    def _dispatch(self) -> None:
        """Send the open batch to the workers."""
        batch, self._open = self._open, None
        if batch is not None:
            batch.task = self._pool.submit(_encode_batch, batch.slot, batch.headers)
            self._queue.append(batch)
            self._write_ready(wait=False)  # asked once a batch, not once a frame: a poll costs ~40 us

    def _write_head(self) -> None:
        """Write the oldest item in flight, waiting for it."""
        item = self._queue.popleft()
        if isinstance(item, bytes):
            self._write(item)
            return
        sizes = item.task.result()
        view = self._pool.output_view(item.slot)
        if self._direct:  # a file or memory: the batch's frames in one write
            self._write(view[:sum(sizes)])
        else:
            start = 0
            for size in sizes:  # one write per frame, as with one job (a datagram sink sends each alone)
                self._write(bytes(view[start: start + size]))
                start += size
        self._pool.release(item.slot)

    def _write(self, frame) -> None:
        self._sink.write(frame)
        self.bytes_out += len(frame)

    def _write_ready(self, wait: bool) -> None:
        while self._queue and (wait or isinstance(self._queue[0], bytes) or self._queue[0].task.done()):
            self._write_head()

    def drain(self) -> None:
        """Send the open batch and write every frame queued so far."""
        self._dispatch()
        self._write_ready(wait=True)

    def write_finished(self) -> None:
        """Write the frames already coded, without waiting for the rest."""
        self._write_ready(wait=False)

    def close(self) -> None:
        """Stop the workers (frames not yet written are dropped: call drain() first)."""
        self._pool.close()
