"""Worker processes that code batches of frames in shared memory (`--jobs N`).

Why processes and not threads: on this kind of machine only about a third of a frame's
encoding time is spent inside the compiled kernels; the rest is Python (headers, CRC,
buffers, dispatch), which a thread cannot run beside another. Threads measured 0.8-0.9x
of one job; processes code whole frames, Python and all, side by side (benchmarks/
jobs_scaling.py, DEVELOPERS.md "Speed").

Why shared memory: sending frames through the pool's pipes (pickled) cost the parent about
0.6 s of CPU time per 64 MiB, as much as coding them in one process. Here the parent copies
a batch's input into a slot of an anonymous shared mapping, sends only a small task (slot
number, headers, sizes) and reads the results from the slot's output region; the slot is
free again once the parent has taken its results.

The workers are forked (the kernels the parent loaded and the shared mappings are
inherited, so a worker starts in milliseconds); where fork is not available the pool is
not used and coding stays in one process (`available()`).
"""

from __future__ import annotations

import itertools
import mmap
import multiprocessing
import os
from collections import deque
from concurrent.futures import Future, ProcessPoolExecutor
from typing import Any, Callable

SLOT_INPUT_BYTES = 1 << 20  # input of one batch (payloads to encode, or coded payloads to decode)
SLOT_OUTPUT_BYTES = 4 << 20  # its results (frames, or messages and block statuses)
SLOTS_PER_JOB = 3  # batches in flight per worker: one coding, one queued, one being taken back

# shared mappings by pool token, inherited by the forked workers (read there, never resized)
_SHARED: dict[int, tuple[mmap.mmap, mmap.mmap, Any]] = {}
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


def resolve_jobs(jobs: int) -> int:
    """Worker processes for a `jobs` setting: 0 means one per core; 1 codes in this process.
    SettingError below 0; 1 wherever workers cannot be forked."""
    from bitmend.errors import SettingError

    if isinstance(jobs, bool) or not isinstance(jobs, int):
        raise TypeError(f"jobs is a whole number, got {type(jobs).__name__}")
    if jobs < 0:
        raise SettingError(f"jobs must be 0 (one per core) or more, got {jobs}")
    chosen = cpu_count() if jobs == 0 else jobs
    return chosen if available() else 1


def shared_views(token: int, slot: int) -> tuple[memoryview, memoryview, Any]:
    """In a worker: (input region, output region, the pool's context) of a slot."""
    inputs, outputs, context = _SHARED[token]
    return (memoryview(inputs)[slot * SLOT_INPUT_BYTES: (slot + 1) * SLOT_INPUT_BYTES],
            memoryview(outputs)[slot * SLOT_OUTPUT_BYTES: (slot + 1) * SLOT_OUTPUT_BYTES], context)


def _ready() -> None:
    """A no-op task: makes the pool fork its workers now, while the shared mappings exist."""


class SlotPool:
    """`jobs` forked workers and SLOTS_PER_JOB * jobs shared slots; tasks are module-level
    functions called as fn(token, slot, *args) in a worker.

    context: read-only data the workers need (a code, a key), inherited at fork rather than
    sent with every task."""

    def __init__(self, jobs: int, context: Any = None) -> None:
        self.jobs = jobs
        self.slots = SLOTS_PER_JOB * jobs
        self._inputs = mmap.mmap(-1, self.slots * SLOT_INPUT_BYTES)
        self._outputs = mmap.mmap(-1, self.slots * SLOT_OUTPUT_BYTES)
        self.token = next(_tokens)
        _SHARED[self.token] = (self._inputs, self._outputs, context)
        self._free: deque[int] = deque(range(self.slots))
        self._executor = ProcessPoolExecutor(jobs, mp_context=multiprocessing.get_context("fork"))
        try:
            for _ in range(jobs):
                self._executor.submit(_ready)  # the workers are forked here, with _SHARED as it is now
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
        return memoryview(self._inputs)[slot * SLOT_INPUT_BYTES: (slot + 1) * SLOT_INPUT_BYTES]

    def output_view(self, slot: int) -> memoryview:
        return memoryview(self._outputs)[slot * SLOT_OUTPUT_BYTES: (slot + 1) * SLOT_OUTPUT_BYTES]

    def submit(self, fn: Callable[..., Any], slot: int, *args: Any) -> Future:
        return self._executor.submit(fn, self.token, slot, *args)

    def close(self) -> None:
        """Stop the workers (waiting for tasks already sent) and free the mappings."""
        executor, self._executor = getattr(self, "_executor", None), None
        if executor is not None:
            executor.shutdown(wait=True, cancel_futures=True)
        _SHARED.pop(self.token, None)
