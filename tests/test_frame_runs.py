"""Frames coded in runs (format.encode_frames, interleave.encode_segments) are the bytes the
frame-by-frame path writes (format.encode_frame, held to the version 2 fixtures in
test_format_versions.py): the run path is an optimisation, never a second format."""

from __future__ import annotations

import io
import os

import numpy as np
import pytest

from bitmend.codes.catalog import code_id, get_code
from bitmend.codes.linear import BinaryLinearCode
from bitmend.container import format as fmt
from bitmend.container.writer import FrameWriter
from bitmend.interleave import encode_segment, encode_segments


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
