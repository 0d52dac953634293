"""encode_bytes codes its frames straight into the bytes object it returns (filled_bytes,
api._Pieces, FrameWriter.container_bytes): the result must be the same bytes as joining
the frames, whether the size told beforehand is right or not."""

from __future__ import annotations

import os

import numpy as np
import pytest

import bitmend
from bitmend import api
from bitmend.codes.catalog import code_id
from bitmend.container import format as fmt
from bitmend.filled_bytes import fillable_bytes


def test_a_filled_bytes_object_holds_what_was_written_through_its_array() -> None:
    blob, view = fillable_bytes(1000)
    assert type(blob) is bytes and len(blob) == 1000 and view.dtype == np.uint8 and len(view) == 1000
    view[:] = np.arange(1000) % 251
    assert blob == bytes(i % 251 for i in range(1000))
    assert fillable_bytes(1) is None and fillable_bytes(0) is None  # CPython shares those objects


def _encoded(data: bytes, expected: int | None, **settings) -> tuple[bytes, bool]:
    """The container through a _Pieces told `expected` bytes; whether it was filled whole."""
    sink = api._Pieces()
    with api.Encoder(sink, stream_id=21, **settings) as enc:
        sink.expect(expected)
        enc.write(data)
    whole = sink._filled is not None and not sink._pieces and sink._at == len(sink._filled[0])
    return sink.joined(), whole


@pytest.mark.parametrize("code, depth, key", [("golay-24-12", 8, None), ("hamming-7-4", 1, b"river gauge key!"),
                                              ("rs-255-223", 2, None), ("bch-31-21", 5, None)])
@pytest.mark.parametrize("size", [0, 1, 16383, 16384, 16385, 49152, 100_000])
def test_the_containers_size_is_known_beforehand_and_filled_exactly(code: str, depth: int, key: bytes | None,
                                                                     size: int) -> None:
    data = os.urandom(size)
    joined, _ = _encoded(data, None, code=code, depth=depth, key=key)
    sink = api._Pieces()
    with api.Encoder(sink, code=code, depth=depth, stream_id=21, key=key) as enc:
        predicted = enc._writer.container_bytes(size)
    assert predicted == len(joined)
    filled, whole = _encoded(data, predicted, code=code, depth=depth, key=key)
    assert filled == joined and whole
    assert bitmend.decode_bytes(filled, key=key).data == data


@pytest.mark.parametrize("error", [-1000, -1, 1, 5000])
def test_a_wrong_size_still_gives_the_same_container(error: int) -> None:
    data = os.urandom(70_000)  # runs of full frames, then a short closing frame
    joined, _ = _encoded(data, None)
    filled, whole = _encoded(data, len(joined) + error)
    assert filled == joined and not whole


def test_repair_frames_are_not_counted_beforehand() -> None:
    sink = api._Pieces()
    with api.Encoder(sink, repair="2/8") as enc:
        assert enc._writer.container_bytes(100_000) is None


def test_frames_made_in_a_given_array_are_the_frames_made_alone() -> None:
    first = fmt.FrameHeader(code_id("golay-24-12"), 8, 0, 500, stream_id=3)
    payloads = os.urandom(3 * 500)
    out = np.zeros(3 * first.frame_bytes, dtype=np.uint8)
    assert fmt.encode_frames(first, payloads, out=out) is out
    assert out.tobytes() == fmt.encode_frames(first, payloads).tobytes()
    with pytest.raises(ValueError, match="frames take"):
        fmt.encode_frames(first, payloads, out=out[:-1])


def test_encode_bytes_codes_its_runs_straight_into_the_output(monkeypatch) -> None:
    # the runs must be made in the output's memory (no run array, no copy), not copied in
    made_in_place = []
    real = fmt.encode_frames

    def watched(first, payloads, key=None, out=None):
        made_in_place.append(out is not None)
        return real(first, payloads, key, out)

    monkeypatch.setattr(fmt, "encode_frames", watched)
    data = os.urandom(200_000)
    assert bitmend.decode_bytes(bitmend.encode_bytes(data, stream_id=4)).data == data
    assert made_in_place and all(made_in_place)


# ---- decode_bytes fills its output when the last frame tells its size ---------------------------

def _spied_fills(monkeypatch) -> list[bytes]:
    """The bytes objects decode_bytes starts to fill, recorded as they are made."""
    from bitmend import filled_bytes

    made: list[bytes] = []
    original = filled_bytes.fillable_bytes

    def spy(size: int):
        filled = original(size)
        if filled is not None:
            made.append(filled[0])
        return filled

    monkeypatch.setattr(filled_bytes, "fillable_bytes", spy)
    return made


@pytest.mark.parametrize("code, depth", [("golay-24-12", 8), ("hamming-7-4", 1), ("rep-3", 8), ("rs-255-223", 2)])
def test_the_last_frame_tells_the_size_a_clean_container_decodes_to(code: str, depth: int) -> None:
    from bitmend.container.reader import stream_length_at_end

    for size in (0, 1, 16384, 16385, 1_100_000):
        data = os.urandom(size)
        assert stream_length_at_end(bitmend.encode_bytes(data, code=code, depth=depth)) == size
    blob = bitmend.encode_bytes(os.urandom(50_000), code=code, depth=depth)
    assert stream_length_at_end(blob[:-1]) is None  # cut: the frame does not end the container
    assert stream_length_at_end(blob + b"\0") is None
    assert stream_length_at_end(bitmend.encode_bytes(os.urandom(50_000), repair="1/4")) is None  # repair frame last
    assert stream_length_at_end(b"no frames here") is None


def test_a_forged_closing_header_does_not_size_the_output() -> None:
    # a lone closing frame claiming to end a stream of 2^47 bytes: no object of that size
    # is made, the frame decodes as what it is (its data after a gap of unknown size)
    from bitmend.container.reader import stream_length_at_end

    header = fmt.FrameHeader(code_id("hamming-7-4"), 8, 3, 1000, last=True, stream_id=9, position=1 << 47)
    forged = fmt.encode_frame(header, bytes(range(250)) * 4)
    assert stream_length_at_end(forged) is None
    out = bitmend.decode_bytes(forged * 1200)  # over 1 MiB: sized from the last frame if it were believed
    assert out.data.startswith(bytes(range(250)) * 4) and not out.report.summary.complete


def test_decode_bytes_fills_the_output_it_returns(monkeypatch) -> None:
    # a clean container of 1 MiB and more: its payloads go straight into the object returned
    data = os.urandom(api.FILLED_OUTPUT_MIN + 12345)
    blob = bitmend.encode_bytes(data, code="hamming-7-4", depth=8)
    made = _spied_fills(monkeypatch)
    out = bitmend.decode_bytes(blob)
    assert out.data == data and out.report.summary.complete
    assert len(made) == 1 and out.data is made[0]


@pytest.mark.parametrize("case", ["dropped frames", "zeroed frames", "two streams", "cut tail", "lost frame"])
def test_decode_bytes_gives_the_same_output_when_the_size_told_is_wrong(monkeypatch, case: str) -> None:
    # damage, a second stream or a cut make the output differ from the last frame's size:
    # the output is the frame-by-frame one all the same (joined from what was filled)
    data = os.urandom(api.FILLED_OUTPUT_MIN + 5000)
    blob = bytearray(bitmend.encode_bytes(data, code="hamming-7-4", depth=8, stream_id=5))
    frame = len(bitmend.encode_bytes(bytes(16384), code="hamming-7-4", depth=8)) - 60  # about one frame
    on_error = "keep"
    if case in ("dropped frames", "zeroed frames"):
        for at in range(3 * frame + 2000, 3 * frame + 2400):  # a burst the code cannot correct: a frame damaged
            blob[at] ^= 0xFF
        on_error = "drop" if case == "dropped frames" else "zero"
    elif case == "two streams":
        blob = bitmend.encode_bytes(b"first stream" * 1000, stream_id=4) + blob
    elif case == "cut tail":
        blob = blob[:-100]
    else:
        blob = blob[: 2 * frame] + blob[4 * frame:]
    made = _spied_fills(monkeypatch)
    want = bitmend.decode_bytes(bytes(blob), on_error=on_error)
    monkeypatch.setattr(api, "FILLED_OUTPUT_MIN", 1 << 40)  # never filled: pieces joined
    joined = bitmend.decode_bytes(bytes(blob), on_error=on_error)
    assert want.data == joined.data and want.report.to_jsonl() == joined.report.to_jsonl()
    assert len(want.data) != len(data) or case == "zeroed frames"
    assert case != "two streams" or joined.data.startswith(b"first stream")
    assert bool(made) == (case != "cut tail")  # sized from the last frame, which a cut takes away


def test_only_whole_huge_pages_inside_the_object_are_offered() -> None:
    # the huge-page advice covers the 2 MiB pages that lie wholly inside the object, never
    # a byte of memory the object does not own
    from bitmend.filled_bytes import HUGE_PAGE, huge_span

    assert huge_span(HUGE_PAGE, 3 * HUGE_PAGE) == (HUGE_PAGE, 3 * HUGE_PAGE)
    assert huge_span(HUGE_PAGE + 16, 3 * HUGE_PAGE) == (2 * HUGE_PAGE, 2 * HUGE_PAGE)
    assert huge_span(HUGE_PAGE + 16, 2 * HUGE_PAGE - 32) is None
    for address in range(0, 3 * HUGE_PAGE, HUGE_PAGE // 3 + 7):
        for size in (HUGE_PAGE - 1, 2 * HUGE_PAGE + 5, 9 * HUGE_PAGE):
            span = huge_span(address, size)
            if span is not None:
                start, length = span
                assert start % HUGE_PAGE == 0 and length % HUGE_PAGE == 0 and length > 0
                assert address <= start and start + length <= address + size


def test_a_large_filled_object_holds_what_was_written() -> None:
    # large enough for the huge-page advice: the contents are what was written, all of them
    from bitmend.filled_bytes import HUGE_MIN

    blob, view = fillable_bytes(HUGE_MIN + 12345)
    view[:] = np.arange(len(view)) % 253
    assert blob == (bytes(range(253)) * (len(view) // 253 + 1))[: len(view)]
