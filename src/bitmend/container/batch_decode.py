"""Payloads of found frames decoded by worker processes in batches (`--jobs N`).

The scanner still finds every frame and decodes every header here, in input order; only
`reader.decode_payload` of whole frames moves to the workers, and delivery (the sequencer
and the assembler) still sees the frames one at a time in the order they were found, so
output, reports and exit codes are the same as with one job. At most `SlotPool.slots`
batches are in flight and `in_order` holds only the frames of those batches.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass, field, replace
from typing import Iterable, Iterator

import numpy as np

from bitmend.container import format as fmt
from bitmend.container.reader import (CLEAN_COUNTS, DecodedFrame, FrameRun, block_counts, checked_run,
                                     decode_payload, run_block_counts)
from bitmend.container.workers import SlotBatch, SlotPool, shared_views
from bitmend.interleave import decode_segments
from bitmend.kernels.status import FAILED, clean_statuses

# a frame's results in the output region: its payload, then one status byte per block
# unless every block is clean (the parent then makes the zeros itself); blocks are at least
# 2 bits long, so a frame has at most 4 blocks per coded byte
BLOCKS_PER_CODED_BYTE = 4

CodeSpec = tuple  # ("catalog",) | ("defined", definition body) | ("unchecked", k, r)


def _code_spec(header: fmt.FrameHeader, code, checked: bool) -> CodeSpec:
    """How a worker finds the frame's code without the code object being sent."""
    if header.code_id != fmt.CUSTOM_CODE_ID:
        return ("catalog",)
    if not checked:
        return ("unchecked", *header.shape)
    return ("defined", fmt.definition_record(code)[:-fmt.CRC_BYTES])


def _code_of(header: fmt.FrameHeader, spec: CodeSpec):
    if spec[0] == "catalog":
        return header.code
    if spec[0] == "unchecked":
        return fmt.unchecked_reading_code(spec[1], spec[2])
    return fmt.code_from_definition_body(spec[1])


@dataclass(frozen=True)
class RunJob:
    """`count` frames of a run (reader.FrameScanner._run_at): catalog code, the same
    shape, headers first.following(count); their coded payloads back to back."""

    first: fmt.FrameHeader  # the header before the run's first frame
    count: int


def _decode_run(run: RunJob, inputs: memoryview, read: int, outputs: memoryview, written: int,
                key: bytes | None, results: list[tuple]) -> tuple[int, int]:
    """In a worker: a run's payloads decoded in one call (interleave.decode_segments); each
    frame's payload and statuses written as _decode_batch writes them. (read, written) after."""
    headers = run.first.following(run.count)
    first = headers[0]
    size = first.coded_bytes
    coded = np.frombuffer(inputs[read: read + run.count * size], dtype=np.uint8).reshape(run.count, size)
    messages, statuses = decode_segments(first.code, first.depth, coded, first.message_bytes)
    counts = run_block_counts(statuses)
    _, payloads, crc_ok, authentic = checked_run(headers, messages, key)
    for i, (payload, status, count) in enumerate(zip(payloads, statuses, counts)):
        outputs[written: written + len(payload)] = payload
        written += len(payload)
        if count != CLEAN_COUNTS:
            outputs[written: written + len(status)] = status.tobytes()
            written += len(status)
        results.append((len(status), crc_ok[i], authentic[i], count))
    return read + run.count * size, written


def _decode_batch(token: int, slot: int, jobs: list) -> list[tuple]:
    """In a worker: decode each frame's coded payload (back to back in the slot's input);
    write its payload and block statuses to the slot's output; (blocks, crc_ok, authentic)
    per frame. A RunJob stands for the frames of a run, decoded together."""
    inputs, outputs, key = shared_views(token, slot)
    results: list[tuple] = []
    read = written = 0
    for job in jobs:
        if isinstance(job, RunJob):
            read, written = _decode_run(job, inputs, read, outputs, written, key, results)
            continue
        header, spec, coded_len = job
        coded = bytes(inputs[read: read + coded_len])
        read += coded_len
        payload, status, crc_ok, authentic = decode_payload(_code_of(header, spec), header, coded, key)
        if spec[0] == "unchecked":  # no block could be checked; only the CRC speaks for the data
            status = np.full(len(status), FAILED, dtype=np.uint8)
        outputs[written: written + len(payload)] = payload
        written += len(payload)
        counts = block_counts(status)
        if counts != CLEAN_COUNTS:
            outputs[written: written + len(status)] = np.ascontiguousarray(status, dtype=np.uint8).tobytes()
            written += len(status)
        results.append((len(status), crc_ok, authentic, counts))
    return results


@dataclass
class _Batch(SlotBatch):
    frames: list[tuple[DecodedFrame, bool]] = field(default_factory=list)  # (frame, code checked)
    jobs: list[tuple[fmt.FrameHeader, CodeSpec, int]] = field(default_factory=list)


class BatchDecoder:
    """Decodes whole frames' payloads in `jobs` worker processes; see the module docstring."""

    def __init__(self, jobs: int, key: bytes | None) -> None:
        self._jobs = jobs
        self._key = key
        self._pool: SlotPool | None = None  # forked once a payload was decoded here (see submit)
        self._open: _Batch | None = None
        self._in_flight: deque[_Batch] = deque()
        self._warmed = False

    def submit(self, frame: DecodedFrame, code, checked: bool, coded: bytes) -> bool:
        """Queue frame's payload for decoding; False (decode it here) when it is too big for
        a slot."""
        header = frame.header
        if self._pool is None:
            if not self._warmed:
                # the first payload is decoded here: the kernels it needs are loaded once, in
                # this process, and the workers forked next have them (each would spend ~0.5 s)
                self._warmed = True
                return False
            self._pool = SlotPool(self._jobs, self._key)
        need_out = header.length + BLOCKS_PER_CODED_BYTE * len(coded)
        if len(coded) > self._pool.input_bytes or need_out > self._pool.output_bytes:
            return False
        batch = self._open
        if batch is not None and not batch.has_room(self._pool, len(coded), need_out):
            self._dispatch()
            batch = None
        if batch is None:
            while not self._pool.has_free_slot:
                self._settle_batch(self._in_flight[0])
            batch = self._open = _Batch(self._pool.take_slot())
        self._pool.input_view(batch.slot)[batch.input_bytes: batch.input_bytes + len(coded)] = coded
        sent_header = replace(header, defined_code=None) if header.defined_code is not None else header
        batch.jobs.append((sent_header, _code_spec(header, code, checked), len(coded)))
        batch.frames.append((frame, checked))
        batch.input_bytes += len(coded)
        batch.output_bytes += need_out
        frame.pending = batch
        return True

    def submit_run(self, frames: list[DecodedFrame], first: fmt.FrameHeader, coded: np.ndarray) -> int:
        """Queue the payloads of a run's frames (catalog code, one shape; `first` the header
        before them, coded their coded payloads as rows) as few tasks, one copy into a slot
        each; how many were queued from the start (0: decode them here; the first payloads
        are, so the workers forked next inherit the kernels, as with submit)."""
        if self._pool is None:
            if not self._warmed:
                self._warmed = True
                return 0
            self._pool = SlotPool(self._jobs, self._key)
        count, size = coded.shape
        header = frames[0].header
        need_out = header.length + BLOCKS_PER_CODED_BYTE * size
        if size > self._pool.input_bytes or need_out > self._pool.output_bytes:
            return 0
        done = 0
        while done < count:
            batch = self._open
            room = 0 if batch is None else min((self._pool.input_bytes - batch.input_bytes) // size,
                                               (self._pool.output_bytes - batch.output_bytes) // need_out)
            if room == 0:
                self._dispatch()
                while not self._pool.has_free_slot:
                    self._settle_batch(self._in_flight[0])
                batch = self._open = _Batch(self._pool.take_slot())
                room = min(self._pool.input_bytes // size, self._pool.output_bytes // need_out)
            take = min(room, count - done)
            start = batch.input_bytes
            # the rows straight into the slot: reshape(-1) of the strided rows would copy them first
            slot_rows = np.frombuffer(self._pool.input_view(batch.slot), dtype=np.uint8, count=take * size,
                                      offset=start).reshape(take, size)
            slot_rows[:] = coded[done: done + take]
            before = first if done == 0 else frames[done - 1].header
            batch.jobs.append(RunJob(before, take))
            for frame in frames[done: done + take]:
                batch.frames.append((frame, True))
                frame.pending = batch
            batch.input_bytes += take * size
            batch.output_bytes += take * need_out
            done += take
        return count

    def _dispatch(self) -> None:
        batch, self._open = self._open, None
        if batch is not None:
            batch.task = self._pool.submit(_decode_batch, batch.slot, batch.jobs)
            self._in_flight.append(batch)

    def _settle_batch(self, batch: _Batch) -> None:
        """Wait for a batch and fill its frames' payload fields; its slot is free again."""
        if batch.task is None:
            self._dispatch()  # the open batch: send it now, its results are wanted
        results = batch.task.result()
        self._in_flight.remove(batch)
        view = self._pool.output_view(batch.slot)
        start = 0
        for (frame, _), (blocks, crc_ok, authentic, counts) in zip(batch.frames, results):
            length = frame.header.length
            frame.payload = bytes(view[start: start + length])
            start += length
            if counts == CLEAN_COUNTS:  # not written: all zeros
                frame.block_status = clean_statuses(blocks)
            else:
                frame.block_status = np.frombuffer(view[start: start + blocks], dtype=np.uint8).copy()
                start += blocks
            frame.crc_ok, frame.authentic = crc_ok, authentic
            frame.set_counts(counts)  # counted in the worker
            frame.pending = None
        self._pool.release(batch.slot)

    def settle(self, frame: DecodedFrame) -> DecodedFrame:
        """frame with its payload fields filled (waits for its batch if need be)."""
        if frame.pending is not None:
            self._settle_batch(frame.pending)
        return frame

    def in_order(self, items: Iterable[DecodedFrame | FrameRun]) -> Iterator[DecodedFrame | FrameRun]:
        """items (frames, or runs of frames) as found, each settled, in the same order; an
        item waits only for its own batches, and batches are sent as they fill."""
        held: deque[DecodedFrame | FrameRun] = deque()
        for item in items:
            held.append(item)
            while held and self._ready(held[0]):
                yield self._settled(held.popleft())
        while held:
            yield self._settled(held.popleft())

    @staticmethod
    def _ready(item: DecodedFrame | FrameRun) -> bool:
        """Whether every batch an item waits for is done."""
        frames = item.frames if isinstance(item, FrameRun) else (item,)
        batch = None
        for frame in frames:  # a run's frames lie in a few batches, one after another
            if frame.pending is not batch:
                batch = frame.pending
                if batch is not None and (batch.task is None or not batch.task.done()):
                    return False
        return True

    def _settled(self, item: DecodedFrame | FrameRun) -> DecodedFrame | FrameRun:
        if isinstance(item, FrameRun):
            for frame in item.frames:
                self.settle(frame)
            return item
        return self.settle(item)

    def close(self) -> None:
        if self._pool is not None:
            self._pool.close()
