"""Records and datagrams keep their boundaries: one record per frame, each delivered whole,
in order and once; a record that did not arrive is missing whole and named in the report.

Datagram tests run real processes on 127.0.0.1 only, through a seeded relay inside the test
that drops, duplicates and reorders datagrams; every loop and wait is bounded."""

from __future__ import annotations

import json
import select
import signal
import socket
import struct
import subprocess
import sys
import time

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import bitmend
from bitmend.records import RecordError, RecordSplitter, framed

from conftest import REPO_ROOT, bitmend_command, flip_run, run_cli

sys.path.insert(0, str(REPO_ROOT / "tools"))
from udp_relay import Relay  # noqa: E402  (the seeded relay of tools/, shared with a benchmark)

WAIT = 60.0

GAUGE_LINES = [f"2031-03-0{1 + i % 3}T{i % 24:02d}:00Z gauge='Eelpool Sluice' stage_m={0.4 + i / 97:.3f}\n".encode()
               for i in range(40)]


# ---- the splitter -------------------------------------------------------------------------------

@settings(max_examples=60, deadline=None)
@given(records=st.lists(st.binary(max_size=300), max_size=12), cuts=st.lists(st.integers(1, 50), max_size=30),
       framing=st.sampled_from(["u16", "u32"]))
def test_length_prefixed_records_come_back_whatever_the_cuts(records, cuts, framing):
    stream = b"".join(framed(r, framing) for r in records)
    splitter, out, pos = RecordSplitter(framing), [], 0
    for cut in cuts:
        out += splitter.feed(stream[pos: pos + cut])
        pos += cut
    out += splitter.feed(stream[pos:]) + splitter.finish()
    assert out == records


def test_lines_keep_their_newlines_and_a_last_line_without_one_is_a_record():
    splitter = RecordSplitter("line")
    assert splitter.feed(b"a 1\nb ") == [b"a 1\n"]
    assert splitter.feed(b"2\n\nc") == [b"b 2\n", b"\n"]
    assert splitter.finish() == [b"c"]


def test_a_record_cut_short_or_longer_than_a_frame_is_refused_with_its_number():
    splitter = RecordSplitter("u16", max_record=100)
    assert splitter.feed(struct.pack(">H", 3) + b"abc") == [b"abc"]
    with pytest.raises(RecordError, match="record 1 is 5000 bytes"):
        splitter.feed(struct.pack(">H", 5000))  # refused before its bytes are awaited
    cut = RecordSplitter("u32")
    cut.feed(struct.pack(">I", 10) + b"abc")
    with pytest.raises(RecordError, match="ends inside record 0"):
        cut.finish()


# ---- Python API -----------------------------------------------------------------------------------

def test_records_round_trip_one_blob_each_through_the_api():
    blobs = list(bitmend.encode_records(GAUGE_LINES + [b""], code="hamming-15-11", depth=4, frame_bytes=128))
    assert len(blobs) == len(GAUGE_LINES) + 2  # one frame per record (the empty one too), then the closing frame
    reader = bitmend.decode_records(blobs)
    assert list(reader) == GAUGE_LINES + [b""]
    assert reader.summary.complete and reader.missing == []


def test_a_lost_or_damaged_record_is_missing_whole_and_named():
    blobs = list(bitmend.encode_records(GAUGE_LINES, code="golay-24-12", depth=2, frame_bytes=128, stream_id=3))
    blobs[7] = flip_run(blobs[7], 8 * 80, 200)  # beyond what the code corrects: damaged
    del blobs[12]  # lost
    reader = bitmend.decode_records(blobs)
    got = list(reader)
    assert got == [r for i, r in enumerate(GAUGE_LINES) if i not in (7, 12)]
    assert reader.missing == [12] and reader.summary.damaged == 1 and not reader.summary.complete
    kept = bitmend.decode_records(blobs, on_error="keep")
    assert len(list(kept)) == len(GAUGE_LINES) - 1  # the damaged one handed on when asked for
    with pytest.raises(ValueError, match="invented"):
        bitmend.decode_records(blobs, on_error="zero")


# ---- command line -----------------------------------------------------------------------------------

@pytest.mark.parametrize("framing", ["line", "u16", "u32"])
def test_cli_records_round_trip_and_a_lost_record_leaves_no_trace(framing, tmp_path):
    records = GAUGE_LINES[:12]
    stream = b"".join(records) if framing == "line" else b"".join(framed(r, framing) for r in records)
    enc = run_cli("encode", "--records", framing, "--frame-bytes", "100", "--code", "hamming-7-4", stdin=stream)
    assert enc.code == 0, enc.err
    inspect = [json.loads(x) for x in run_cli("inspect", "--json", stdin=enc.out).out.decode().splitlines()]
    frames = [o for o in inspect if o["type"] == "frame"]
    assert [f["payload_bytes"] for f in frames] == [len(r) for r in records] + [0]
    dec = run_cli("decode", "--records", framing, stdin=enc.out)
    assert dec.code == 0 and dec.out == stream
    lost = b"".join(enc.out[f["offset"]: f["offset"] + f["frame_bytes"]] for f in frames if f["seq"] != 5)
    report = tmp_path / "r.jsonl"
    dec = run_cli("decode", "--records", framing, "--report", str(report), stdin=lost)
    expected = [r for i, r in enumerate(records) if i != 5]
    assert dec.code == 1
    assert dec.out == (b"".join(expected) if framing == "line" else b"".join(framed(r, framing) for r in expected))
    assert "records missing (by sequence number): 5" in dec.err
    lines = [json.loads(x) for x in report.read_text().splitlines()]
    assert [x["seq"] for x in lines if x.get("status") == "lost"] == [5]


def test_cli_refuses_a_record_longer_than_a_frame_and_zero_filling_records():
    run = run_cli("encode", "--records", "line", "--frame-bytes", "10", stdin=b"short\n" + b"x" * 40 + b"\n")
    assert run.code != 0 and "longer than a frame" in run.err and "Traceback" not in run.err
    run = run_cli("decode", "--records", "line", "--on-error", "zero", stdin=b"")
    assert run.code == 2 and "invented" in run.err


# ---- datagrams on 127.0.0.1 ----------------------------------------------------------------------------

def _wait_listening(proc: subprocess.Popen) -> None:
    """Wait (bounded) for the receiver's 'listening on' line: its socket is bound."""
    deadline = time.monotonic() + WAIT
    seen = b""
    while b"listening on" not in seen:
        left = deadline - time.monotonic()
        assert left > 0 and proc.poll() is None, f"the receiver did not start: {seen!r}"
        ready, _, _ = select.select([proc.stderr], [], [], left)
        if ready:
            seen += proc.stderr.readline()


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_datagrams_through_a_lossy_reordering_relay_are_delivered_in_order_once(tmp_path):
    relay_port, decode_port = _free_port(), _free_port()
    report = tmp_path / "report.jsonl"
    out = tmp_path / "received.txt"
    decoder = subprocess.Popen([*bitmend_command(), "decode", f"udp:127.0.0.1:{decode_port}", "--idle", "10",
                                "--records", "line", "-o", str(out), "--report", str(report)],
                               stderr=subprocess.PIPE)
    relay = Relay(relay_port, decode_port, seed=11, drop=0.1, dup=0.15, hold=0.2)
    try:
        _wait_listening(decoder)
        encoder = subprocess.Popen([*bitmend_command(), "encode", "--records", "line", "--frame-bytes", "256",
                                    "--code", "hamming-15-11", "-o", f"udp:127.0.0.1:{relay_port}"],
                                   stdin=subprocess.PIPE, stderr=subprocess.PIPE)
        encoder.stdin.write(b"".join(GAUGE_LINES))
        encoder.stdin.close()
        relay.run(idle=3.0)
        assert encoder.wait(timeout=WAIT) == 0
        decoder.wait(timeout=WAIT)
    finally:
        for proc in (decoder,):
            if proc.poll() is None:
                proc.kill()
                proc.wait(timeout=10)
    lines = [json.loads(x) for x in report.read_text().splitlines()]
    summary = lines[-1]
    lost = sorted(x["seq"] for x in lines[:-1] if x["status"] == "lost")
    delivered = [x["seq"] for x in lines[:-1] if x["status"] in ("clean", "corrected")]
    assert delivered == sorted(delivered) and len(delivered) == len(set(delivered))
    assert summary["duplicates"] == relay.counts["duplicated"]  # both copies of a duplicate arrive together
    expected = b"".join(r for i, r in enumerate(GAUGE_LINES) if i not in lost)
    assert out.read_bytes() == expected
    assert relay.counts["dropped"] > 0 and relay.counts["reordered"] > 0 and summary["reordered"] > 0
    assert (decoder.returncode == 0) == summary["complete"]


def test_a_datagram_receiver_ends_cleanly_on_sigterm_with_its_summary(tmp_path):
    port = _free_port()
    report = tmp_path / "r.jsonl"
    out = tmp_path / "out.txt"
    decoder = subprocess.Popen([*bitmend_command(), "decode", f"udp:127.0.0.1:{port}", "--records", "line",
                                "--report", str(report), "-o", str(out)], stderr=subprocess.PIPE)
    records = [b"gauge 3 stage 1.02\n", b"gauge 4 stage 0.77\n"]
    try:
        _wait_listening(decoder)
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
            for blob in bitmend.encode_records(records, frame_bytes=64):
                s.sendto(blob, ("127.0.0.1", port))
        time.sleep(1.0)  # (not a measurement: lets the datagrams land before the stop)
        decoder.send_signal(signal.SIGTERM)
        _, err = decoder.communicate(timeout=WAIT)
    finally:
        if decoder.poll() is None:
            decoder.kill()
            decoder.wait(timeout=10)
    summary = json.loads(report.read_text().splitlines()[-1])
    assert summary["type"] == "summary" and summary["frames"] == 3
    assert out.read_bytes() == b"".join(records) and decoder.returncode == 0
    assert b"ended by SIGTERM" in err and b"Traceback" not in err
