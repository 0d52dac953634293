"""Encoder and Decoder behave as the standard library's file objects do (io, gzip, bz2):
mode and name, tell() in plain-data bytes, ValueError on any use after close, open()
refusing arguments that do not fit the mode, non-seekable sources and sinks, line
iteration, and a failed stream that keeps failing instead of looking like a clean end."""

from __future__ import annotations

import io
import os
import pathlib
import threading

import pytest

import bitmend
from bitmend import (DamagedDataError, Decoder, Encoder, NotAContainerError, RepairSpecError,
                     SettingError, UnknownCodeError)
from bitmend.records import decode_records, encode_records

from conftest import frame_spans, random_bytes

LINES = b"".join(b"station %d stage %.2f m\n" % (i, 0.4 + i / 100) for i in range(300)) + b"no newline at the end"
KEY = bytes(range(32))


def container(data: bytes = LINES, **settings) -> bytes:
    return bitmend.encode_bytes(data, stream_id=0x5EED, **settings)


def decoder(data: bytes = LINES, **settings) -> Decoder:
    return bitmend.open(io.BytesIO(container(data, frame_bytes=512)), "rb", **settings)


class NonSeekable(io.RawIOBase):
    """A stream that cannot seek or tell, as a pipe or a socket is (after test_bz2's helper)."""

    def __init__(self, inner: io.BytesIO) -> None:
        super().__init__()
        self.inner = inner

    def readable(self) -> bool:
        return True

    def writable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return False

    def readinto(self, buffer) -> int:
        return self.inner.readinto(buffer)

    def write(self, data) -> int:
        return self.inner.write(data)

    def tell(self) -> int:
        raise io.UnsupportedOperation("tell")

    def seek(self, *args) -> int:
        raise io.UnsupportedOperation("seek")


# ---- use after close ---------------------------------------------------------------------------

DECODER_CALLS = {
    "read": lambda f: f.read(),
    "read(n)": lambda f: f.read(10),
    "read1": lambda f: f.read1(10),
    "readinto": lambda f: f.readinto(bytearray(10)),
    "readinto1": lambda f: f.readinto1(bytearray(10)),
    "readline": lambda f: f.readline(),
    "readlines": lambda f: f.readlines(),
    "peek": lambda f: f.peek(1),
    "tell": lambda f: f.tell(),
    "iteration": lambda f: next(iter(f)),
    "fileno": lambda f: f.fileno(),
    "readable": lambda f: f.readable(),
    "writable": lambda f: f.writable(),
    "seekable": lambda f: f.seekable(),
    "isatty": lambda f: f.isatty(),
}

ENCODER_CALLS = {
    "write": lambda f: f.write(b"late"),
    "writelines": lambda f: f.writelines([b"late"]),
    "flush": lambda f: f.flush(),
    "tell": lambda f: f.tell(),
    "fileno": lambda f: f.fileno(),
    "send_record": lambda f: f.send_record(b"late"),
    "end_group": lambda f: f.end_group(),
    "flush_output": lambda f: f.flush_output(),
    "readable": lambda f: f.readable(),
    "writable": lambda f: f.writable(),
    "seekable": lambda f: f.seekable(),
    "isatty": lambda f: f.isatty(),
}


@pytest.mark.parametrize("call", DECODER_CALLS.values(), ids=DECODER_CALLS.keys())
def test_every_decoder_method_after_close_raises_value_error(call):
    f = decoder()
    f.read(5)
    f.close()
    with pytest.raises(ValueError, match="closed file"):
        call(f)


@pytest.mark.parametrize("call", ENCODER_CALLS.values(), ids=ENCODER_CALLS.keys())
def test_every_encoder_method_after_close_raises_value_error(call):
    f = bitmend.open(io.BytesIO(), "wb")
    f.write(b"gauge 4 stage 0.77")
    f.close()
    with pytest.raises(ValueError, match="closed file"):
        call(f)


def test_close_twice_is_harmless_and_closed_says_so():
    enc, dec = bitmend.open(io.BytesIO(), "wb"), decoder()
    for f in (enc, dec):
        assert not f.closed
        f.close()
        f.close()
        assert f.closed


def test_encoder_closed_in_a_with_block_sends_its_closing_frame_once():
    sink = io.BytesIO()
    with bitmend.open(sink, "wb", stream_id=0x5EED) as f:
        f.write(LINES)
    f.close()
    assert sink.getvalue() == container()


# ---- mode, name, readable/writable/seekable, fileno ---------------------------------------------

def test_modes_and_capabilities_are_those_of_a_one_way_stream():
    enc, dec = bitmend.open(io.BytesIO(), "wb"), decoder()
    assert (enc.mode, enc.readable(), enc.writable(), enc.seekable()) == ("wb", False, True, False)
    assert (dec.mode, dec.readable(), dec.writable(), dec.seekable()) == ("rb", True, False, False)


@pytest.mark.parametrize("as_given", [str, pathlib.Path, os.fsencode], ids=["str", "PathLike", "bytes"])
def test_name_is_the_path_given(tmp_path, as_given):
    path = tmp_path / "gauge.bmd"
    with bitmend.open(as_given(path), "wb") as enc:
        enc.write(LINES)
    with bitmend.open(as_given(path), "rb") as dec:
        assert dec.read() == LINES
    expected = os.fsencode(path) if as_given is os.fsencode else str(path)
    assert enc.name == expected and dec.name == expected


def test_name_of_a_wrapped_file_is_its_name_and_empty_without_one(tmp_path):
    path = tmp_path / "gauge.bmd"
    with io.open(path, "wb") as raw, bitmend.open(raw, "wb") as enc:
        enc.write(LINES)
        assert enc.name == str(path)
    with io.open(path, "rb") as raw, bitmend.open(raw, "rb") as dec:
        assert dec.name == str(path)
    assert bitmend.open(io.BytesIO(), "wb").name == ""
    assert decoder().name == ""
    with io.open(os.open(path, os.O_RDONLY), "rb") as by_descriptor:  # its name is an int: no path
        assert bitmend.open(by_descriptor, "rb").name == ""


def test_fileno_is_the_wrapped_files_and_unsupported_for_memory(tmp_path):
    path = tmp_path / "gauge.bmd"
    with io.open(path, "wb") as raw, bitmend.open(raw, "wb") as enc:
        assert enc.fileno() == raw.fileno()
    with bitmend.open(path, "rb") as dec:
        assert os.fstat(dec.fileno()).st_size == path.stat().st_size
    with pytest.raises(io.UnsupportedOperation):
        decoder().fileno()


def test_seeking_is_refused_without_naming_a_private_class():
    f = decoder()
    for call in (lambda: f.seek(0), lambda: f.truncate(0), lambda: f.write(b"x")):
        with pytest.raises(io.UnsupportedOperation) as caught:
            call()
        assert "_" not in str(caught.value)


# ---- open(): arguments that fit the mode, values checked before any file is made ----------------

@pytest.mark.parametrize("argument, value", [("code", "golay-23-12"), ("depth", 4), ("frame_bytes", 512),
                                             ("stream_id", 7), ("repair", "1/4")])
def test_open_for_reading_refuses_writing_arguments(argument, value):
    with pytest.raises(ValueError, match=f"{argument}= applies to writing only, not to mode 'rb'"):
        bitmend.open(io.BytesIO(container()), "rb", **{argument: value})


@pytest.mark.parametrize("argument, value", [("on_error", "drop"), ("accept_unauthenticated", True)])
def test_open_for_writing_refuses_reading_arguments(argument, value):
    with pytest.raises(ValueError, match=f"{argument}= applies to reading only, not to mode 'wb'"):
        bitmend.open(io.BytesIO(), "wb", **{argument: value})


@pytest.mark.parametrize("argument", ["encoding", "errors", "newline"])
@pytest.mark.parametrize("mode", ["rb", "wb"])
def test_open_in_binary_mode_refuses_text_arguments(mode, argument):
    with pytest.raises(ValueError, match=f"{argument}= applies to text modes"):
        bitmend.open(io.BytesIO(container()), mode, **{argument: "utf-8" if argument == "encoding" else "strict"})


@pytest.mark.parametrize("settings, error", [
    ({"code": "golay-25-12"}, UnknownCodeError),
    ({"depth": 0}, SettingError),
    ({"depth": 256}, SettingError),
    ({"frame_bytes": 0}, SettingError),
    ({"repair": "4/0"}, RepairSpecError),
    ({"key": b"short"}, SettingError),
])
def test_open_for_writing_checks_values_before_making_the_file(tmp_path, settings, error):
    path = tmp_path / "never.bmd"
    with pytest.raises(error):
        bitmend.open(path, "wb", **settings)
    assert not path.exists()


def test_open_for_reading_names_the_on_error_choices():
    with pytest.raises(ValueError, match="keep, zero, drop, fail, got 'nope'"):
        bitmend.open(io.BytesIO(container()), "rb", on_error="nope")


def test_open_with_reading_arguments_delivers_what_they_ask():
    blob = bitmend.encode_bytes(LINES, key=KEY)
    with bitmend.open(io.BytesIO(blob), "rb") as f:
        assert f.read() == b"" and f.keyed_without_key > 0
    with bitmend.open(io.BytesIO(blob), "rb", accept_unauthenticated=True, on_error="fail") as f:
        assert f.read() == LINES


def test_a_custom_code_object_is_accepted_for_writing():
    code = bitmend.get_code("hamming-7-4")
    with bitmend.open(io.BytesIO(), "wb", code=code) as f:
        assert f.write(b"ok") == 2


# ---- tell() --------------------------------------------------------------------------------------

def test_encoder_tell_counts_plain_bytes_across_writes_and_flushes():
    f = bitmend.open(io.BytesIO(), "wb", frame_bytes=100)
    assert f.tell() == 0
    total = 0
    for size in (1, 99, 250, 0, 7):
        total += f.write(bytes(size))
        assert f.tell() == total
        f.flush()
        assert f.tell() == total
    assert f.bytes_out > total  # container bytes are counted apart
    f.close()


def test_decoder_tell_counts_plain_bytes_delivered_across_every_kind_of_read():
    f = decoder()
    assert f.tell() == 0
    assert f.read(10) == LINES[:10] and f.tell() == 10
    assert f.peek(1)[:1] == LINES[10:11] and f.tell() == 10  # peek consumes nothing
    line = f.readline()
    assert line == LINES[10: LINES.index(b"\n") + 1] and f.tell() == 10 + len(line)
    at = f.tell()
    got = f.read1(1000)
    assert got == LINES[at: at + len(got)] and f.tell() == at + len(got)
    buffer = bytearray(3000)
    at = f.tell()
    size = f.readinto(buffer)
    assert bytes(buffer[:size]) == LINES[at: at + size] and f.tell() == at + size
    assert f.read() == LINES[at + size:] and f.tell() == len(LINES)


def test_decoder_tell_reaches_the_length_after_a_whole_read():
    f = decoder()
    assert f.read() == LINES and f.tell() == len(LINES)
    assert f.read() == b"" and f.tell() == len(LINES)


# ---- reading lines and pieces --------------------------------------------------------------------

def test_iteration_gives_the_lines_and_the_unterminated_tail():
    with decoder() as f:
        assert list(f) == LINES.splitlines(keepends=True)


def test_readline_with_a_size_stops_at_the_size_or_the_newline():
    first = LINES.splitlines(keepends=True)[0]
    with decoder() as f:
        assert f.readline(5) == first[:5]
        assert f.readline(1000) == first[5:]
        assert f.readline(0) == b""
        assert f.readline(-1) == LINES.splitlines(keepends=True)[1]


def test_readlines_with_a_hint_stops_after_the_hint_is_reached():
    lines = LINES.splitlines(keepends=True)
    with decoder() as f:
        got = f.readlines(len(lines[0]) + 1)
        assert got == lines[:2]
        assert f.readlines() == lines[2:]


def test_reads_of_every_size_give_the_data_in_order():
    data = random_bytes(70_000, 11)
    with decoder(data) as f:
        pieces = [f.read(0), f.read(1), f.read(65_537), f.read(None)]
    assert pieces[0] == b"" and b"".join(pieces) == data


def test_read1_and_readinto1_give_at_most_what_was_asked_and_something_before_the_end():
    data = random_bytes(5000, 12)
    out = bytearray()
    with decoder(data) as f:
        while True:
            block = f.read1(700)
            assert len(block) <= 700
            if not block:
                break
            out += block
    assert out == data
    buffer = bytearray(300)
    with decoder(data) as f:
        assert 0 < f.readinto1(buffer) <= 300 and bytes(buffer[:3]) == data[:3]


def test_peek_shows_what_read_then_returns():
    with decoder() as f:
        ahead = f.peek(50)
        assert ahead and LINES.startswith(ahead[:50])
        assert f.read(len(ahead)) == ahead


def test_empty_stream_reads_as_empty_everywhere():
    with decoder(b"") as f:
        assert (f.read(), f.read1(5), f.readline(), f.peek(1), list(f), f.tell()) == (b"", b"", b"", b"", [], 0)


# ---- non-seekable sources and sinks --------------------------------------------------------------

def test_decoder_reads_from_a_pipe():
    blob = container(random_bytes(200_000, 13), frame_bytes=4096)  # more than a pipe's buffer holds
    read_end, write_end = os.pipe()

    def feed() -> None:
        with io.open(write_end, "wb") as w:
            w.write(blob)

    writer = threading.Thread(target=feed)
    writer.start()
    try:
        with io.open(read_end, "rb") as r, bitmend.open(r, "rb", on_error="fail") as f:
            assert f.read() == random_bytes(200_000, 13)
            assert f.name == "" and not f.seekable()
    finally:
        writer.join()


def test_decoder_and_encoder_over_streams_that_cannot_seek_or_tell():
    sink = NonSeekable(io.BytesIO())
    with bitmend.open(sink, "wb", stream_id=0x5EED) as f:
        f.write(LINES)
        assert f.tell() == len(LINES)
    assert sink.inner.getvalue() == container()
    with bitmend.open(NonSeekable(io.BytesIO(container())), "rb") as f:
        assert f.read(100) == LINES[:100] and f.tell() == 100
        assert f.read() == LINES[100:]


# ---- a failed stream keeps failing ----------------------------------------------------------------

@pytest.fixture(scope="module")
def frame_two_lost() -> bytes:
    blob = bytearray(container(frame_bytes=512))
    lost = frame_spans(bytes(blob))[2]
    blob[lost.start: lost.end] = bytes(lost.size)
    return bytes(blob)


@pytest.mark.parametrize("call", [DECODER_CALLS[name] for name in ("read", "read(n)", "read1", "readinto",
                                                                    "readline", "readlines", "peek", "iteration")],
                         ids=["read", "read(n)", "read1", "readinto", "readline", "readlines", "peek", "iteration"])
def test_every_read_after_damaged_data_error_raises_it_again(frame_two_lost, call):
    f = bitmend.open(io.BytesIO(frame_two_lost), "rb", on_error="fail")
    assert f.read(1024) == LINES[:1024]  # the two frames before the lost one
    with pytest.raises(DamagedDataError) as first:
        f.read()
    with pytest.raises(DamagedDataError) as again:
        call(f)
    assert str(again.value) == str(first.value) and again.value.__cause__ is first.value
    with pytest.raises(DamagedDataError):
        call(f)
    assert f.tell() == 1024  # nothing after the failure counts as delivered
    f.close()
    with pytest.raises(ValueError, match="closed file"):
        call(f)


def test_a_read_after_not_a_container_raises_again():
    f = bitmend.open(io.BytesIO(b"gauge 17: 2.31 m\n" * 40), "rb")
    for _ in range(2):
        with pytest.raises(NotAContainerError):
            f.read()


# ---- context manager --------------------------------------------------------------------------

def test_with_block_returns_the_object_and_closes_only_files_it_opened(tmp_path):
    wrapped = io.BytesIO()
    with bitmend.open(wrapped, "wb") as f:
        assert isinstance(f, Encoder)
    assert f.closed and not wrapped.closed
    path = tmp_path / "gauge.bmd"
    with bitmend.open(path, "wb") as f:
        f.write(LINES)
        descriptor = f.fileno()
    with pytest.raises(OSError):  # the file open() made is closed with the encoder
        os.fstat(descriptor)
    with bitmend.open(path, "rb") as f:
        assert isinstance(f, Decoder) and f.read() == LINES


def test_an_error_inside_a_with_block_leaves_a_stream_that_reads_as_incomplete():
    sink = io.BytesIO()
    with pytest.raises(RuntimeError):
        with bitmend.open(sink, "wb", frame_bytes=100) as f:
            f.write(LINES[:1000])
            raise RuntimeError("sensor link dropped")
    assert f.closed
    result = bitmend.decode_bytes(sink.getvalue())
    assert not result.report.complete and len(result.data) < 1000


# ---- text modes ----------------------------------------------------------------------------------

def test_text_modes_round_trip_through_a_text_wrapper(tmp_path):
    text = "Brückwasser Wehr: 2,31 m\nÉtang aux Anguilles: 0,77 m\n"
    path = tmp_path / "gauge.bmd"
    with bitmend.open(path, "wt", encoding="utf-8", code="golay-23-12") as f:
        assert isinstance(f, io.TextIOWrapper)
        f.write(text)
    with bitmend.open(path, "rt", encoding="utf-8", on_error="fail") as f:
        assert f.readlines() == text.splitlines(keepends=True)
    assert bitmend.decode_bytes(path.read_bytes()).data == text.encode("utf-8")


# ---- frames held back by the key ------------------------------------------------------------------

def test_key_mismatch_counts_are_public_on_decoder_and_record_reader():
    keyed = bitmend.encode_bytes(LINES, key=KEY, frame_bytes=512)
    plain = container(frame_bytes=512)
    frames = len(frame_spans(plain))
    with bitmend.open(io.BytesIO(keyed), "rb") as f:
        f.read()
        assert (f.keyed_without_key, f.untagged_with_key) == (frames, 0)
    with bitmend.open(io.BytesIO(plain), "rb", key=KEY) as f:
        f.read()
        assert (f.keyed_without_key, f.untagged_with_key) == (0, frames)
    records = decode_records(encode_records([b"gauge 1", b"gauge 2"], key=KEY))
    assert list(records) == [] and records.keyed_without_key == 3 and records.untagged_with_key == 0
