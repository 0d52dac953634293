"""Frames coded in runs (format.encode_frames, interleave.encode_segments) are the bytes the
frame-by-frame path writes (format.encode_frame, held to the version 2 fixtures in
test_format_versions.py): the run path is an optimisation, never a second format."""

from __future__ import annotations

import io
import os

import numpy as np
import pytest

import bitmend
from bitmend import interleave
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import code_id, get_code
from bitmend.codes.linear import BinaryLinearCode
from bitmend.container import format as fmt
from bitmend.container import reader
from bitmend.container.writer import FrameWriter
from bitmend.interleave import decode_segment, decode_segments, encode_segment, encode_segments
from bitmend.kernels.status import MarkedRows


def frame_by_frame(first: fmt.FrameHeader, payloads: bytes, key: bytes | None = None) -> bytes:
    out, header, length = [], first, first.length
    for start in range(0, len(payloads), length):
        out.append(fmt.encode_frame(header, payloads[start: start + length], key))
        header = header.next()
    return b"".join(out)


@pytest.mark.parametrize("name", ["rep-3", "hamming-7-4", "secded-72-64", "golay-24-12", "bch-31-21", "rs-255-223"])
@pytest.mark.parametrize("depth", [1, 5, 8])
@pytest.mark.parametrize("length", [1, 301, 4096])
def test_run_is_frame_by_frame(name: str, depth: int, length: int) -> None:
    # counters near their wrap: sequence mod 2^32 and position mod 2^48 roll over inside the run
    first = fmt.FrameHeader(code_id(name), depth, fmt.SEQ_MODULUS - 2, length, stream_id=0x0123456789ABCDEF,
                            position=(1 << fmt.POSITION_BITS) - length - 1)
    payloads = os.urandom(4 * length)
    assert fmt.encode_frames(first, payloads).tobytes() == frame_by_frame(first, payloads)


def test_keyed_run_is_frame_by_frame() -> None:
    first = fmt.FrameHeader(code_id("golay-24-12"), 8, 41, 777, stream_id=5, position=1000, keyed=True)
    payloads = os.urandom(3 * 777)
    key = b"river-gauge shared key 0123"
    assert fmt.encode_frames(first, payloads, key).tobytes() == frame_by_frame(first, payloads, key)
    with pytest.raises(ValueError, match="key"):
        fmt.encode_frames(first, payloads)


def test_custom_code_run_is_frame_by_frame() -> None:
    parity = np.random.default_rng(7).integers(0, 2, (12, 9)).astype(np.uint8)
    code = BinaryLinearCode("custom-21-12", parity)
    first = fmt.FrameHeader.for_defined_code(code, 8, 0, 500, stream_id=9, position=0)
    payloads = os.urandom(2 * 500)
    assert fmt.encode_frames(first, payloads).tobytes() == frame_by_frame(first, payloads)


def test_run_refuses_partial_payloads_and_closing_headers() -> None:
    first = fmt.FrameHeader(code_id("hamming-7-4"), 1, 0, 10)
    with pytest.raises(ValueError, match="whole payloads"):
        fmt.encode_frames(first, bytes(25))
    with pytest.raises(ValueError, match="closing"):
        fmt.encode_frames(fmt.FrameHeader(code_id("hamming-7-4"), 1, 0, 10, last=True), bytes(20))


@pytest.mark.parametrize("name, depth, message_bytes", [
    ("hamming-7-4", 1, 16388),   # message bits fill whole codewords: one call for all rows
    ("golay-24-12", 8, 16388),   # each row padded to whole groups: row by row
    ("golay-24-12", 20, 30),     # the header layout: exactly one group per row
    ("bch-63-51", 3, 100),
])
def test_segments_are_segment_by_segment(name: str, depth: int, message_bytes: int) -> None:
    code = get_code(name)
    messages = np.frombuffer(os.urandom(5 * message_bytes), dtype=np.uint8).reshape(5, message_bytes)
    rows = encode_segments(code, depth, messages)
    assert [row.tobytes() for row in rows] == [encode_segment(code, depth, m.tobytes()) for m in messages]


def test_writer_runs_match_one_frame_at_a_time() -> None:
    # a large write goes through runs; the same bytes fed a little at a time go frame by frame
    data = os.urandom(50_000)
    whole, pieces = io.BytesIO(), io.BytesIO()
    with_runs = FrameWriter(whole, "golay-24-12", 8, frame_bytes=1000, stream_id=3)
    with_runs.write(data)
    with_runs.close()
    one_by_one = FrameWriter(pieces, "golay-24-12", 8, frame_bytes=1000, stream_id=3)
    for start in range(0, len(data), 500):  # never two whole frames waiting: no runs
        one_by_one.write(data[start: start + 500])
    one_by_one.close()
    assert whole.getvalue() == pieces.getvalue()


# ---- decoding in runs ---------------------------------------------------------------------

@pytest.mark.parametrize("name, depth, message_bytes", [
    ("hamming-7-4", 1, 16388), ("golay-24-12", 8, 16388), ("golay-24-12", 20, 30), ("bch-63-51", 3, 100)])
def test_decoded_segments_are_segment_by_segment(name: str, depth: int, message_bytes: int) -> None:
    code = get_code(name)
    messages = np.frombuffer(os.urandom(4 * message_bytes), dtype=np.uint8).reshape(4, message_bytes)
    coded = encode_segments(code, depth, messages).copy()
    rng = np.random.default_rng(11)
    flips = rng.random(coded.shape) < 0.01  # about 1% of bytes hit by one bit each: some blocks fail
    coded[flips] ^= np.uint8(0x10)
    got_messages, got_status = decode_segments(code, depth, coded, message_bytes)
    for i in range(4):
        want_message, want_status = decode_segment(code, depth, coded[i].tobytes(), message_bytes)
        assert got_messages[i].tobytes() == want_message
        assert np.array_equal(got_status[i], want_status)


def _linear_code(name: str) -> BlockCode:
    """A catalog code, or custom-11-7: a (11, 7) code of random parity, whose table step has
    a shape of no loop of its own (the general loops)."""
    if name.startswith("custom"):
        return BinaryLinearCode(name, np.random.default_rng(3).integers(0, 2, (7, 4)).astype(np.uint8))
    return get_code(name)


LINEAR_SHAPES = [("hamming-7-4", 8), ("secded-8-4", 1), ("hamming-15-11", 8), ("rep-3", 8), ("golay-24-12", 8),
                 ("golay-23-12", 8), ("custom-11-7", 1)]


@pytest.mark.parametrize("name, depth", LINEAR_SHAPES)
def test_rows_coded_where_they_go_are_segment_by_segment_and_touch_nothing_else(name: str, depth: int) -> None:
    # the linear kernels write a run's coded payloads straight into the frames, rows apart;
    # each row must be encode_segment's bytes, and the bytes between rows (the frames'
    # headers, written before or after) must be left as they were: a row's last step
    # stores exactly its bytes
    code = _linear_code(name)
    count, message_bytes, gap = 5, 3024, 37  # 3024 = 56 * 54: rows of whole steps for every shape here
    width = interleave.layout(code, depth, message_bytes).coded_bytes
    messages = np.frombuffer(os.urandom(count * message_bytes), dtype=np.uint8).reshape(count, message_bytes)
    store = np.full(count * (width + gap) + 8, 0xA5, dtype=np.uint8)
    rows = np.lib.stride_tricks.as_strided(store, shape=(count, width), strides=(width + gap, 1))
    padded = interleave.message_row_bytes(code, depth, message_bytes)
    wide = np.zeros((count, padded), dtype=np.uint8)
    wide[:, :message_bytes] = messages
    assert interleave._encode_in_place(code, interleave.layout(code, depth, message_bytes), wide.reshape(-1), rows)
    for i in range(count):
        assert rows[i].tobytes() == encode_segment(code, depth, messages[i].tobytes())
        assert (store[i * (width + gap) + width: (i + 1) * (width + gap)] == 0xA5).all()
    assert (store[count * (width + gap) - gap:] == 0xA5).all()
    assert encode_segments(code, depth, messages).tobytes() == rows.tobytes()


@pytest.mark.parametrize("rate", [0.03, 0.002])
@pytest.mark.parametrize("name, depth", LINEAR_SHAPES)
def test_rows_decoded_where_they_lie_are_segment_by_segment(name: str, depth: int, rate: float) -> None:
    # the linear kernels read a run's coded payloads where they lie in the input, rows apart
    # (junk between them, the last row ending the buffer), every table shape (custom-11-7:
    # the general loop); with damage, the messages and statuses are decode_segment's. At
    # 3% bit errors more than one codeword in 8 is marked (rep-3 aside): more than the
    # kernel lists, so the statuses come as the array; at 0.2% as the listed marks
    code = _linear_code(name)
    count, message_bytes, gap = 5, 3024, 37  # 3024 = 56 * 54: rows of whole steps for every shape here
    messages = np.frombuffer(os.urandom(count * message_bytes), dtype=np.uint8).reshape(count, message_bytes)
    coded = encode_segments(code, depth, messages).copy()
    flips = np.random.default_rng(11).random((coded.shape[0], 8 * coded.shape[1])) < rate  # bit errors
    coded ^= np.packbits(flips, axis=1)
    width = coded.shape[1]
    store = np.full(count * (width + gap) - gap, 0xA5, dtype=np.uint8)
    rows = np.lib.stride_tricks.as_strided(store, shape=(count, width), strides=(width + gap, 1))
    rows[:] = coded
    assert interleave._linear_row_steps(code, interleave.layout(code, depth, message_bytes), rows, decoding=True)
    got_messages, got_status, tally = interleave.decode_segments_tallied(code, depth, rows, message_bytes, 3)
    if rate < 0.01:
        assert isinstance(got_status, MarkedRows)
    elif name != "rep-3":
        assert isinstance(got_status, np.ndarray)
    for i in range(count):
        want_message, want_status = decode_segment(code, depth, coded[i].tobytes(), message_bytes)
        assert got_messages[i].tobytes() == want_message
        assert np.array_equal(got_status[i], want_status)
    # the kernel's own count of what it marked, row by row, is the count of the statuses
    from bitmend.kernels.tally import status_tally

    counts, failed = tally
    want_counts, want_failed = status_tally(np.ascontiguousarray(got_status), 3)
    assert np.array_equal(counts, want_counts) and (want_counts[:, 0] + want_counts[:, 2]).all()
    if name in ("secded-8-4", "golay-24-12", "custom-11-7") and rate > 0.01:  # codes that detect what they cannot correct
        assert want_counts[:, 2].all()  # (Hamming and Golay (23, 12) codes are perfect: they never fail)
    for i in range(count):
        listed = min(int(counts[i, 2]), 3)
        assert np.array_equal(failed[i, :listed], want_failed[i, :listed])
    clean_messages, clean_status = decode_segments(code, depth, encode_segments(code, depth, messages), message_bytes)
    assert clean_messages.tobytes() == messages.tobytes() and not clean_status.any()


@pytest.mark.parametrize("rate", [0.03, 0.002])
@pytest.mark.parametrize("name, depth", LINEAR_SHAPES)
def test_rows_of_part_steps_are_decoded_together_and_tallied_from_their_marks(name: str, depth: int,
                                                                                rate: float) -> None:
    # rows whose codewords do not fill whole table steps (a default frame of rep-3 at depth
    # 8: 16388 groups, 2048.5 steps) are decoded end to end as one segment; the statuses
    # and tally per row, counted from the kernel's marks, are decode_segment's and
    # status_tally's. 8 rows: rep-3's 8 x 3025 groups are whole steps together, not apart
    from bitmend.kernels.tally import status_tally

    code = _linear_code(name)
    count, message_bytes = 8, 3025
    messages = np.frombuffer(os.urandom(count * message_bytes), dtype=np.uint8).reshape(count, message_bytes)
    coded = encode_segments(code, depth, messages).copy()
    flips = np.random.default_rng(12).random((coded.shape[0], 8 * coded.shape[1])) < rate
    coded ^= np.packbits(flips, axis=1)
    got_messages, got_status, tally = interleave.decode_segments_tallied(code, depth, coded, message_bytes, 3)
    if rate < 0.01 and interleave._padded_message_bytes(interleave.layout(code, depth, message_bytes)):
        assert isinstance(got_status, MarkedRows) and tally is not None
    want_status = []
    for i in range(count):
        want_message, status = decode_segment(code, depth, coded[i].tobytes(), message_bytes)
        assert got_messages[i].tobytes() == want_message
        assert np.array_equal(got_status[i], status)
        want_status.append(status)
    if tally is not None:
        want_counts, want_failed = status_tally(np.ascontiguousarray(want_status), 3)
        counts, failed = tally
        assert np.array_equal(counts, want_counts) and (want_counts[:, 0] + want_counts[:, 2]).all()
        for i in range(count):
            listed = min(int(counts[i, 2]), 3)
            assert np.array_equal(failed[i, :listed], want_failed[i, :listed])


def _reports(container: bytes, key: bytes | None = None, jobs: int = 1) -> tuple[bytes, str]:
    out = bitmend.decode_bytes(container, key=key, jobs=jobs)
    return out.data, out.report.to_jsonl()


@pytest.mark.parametrize("name, depth", [("hamming-7-4", 1), ("golay-24-12", 8), ("secded-72-64", 8), ("rep-3", 8)])
def test_runs_decode_as_frame_by_frame_on_a_damaged_stream(monkeypatch, name: str, depth: int) -> None:
    # random bit errors everywhere, one frame's leading header wrecked (its copy is used),
    # one frame cut out (lost) and some bytes slipped in: with runs on, the data, every
    # frame report and the summary are those of the frame-by-frame path (runs off)
    data = os.urandom(60_000)
    key = b"river-gauge key for the run tests"
    container = bytearray(bitmend.encode_bytes(data, code=name, depth=depth, frame_bytes=2000, stream_id=77, key=key))
    rng = np.random.default_rng(5)
    for bit in rng.choice(8 * len(container), size=len(container) // 400, replace=False):
        container[bit // 8] ^= 1 << (bit % 8)
    frame = len(bitmend.encode_bytes(bytes(2000), code=name, depth=depth, frame_bytes=2000, stream_id=77, key=key)) // 2
    container[3 * frame + 8: 3 * frame + 40] = bytes(32)  # frame 3's leading header
    del container[10 * frame: 11 * frame]  # frame 10 lost outright
    container[20 * frame + 500: 20 * frame + 500] = b"\x55\xaa\x13"  # bytes slipped into frame 21
    with_runs = _reports(bytes(container), key)
    with_workers = _reports(bytes(container), key, jobs=2) if name == "golay-24-12" else with_runs
    monkeypatch.setattr(reader, "RUN_FRAMES", 0)
    assert with_runs == _reports(bytes(container), key)
    assert with_workers == with_runs


# ---- records given all at once ------------------------------------------------------------

def _gauge_records(count: int, seed: int) -> list[bytes]:
    """Invented river-gauge readings of several lengths, with an empty record among them."""
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        text = f"G{i % 7:02d} stage={rng.uniform(0.2, 4.0):.3f}m t={i}\n"
        out.append(b"" if i == 5 else (text * int(rng.integers(1, 4))).encode())
    return out


@pytest.mark.parametrize("code, depth, keyed", [("golay-24-12", 8, False), ("hamming-7-4", 1, True),
                                                 ("rs-255-223", 2, False)])
def test_records_given_at_once_are_the_frames_sent_one_by_one(code: str, depth: int, keyed: bool) -> None:
    records = _gauge_records(700, 1)  # more than one batch
    key = b"river-gauge key for the run tests" if keyed else None
    at_once = list(bitmend.encode_records(records, code=code, depth=depth, stream_id=11, key=key))
    one_by_one = list(bitmend.encode_records(iter(records), code=code, depth=depth, stream_id=11, key=key))
    assert at_once == one_by_one


RUN_KEY = b"river-gauge key for the run tests"


def _damaged_blobs() -> list[bytes]:
    """Blobs of keyed records with hit, cut, foreign, junk, repeated and lost ones among them."""
    records = _gauge_records(300, 2)
    blobs = list(bitmend.encode_records(records, code="golay-24-12", depth=8, stream_id=21, key=RUN_KEY))
    other = list(bitmend.encode_records(records[:5], code="golay-24-12", depth=8, stream_id=22, key=RUN_KEY))
    rng = np.random.default_rng(3)
    for i in rng.choice(len(blobs) - 1, 40, replace=False):
        blob = bytearray(blobs[i])
        for bit in rng.choice(8 * len(blob), int(rng.integers(1, 60)), replace=False):
            blob[bit // 8] ^= 1 << (bit % 8)
        blobs[i] = bytes(blob)
    blobs[7] = blobs[7][:-9]  # cut short
    blobs[9] = blobs[9][:8] + bytes(60) + blobs[9][68:]  # leading header wiped: the copy serves
    blobs[30:30] = [other[2], b"not a frame at all", blobs[40]]  # foreign, junk, a repeat
    del blobs[100]  # lost
    return blobs


def test_blobs_given_at_once_decode_as_blobs_one_by_one() -> None:
    # the same records and the same reports whether the blobs come as a list (batched) or
    # one by one
    blobs = _damaged_blobs()

    def decoded(source):
        reader = bitmend.decode_records(source, on_error="keep", key=RUN_KEY)
        return list(reader.with_reports()), reader.report.to_jsonl()

    assert decoded(blobs) == decoded(iter(blobs))


def test_a_blob_decoded_alone_is_what_the_scan_and_the_batch_find() -> None:
    # reader.single_frame (blobs one by one) takes a blob the batch takes, and finds in it
    # the frame FrameScanner finds; any other blob is left to the scan
    blobs = _damaged_blobs()
    batch = reader.single_frames(blobs, RUN_KEY)
    taken = 0
    for blob, in_batch in zip(blobs, batch):
        alone = reader.single_frame(blob, RUN_KEY)
        assert (alone is None) == (in_batch is None)
        if alone is None:
            continue
        taken += 1
        scanned = list(reader.FrameScanner(io.BytesIO(blob), key=RUN_KEY).frames())
        assert len(scanned) == 1
        for frame in (in_batch, scanned[0]):
            assert (frame.header, bytes(frame.payload), frame.crc_ok, frame.authentic, frame.marker_distance) == \
                (alone.header, alone.payload, alone.crc_ok, alone.authentic, alone.marker_distance)
            assert np.array_equal(np.asarray(frame.block_status), alone.block_status)
            assert frame._counts == alone._counts
    assert taken > 250 and any(frame is None for frame in batch)


def test_a_runs_block_counts_are_each_frames() -> None:
    # the run's counts (compiled when the kernels are loaded, numpy otherwise) are
    # block_counts row by row: corrected blocks, their corrected symbols, failed blocks
    rng = np.random.default_rng(9)
    status = rng.choice(np.array([0, 0, 0, 0, 1, 2, 3, fmt.FAILED], dtype=np.uint8), size=(7, 999))
    status[2] = 0  # a clean frame among them
    want = [reader.block_counts(row) for row in status]
    assert reader.run_block_counts(status) == want
    import bitmend.kernels.blockcode  # noqa: F401  (loads the compiled kernels: the compiled count)
    assert reader.run_block_counts(status) == want
    assert reader.run_block_counts(status[:0]) == []
    from bitmend.kernels.tally import status_tally

    counts, failed = status_tally(np.ascontiguousarray(status), 5)  # the failed positions, the first 5 a row
    for i, row in enumerate(status):
        where = np.flatnonzero(row == fmt.FAILED)
        assert counts[i, 2] == len(where)
        assert failed[i, :min(len(where), 5)].tolist() == where[:5].tolist()
    # sparse, at the first and last block of rows, rows skipped between (the scan follows
    # the row as it goes)
    sparse = np.zeros((9, 1001), dtype=np.uint8)
    sparse[0, 0], sparse[0, 1000], sparse[5, 0], sparse[8, 1000], sparse[8, 3] = 2, fmt.FAILED, 1, fmt.FAILED, 3
    counts, failed = status_tally(sparse, 5)
    assert [tuple(row) for row in counts.tolist()] == [reader.block_counts(row) for row in sparse]
    assert failed[0, 0] == 1000 and failed[8, 0] == 1000


def test_a_frames_quick_report_is_the_constructors() -> None:
    # FrameReport.of_frame skips the frozen constructor's per-field setattr; it must make
    # the same record, every field included (a field added later fails here until added there)
    from dataclasses import fields

    from bitmend.report import FrameReport

    made = FrameReport(7, 1234, "corrected", 99, 2, 3, [4, 5], True, 500, 600, False, 2,
                       stream="00000000000000ab", stream_index=1, reordered=True, closing=True)
    quick = FrameReport.of_frame(7, 1234, "corrected", 99, 2, 3, [4, 5], True, 500, 600, False, 2,
                                 "00000000000000ab", 1, True, True)
    assert quick == made and quick.to_json() == made.to_json()
    assert list(vars(quick)) == [f.name for f in fields(FrameReport)]


def test_a_runs_clean_reports_are_the_constructors() -> None:
    # FrameReport.clean_frames copies one filled-in record per frame; each must equal the
    # constructor's, and no two may share their failed_blocks list
    from bitmend.report import FrameReport

    quick = FrameReport.clean_frames([9, 10], [0, 700], [40, 41], [100, 300], [200, 201], "00000000000000cd", 2)
    made = [FrameReport(seq, offset, "clean", blocks, 0, 0, [], True, out, size,
                        stream="00000000000000cd", stream_index=2)
            for seq, offset, blocks, out, size in ((9, 0, 40, 100, 200), (10, 700, 41, 300, 201))]
    assert quick == made and [r.to_json() for r in quick] == [r.to_json() for r in made]
    assert quick[0].failed_blocks is not quick[1].failed_blocks


def test_a_runs_mixed_reports_are_the_constructors() -> None:
    # FrameReport.run_frames copies one filled-in record per frame and sets every field a
    # run's frame may vary in, for the frames it is told are not clean: each report must
    # equal the constructor's
    from bitmend.report import FrameReport

    quick = FrameReport.run_frames([9, 10, 11], [0, 700, 1400], [40, 41, 42], [100, 300, 501], [200, 201, 202],
                                   "00000000000000cd", 2,
                                   [(1, "corrected", (3, 4, 0), [], True), (2, "damaged", (1, 1, 2), [5, 6], False)])
    made = [FrameReport(9, 0, "clean", 40, 0, 0, [], True, 100, 200, stream="00000000000000cd", stream_index=2),
            FrameReport(10, 700, "corrected", 41, 3, 4, [], True, 300, 201, stream="00000000000000cd",
                        stream_index=2),
            FrameReport(11, 1400, "damaged", 42, 1, 1, [5, 6], False, 501, 202, failed_count=2,
                        stream="00000000000000cd", stream_index=2)]
    assert quick == made and [r.to_json() for r in quick] == [r.to_json() for r in made]


def test_the_run_key_of_a_header_follows_its_flags_and_copies() -> None:
    # frames of one run share stream, code and keying; a closing, repair or grouped frame,
    # or a version 1 frame, is never in a run, and a copy that changes `last` says so
    header = fmt.FrameHeader(code_id("golay-24-12"), 8, 5, 200, stream_id=77)
    assert header.run_key == (77, header.code_id, False)
    assert header._copied(6, 400).run_key == header.run_key
    assert header._copied(6, 400, last=True).run_key is None
    assert fmt.FrameHeader(header.code_id, 8, 5, 200, last=True, stream_id=77)._copied(6, 0, False).run_key \
        == header.run_key
    for flags in ({"repair": True}, {"in_group": True}, {"version": 1}):
        assert fmt.FrameHeader(header.code_id, 8, 5, 200, stream_id=77, **flags).run_key is None


def test_a_record_too_long_stops_records_at_once_where_it_stops_them_one_by_one() -> None:
    from bitmend.errors import SettingError

    records = [b"G01 stage=1.40m\n", b"G02 stage=1.41m\n", bytes(300), b"G03 stage=1.42m\n"]

    def sent(source) -> tuple[list[bytes], str]:
        blobs = []
        with pytest.raises(SettingError) as raised:
            for blob in bitmend.encode_records(source, code="hamming-7-4", depth=1, frame_bytes=100, stream_id=4):
                blobs.append(blob)
        return blobs, str(raised.value)

    at_once, one_by_one = sent(records), sent(iter(records))
    assert at_once == one_by_one and len(at_once[0]) == 2


# ---- delivery of runs ------------------------------------------------------------------------

class _Trickle(io.RawIOBase):
    """A pipe-like source: reads return a few hundred bytes at a time, so the scanner never
    reads ahead and finds short runs, as on a live link."""

    def __init__(self, data: bytes, seed: int) -> None:
        self._data, self._at = data, 0
        self._rng = np.random.default_rng(seed)

    def readable(self) -> bool:
        return True

    def readinto(self, buffer) -> int:
        size = min(len(buffer), int(self._rng.integers(1, 900)), len(self._data) - self._at)
        buffer[:size] = self._data[self._at: self._at + size]
        self._at += size
        return size


def _decoded_from(source, jobs: int = 1) -> tuple[bytes, str]:
    with bitmend.Decoder(source, jobs=jobs) as dec:
        data = dec.read()
        return data, dec.report.to_jsonl()


def _frame_spans(container: bytes) -> list[tuple[int, int]]:
    found = reader.FrameScanner(io.BytesIO(container), decode_payloads=False).frames()
    return [(f.offset, f.offset + f.header.frame_bytes) for f in found]


def test_a_container_in_memory_decodes_as_one_read_from_a_pipe() -> None:
    # decode_bytes reads the container in place and a file is read ahead for long runs; a
    # pipe that trickles gives short runs: same data, same reports, damaged or not
    data = os.urandom(40_000)
    container = bytearray(bitmend.encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=700, stream_id=5))
    rng = np.random.default_rng(8)
    for bit in rng.choice(8 * len(container), size=len(container) // 300, replace=False):
        container[bit // 8] ^= 1 << (bit % 8)
    del container[9000: 9400]
    container = bytes(container)
    in_memory = bitmend.decode_bytes(container)
    assert (in_memory.data, in_memory.report.to_jsonl()) == _decoded_from(_Trickle(container, 1))
    assert (in_memory.data, in_memory.report.to_jsonl()) == _decoded_from(io.BytesIO(container))


@pytest.mark.parametrize("arrangement", ["swapped", "repeated", "interleaved", "gap"])
def test_runs_out_of_order_are_delivered_as_frame_by_frame(monkeypatch, arrangement: str) -> None:
    # frames spliced out of order, twice, mixed with another stream's, or with a gap: the
    # scanner still finds runs, which delivery must take frame by frame whenever they are
    # not simply the next frames of the open stream; data and reports equal runs off
    data = os.urandom(30_000)
    ours = bitmend.encode_bytes(data, code="hamming-7-4", depth=1, frame_bytes=500, stream_id=31)
    other = bitmend.encode_bytes(os.urandom(6000), code="hamming-7-4", depth=1, frame_bytes=500, stream_id=32)
    spans = _frame_spans(ours)
    pieces = [ours[a:b] for a, b in spans]
    foreign = [other[a:b] for a, b in _frame_spans(other)]
    if arrangement == "swapped":  # 10..19 arrive after 20..39
        order = pieces[:10] + pieces[20:40] + pieces[10:20] + pieces[40:]
    elif arrangement == "repeated":  # the whole stream, then again
        order = pieces + pieces
    elif arrangement == "interleaved":  # a run of the other stream inside ours
        order = pieces[:15] + foreign[:8] + pieces[15:]
    else:  # 10..49 lost: more than the reorder window
        order = pieces[:10] + pieces[50:]
    container = b"".join(order)
    with_runs = _reports(container)
    monkeypatch.setattr(reader, "RUN_FRAMES", 0)
    assert with_runs == _reports(container)
    if arrangement == "repeated":
        assert with_runs[0] == data


def test_the_next_frames_of_the_open_stream_are_delivered_as_one_run() -> None:
    # a clean stream read as runs: delivery hands them on whole (one event a run), and
    # the frames so delivered are every frame, in order, once
    from bitmend.container.delivery import Delivered, DeliveredRun, Sequencer

    container = bitmend.encode_bytes(os.urandom(50_000), code="golay-24-12", depth=8, frame_bytes=1000)
    sequencer = Sequencer()
    events = []
    for item in reader.FrameScanner(container).items():
        events += sequencer.push_run(item) if isinstance(item, reader.FrameRun) else sequencer.push(item)
    events += sequencer.finish()
    runs = [e for e in events if isinstance(e, DeliveredRun)]
    assert runs and all(len(e.frames) > 1 for e in runs)
    seqs = [f.header.seq for e in events if isinstance(e, (Delivered, DeliveredRun))
            for f in (e.frames if isinstance(e, DeliveredRun) else [e.frame])]
    assert seqs == list(range(len(_frame_spans(container))))
    assert all(e.data == b"".join(bytes(f.payload) for f in e.frames) for e in runs)


def test_headers_decoded_together_are_each_decoded_alone() -> None:
    # counters at their extremes (sequence 2^32 - 1, positions past 2^32 up to 2^48 - 1),
    # flags, keyed, a repair frame, one record hit beyond repair and one corrected:
    # decode_headers row by row equals decode_header (None where that raises or fails)
    headers = [fmt.FrameHeader(code_id("golay-24-12"), 8, fmt.SEQ_MODULUS - 1, 16384, stream_id=2**64 - 1,
                               position=2**48 - 1),
               fmt.FrameHeader(code_id("hamming-7-4"), 1, 7, 12, last=True, stream_id=3, position=2**32 + 5),
               fmt.FrameHeader(code_id("secded-72-64"), 255, 0, 0, stream_id=0, position=0, keyed=True),
               fmt.FrameHeader(code_id("rs-255-223"), 4, 12345, 900, stream_id=99, position=2**40, in_group=True),
               fmt.FrameHeader(code_id("golay-24-12"), 8, 9, 300, stream_id=99, position=123456789, repair=True)]
    rows = np.frombuffer(b"".join(fmt.encode_header(h) for h in headers * 3), dtype=np.uint8)
    rows = rows.reshape(len(headers) * 3, fmt.HEADER_BYTES).copy()
    rows[6, :30] ^= 0xFF  # beyond what the header code corrects
    rows[8, 3] ^= 0x01  # one bit: corrected
    want = []
    for row in rows:
        try:
            want.append(fmt.decode_header(row.tobytes()))
        except fmt.HeaderError:
            want.append(None)
    assert fmt.decode_headers(rows) == want
    assert want[0] == headers[0] and want[8] == headers[3] and want[6] is None


@pytest.mark.parametrize("on_error", ["zero", "drop", "fail"])
def test_damaged_frames_inside_runs_follow_the_policy_as_frame_by_frame(monkeypatch, on_error: str) -> None:
    # enough random bit errors that some frames fail their CRC-32C inside runs: each
    # policy gives the data, reports (or the error) of the frame-by-frame path
    data = os.urandom(50_000)
    container = bytearray(bitmend.encode_bytes(data, code="hamming-7-4", depth=1, frame_bytes=1500, stream_id=9))
    rng = np.random.default_rng(21)
    for bit in rng.choice(8 * len(container), size=len(container) // 60, replace=False):
        container[bit // 8] ^= 1 << (bit % 8)
    container = bytes(container)

    def outcome() -> tuple:
        try:
            out = bitmend.decode_bytes(container, on_error=on_error)
        except bitmend.DamagedDataError as exc:
            return ("raised", str(exc))
        return out.data, out.report.to_jsonl(), out.report.summary.damaged

    with_runs = outcome()
    monkeypatch.setattr(reader, "RUN_FRAMES", 0)
    assert with_runs == outcome()
    assert with_runs[0] == "raised" if on_error == "fail" else with_runs[2] > 0
