"""Keyed frames (--key-file): only frames from a holder of the shared key are delivered.

Each keyed frame carries HMAC-SHA-256, truncated to 128 bits, over its header record and
payload, inside the coded part (docs/FORMAT.md, "Keyed frames")."""

from __future__ import annotations

import hashlib
import hmac
import os

import pytest

import bitmend
from bitmend.container import format as fmt
from bitmend.inject import inject_bytes

from conftest import frame_spans, random_bytes, run_cli

KEY = bytes(range(100, 132))
OTHER_KEY = bytes(range(1, 33))
DATA = b"".join(f"2031-03-02T{h:02d}:00Z gauge='Brackwater Weir' stage_m={1 + h / 40:.3f}\n".encode()
                for h in range(24)) * 8


# ---- the primitive, as used ----------------------------------------------------------------------

def test_hmac_sha_256_matches_the_published_test_vectors():
    # RFC 4231, "Identifiers and Test Vectors for HMAC-SHA-224, -256, -384, and -512",
    # test case 2 (key "Jefe") and test case 5 (output truncated to 128 bits, as the frame
    # tag is); the expected values are recalled from memory
    full = hmac.new(b"Jefe", b"what do ya want for nothing?", hashlib.sha256).hexdigest()
    assert full == "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
    truncated = hmac.new(b"\x0c" * 20, b"Test With Truncation", hashlib.sha256).digest()[:fmt.TAG_BYTES]
    assert truncated.hex() == "a3b6167473100ee06e0c796c2955552b"


def test_the_frame_tag_covers_the_header_record_and_the_payload():
    header = fmt.FrameHeader(2, 4, 7, 5, stream_id=0xABCDEF, position=1000, keyed=True)
    tag = fmt.frame_tag(KEY, header, b"hello")
    assert tag == hmac.new(KEY, header.record()[:26] + b"hello", hashlib.sha256).digest()[:16]
    for changed in (fmt.FrameHeader(2, 4, 8, 5, stream_id=0xABCDEF, position=1000, keyed=True),   # seq
                    fmt.FrameHeader(2, 4, 7, 5, stream_id=0xABCDEE, position=1000, keyed=True),   # stream
                    fmt.FrameHeader(2, 4, 7, 5, stream_id=0xABCDEF, position=1001, keyed=True),   # position
                    fmt.FrameHeader(2, 5, 7, 5, stream_id=0xABCDEF, position=1000, keyed=True)):  # depth
        assert fmt.frame_tag(KEY, changed, b"hello") != tag
    assert fmt.frame_tag(KEY, header, b"hellp") != tag and fmt.frame_tag(OTHER_KEY, header, b"hello") != tag
    assert header.message_bytes == 5 + 4 + 16


# ---- decoding with and without the key -----------------------------------------------------------

def test_the_right_key_gets_every_byte_back():
    blob = bitmend.encode_bytes(DATA, code="hamming-15-11", depth=4, frame_bytes=500, key=KEY)
    result = bitmend.decode_bytes(blob, key=KEY)
    assert result.data == DATA and result.report.complete and result.report.summary.unauthenticated == 0


def test_a_wrong_key_delivers_nothing():
    blob = bitmend.encode_bytes(DATA, code="hamming-15-11", depth=4, frame_bytes=500, key=KEY)
    result = bitmend.decode_bytes(blob, key=OTHER_KEY, on_error="keep")
    assert result.data == b"" and not result.report.complete
    assert result.report.summary.unauthenticated == len(frame_spans(blob))
    assert all(f.status == "unauthenticated" for f in result.report.frames)


def test_a_forged_frame_with_the_same_stream_and_sequence_number_is_rejected():
    stream = 0x6A7E5EED
    genuine = bitmend.encode_bytes(DATA, code="golay-24-12", depth=2, frame_bytes=400, stream_id=stream, key=KEY)
    # the forger knows the format and the stream identity, but not the key
    forged = bitmend.encode_bytes(b"F" * len(DATA), code="golay-24-12", depth=2, frame_bytes=400, stream_id=stream,
                                  key=OTHER_KEY)
    g, f = frame_spans(genuine), frame_spans(forged)
    spliced = b"".join(forged[f[i].start: f[i].end] + genuine[g[i].start: g[i].end] if i == 3
                       else genuine[g[i].start: g[i].end] for i in range(len(g)))
    result = bitmend.decode_bytes(spliced, key=KEY)
    assert result.data == DATA  # the original frame 3, which came after the forgery, is delivered
    assert result.report.summary.unauthenticated == 1 and not result.report.complete
    # without its original the forged frame 3 leaves a gap: never filled with the forgery
    replaced = b"".join(forged[f[i].start: f[i].end] if i == 3 else genuine[g[i].start: g[i].end]
                        for i in range(len(g)))
    result = bitmend.decode_bytes(replaced, key=KEY, on_error="zero")
    assert result.data == DATA[:1200] + bytes(400) + DATA[1600:]
    assert [x.seq for x in result.report.frames if x.status == "lost"] == [3]


def test_an_unkeyed_forgery_is_not_delivered_with_a_key():
    genuine = bitmend.encode_bytes(DATA, frame_bytes=400, stream_id=9, key=KEY)
    unkeyed = bitmend.encode_bytes(b"F" * 400, frame_bytes=400, stream_id=9)
    result = bitmend.decode_bytes(unkeyed + genuine, key=KEY)
    assert result.data == DATA and result.report.summary.unauthenticated == 1


def test_tag_bits_hit_by_the_channel_are_corrected_like_any_other():
    blob = bitmend.encode_bytes(DATA, code="golay-24-12", depth=8, frame_bytes=300, key=KEY)
    hit, ledger = inject_bytes(blob, ["bsc:p=5e-3"], seed=4)
    assert ledger.bits_flipped > 50
    result = bitmend.decode_bytes(hit, key=KEY)
    assert result.data == DATA and result.report.complete
    assert result.report.summary.corrected > 0 and result.report.summary.unauthenticated == 0


def test_repair_rebuilds_only_from_authenticated_frames():
    blob = bitmend.encode_bytes(DATA, code="hamming-7-4", depth=2, frame_bytes=200, stream_id=5, key=KEY,
                                repair="2/8")
    spans = frame_spans(blob)
    frames = [blob[s.start: s.end] for s in spans]
    headers = [fmt.decode_header(x[8:8 + fmt.MAX_HEADER_BYTES]) for x in frames]
    # a forged repair frame of group 0 (right stream and group fields, wrong key) and a lost data frame
    first_repair = next(i for i, h in enumerate(headers) if h.repair)
    forger = fmt.encode_frame(headers[first_repair], bytes(headers[first_repair].length), OTHER_KEY)
    kept = frames[:2] + frames[3:first_repair] + [forger] + frames[first_repair:]
    result = bitmend.decode_bytes(b"".join(kept), key=KEY)
    assert result.data == DATA and result.report.summary.rebuilt == 1
    assert result.report.summary.unauthenticated == 1


# ---- the command line ------------------------------------------------------------------------------

@pytest.fixture
def key_file(tmp_path):
    path = tmp_path / "gauge.key"
    path.write_bytes(KEY)
    os.chmod(path, 0o600)
    return path


def test_cli_keyed_round_trip_and_the_mismatches_are_one_clear_line(key_file, tmp_path):
    enc = run_cli("encode", "--key-file", str(key_file), "--frame-bytes", "1000", stdin=DATA)
    assert enc.code == 0, enc.err
    assert run_cli("decode", "--key-file", str(key_file), stdin=enc.out).out == DATA
    no_key = run_cli("decode", stdin=enc.out)
    assert no_key.code == 1 and no_key.out == b""
    assert "the frames are keyed: give --key-file" in no_key.err_lines[0]
    unkeyed = run_cli("encode", stdin=DATA).out
    with_key = run_cli("decode", "--key-file", str(key_file), stdin=unkeyed)
    assert with_key.code == 1 and with_key.out == b"" and "carry no tag" in with_key.err_lines[0]
    asked = run_cli("decode", "--key-file", str(key_file), "--accept-unauthenticated", stdin=unkeyed)
    assert asked.code == 0 and asked.out == DATA
    hex_key = tmp_path / "hex.key"
    hex_key.write_text(KEY.hex() + "\n")
    os.chmod(hex_key, 0o600)
    assert run_cli("decode", "--key-file", str(hex_key), stdin=enc.out).out == DATA


@pytest.mark.parametrize("content, mode, words", [
    (KEY, 0o644, "readable or writable by others"),
    (KEY[:15], 0o600, "at least 16"),
    (b"abc", 0o600, "odd number of digits"),
])
def test_cli_refuses_an_unusable_key_file(tmp_path, content, mode, words):
    path = tmp_path / "bad.key"
    path.write_bytes(content)
    os.chmod(path, mode)
    run = run_cli("encode", "--key-file", str(path), stdin=b"x")
    assert run.code == 2 and len(run.err_lines) == 1 and words in run.err and run.out == b""
