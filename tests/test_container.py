"""The framed container: round trips, headers, CRC, damage, resynchronisation, reports."""

from __future__ import annotations

import io
import struct
import zlib

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import bitmend
from bitmend import DamagedDataError, NotAContainerError, decode_bytes, encode_bytes
from bitmend.codes.catalog import code_id, get_code
from bitmend.container import format as fmt
from bitmend.interleave import encode_segment, layout
from bitmend.report import CLEAN, CORRECTED, DAMAGED, LOST

from conftest import (ALL_CODES, SECDED_CODES, check_report_lines, delete_bit, flip_run, frame_spans, insert_bit,
                      payload_slices, random_bytes)

# ---- CRC and headers --------------------------------------------------------------------------

def test_crc32c_check_value_of_123456789():
    # CRC-32C of b"123456789" = 0xE3069283 (Greg Cook's CRC RevEng catalogue), for the
    # function in use and for the crcmod reference it must equal
    assert fmt.crc32c(b"123456789") == 0xE3069283
    assert fmt.crc32c_reference(b"123456789") == 0xE3069283


@settings(max_examples=50, deadline=None)
@given(data=st.binary(max_size=3000))
def test_crc32c_in_use_equals_the_crcmod_reference(data):
    assert fmt.crc32c(data) == fmt.crc32c_reference(data)


def test_crc32c_is_not_plain_crc32():
    # CRC-32 of b"123456789" = 0xCBF43926 (Greg Cook's CRC RevEng catalogue); the container
    # must use the Castagnoli polynomial, not this one
    assert zlib.crc32(b"123456789") == 0xCBF43926
    assert fmt.crc32c(b"123456789") != zlib.crc32(b"123456789")


@settings(max_examples=60, deadline=None)
@given(code=st.sampled_from(ALL_CODES), depth=st.integers(1, 255), seq=st.integers(0, 2**32 - 1),
       length=st.integers(0, fmt.MAX_PAYLOAD_BYTES), last=st.booleans(), stream_id=st.integers(0, 2**64 - 1),
       position=st.integers(0, 2**48 - 1))
def test_header_round_trips_through_its_60_coded_bytes(code, depth, seq, length, last, stream_id, position):
    header = fmt.FrameHeader(code_id(code), depth, seq, length, last, stream_id=stream_id, position=position)
    coded = fmt.encode_header(header)
    assert len(coded) == fmt.HEADER_BYTES == 60  # 20 golay-24-12 codewords of the 30-byte record
    assert fmt.decode_header(coded) == header


@settings(max_examples=30, deadline=None)
@given(code=st.sampled_from(ALL_CODES), depth=st.integers(1, 255), seq=st.integers(0, 2**32 - 1),
       length=st.integers(0, fmt.MAX_PAYLOAD_BYTES), last=st.booleans())
def test_version_1_header_still_round_trips_through_its_33_coded_bytes(code, depth, seq, length, last):
    header = fmt.FrameHeader(code_id(code), depth, seq, length, last, version=1)
    coded = fmt.encode_header(header)
    assert len(coded) == 33 and header.header_bytes == 33
    assert fmt.decode_header(coded + bytes(27)) == header  # read from a window sized for either version
    assert fmt.decode_header(coded) == header


def test_header_record_layout_is_big_endian_with_crc():
    header = fmt.FrameHeader(code_id("hamming-7-4"), 9, 0x01020304, 0x0A0B0C0D, last=True,
                             stream_id=0x1122334455667788, position=0xA1A2A3A4A5A6)
    record = header.record()
    assert len(record) == 30
    assert record[:26] == bytes([2, 1, 2, 9, 0x11, 0x22, 0x33, 0x44, 0x55, 0x66, 0x77, 0x88, 1, 2, 3, 4,
                                 0xA1, 0xA2, 0xA3, 0xA4, 0xA5, 0xA6, 0x0A, 0x0B, 0x0C, 0x0D])
    assert struct.unpack(">I", record[26:])[0] == fmt.crc32c(record[:26])


def test_version_1_record_layout_is_unchanged():
    header = fmt.FrameHeader(code_id("hamming-7-4"), 9, 0x01020304, 0x0A0B0C0D, last=True, version=1)
    record = header.record()
    assert record[:12] == bytes([1, 1, 2, 9, 1, 2, 3, 4, 0x0A, 0x0B, 0x0C, 0x0D])
    assert struct.unpack(">I", record[12:])[0] == fmt.crc32c(record[:12])


def _coded_record(body: bytes, layout: fmt.HeaderLayout) -> bytes:
    """A coded header holding any record body (its CRC-32C appended), for hostile values."""
    return encode_segment(fmt.header_code(), layout.depth, body + struct.pack(">I", fmt.crc32c(body)))


def test_a_newer_version_in_either_header_size_is_refused_by_name():
    v2 = fmt.FrameHeader(11, 8, 0, 10).record()[:-4]
    with pytest.raises(fmt.UnsupportedVersionError, match="version 3"):
        fmt.decode_header(_coded_record(bytes([3]) + v2[1:], fmt.HEADER_LAYOUTS[2]))
    v1 = fmt.FrameHeader(11, 8, 0, 10, version=1).record()[:-4]
    with pytest.raises(fmt.UnsupportedVersionError, match="version 2"):
        fmt.decode_header(_coded_record(bytes([2]) + v1[1:], fmt.HEADER_LAYOUTS[1]))


@pytest.mark.parametrize("start", [0, 7, 100, 480 - 60])
def test_header_survives_any_60_bit_burst(start):
    header = fmt.FrameHeader(code_id("golay-24-12"), 8, 77, 4096)
    coded = flip_run(fmt.encode_header(header), start, 60)
    assert fmt.decode_header(coded) == header


def test_random_bytes_are_not_taken_for_a_header():
    rng = np.random.default_rng(0)
    for _ in range(200):
        assert fmt.decode_header(rng.integers(0, 256, 60, dtype=np.uint8).tobytes()) is None
    assert fmt.decode_header(bytes(60)) is None


@pytest.mark.parametrize("header, error, words", [
    (fmt.FrameHeader(11, 8, 0, fmt.MAX_PAYLOAD_BYTES + 1), fmt.HeaderError, "length"),
    (fmt.FrameHeader(11, 8, 0, 2**32 - 1), fmt.HeaderError, "length"),
    (fmt.FrameHeader(11, 0, 0, 10), fmt.HeaderError, "depth"),
    (fmt.FrameHeader(99, 8, 0, 10), fmt.HeaderError, "code"),
    (fmt.FrameHeader(11, 8, 0, 10, version=1), None, None),
])
def test_hostile_header_values_raise_a_clear_header_error(header, error, words):
    if error is None:  # a version 1 header is not hostile: it is read as version 1
        assert fmt.decode_header(fmt.encode_header(header)) == header
        return
    with pytest.raises(error, match=words):
        fmt.decode_header(fmt.encode_header(header))


def test_stream_with_only_a_hostile_header_is_not_a_container_and_allocates_nothing_big():
    hostile = fmt.FrameHeader(11, 8, 0, 2**31)
    blob = fmt.MARKER_BYTES + fmt.encode_header(hostile) + random_bytes(200, 3)
    with pytest.raises(NotAContainerError):
        decode_bytes(blob)


def test_frame_size_is_marker_two_headers_and_coded_payload():
    header = fmt.FrameHeader(code_id("hamming-15-11"), 5, 0, 100)
    groups = -(-8 * (100 + 4) // (5 * 11))
    assert header.coded_bytes == (groups * 5 * 15 + 7) // 8
    assert header.frame_bytes == 8 + 60 + header.coded_bytes + 60
    frame = fmt.encode_frame(header, random_bytes(100, 1))
    assert len(frame) == header.frame_bytes
    assert frame[:8] == fmt.MARKER_BYTES
    assert frame[8:68] == frame[-60:] == fmt.encode_header(header)


def test_frame_refuses_payload_of_the_wrong_length():
    with pytest.raises(ValueError):
        fmt.encode_frame(fmt.FrameHeader(11, 8, 0, 10), b"short")


# ---- round trips ------------------------------------------------------------------------------

@pytest.mark.parametrize("name", ALL_CODES)
@pytest.mark.parametrize("depth", (1, 3, 8))
def test_round_trip_every_code_at_awkward_lengths_and_several_frames(name, depth):
    frame_bytes = 37
    for size in (0, 1, 2, 17, 36, 37, 38, 111, 250):
        data = random_bytes(size, seed=size * 7 + depth)
        blob = encode_bytes(data, code=name, depth=depth, frame_bytes=frame_bytes)
        result = decode_bytes(blob)
        assert result.data == data
        summary = result.report.summary
        assert summary.complete and summary.frames == max(1, -(-size // frame_bytes))
        assert summary.clean == summary.frames and summary.bytes_out == size
        spans = frame_spans(blob)
        assert [s.seq for s in spans] == list(range(len(spans)))


@settings(max_examples=40, deadline=None)
@given(data=st.binary(max_size=700), name=st.sampled_from(ALL_CODES), depth=st.integers(1, 255),
       frame_bytes=st.integers(1, 300))
def test_round_trip_any_bytes_any_code_depth_and_frame_size(data, name, depth, frame_bytes):
    result = decode_bytes(encode_bytes(data, code=name, depth=depth, frame_bytes=frame_bytes))
    assert result.data == data
    assert result.report.summary.complete


def test_empty_input_gives_one_closing_frame_that_decodes_to_nothing():
    blob = encode_bytes(b"")
    spans = frame_spans(blob)
    assert len(spans) == 1 and spans[0].length == 0
    header = fmt.decode_header(blob[8:68])
    assert header.last and header.seq == 0
    result = decode_bytes(blob)
    assert result.data == b""
    assert result.report.summary.complete and result.report.summary.frames == 1


def test_only_the_final_frame_carries_the_closing_flag():
    blob = encode_bytes(random_bytes(300, 1), frame_bytes=64)
    flags = [fmt.decode_header(blob[s.header_start: s.payload_start]).last for s in frame_spans(blob)]
    assert flags == [False] * (len(flags) - 1) + [True]


def test_concatenated_containers_decode_to_the_concatenated_data():
    a, b = random_bytes(500, 1), random_bytes(321, 2)
    blob = encode_bytes(a, code="hamming-7-4", depth=4, frame_bytes=128) + encode_bytes(b, frame_bytes=100)
    result = decode_bytes(blob)
    assert result.data == a + b
    assert result.report.summary.complete
    assert result.report.summary.lost == 0


def test_payload_crc_catches_a_wrong_correction():
    # 4 errors in one hamming-7-4 codeword at depth 1 get miscorrected by the code;
    # the frame's CRC-32C must refuse the result
    data = random_bytes(64, 5)
    blob = encode_bytes(data, code="hamming-7-4", depth=1, frame_bytes=64)
    span = frame_spans(blob)[0]
    damaged = flip_run(blob, 8 * span.payload_start + 70, 4)
    result = decode_bytes(damaged)
    frame = result.report.frames[0]
    assert frame.status == DAMAGED and not frame.crc_ok
    assert not result.report.summary.complete


# ---- bursts in a container -------------------------------------------------------------------

@pytest.mark.parametrize("name, depth", [("golay-24-12", 1), ("golay-24-12", 8), ("golay-24-12", 255),
                                         ("hamming-7-4", 8), ("secded-72-64", 16), ("golay-23-12", 255),
                                         ("rep-3", 255)])
def test_burst_of_depth_times_t_in_a_payload_is_corrected_in_the_container(name, depth):
    code = get_code(name)
    burst = depth * code.t
    data = random_bytes(4000, depth)
    blob = encode_bytes(data, code=name, depth=depth, frame_bytes=1000)
    spans = frame_spans(blob)
    target = spans[1]
    header = fmt.decode_header(blob[target.header_start: target.payload_start])
    coded_bits = layout(code, depth, header.length + fmt.CRC_BYTES).coded_bits  # excludes pad bits
    for offset in (0, 3, coded_bits - burst):
        damaged = flip_run(blob, 8 * target.payload_start + offset, burst)
        result = decode_bytes(damaged)
        assert result.data == data
        assert result.report.summary.complete
        frames = result.report.frames
        assert frames[1].status == CORRECTED and frames[1].corrected_symbols == burst
        assert all(f.status == CLEAN for i, f in enumerate(frames) if i != 1)


@pytest.mark.parametrize("name, depth", [("golay-24-12", 8), ("hamming-15-11", 8)])
def test_burst_of_depth_times_t_anywhere_after_the_first_marker_is_survived(name, depth):
    code = get_code(name)
    burst = depth * code.t
    data = random_bytes(500, 11)
    blob = encode_bytes(data, code=name, depth=depth, frame_bytes=128)
    for start in range(64, 8 * len(blob) - burst, 13):
        result = decode_bytes(flip_run(blob, start, burst))
        assert result.data == data, f"burst at bit {start}"
        assert result.report.summary.complete, f"burst at bit {start}"


def test_burst_of_depth_times_t_on_the_first_marker_is_survived():
    data = random_bytes(500, 11)
    blob = encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128)
    result = decode_bytes(flip_run(blob, 0, 24))
    assert result.data == data and result.report.summary.complete


def test_burst_of_depth_times_t_on_the_closing_frame_header_is_survived():
    data = random_bytes(3500, 2)
    blob = encode_bytes(data, code="golay-24-12", depth=255, frame_bytes=1000)
    last = frame_spans(blob)[-1]
    result = decode_bytes(flip_run(blob, 8 * last.start, 255 * 3))
    assert result.data == data and result.report.summary.complete


@pytest.mark.parametrize("name", SECDED_CODES)
def test_burst_one_bit_too_long_for_secded_is_reported_as_damaged(name):
    code = get_code(name)
    depth = 8
    data = random_bytes(600, 4)
    blob = encode_bytes(data, code=name, depth=depth, frame_bytes=200)
    target = frame_spans(blob)[1]
    # depth + 1 bits from the payload start: codeword 0 gets message bits 0 and 1 flipped
    result = decode_bytes(flip_run(blob, 8 * target.payload_start, depth * code.t + 1))
    frame = result.report.frames[1]
    assert frame.status == DAMAGED and not frame.crc_ok
    assert frame.failed_blocks == [0]
    assert frame.corrected_blocks == depth - 1
    assert not result.report.summary.complete
    assert result.data[:200] == data[:200] and result.data[400:] == data[400:]


# ---- damaged headers ----------------------------------------------------------------------------

@pytest.mark.parametrize("wipe", ["zeros", "random", "marker and header"])
def test_hit_leading_header_is_recovered_from_the_trailing_copy(wipe):
    data = random_bytes(1000, 1)
    blob = bytearray(encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128))
    target = frame_spans(bytes(blob))[3]
    if wipe == "zeros":
        blob[target.header_start: target.payload_start] = bytes(fmt.HEADER_BYTES)
    elif wipe == "random":
        blob[target.header_start: target.payload_start] = random_bytes(fmt.HEADER_BYTES, 9)
    else:
        blob[target.start: target.payload_start] = random_bytes(8 + fmt.HEADER_BYTES, 9)
    result = decode_bytes(bytes(blob))
    assert result.data == data
    assert result.report.summary.complete
    assert all(f.status == CLEAN for f in result.report.frames)


@pytest.mark.parametrize("fill", ["zeros", "random"])
@pytest.mark.parametrize("index", [1, 3, 5])
def test_frame_with_both_headers_wiped_is_recovered_by_its_place_in_the_stream(fill, index):
    # a full-size frame in the middle keeps the stream's rhythm: the reader decodes it as
    # the frame that must come next and accepts it because its payload CRC checks
    data = random_bytes(1000, 1)
    blob = bytearray(encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128))
    target = frame_spans(bytes(blob))[index]
    blob[target.start: target.payload_start] = bytes(8 + fmt.HEADER_BYTES) if fill == "zeros" else random_bytes(8 + fmt.HEADER_BYTES, index)
    blob[target.copy_start: target.end] = bytes(fmt.HEADER_BYTES) if fill == "zeros" else random_bytes(fmt.HEADER_BYTES, index + 100)
    result = decode_bytes(bytes(blob))
    assert result.data == data and result.report.summary.complete
    assert all(f.status == CLEAN for f in result.report.frames)


@pytest.mark.parametrize("fill", ["zeros", "random"])
@pytest.mark.parametrize("index", [1, 3, 5])
def test_frame_with_both_headers_and_its_payload_wiped_is_lost_alone(fill, index):
    data = random_bytes(1000, 1)
    blob = bytearray(encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128))
    spans = frame_spans(bytes(blob))
    slices = payload_slices(spans)
    target = spans[index]
    size = target.copy_start - target.start  # marker, header and the whole coded payload
    blob[target.start: target.copy_start] = bytes(size) if fill == "zeros" else random_bytes(size, index)
    blob[target.copy_start: target.end] = bytes(fmt.HEADER_BYTES) if fill == "zeros" else random_bytes(fmt.HEADER_BYTES, index + 100)
    result = decode_bytes(bytes(blob))
    report = result.report
    assert [f.seq for f in report.frames] == list(range(len(spans)))
    for i, frame in enumerate(report.frames):
        if i == index:
            assert frame.status in (LOST, DAMAGED)
        else:
            assert frame.status == CLEAN
    assert report.summary.lost + report.summary.damaged == 1
    assert not report.summary.complete
    # everything else is delivered intact and in order
    if report.frames[index].status == LOST:
        assert result.data == data[: slices[index].start] + data[slices[index].stop:]
    else:
        assert result.data[: slices[index].start] == data[: slices[index].start]
        assert result.data[slices[index].stop:] == data[slices[index].stop:]


def test_lost_frame_is_listed_by_sequence_number_with_no_offset():
    data = random_bytes(1000, 1)
    blob = bytearray(encode_bytes(data, frame_bytes=128))
    target = frame_spans(bytes(blob))[2]
    blob[target.start: target.end] = bytes(target.size)  # the whole frame is blanked
    result = decode_bytes(bytes(blob))
    lost = [f for f in result.report.frames if f.status == LOST]
    assert [f.seq for f in lost] == [2]
    assert lost[0].offset is None and lost[0].bytes == 0
    assert result.report.summary.lost == 1


def test_frames_lost_at_the_start_are_reported_by_sequence_number():
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, frame_bytes=128)
    spans = frame_spans(blob)
    result = decode_bytes(blob[spans[2].start:])  # frames 0 and 1 vanished
    assert [f.seq for f in result.report.frames if f.status == LOST] == [0, 1]
    assert result.data == data[256:]


# ---- resynchronisation ----------------------------------------------------------------------------

@pytest.mark.parametrize("count", [1, 7, 77, 500])
def test_inserted_garbage_between_frames_is_skipped(count):
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128)
    target = frame_spans(blob)[3]
    garbled = blob[: target.start] + random_bytes(count, count) + blob[target.start:]
    result = decode_bytes(garbled)
    assert result.data == data
    assert result.report.summary.complete
    assert result.report.summary.skipped_bytes == count


@pytest.mark.parametrize("slip", ["delete", "insert"])
@pytest.mark.parametrize("where", [0, 100, 1001])
def test_bit_slip_costs_only_the_frame_it_happens_in(slip, where):
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128)
    spans = frame_spans(blob)
    slices = payload_slices(spans)
    target = spans[3]
    position = 8 * target.payload_start + where
    damaged = delete_bit(blob, position) if slip == "delete" else insert_bit(blob, position)
    result = decode_bytes(damaged)
    frames = result.report.frames
    assert [f.seq for f in frames] == list(range(len(spans)))
    assert all(f.status == CLEAN for i, f in enumerate(frames) if i != 3)
    assert frames[3].status in (DAMAGED, LOST)
    assert result.data[: slices[3].start] == data[: slices[3].start]
    assert result.data[-(len(data) - slices[3].stop):] == data[slices[3].stop:]


def test_bit_slip_in_a_marker_is_recovered_by_correlation():
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, frame_bytes=128)
    target = frame_spans(blob)[4]
    # the slip shifts frame 4 by one bit; later frames follow it at odd bit offsets
    result = decode_bytes(delete_bit(blob, 8 * target.start + 20))
    frames = result.report.frames
    assert all(f.status == CLEAN for i, f in enumerate(frames) if i < 3)
    assert [f.seq for f in frames] == list(range(len(frames)))
    assert result.data[:384] == data[:384]
    assert frames[-1].status == CLEAN and result.data.endswith(data[-104:])


# ---- truncation ---------------------------------------------------------------------------------

@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cut=st.integers(0, 10**9))
def test_truncated_stream_delivers_a_prefix_covering_every_complete_frame(cut):
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128)
    spans = frame_spans(blob)
    cut = 1 + cut % (len(blob) - 1)  # a proper, non-empty prefix of the container
    whole = [s for s in spans if s.end <= cut]
    try:
        result = decode_bytes(blob[:cut])
    except NotAContainerError:
        assert not whole and cut < 8 + fmt.HEADER_BYTES  # not even the first header arrived
        return
    assert data.startswith(result.data)
    assert len(result.data) >= sum(s.length for s in whole)
    assert not result.report.summary.complete
    assert all(f.status in (CLEAN, CORRECTED) for f in result.report.frames[: len(whole)])


def test_truncated_stream_keeps_whole_codeword_groups_of_the_cut_frame():
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, code="golay-24-12", depth=8, frame_bytes=128)
    spans = frame_spans(blob)
    cut = spans[3].payload_start + 100  # 100 of the frame's coded bytes: 4 groups of 24 bytes
    result = decode_bytes(blob[:cut])
    assert result.data == data[: 3 * 128 + 4 * 12]
    last = result.report.frames[-1]
    assert last.truncated and last.status == DAMAGED


def test_truncated_stream_with_on_error_fail_raises_after_the_whole_frames():
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, frame_bytes=128)
    spans = frame_spans(blob)
    with bitmend.open(io.BytesIO(blob[: spans[4].end]), "rb", on_error="fail") as dec:
        got = dec.read(5 * 128)
        assert got == data[: 5 * 128]
        with pytest.raises(DamagedDataError):
            dec.read()


# ---- garbage -------------------------------------------------------------------------------------

@pytest.mark.parametrize("junk", [b"", b"\x00" * 5000, random_bytes(20000, 8), b"gauge 17: 2.31 m\n" * 50])
def test_input_without_frames_is_not_a_container(junk):
    with pytest.raises(NotAContainerError):
        decode_bytes(junk)


# ---- on-error policies ------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def one_damaged_frame():
    """A container whose frame 2 is damaged by a long burst inside its payload."""
    data = random_bytes(1000, 1)
    blob = encode_bytes(data, code="hamming-7-4", depth=4, frame_bytes=128)
    spans = frame_spans(blob)
    damaged = flip_run(blob, 8 * spans[2].payload_start + 40, 400)
    return data, damaged, payload_slices(spans)[2]


def test_on_error_keep_delivers_the_damaged_frame_at_its_length(one_damaged_frame):
    data, blob, hit = one_damaged_frame
    result = decode_bytes(blob, on_error="keep")
    assert len(result.data) == len(data)
    assert result.data[: hit.start] == data[: hit.start] and result.data[hit.stop:] == data[hit.stop:]
    assert result.data[hit] != data[hit]
    assert [f.status for f in result.report.frames].count(DAMAGED) == 1


def test_on_error_zero_writes_zeros_for_the_damaged_frame(one_damaged_frame):
    data, blob, hit = one_damaged_frame
    result = decode_bytes(blob, on_error="zero")
    assert result.data == data[: hit.start] + bytes(hit.stop - hit.start) + data[hit.stop:]


def test_on_error_drop_omits_the_damaged_frame(one_damaged_frame):
    data, blob, hit = one_damaged_frame
    result = decode_bytes(blob, on_error="drop")
    assert result.data == data[: hit.start] + data[hit.stop:]
    assert result.report.summary.bytes_out == len(data) - (hit.stop - hit.start)


def test_on_error_fail_raises_after_delivering_the_frames_before(one_damaged_frame):
    data, blob, hit = one_damaged_frame
    with pytest.raises(DamagedDataError):
        decode_bytes(blob, on_error="fail")
    with bitmend.open(io.BytesIO(blob), "rb", on_error="fail") as dec:
        assert dec.read(hit.start) == data[: hit.start]
        with pytest.raises(DamagedDataError):
            dec.read()


def test_on_error_zero_fills_a_lost_frame_of_known_size():
    data = random_bytes(1000, 1)
    blob = bytearray(encode_bytes(data, frame_bytes=128))
    target = frame_spans(bytes(blob))[2]
    blob[target.start: target.end] = bytes(target.size)
    result = decode_bytes(bytes(blob), on_error="zero")
    assert result.data == data[:256] + bytes(128) + data[384:]


def test_unknown_on_error_policy_is_refused():
    with pytest.raises(ValueError):
        decode_bytes(encode_bytes(b"x"), on_error="ignore")


# ---- report ---------------------------------------------------------------------------------------

def test_report_json_lines_follow_the_contract_on_a_battered_stream():
    data = random_bytes(2000, 1)
    blob = bytearray(encode_bytes(data, code="secded-39-32", depth=8, frame_bytes=200))
    spans = frame_spans(bytes(blob))
    blob[spans[1].start: spans[1].end] = bytes(spans[1].size)  # lost
    blob = bytearray(flip_run(bytes(blob), 8 * spans[3].payload_start, 9))  # damaged (one block fails)
    blob = bytearray(flip_run(bytes(blob), 8 * spans[5].payload_start + 50, 8))  # corrected
    result = decode_bytes(bytes(blob))
    objects = check_report_lines(result.report.to_jsonl(), result.data)
    by_seq = {o["seq"]: o for o in objects[:-1]}
    assert by_seq[1]["status"] == LOST
    assert by_seq[3]["status"] == DAMAGED and by_seq[3]["failed_blocks"] == [0]
    assert by_seq[5]["status"] == CORRECTED and by_seq[5]["corrected_symbols"] == 8
    assert by_seq[5]["corrected_blocks"] == 8
    assert objects[-1]["complete"] is False


def test_report_of_a_clean_stream_is_complete_with_block_counts():
    data = random_bytes(700, 1)
    blob = encode_bytes(data, code="hamming-31-26", depth=4, frame_bytes=300)
    result = decode_bytes(blob)
    objects = check_report_lines(result.report.to_jsonl(), result.data)
    assert objects[-1]["complete"] is True
    for f, span in zip(objects[:-1], frame_spans(blob)):
        assert f["offset"] == span.start
        header = fmt.decode_header(blob[span.header_start: span.payload_start])
        assert f["blocks"] == -(-8 * (header.length + 4) // (4 * 26)) * 4
