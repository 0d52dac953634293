"""Worker processes that code batches of frames in shared memory (`--jobs N`).

Why processes and not threads: on this kind of machine only about a third of a frame's
encoding time is spent inside the compiled kernels; the rest is Python (headers, CRC,
buffers, dispatch), which a thread cannot run beside another. Threads measured 0.8-0.9x
of one job; processes code whole frames, Python and all, side by side (DEVELOPERS.md
"Jobs", benchmarks/jobs_scaling.py).

Why shared memory: sending frames through a process pool's pipes (pickled) cost the parent
about 0.5 s of CPU time per 64 MiB, more than half of what coding them in one process costs.
Here the parent copies a batch's input into a slot of an anonymous shared mapping, sends
only a small task (slot number, headers) and reads the results from the slot's output
region; the slot is free again once the parent has taken its results.

The workers are forked, so the shared mappings (and whatever the parent has loaded) are
inherited and a worker starts in milliseconds; where fork is not available every setting
means one job (`resolve_jobs`, `automatic_jobs`).
"""

from __future__ import annotations

import itertools
import mmap
import multiprocessing
import os
import signal
from collections import deque
from dataclasses import dataclass
from typing import Any, Callable

from bitmend.errors import ContainerError, SettingError

SLOT_INPUT_BYTES = 1 << 20  # input of one batch (payloads to encode, or coded payloads to decode)
SLOT_OUTPUT_BYTES = 4 << 20  # its results (frames, or messages and block statuses)
SLOTS_PER_JOB = 3  # batches in flight per worker: one coding, one queued, one being taken back

# shared mappings by pool token, inherited by the forked workers (read there, never resized)
_SHARED: dict[int, tuple[mmap.mmap, mmap.mmap, int, int, Any]] = {}
_tokens = itertools.count(1)


def available() -> bool:
    """True where worker processes can be forked (POSIX systems)."""
    return "fork" in multiprocessing.get_all_start_methods()


def cpu_count() -> int:
    """Cores this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


AUTOMATIC_MIN_BYTES = 16 << 20  # inputs this large get one job per core when jobs are automatic


def automatic_jobs(input_bytes: int | None) -> int:
    """Jobs chosen for `--jobs 0`: one per core for an input of known size of at least
    AUTOMATIC_MIN_BYTES (starting workers costs ~10 ms, and batches add latency a live
    pipe should not have), else 1 (a pipe, or a small file)."""
    if input_bytes is None or input_bytes < AUTOMATIC_MIN_BYTES or not available():
        return 1
    return cpu_count()


def resolve_jobs(jobs: int) -> int:
    """Worker processes for a `jobs` setting: 0 means one per core; 1 codes in this process.
    SettingError below 0; 1 wherever workers cannot be forked."""
    if isinstance(jobs, bool) or not isinstance(jobs, int):
        raise TypeError(f"jobs is a whole number, got {type(jobs).__name__}")
    if jobs < 0:
        raise SettingError(f"jobs must be 0 (one per core) or more, got {jobs}")
    chosen = cpu_count() if jobs == 0 else jobs
    return chosen if available() else 1


def shared_views(token: int, slot: int) -> tuple[memoryview, memoryview, Any]:
    """In a worker: (input region, output region, the pool's context) of a slot."""
    inputs, outputs, input_bytes, output_bytes, context = _SHARED[token]
    return (memoryview(inputs)[slot * input_bytes: (slot + 1) * input_bytes],
            memoryview(outputs)[slot * output_bytes: (slot + 1) * output_bytes], context)


class WorkerStoppedError(ContainerError):
    """A worker process (jobs > 1) ended without answering: killed, or out of memory. The
    container was not finished (encoding) or not read to its end (decoding)."""


def _serve(token: int, conn) -> None:
    """A worker's loop: (fn, slot, args) in, ("ok", result) or ("error", exception) out, in
    order; None or a closed pipe ends it. Ctrl-C goes to the parent alone: it stops the run."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    while True:
        try:
            task = conn.recv()
        except (EOFError, OSError):
            return
        if task is None:
            return
        fn, slot, args = task
        try:
            answer = ("ok", fn(token, slot, *args))
        except Exception as exc:  # sent back and raised in the parent
            answer = ("error", exc)
        conn.send(answer)


class Task:
    """A task sent to one worker; each worker answers its tasks in the order sent."""

    def __init__(self, worker: "_Worker") -> None:
        self._worker = worker
        self._answered = False
        self._answer: Any = None

    def _take(self, answer: Any) -> None:
        self._answered, self._answer = True, answer

    def done(self) -> bool:
        """True once the answer is here (takes answers that have arrived, without waiting)."""
        while not self._answered and self._worker.poll():
            self._worker.receive()
        return self._answered

    def result(self) -> Any:
        while not self._answered:
            self._worker.receive()
        kind, value = self._answer
        if kind == "error":
            raise value
        return value


class _Worker:
    def __init__(self, token: int, context) -> None:
        self.conn, child = context.Pipe()
        self.process = context.Process(target=_serve, args=(token, child), daemon=True)
        self.process.start()
        child.close()
        self.waiting: deque[Task] = deque()

    def send(self, fn: Callable[..., Any], slot: int, args: tuple) -> Task:
        task = Task(self)
        try:
            self.conn.send((fn, slot, args))
        except OSError:  # its end of the pipe is closed: the worker is gone
            raise WorkerStoppedError("a worker process stopped without finishing its frames") from None
        self.waiting.append(task)
        return task

    def poll(self) -> bool:
        return bool(self.waiting) and self.conn.poll()

    def receive(self) -> None:
        try:
            answer = self.conn.recv()
        except (EOFError, OSError):
            raise WorkerStoppedError("a worker process stopped without finishing its frames") from None
        self.waiting.popleft()._take(answer)

    def stop(self) -> None:
        try:
            self.conn.send(None)
        except OSError:
            pass
        self.process.join(timeout=5)
        if self.process.is_alive():
            self.process.terminate()
            self.process.join()
        self.conn.close()


class SlotPool:
    """`jobs` forked workers and SLOTS_PER_JOB * jobs shared slots; tasks are module-level
    functions called as fn(token, slot, *args) in a worker, sent to the workers in turn.

    No helper threads: a task is one message down a pipe and one answer back (the
    standard library's process pool runs two threads in the parent, which took the GIL
    from the thread doing the real work for milliseconds at a time). context: read-only
    data the workers need (a code, a key), inherited at fork rather than sent with every task."""

    def __init__(self, jobs: int, context: Any = None) -> None:
        self.jobs = jobs
        self.slots = SLOTS_PER_JOB * jobs
        self.input_bytes, self.output_bytes = SLOT_INPUT_BYTES, SLOT_OUTPUT_BYTES  # per slot
        self._inputs = mmap.mmap(-1, self.slots * self.input_bytes)
        self._outputs = mmap.mmap(-1, self.slots * self.output_bytes)
        self.token = next(_tokens)
        _SHARED[self.token] = (self._inputs, self._outputs, self.input_bytes, self.output_bytes, context)
        self._free: deque[int] = deque(range(self.slots))
        self._turn = itertools.cycle(range(jobs))
        self._workers: list[_Worker] = []
        try:
            fork = multiprocessing.get_context("fork")
            for _ in range(jobs):
                self._workers.append(_Worker(self.token, fork))
        except BaseException:
            self.close()
            raise

    @property
    def has_free_slot(self) -> bool:
        return bool(self._free)

    def take_slot(self) -> int:
        return self._free.popleft()

    def release(self, slot: int) -> None:
        self._free.append(slot)

    def input_view(self, slot: int) -> memoryview:
        return memoryview(self._inputs)[slot * self.input_bytes: (slot + 1) * self.input_bytes]

    def output_view(self, slot: int) -> memoryview:
        return memoryview(self._outputs)[slot * self.output_bytes: (slot + 1) * self.output_bytes]

    def submit(self, fn: Callable[..., Any], slot: int, *args: Any) -> Task:
        return self._workers[next(self._turn)].send(fn, slot, args)

    def close(self) -> None:
        """Stop the workers (they finish the task in hand) and forget the mappings."""
        workers, self._workers = self._workers, []
        for worker in workers:
            worker.stop()
        _SHARED.pop(self.token, None)


@dataclass
class SlotBatch:
    """Frames gathered into one shared slot, then sent to a worker as one task: the slot's
    input and output bytes used so far, and the task once sent. Encode and decode batches
    add their own frame lists."""

    slot: int
    input_bytes: int = 0
    output_bytes: int = 0
    task: Task | None = None

    def has_room(self, pool: SlotPool, input_bytes: int, output_bytes: int) -> bool:
        """Whether one more frame of these sizes fits the slot's input and output."""
        return (self.input_bytes + input_bytes <= pool.input_bytes
                and self.output_bytes + output_bytes <= pool.output_bytes)
