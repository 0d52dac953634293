"""The Python API: bitmend.open in the style of the gzip module, Encoder/Decoder, one-shot helpers."""

from __future__ import annotations

import io

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import bitmend
from bitmend.channel.bsc import flip_bits as bsc_flip
from bitmend.codes.catalog import UnknownCodeError
from bitmend.report import CLEAN, CORRECTED

from conftest import frame_spans, hamming_distance, random_bytes


def test_open_wb_to_bytesio_then_rb_gives_the_data_back(gauge_log):
    sink = io.BytesIO()
    with bitmend.open(sink, "wb", code="hamming-15-11", depth=8, frame_bytes=500) as f:
        for line in gauge_log.splitlines(keepends=True):
            f.write(line)
    assert not sink.closed  # a caller's file object stays open
    blob = sink.getvalue()
    assert len(frame_spans(blob)) == -(-len(gauge_log) // 500)
    with bitmend.open(io.BytesIO(blob), "rb") as f:
        assert f.read() == gauge_log
        assert f.report.complete
        assert f.report.summary.frames == len(f.report.frames)


def test_open_with_a_path_writes_a_file_in_a_with_block(tmp_path, gauge_log):
    path = tmp_path / "gauges.bmd"
    with bitmend.open(path, "wb", code="golay-23-12", depth=4) as f:
        f.write(gauge_log)
    assert f.closed
    assert bitmend.decode_bytes(path.read_bytes()).data == gauge_log


def test_open_with_a_path_reads_a_file_and_closes_it(tmp_path, gauge_log):
    path = tmp_path / "gauges.bmd"
    path.write_bytes(bitmend.encode_bytes(gauge_log, code="golay-23-12", depth=4))
    with bitmend.open(str(path), "rb") as f:
        assert f.read() == gauge_log
        assert f.report.complete
    assert f.closed
    with bitmend.open(path) as f:  # a PathLike, default mode "rb"
        assert f.read() == gauge_log


def test_decoder_iterates_lines_and_reads_line_by_line(gauge_log):
    blob = bitmend.encode_bytes(gauge_log, frame_bytes=333)  # frames cut lines in the middle
    with bitmend.open(io.BytesIO(blob)) as f:
        first = f.readline()
        rest = list(f)
    assert [first, *rest] == gauge_log.splitlines(keepends=True)
    with bitmend.open(io.BytesIO(blob)) as f:
        assert f.read(10) == gauge_log[:10]
        assert f.readline() == gauge_log.splitlines(keepends=True)[0][10:]


def test_report_summary_is_final_after_reading_to_the_end(gauge_log):
    blob = bitmend.encode_bytes(gauge_log, code="secded-39-32", frame_bytes=1000)
    damaged = bytearray(blob)
    damaged[100] ^= 0x10  # one bit in frame 0's payload area
    with bitmend.open(io.BytesIO(bytes(damaged))) as f:
        data = f.read()
        report = f.report
    assert data == gauge_log
    assert report.complete
    assert report.frames[0].status == CORRECTED and report.frames[0].corrected_symbols == 1
    assert all(fr.status == CLEAN for fr in report.frames[1:])
    assert report.summary.corrected == 1 and report.summary.bytes_out == len(gauge_log)


def test_decoder_calls_on_frame_for_every_frame():
    seen = []
    blob = bitmend.encode_bytes(random_bytes(1000, 3), frame_bytes=100)
    with bitmend.Decoder(io.BytesIO(blob), on_frame=seen.append) as dec:
        dec.read()
    assert [r.seq for r in seen] == list(range(10))


def test_encoder_flush_ends_a_frame_at_a_packet_boundary():
    sink = io.BytesIO()
    packets = [b"gauge 3 stage 1.02", b"gauge 4 stage 0.77 flow 8.1", b"battery 3.41 V"]
    with bitmend.Encoder(sink, frame_bytes=4096) as enc:
        for p in packets:
            enc.write(p)
            enc.flush()
    spans = frame_spans(sink.getvalue())
    assert [s.length for s in spans] == [len(p) for p in packets] + [0]
    assert bitmend.decode_bytes(sink.getvalue()).data == b"".join(packets)


def test_encoder_counts_bytes_in_and_out():
    sink = io.BytesIO()
    enc = bitmend.Encoder(sink, frame_bytes=64)
    enc.write(random_bytes(200, 1))
    enc.close()
    assert enc.bytes_in == 200
    assert enc.bytes_out == len(sink.getvalue())
    assert enc.closed


def test_writing_after_close_raises():
    enc = bitmend.open(io.BytesIO(), "wb")
    enc.close()
    with pytest.raises(ValueError):
        enc.write(b"late")


@pytest.mark.parametrize("mode", ["ab", "r+b", "x"])
def test_open_refuses_other_modes(mode):
    with pytest.raises(ValueError):
        bitmend.open(io.BytesIO(), mode)


def test_open_refuses_something_that_is_not_a_file():
    with pytest.raises(TypeError):
        bitmend.open(12345, "rb")


def test_encode_refuses_unknown_codes_and_bad_depths_and_frame_sizes():
    with pytest.raises(UnknownCodeError):
        bitmend.encode_bytes(b"x", code="golay-25-12")
    for depth in (0, 256):
        with pytest.raises(ValueError):
            bitmend.encode_bytes(b"x", depth=depth)
    with pytest.raises(ValueError):
        bitmend.encode_bytes(b"x", frame_bytes=0)


def test_decode_bytes_of_garbage_raises_not_a_container():
    with pytest.raises(bitmend.NotAContainerError):
        bitmend.decode_bytes(b"not a container at all" * 20)


@settings(max_examples=30, deadline=None)
@given(chunks=st.lists(st.binary(max_size=90), max_size=12), frame_bytes=st.integers(1, 120))
def test_writes_in_any_pieces_give_the_same_container_as_one_write(chunks, frame_bytes):
    sink = io.BytesIO()
    with bitmend.open(sink, "wb", frame_bytes=frame_bytes, stream_id=0x6A) as f:
        for c in chunks:
            f.write(c)
    whole = b"".join(chunks)
    assert sink.getvalue() == bitmend.encode_bytes(whole, frame_bytes=frame_bytes, stream_id=0x6A)
    assert len(frame_spans(sink.getvalue())) == max(1, -(-len(whole) // frame_bytes))


def test_default_code_survives_a_light_random_bit_channel(gauge_log):
    # golay-24-12 at depth 8 against a BSC with p = 1e-3 (seeded): every bit comes back
    blob = bitmend.encode_bytes(gauge_log)
    damaged, flips = bsc_flip(blob, 1e-3, np.random.default_rng(2031))
    assert flips > 0 and hamming_distance(blob, damaged) == flips
    result = bitmend.decode_bytes(damaged)
    assert result.data == gauge_log
    assert result.report.summary.complete
    assert result.report.summary.corrected_symbols <= flips


@settings(max_examples=20, deadline=None)
@given(p=st.one_of(st.just(0.0), st.floats(1e-6, 1)), size=st.integers(0, 300), seed=st.integers(0, 2**32 - 1))
def test_bsc_flip_count_equals_bits_changed(p, size, seed):
    data = random_bytes(size, seed)
    damaged, flips = bsc_flip(data, p, np.random.default_rng(seed))
    assert len(damaged) == size
    assert hamming_distance(data, damaged) == flips
    if p == 0:
        assert flips == 0
    if p == 1:
        assert flips == 8 * size


def test_bsc_refuses_probabilities_outside_zero_one():
    with pytest.raises(ValueError):
        bsc_flip(b"abc", 1.5, np.random.default_rng(0))


def test_bsc_with_a_vanishing_flip_probability_flips_nothing():
    damaged, flips = bsc_flip(b"abc", 1e-20, np.random.default_rng(0))
    assert (damaged, flips) == (b"abc", 0)
