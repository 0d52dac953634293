"""The plain-Python frame writer (container/small_frames.py) against the normal writer, and
the command line's small-encode path that uses it: the same bytes, without numpy."""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import bitmend
from bitmend.codes import catalog
from bitmend.container import format as fmt
from bitmend.container import small_frames as sf
from bitmend.interleave import encode_segment
from bitmend.keyfile import MIN_KEY_BYTES
from conftest import random_bytes, run_cli

KEY = bytes(range(40, 72))  # 32 bytes
SMALL_NAMES = sorted(sf.SMALL_CODES)


def normal(data: bytes, code: str, depth: int, frame_bytes: int, stream_id: int, key: bytes | None) -> bytes:
    return bitmend.encode_bytes(data, code=code, depth=depth, frame_bytes=frame_bytes, stream_id=stream_id, key=key)


# ---- the copies are the originals ---------------------------------------------------------------

def test_copied_format_constants_equal_the_formats():
    assert sf.FORMAT_VERSION == fmt.FORMAT_VERSION
    assert sf.MARKER_BYTES == fmt.MARKER_BYTES
    assert sf.HEADER_CODE == fmt.HEADER_CODE
    assert sf.HEADER_DEPTH == fmt.HEADER_DEPTH
    assert sf.CRC_BYTES == fmt.CRC_BYTES
    assert (sf.FLAG_LAST, sf.FLAG_KEYED) == (fmt.FLAG_LAST, fmt.FLAG_KEYED)
    assert sf.TAG_BYTES == fmt.TAG_BYTES
    assert sf.POSITION_BITS == fmt.POSITION_BITS
    assert sf.SEQ_MODULUS == fmt.SEQ_MODULUS
    assert sf.DEFAULT_FRAME_BYTES == fmt.DEFAULT_FRAME_BYTES
    assert sf.MAX_PAYLOAD_BYTES == fmt.MAX_PAYLOAD_BYTES
    assert sf.MIN_KEY_BYTES == MIN_KEY_BYTES


def test_copied_catalog_defaults_equal_the_catalogs():
    assert (sf.DEFAULT_CODE, sf.DEFAULT_DEPTH, sf.MAX_DEPTH) == (
        catalog.DEFAULT_CODE, catalog.DEFAULT_DEPTH, catalog.MAX_DEPTH)


def test_small_codes_are_exactly_the_catalog_codes_of_the_generic_engine():
    engine = {e.name for e in catalog.CATALOG if catalog.get_code(e.name).generic_engine is not None}
    assert set(sf.SMALL_CODES) == engine


@pytest.mark.parametrize("name", SMALL_NAMES)
def test_each_small_code_has_the_catalog_id_sizes_and_every_parity_bit(name):
    small = sf.SMALL_CODES[name]
    code = catalog.get_code(name)
    assert (small.code_id, small.n, small.k) == (catalog.code_id(name), code.n, code.k)
    rows = [int("".join(str(int(b)) for b in row), 2) for row in code.P]
    assert list(small.parity_rows) == rows


def test_crc32c_is_the_formats_and_meets_the_catalogue_check_value():
    # CRC-32C check value for "123456789": 0xE3069283 (the CRC catalogue, CRC-32/ISCSI)
    assert sf.crc32c(b"123456789") == 0xE3069283
    for size in (0, 1, 7, 200, 4099):
        data = random_bytes(size, size)
        assert sf.crc32c(data) == fmt.crc32c(data)


# ---- segments and frames byte for byte ------------------------------------------------------------

@pytest.mark.parametrize("name", SMALL_NAMES)
@pytest.mark.parametrize("depth", [1, 2, 3, 5, 8, 13, 16, 20, 24, 255])
def test_segment_equals_the_interleavers_for_every_small_code_and_depth(name, depth):
    code = catalog.get_code(name)
    for size in (0, 1, 3, 17, 204):
        message = random_bytes(size, depth * 1000 + size)
        assert sf.encode_segment(sf.SMALL_CODES[name], depth, message) == encode_segment(code, depth, message)


@pytest.mark.parametrize("name", SMALL_NAMES)
def test_a_200_byte_container_equals_the_normal_writers_unkeyed_and_keyed(name):
    data = random_bytes(200, 11)
    for key in (None, KEY):
        for depth in (1, 8, 11):
            assert sf.encode_small(data, name, depth, stream_id=0x5EED, key=key) == normal(
                data, name, depth, sf.DEFAULT_FRAME_BYTES, 0x5EED, key)


@pytest.mark.parametrize("size, frame_bytes", [(0, 16384), (1, 1), (64, 16), (65, 16), (63, 16), (300, 100),
                                               (32768, 16384), (5000, 1024)])
def test_frame_cutting_holds_one_back_and_closes_as_the_normal_writer(size, frame_bytes):
    data = random_bytes(size, size + frame_bytes)
    assert sf.encode_small(data, "golay-24-12", 8, frame_bytes, 0xABCDEF) == normal(
        data, "golay-24-12", 8, frame_bytes, 0xABCDEF, None)


def test_an_empty_input_is_one_empty_closing_frame_that_decodes_to_nothing():
    blob = sf.encode_small(b"", stream_id=7)
    assert blob == normal(b"", sf.DEFAULT_CODE, sf.DEFAULT_DEPTH, sf.DEFAULT_FRAME_BYTES, 7, None)
    result = bitmend.decode_bytes(blob)
    assert result.data == b"" and result.report.summary.complete


def test_writes_in_pieces_give_the_same_container_as_one_write():
    data = random_bytes(3000, 3)
    whole = sf.encode_small(data, "hamming-15-11", 5, 700, 99, KEY)
    sink = io.BytesIO()
    writer = sf.SmallFrameWriter(sink, "hamming-15-11", 5, 700, 99, KEY)
    for start in range(0, len(data), 333):
        writer.write(data[start: start + 333])
    writer.close()
    assert sink.getvalue() == whole


def test_sequence_numbers_and_positions_wrap_as_the_format_says():
    sink = io.BytesIO()
    writer = sf.SmallFrameWriter(sink, "secded-8-4", 3, 10, stream_id=1)
    writer._seq = sf.SEQ_MODULUS - 1  # the next frames wrap from 2^32 - 1 to 0
    writer._position = (1 << sf.POSITION_BITS) - 5
    writer.write(random_bytes(25, 1))
    writer.close()
    headers = [fmt.decode_header(sink.getvalue()[at + 8:]) for at in _frame_starts(sink.getvalue())]
    assert [h.seq for h in headers] == [sf.SEQ_MODULUS - 1, 0, 1]
    assert [h.position for h in headers] == [(1 << 48) - 5, 5, 15]
    assert [h.last for h in headers] == [False, False, True]


def _frame_starts(blob: bytes) -> list[int]:
    starts, at = [], 0
    while at < len(blob):
        starts.append(at)
        at += fmt.decode_header(blob[at + 8:]).frame_bytes
    return starts


@settings(max_examples=60, deadline=None)
@given(data=st.binary(max_size=600), name=st.sampled_from(SMALL_NAMES), depth=st.integers(1, 40),
       frame_bytes=st.integers(1, 700), stream_id=st.integers(0, (1 << 64) - 1), keyed=st.booleans())
def test_any_small_input_gives_the_normal_writers_bytes(data, name, depth, frame_bytes, stream_id, keyed):
    key = KEY if keyed else None
    assert sf.encode_small(data, name, depth, frame_bytes, stream_id, key) == normal(
        data, name, depth, frame_bytes, stream_id, key)


def test_stream_identity_is_drawn_fresh_for_each_writer():
    ids = {fmt.decode_header(sf.encode_small(b"x")[8:]).stream_id for _ in range(8)}
    assert len(ids) == 8


@pytest.mark.parametrize("kwargs, message", [
    ({"code": "bch-15-7"}, "not one of the codes written without numpy"),
    ({"depth": 0}, "depth must be 1..255"),
    ({"depth": 256}, "depth must be 1..255"),
    ({"frame_bytes": 0}, "frame size must be"),
    ({"frame_bytes": (1 << 20) + 1}, "frame size must be"),
    ({"stream_id": 1 << 64}, "stream id must be"),
    ({"key": b"short"}, "at least 16 bytes"),
])
def test_settings_the_small_writer_cannot_serve_are_setting_errors(kwargs, message):
    with pytest.raises(bitmend.SettingError, match=message):
        sf.SmallFrameWriter(io.BytesIO(), **kwargs)


def test_small_enough_counts_codewords_and_refuses_codes_it_does_not_write():
    assert sf.small_enough("golay-24-12", 200)
    assert sf.small_enough("golay-24-12", sf.SMALL_CODEWORDS * 12 // 8)
    assert not sf.small_enough("golay-24-12", sf.SMALL_CODEWORDS * 12 // 8 + 1)
    assert not sf.small_enough("rep-3", sf.SMALL_CODEWORDS // 8 + 1)
    assert not sf.small_enough("rs-32-28", 10)
    assert not sf.small_enough("no-such-code", 10)


# ---- the command line's small encode --------------------------------------------------------------

def stream_id_of(blob: bytes) -> int:
    return fmt.decode_header(blob[len(fmt.MARKER_BYTES):]).stream_id


@pytest.mark.parametrize("args", [(), ("--code", "hamming-7-4", "--depth", "3", "--frame-bytes", "64"),
                                  ("--code", "secded-72-64", "--depth", "1")])
def test_cli_encode_of_a_small_file_writes_the_normal_writers_container(tmp_path, args):
    data = random_bytes(200, 21)
    src, out = tmp_path / "gauge.bin", tmp_path / "gauge.bmd"
    src.write_bytes(data)
    run = run_cli("encode", str(src), "-o", str(out), *args)
    assert run.code == 0 and run.err == ""
    blob = out.read_bytes()
    options = dict(zip(args[::2], args[1::2]))
    expected = normal(data, options.get("--code", sf.DEFAULT_CODE), int(options.get("--depth", sf.DEFAULT_DEPTH)),
                      int(options.get("--frame-bytes", sf.DEFAULT_FRAME_BYTES)), stream_id_of(blob), None)
    assert blob == expected
    assert bitmend.decode_bytes(blob).data == data


def test_cli_encode_of_a_small_file_with_a_key_file_makes_frames_only_the_key_opens(tmp_path):
    data = random_bytes(200, 22)
    src, out, key_file = tmp_path / "in.bin", tmp_path / "out.bmd", tmp_path / "link.key"
    src.write_bytes(data)
    key_file.write_bytes(KEY)
    key_file.chmod(0o600)
    run = run_cli("encode", str(src), "-o", str(out), "--key-file", str(key_file))
    assert run.code == 0
    blob = out.read_bytes()
    assert blob == normal(data, sf.DEFAULT_CODE, sf.DEFAULT_DEPTH, sf.DEFAULT_FRAME_BYTES, stream_id_of(blob), KEY)
    assert bitmend.decode_bytes(blob, key=KEY).data == data


def test_cli_encode_of_stdin_redirected_from_a_small_file_writes_stdout(tmp_path):
    data = random_bytes(500, 23)
    src = tmp_path / "in.bin"
    src.write_bytes(data)
    with open(src, "rb") as stdin:
        proc = subprocess.run([sys.executable, "-m", "bitmend", "encode", "--depth", "4"], stdin=stdin,
                              capture_output=True, timeout=60, check=False)
    assert proc.returncode == 0
    assert proc.stdout == normal(data, sf.DEFAULT_CODE, 4, sf.DEFAULT_FRAME_BYTES, stream_id_of(proc.stdout), None)


def test_cli_encode_of_an_empty_file_is_one_empty_closing_frame(tmp_path):
    src, out = tmp_path / "empty.bin", tmp_path / "empty.bmd"
    src.write_bytes(b"")
    assert run_cli("encode", str(src), "-o", str(out)).code == 0
    blob = out.read_bytes()
    assert blob == normal(b"", sf.DEFAULT_CODE, sf.DEFAULT_DEPTH, sf.DEFAULT_FRAME_BYTES, stream_id_of(blob), None)


PROBE = """
import json, sys
from bitmend import cli
sys.argv = ["bitmend", *sys.argv[1:]]
try:
    cli.main()
except SystemExit as done:
    print(json.dumps({"code": done.code, "numpy": "numpy" in sys.modules}), file=sys.stderr)
"""


def probe(*args: str) -> dict:
    proc = subprocess.run([sys.executable, "-c", PROBE, *args], capture_output=True, timeout=60, check=False)
    return json.loads(proc.stderr.decode().strip().splitlines()[-1])


def test_cli_encode_of_a_200_byte_file_never_imports_numpy(tmp_path):
    src = tmp_path / "packet.bin"
    src.write_bytes(random_bytes(200, 24))
    assert probe("encode", str(src), "-o", str(tmp_path / "packet.bmd")) == {"code": 0, "numpy": False}


@pytest.mark.parametrize("extra", [("--code", "bch-15-7"), ("--repair", "1/2"), ("--jobs", "2"),
                                   ("--records", "line")])
def test_cli_encode_takes_the_normal_writer_for_what_the_small_one_does_not_do(tmp_path, extra):
    data = b"gauge 4 stage 0.87m\n" * 10
    src, out = tmp_path / "in.txt", tmp_path / "out.bmd"
    src.write_bytes(data)
    assert probe("encode", str(src), "-o", str(out), *extra) == {"code": 0, "numpy": True}
    assert bitmend.decode_bytes(out.read_bytes()).data == data


def test_cli_encode_of_a_file_above_the_small_limit_takes_the_normal_writer(tmp_path):
    data = random_bytes(sf.SMALL_CODEWORDS * 12 // 8 + 1, 25)
    src, out = tmp_path / "big.bin", tmp_path / "big.bmd"
    src.write_bytes(data)
    assert probe("encode", str(src), "-o", str(out)) == {"code": 0, "numpy": True}
    assert bitmend.decode_bytes(out.read_bytes()).data == data


def test_cli_small_encode_errors_are_the_normal_ones(tmp_path):
    src = tmp_path / "in.bin"
    src.write_bytes(b"x" * 10)
    loose = tmp_path / "loose.key"
    loose.write_bytes(KEY)
    loose.chmod(0o644)
    run = run_cli("encode", str(src), "-o", str(tmp_path / "o.bmd"), "--key-file", str(loose))
    assert run.code == 2 and "must not be readable or writable by others" in run.err
    assert "Traceback" not in run.err and len(run.err.strip().splitlines()) == 1
    run = run_cli("encode", str(src), "-o", str(tmp_path))  # a directory
    assert run.code == 3 and run.err.startswith("bitmend: ") and "Traceback" not in run.err
    assert sorted(os.listdir(tmp_path)) == ["in.bin", "loose.key"]  # no output, no temp file left
