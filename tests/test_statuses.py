"""The decode kernels' reused status buffer (kernels/status.py): what a caller keeps never
changes under it, and a buffer is always zero when it is lent again."""

from __future__ import annotations

import numpy as np
import pytest

import bitmend
from bitmend.channel.bsc import flip_bits
from bitmend.interleave import decode_segment, encode_segment
from bitmend.kernels.status import FAILED, SCRATCH_MIN, MarkedRows, all_clean, kept_statuses, marked_rows, status_buffer


def test_a_clean_buffer_is_kept_as_one_zero_and_a_marked_one_as_a_copy() -> None:
    size = SCRATCH_MIN + 1000
    status = status_buffer(size)
    assert not status.any()
    clean = kept_statuses(status)
    assert clean.shape == (size,) and not clean.flags.writeable and all_clean(clean)
    assert all_clean(clean.reshape(size // 8, 8)[3])  # rows of it too

    status = status_buffer(size)
    status[[5, 700]] = (1, FAILED)
    kept = kept_statuses(status)
    assert kept[5] == 1 and kept[700] == FAILED and not all_clean(kept)
    again = status_buffer(size)
    assert not again.any()  # zeroed for the next call ...
    assert kept[5] == 1 and kept[700] == FAILED  # ... without touching what was kept
    kept_statuses(again)


def test_a_buffer_never_given_back_is_zeroed_before_it_is_lent_again() -> None:
    status = status_buffer(SCRATCH_MIN)
    status[42] = 3  # a kernel marked it, then the caller failed before kept_statuses
    assert not status_buffer(SCRATCH_MIN).any()
    kept_statuses(status_buffer(SCRATCH_MIN))


def test_few_statuses_are_an_array_of_their_own() -> None:
    status = status_buffer(SCRATCH_MIN - 1)
    status[7] = 2
    assert kept_statuses(status) is status and status_buffer(SCRATCH_MIN - 1) is not status


def test_statuses_of_segments_decoded_one_after_another_are_each_their_own() -> None:
    # a damaged segment, then a clean one, then the damaged one again: the clean one must not
    # inherit marks, and the statuses kept from the first stay as they were (common practice:
    # a reused buffer is only safe if every reuse starts from zero)
    code = bitmend.get_code("hamming-7-4")
    message = bytes(range(256)) * 1024  # large enough for the compiled kernels
    coded = encode_segment(code, 1, message)
    damaged, _ = flip_bits(coded, 0.01, np.random.default_rng(5))
    back, first = decode_segment(code, 1, damaged, len(message))
    first_copy = np.array(first)
    assert np.count_nonzero(first_copy) > 0
    back_clean, clean = decode_segment(code, 1, coded, len(message))
    assert bytes(back_clean) == message and all_clean(clean)
    _, second = decode_segment(code, 1, damaged, len(message))
    assert np.array_equal(second, first_copy) and np.array_equal(first, first_copy)


def test_a_kernel_that_corrected_nothing_is_taken_at_its_word() -> None:
    # marked=False (a linear kernel counted no corrected step): kept as clean with no scan,
    # the buffer given back; an array of the call's own is read-only clean too
    status = status_buffer(SCRATCH_MIN)
    clean = kept_statuses(status, marked=False)
    assert all_clean(clean) and not clean.flags.writeable
    assert not status_buffer(SCRATCH_MIN).any()
    kept_statuses(status_buffer(SCRATCH_MIN))
    own = kept_statuses(np.zeros(10, dtype=np.uint8), marked=False)
    assert own.shape == (10,) and all_clean(own) and not own.flags.writeable
    # marked=True: the kernel says it wrote statuses, so they are copied out without a scan
    status = status_buffer(SCRATCH_MIN)
    status[9] = 2
    kept = kept_statuses(status, marked=True)
    assert any(kept.strides) and kept[9] == 2 and not status_buffer(SCRATCH_MIN).any()
    kept_statuses(status_buffer(SCRATCH_MIN))


def test_the_linear_kernels_count_of_corrected_steps_matches_the_numpy_twins_statuses() -> None:
    # if a linear kernel under-counted the steps it corrected, its statuses would be
    # dropped as clean: damaged segments must give the statuses of kernels.small, which
    # decodes codeword by codeword in numpy (an independent path)
    from bitmend.interleave import layout
    from bitmend.kernels import small

    message = bytes(range(256)) * 512
    for name, depth in (("hamming-7-4", 8), ("golay-24-12", 8), ("secded-16-11", 1)):
        code = bitmend.get_code(name)
        coded = encode_segment(code, depth, message)
        for p in (1e-4, 0.02):
            damaged, _ = flip_bits(coded, p, np.random.default_rng(3))
            _, status = decode_segment(code, depth, damaged, len(message))
            lead_m, _, weight = code.leader_tables
            _, twin = small.decode(damaged, code.P, depth, layout(code, depth, len(message)).groups, lead_m, weight,
                                   len(message))
            assert np.count_nonzero(twin) and np.array_equal(status, twin)


def test_taken_statuses_are_kept_tallied_and_the_buffer_given_back_zero() -> None:
    # one pass copies a marked buffer out, counts it per row (as status_tally does) and
    # clears it: rows that do not start on a word, FAILED among the marks, a row all FAILED
    import bitmend.kernels.blockcode  # noqa: F401  (the compiled kernels, as when a kernel marked the buffer)
    from bitmend.kernels.status import taken_statuses
    from bitmend.kernels.tally import status_tally

    rows, blocks = 70, 1001
    status = status_buffer(rows * blocks)
    rng = np.random.default_rng(4)
    hit = rng.random(rows * blocks) < 0.03
    status[hit] = rng.choice(np.array([1, 2, 3, FAILED], dtype=np.uint8), size=int(hit.sum()))
    status[5 * blocks: 6 * blocks] = FAILED
    want = np.array(status).reshape(rows, blocks)
    kept, (counts, failed) = taken_statuses(status, rows, 4)
    assert np.array_equal(kept.reshape(rows, blocks), want)
    assert not status_buffer(rows * blocks).any()  # given back zero, not re-zeroed: it was not lent
    kept_statuses(status_buffer(rows * blocks))
    want_counts, want_failed = status_tally(want, 4)
    assert np.array_equal(counts, want_counts) and counts[5].tolist() == [0, 0, blocks]
    for i in range(rows):
        listed = min(int(counts[i, 2]), 4)
        assert failed[i, :listed].tolist() == np.flatnonzero(want[i] == FAILED)[:listed].tolist()
    corrected = (want > 0) & (want < FAILED)
    assert counts[:, 0].tolist() == corrected.sum(axis=1).tolist()
    assert counts[:, 1].tolist() == np.where(corrected, want, 0).sum(axis=1).tolist()


def test_marked_rows_are_the_statuses_and_the_buffer_is_given_back() -> None:
    # a run's statuses kept as the kernel's list of marks (the kernel wrote none to the
    # buffer): each row, the whole run and every index read as the array would; the
    # buffer is given back for the next call, still zero
    rows, blocks = 4, SCRATCH_MIN // 2
    status = status_buffer(rows * blocks)
    places = np.array([3, 9, blocks + 1, 3 * blocks, 3 * blocks + blocks - 1], dtype=np.uint64)
    values = np.array([1, FAILED, 2, 1, FAILED], dtype=np.uint64)
    want = np.zeros(rows * blocks, dtype=np.uint8)
    want[places.astype(np.intp)] = values
    want = want.reshape(rows, blocks)
    kept = marked_rows(status, (places << np.uint64(8)) | values, rows, rows * blocks)
    assert isinstance(kept, MarkedRows) and kept.shape == (rows, blocks) and len(kept) == rows
    assert np.array_equal(np.asarray(kept), want)
    for row, got in enumerate(kept):
        assert len(got) == blocks and np.array_equal(np.asarray(got), want[row])
    assert np.array_equal(np.asarray(kept[-1]), want[-1]) and not np.asarray(kept[2]).any()
    with pytest.raises(IndexError):
        kept[rows]
    again = status_buffer(rows * blocks)
    assert again.base is status.base and not again.any()
    kept_statuses(again)


def test_the_tally_of_marked_rows_is_the_tally_of_their_statuses() -> None:
    # MarkedRows.tally counts from the marks what kernels.tally.status_tally counts from
    # the array: corrected blocks and symbols, failed blocks, the first `listed` failed
    # places of each row; marks past the rows (padding) are not counted
    from bitmend.kernels.tally import status_tally

    rng = np.random.default_rng(3)
    rows, blocks, listed = 6, 5000, 3
    status = np.zeros(rows * blocks + 40, dtype=np.uint8)
    places = np.sort(rng.choice(len(status), 900, replace=False))
    status[places] = rng.choice([1, 2, 3, FAILED], size=len(places), p=[0.5, 0.2, 0.1, 0.2])
    status[2 * blocks: 3 * blocks] = 0  # a clean row
    places = np.flatnonzero(status).astype(np.uint64)
    marks = (places << np.uint64(8)) | status[places.astype(np.intp)].astype(np.uint64)
    kept = marked_rows(status_buffer(len(status)), marks, rows, rows * blocks)
    counts, failed = kept.tally(listed)
    want_counts, want_failed = status_tally(status[: rows * blocks].reshape(rows, blocks).copy(), listed)
    assert np.array_equal(counts, want_counts) and counts[:, 2].min() == 0 and counts[:, 2].max() > listed
    for row in range(rows):
        shown = min(int(counts[row, 2]), listed)
        assert np.array_equal(failed[row, :shown], want_failed[row, :shown])
    assert np.array_equal(np.asarray(kept), status[: rows * blocks].reshape(rows, blocks))
