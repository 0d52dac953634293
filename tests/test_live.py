"""Live links: a frame leaves the encoder within --max-delay of its first byte, `decode` writes
each frame's bytes as soon as the frame is complete, `inject` passes data on as it comes.
Proved with real processes and real pipes: each line must come out of the far end of
`encode | inject | decode` while the input is still open (no timing is measured; every wait
is bounded)."""

from __future__ import annotations

import io
import os
import select
import subprocess
import time

import pytest

from bitmend.live import ArrivalClock, pump_encode
import bitmend

from conftest import bitmend_command

WAIT = 60.0  # seconds: a bound on how long a line may take on a slow, busy machine


def _read_line(fd: int, pending: bytearray, deadline: float) -> bytes:
    while b"\n" not in pending:
        left = deadline - time.monotonic()
        assert left > 0, "no line came out while the input stayed open"
        ready, _, _ = select.select([fd], [], [], left)
        if ready:
            block = os.read(fd, 65536)
            assert block, "the pipeline ended early"
            pending += block
    line, _, rest = bytes(pending).partition(b"\n")
    pending[:] = rest
    return line + b"\n"


def test_each_line_crosses_encode_inject_decode_before_the_input_ends():
    encode = subprocess.Popen([*bitmend_command(), "encode", "--max-delay", "0.05", "--frame-bytes", "4096"],
                              stdin=subprocess.PIPE, stdout=subprocess.PIPE)
    inject = subprocess.Popen([*bitmend_command(), "inject", "--channel", "bsc:p=1e-3", "--seed", "5", "-q"],
                              stdin=encode.stdout, stdout=subprocess.PIPE)
    decode = subprocess.Popen([*bitmend_command(), "decode", "-q"], stdin=inject.stdout, stdout=subprocess.PIPE)
    encode.stdout.close()
    inject.stdout.close()
    pending = bytearray()
    try:
        for i in range(4):
            line = f"2031-03-01T06:{i:02d}Z gauge='Cinder Bend' stage_m=1.{i}2\n".encode()
            encode.stdin.write(line)
            encode.stdin.flush()
            # the input is still open: the line must come out now, not at the end
            assert _read_line(decode.stdout.fileno(), pending, time.monotonic() + WAIT) == line
        encode.stdin.close()
        assert decode.stdout.read() == b""
        assert [p.wait(timeout=WAIT) for p in (encode, inject, decode)] == [0, 0, 0]
    finally:
        for proc in (encode, inject, decode):
            if proc.poll() is None:
                proc.kill()
                proc.wait(timeout=10)


def test_arrival_clock_names_the_oldest_byte_still_waiting():
    clock = ArrivalClock()
    clock.arrived(10, 1.0)   # bytes 0..9 at t = 1
    clock.arrived(25, 2.0)   # bytes 10..24 at t = 2
    assert clock.oldest_waiting(bytes_in=25, pending=25) == 1.0
    assert clock.oldest_waiting(bytes_in=25, pending=15) == 2.0  # bytes 0..9 went out in a frame
    assert clock.oldest_waiting(bytes_in=25, pending=0) is None


class _ScriptedLink:
    """A source whose blocks arrive at set times, on a clock of its own: read_within waits
    (on that clock) at most the time it is given, as a pipe read after select() does."""

    def __init__(self, arrivals):
        self.arrivals = list(arrivals)  # (time, block)
        self.now = 0.0

    def read_within(self, timeout):
        if not self.arrivals:
            return b""
        when, block = self.arrivals[0]
        if timeout is not None and when > self.now + timeout:
            self.now += timeout
            return None
        self.now = max(self.now, when)
        self.arrivals.pop(0)
        return block


def _frame_sizes(arrivals, max_delay, frame_bytes=1000):
    link = _ScriptedLink(arrivals)
    sink = io.BytesIO()
    enc = bitmend.Encoder(sink, "hamming-7-4", 1, frame_bytes=frame_bytes, stream_id=1)
    pump_encode(link, enc, max_delay, clock=lambda: link.now)
    enc.close()
    return [f.bytes for f in bitmend.decode_bytes(sink.getvalue()).report.frames]


def test_a_slow_source_gets_a_frame_within_the_deadline_of_its_first_byte():
    # lines 0.5 s apart, deadline 0.2 s: one frame per line (the last one closes the stream)
    assert _frame_sizes([(0.5, b"line one\n"), (1.0, b"line two\n"), (1.5, b"line three\n")], 0.2) == [9, 9, 11]
    # two lines 0.1 s apart share the frame that the first one's deadline sends
    assert _frame_sizes([(0.5, b"a" * 9), (0.6, b"b" * 9), (2.0, b"c" * 5)], 0.2) == [18, 5]


def test_a_fast_source_still_gets_full_frames():
    assert _frame_sizes([(0.0, bytes(400))] * 10, 0.2) == [1000, 1000, 1000, 1000]
    assert _frame_sizes([(0.5, b"x" * 10)], None) == [10]  # no deadline: the closing frame carries it


def test_a_repair_group_closes_max_delay_after_its_first_frame_on_a_slow_link():
    # lines 0.5 s apart, deadline 0.2 s, repair 1/4: each line's frame goes out at its
    # deadline and its group closes at the next one, with its repair frame, long before
    # four frames could fill it
    link = _ScriptedLink([(0.5, b"line one\n"), (1.5, b"line two\n"), (2.5, b"line three\n")])
    sink = io.BytesIO()
    enc = bitmend.Encoder(sink, "hamming-7-4", 1, frame_bytes=1000, stream_id=1, repair="1/4")
    pump_encode(link, enc, 0.2, clock=lambda: link.now)
    enc.close()
    from bitmend.container.reader import FrameScanner
    kinds = ["R" if f.header.repair else "D" for f in FrameScanner(io.BytesIO(sink.getvalue()),
                                                                   decode_payloads=False).frames()]
    assert kinds == ["D", "R", "D", "R", "D", "R"]  # the last line's frame closes the stream, then its repair
