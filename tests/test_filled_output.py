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
