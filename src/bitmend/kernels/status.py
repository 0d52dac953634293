"""The status a decoder gives each codeword: 0 clean, 1..t symbols corrected, or FAILED.

One constant for every code family and kernel, so a status array means the same thing
wherever it came from. 255 fits the uint8 status arrays and lies above every t in the
catalog (the largest is 16 symbols for rs-255-223).

Decode kernels mark statuses in a zeroed buffer (status_buffer), and only the codewords
they correct or give up on: a clean segment's statuses are kept as one zero repeated
(kept_statuses), which all_clean reads once. The linear kernels also list what they mark
(index and status), so a run's few marked statuses are kept as those lists, row by row
(marked_rows, MarkedRow), with no copy of the run's whole buffer."""

import threading

import numpy as np

FAILED = 255  # a detected, uncorrectable codeword (or, in a truncated segment, one that never arrived)

SCRATCH_LIMIT = 1 << 23  # statuses a thread's reused buffer may hold (8 MiB); larger calls allocate
SCRATCH_MIN = 1 << 16  # fewer statuses than this: a fresh array costs less than the bookkeeping
_ZERO_BYTE = bytes(1)
_scratch = threading.local()


def status_buffer(size: int) -> np.ndarray:
    """A zeroed uint8 array of `size` statuses for a decode kernel to mark, to be passed
    through kept_statuses before the next is asked for. From SCRATCH_MIN to SCRATCH_LIMIT
    statuses (a run of frames) it is this thread's own buffer, reused: a fresh zeroed
    array costs a memset of one status per codeword (two per payload byte for
    hamming-7-4) that a clean segment never writes. A buffer never given back (an
    exception between the kernel and kept_statuses) is zeroed whole before it is lent
    again."""
    if not SCRATCH_MIN <= size <= SCRATCH_LIMIT:
        return np.zeros(size, dtype=np.uint8)
    buffer = getattr(_scratch, "buffer", None)
    if buffer is None or len(buffer) < size:
        buffer = _scratch.buffer = np.zeros(max(size, 1 << 20), dtype=np.uint8)
    elif _scratch.lent:
        buffer[:] = 0
    _scratch.lent = True
    return buffer[:size]


def _lent(status: np.ndarray) -> bool:
    """Whether status is this thread's reused buffer (status_buffer), not an array of its own."""
    return status.base is not None and status.base is getattr(_scratch, "buffer", None)


def kept_statuses(status: np.ndarray, marked: bool | None = None) -> np.ndarray:
    """The statuses a kernel marked in a status_buffer, as the caller may keep them. An
    array of the call's own is kept as it is; this thread's buffer is given back, its
    statuses kept as one zero repeated when all are clean (no memory per codeword;
    all_clean reads it once), else as a copy, the buffer zeroed again. marked: whether
    the kernel says it wrote a status (the linear kernels count the steps they corrected),
    so the buffer is not scanned to find out; None: not known."""
    if not _lent(status):
        return clean_statuses(status.shape) if marked is False else status  # allocated for this call alone
    _scratch.lent = False
    if marked is False or marked is None and not np.count_nonzero(status):
        return clean_statuses(status.shape)
    kept = status.copy()
    status[:] = 0
    return kept


def marked_rows(status: np.ndarray, marks: np.ndarray, rows: int, blocks: int) -> "MarkedRows":
    """The statuses of a status_buffer's first `blocks` codewords, which a kernel listed as
    marks ((codeword index << 8) | status, ascending) and did not write (the buffer is
    still zero, and is given back), as `rows` equal rows. A run of hamming-7-4 at
    p = 1e-3 marks one status in 150 (a 1 MiB run: 14,000 of 2.4 million): written to the
    buffer, each missed the cache, and then the whole buffer was copied and cleared."""
    if _lent(status):
        _scratch.lent = False
    return MarkedRows(blocks // rows, rows, marks)


def _unpacked(marks: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(codeword places as intp, statuses as uint8) of marks, (place << 8) | status each."""
    return (marks >> np.uint64(8)).astype(np.intp), (marks & np.uint64(0xFF)).astype(np.uint8)


class MarkedRows:
    """A run's statuses, `rows` rows of `blocks`, given by the few that are not 0: marks
    ((codeword index in the run << 8) | status, ascending). Indexed and iterated like the
    (rows, blocks) status array, row by row as MarkedRow; np.asarray makes the array.
    Nothing is unpacked until a row's array is asked for (the reader never asks: the
    kernels count what a frame's report needs)."""

    __slots__ = ("_bounds", "blocks", "marks")

    def __init__(self, blocks: int, rows: int, marks: np.ndarray) -> None:
        self.blocks, self.marks = blocks, marks
        starts = (np.arange(rows + 1, dtype=np.uint64) * np.uint64(blocks)) << np.uint64(8)
        self._bounds = np.searchsorted(marks, starts).tolist()  # row i's marks: [i] .. [i + 1]

    @property
    def shape(self) -> tuple[int, int]:
        return len(self._bounds) - 1, self.blocks

    def __len__(self) -> int:
        return len(self._bounds) - 1

    def __getitem__(self, row: int) -> "MarkedRow":
        if not -len(self) <= row < len(self):
            raise IndexError(row)
        return MarkedRow(self, row % len(self))

    def __iter__(self):
        return map(MarkedRow, [self] * len(self), range(len(self)))  # made per frame: no per-row call here

    def tally(self, listed: int) -> tuple[np.ndarray, np.ndarray]:
        """kernels.tally.status_tally of the rows, from the marks: (counts, failed), counts
        (rows, 3) int64 of blocks corrected, symbols corrected and blocks failed, failed
        (rows, w) int64 with row i's first min(counts[i, 2], listed) failed places in
        it, w = 1 or the most any row needs (the rest is not to be read)."""
        bounds = np.asarray(self._bounds)
        places, values = _unpacked(self.marks[: bounds[-1]])
        lost = values == FAILED
        lost_before = np.concatenate(([0], np.cumsum(lost)))[bounds]  # failed marks before each row's first
        symbols_before = np.concatenate(([0], np.cumsum(np.where(lost, 0, values), dtype=np.int64)))[bounds]
        counts = np.empty((len(self), 3), dtype=np.int64)
        counts[:, 2] = np.diff(lost_before)
        counts[:, 0] = np.diff(bounds) - counts[:, 2]
        counts[:, 1] = np.diff(symbols_before)
        width = min(listed, int(counts[:, 2].max(initial=0)))
        failed = np.zeros((len(self), max(width, 1)), dtype=np.int64)
        if width:
            lost_places = places[lost]
            lost_rows = np.repeat(np.arange(len(self)), counts[:, 2])
            rank = np.arange(len(lost_places)) - lost_before[lost_rows]  # place among its row's failures
            first = rank < width
            failed[lost_rows[first], rank[first]] = (lost_places - lost_rows * self.blocks)[first]
        return counts, failed

    def row_marks(self, row: int) -> tuple[np.ndarray, np.ndarray]:
        """The places (from the row's first codeword) and statuses of the row's marks."""
        places, values = _unpacked(self.marks[self._bounds[row]: self._bounds[row + 1]])
        return places - row * self.blocks, values

    def __array__(self, dtype=None, copy=None) -> np.ndarray:
        status = np.zeros(len(self) * self.blocks, dtype=np.uint8)
        places, values = _unpacked(self.marks[: self._bounds[-1]])  # the rows' own: none past them
        status[places] = values
        status = status.reshape(self.shape)
        return status if dtype is None else status.astype(dtype, copy=False)


class MarkedRow:
    """Row `row` of a MarkedRows: the statuses of one row of codewords (a frame's). len()
    is the number of codewords, as for the array, which np.asarray makes when wanted."""

    __slots__ = ("row", "run")

    def __init__(self, run: MarkedRows, row: int) -> None:
        self.run, self.row = run, row

    def __len__(self) -> int:
        return self.run.blocks

    def __array__(self, dtype=None, copy=None) -> np.ndarray:
        status = np.zeros(self.run.blocks, dtype=np.uint8)
        places, values = self.run.row_marks(self.row)
        status[places] = values
        return status if dtype is None else status.astype(dtype, copy=False)


def taken_statuses(status: np.ndarray, rows: int, listed: int) -> tuple[np.ndarray, tuple[np.ndarray, np.ndarray]]:
    """kept_statuses of statuses a kernel did mark, with their tally (kernels.tally.status_tally
    of them as `rows` rows, the first `listed` failed blocks of each): for this thread's
    buffer, one compiled pass copies them out, counts them and leaves the buffer zero (a
    separate scan, copy, clearing and tally read a damaged run's statuses four times)."""
    from bitmend.kernels.tally import status_tally, tally_taken  # statuses are marked by compiled kernels

    grid = status.reshape(rows, -1)
    if not _lent(status):
        return status, status_tally(np.ascontiguousarray(grid), listed)
    _scratch.lent = False
    kept = np.empty_like(status)
    return kept, tally_taken(grid, listed, kept.reshape(rows, -1))


def clean_statuses(shape: int | tuple[int, ...]) -> np.ndarray:
    """Statuses of codewords that were all clean: one zero repeated, read-only (a view of
    an immutable zero byte with all strides 0; np.broadcast_to makes the same in 6x the time)."""
    if isinstance(shape, int):
        return np.ndarray((shape,), np.uint8, _ZERO_BYTE, 0, (0,))
    return np.ndarray(shape, np.uint8, _ZERO_BYTE, 0, (0,) * len(shape))


def all_clean(status: np.ndarray) -> bool:
    """Whether every status is 0. An array whose strides are all zero holds one value
    repeated (kept_statuses of a clean segment, and its rows), so one read answers."""
    if status.size and not any(status.strides):
        return not status.flat[0]
    return not np.count_nonzero(status)
