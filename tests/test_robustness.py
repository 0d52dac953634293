"""The decoder is fed damaged data by definition: it must never crash or hang, never pass
off unverified bytes as good, and never lose what it could recover.

Invariant checked throughout (`assert_verified_frames_are_true`): every frame reported
clean or corrected carries exactly the bytes the writer put in it."""

from __future__ import annotations

import subprocess
import sys
import tracemalloc

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import bitmend
from bitmend.container import format as fmt
from conftest import frame_spans, payload_slices, random_bytes, run_cli

# a small multi-frame container: 5 frames of 60 payload bytes (the last one shorter)
SMALL_DATA = random_bytes(270, 61)
SMALL_CODE, SMALL_DEPTH, SMALL_FRAME = "hamming-7-4", 2, 60


def small_container() -> bytes:
    return bitmend.encode_bytes(SMALL_DATA, code=SMALL_CODE, depth=SMALL_DEPTH, frame_bytes=SMALL_FRAME)


def assert_verified_frames_are_true(result: bitmend.Decoded, data: bytes, frame_bytes: int) -> None:
    """Frames reported clean/corrected hold the original bytes of their sequence number,
    and the summary never claims completeness it does not have."""
    for report in result.report.frames:
        if report.status in ("clean", "corrected"):
            start = report.seq * frame_bytes
            delivered = result.data[report.out_offset: report.out_offset + report.bytes]
            assert delivered == data[start: start + report.bytes], f"frame {report.seq} verified but wrong"
    if result.report.complete:
        assert result.data == data


# ---- truncation ---------------------------------------------------------------------------

def test_truncation_at_every_byte_offset_delivers_every_whole_frame_before_the_cut():
    container = small_container()
    spans = frame_spans(container)
    slices = payload_slices(spans)
    for cut in range(len(container) + 1):
        try:
            result = bitmend.decode_bytes(container[:cut])
        except bitmend.NotAContainerError:
            # only a stub too short to hold even the first header may be unreadable
            assert cut < spans[0].payload_start, f"cut at {cut} lost the whole container"
            continue
        assert_verified_frames_are_true(result, SMALL_DATA, SMALL_FRAME)
        whole = [i for i, s in enumerate(spans) if s.end <= cut]
        good = {r.seq for r in result.report.frames if r.status in ("clean", "corrected")}
        assert set(whole) <= good, f"cut at {cut}: whole frames {whole} not all recovered"
        expected_prefix = SMALL_DATA[: slices[whole[-1]].stop] if whole else b""
        assert result.data.startswith(expected_prefix)
        assert result.report.complete == (cut == len(container))


# ---- single bit flips in one header -------------------------------------------------------

def test_one_bit_flipped_anywhere_in_a_frame_marker_or_header_costs_nothing():
    container = small_container()
    target = frame_spans(container)[2]
    for bit in range(8 * target.start, 8 * target.payload_start):  # marker and leading header
        damaged = bytearray(container)
        damaged[bit >> 3] ^= 0x80 >> (bit & 7)
        result = bitmend.decode_bytes(bytes(damaged))
        assert result.data == SMALL_DATA and result.report.complete, f"bit {bit}"


def test_one_frames_header_and_copy_wiped_is_recovered_by_the_stream_rhythm():
    container = small_container()
    target = frame_spans(container)[2]
    damaged = bytearray(container)
    rng = np.random.default_rng(5)
    damaged[target.start: target.payload_start] = rng.integers(0, 256, target.payload_start - target.start,
                                                              dtype=np.uint8).tobytes()
    damaged[target.copy_start: target.end] = rng.integers(0, 256, fmt.HEADER_BYTES, dtype=np.uint8).tobytes()
    result = bitmend.decode_bytes(bytes(damaged))
    assert result.data == SMALL_DATA and result.report.complete


def test_one_frame_wiped_whole_costs_that_frame_alone():
    container = small_container()
    target = frame_spans(container)[2]
    damaged = bytearray(container)
    rng = np.random.default_rng(5)
    damaged[target.start: target.end] = rng.integers(0, 256, target.end - target.start, dtype=np.uint8).tobytes()
    result = bitmend.decode_bytes(bytes(damaged))
    statuses = {r.seq: r.status for r in result.report.frames}
    assert statuses[2] == "lost"
    assert all(s == "clean" for seq, s in statuses.items() if seq != 2)
    assert_verified_frames_are_true(result, SMALL_DATA, SMALL_FRAME)


# ---- inserted and deleted bytes ------------------------------------------------------------

@pytest.mark.parametrize("seed", range(12))
def test_random_inserted_or_deleted_bytes_cost_only_the_frames_they_touch(seed):
    rng = np.random.default_rng(seed)
    data = random_bytes(4000, seed)
    container = bitmend.encode_bytes(data, code="secded-16-11", depth=8, frame_bytes=500)
    spans = frame_spans(container)
    hit = int(rng.integers(1, len(spans) - 1))
    at = int(rng.integers(spans[hit].payload_start, spans[hit].payload_end))
    count = int(rng.integers(1, 40))
    if seed % 2:
        damaged = container[:at] + rng.integers(0, 256, count, dtype=np.uint8).tobytes() + container[at:]
    else:
        damaged = container[:at] + container[at + count:]
    result = bitmend.decode_bytes(damaged)
    assert_verified_frames_are_true(result, data, 500)
    good = {r.seq for r in result.report.frames if r.status in ("clean", "corrected")}
    assert good >= {s.seq for s in spans} - {hit}, f"frames other than {hit} lost"


# ---- hostile headers -------------------------------------------------------------------------

def _hostile(version=2, flags=0, code_id=11, depth=8, seq=0, length=100, layout=2) -> bytes:
    """A marker and a header whose CRC checks but whose values are chosen by an attacker,
    in the record layout of format version `layout` (2: 30 bytes, 1: 16 bytes)."""
    import struct

    if layout == 1:
        body = struct.pack(">BBBBII", version, flags, code_id, depth, seq, length)
    else:
        body = struct.pack(">BBBBQI", version, flags, code_id, depth, 0x5EED, seq) + bytes(6) + struct.pack(">I", length)
    record = body + struct.pack(">I", fmt.crc32c(body))
    from bitmend.interleave import encode_segment

    return fmt.MARKER_BYTES + encode_segment(fmt.header_code(), fmt.HEADER_LAYOUTS[layout].depth, record)


@pytest.mark.parametrize("fields, words", [
    ({"version": 9}, "version 9"),
    ({"length": 0xFFFFFFFF}, "exceeds the limit"),
    ({"code_id": 250}, "unknown code id 250"),
    ({"depth": 0}, "depth 0"),
    ({"flags": 0x80}, "unknown flags"),
])
@pytest.mark.parametrize("layout", [2, 1])
def test_hostile_header_values_get_one_clear_error_line(fields, words, layout):
    version = fields.get("version", layout)
    run = run_cli("decode", stdin=_hostile(**{**fields, "version": version}, layout=layout) + bytes(200))
    assert run.code == 3
    assert len(run.err_lines) == 1 and words in run.err_lines[0], run.err
    assert "Traceback" not in run.err


def test_a_header_claiming_the_largest_frame_on_a_tiny_input_stays_in_bounded_memory():
    # rep-3 at depth 3 with a 1 MiB payload is the largest frame the format allows;
    # the input then ends: the decoder must not build a full-size frame's worth of arrays
    hostile = _hostile(code_id=1, depth=3, length=fmt.MAX_PAYLOAD_BYTES)
    tracemalloc.start()
    try:
        result = bitmend.decode_bytes(hostile)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert not result.report.complete and result.data == b""
    assert peak < 48 << 20, f"peak traced memory {peak / 2**20:.1f} MiB"


def test_garbage_of_a_few_megabytes_is_scanned_in_bounded_memory_and_rejected():
    # peak RSS is measured after a warm-up that loads (or compiles) the search kernel, so
    # only what the 12 MiB scan itself adds is counted
    code = (
        "import resource, bitmend\n"
        "def scan(data):\n"
        "    try:\n"
        "        bitmend.decode_bytes(data)\n"
        "    except bitmend.NotAContainerError:\n"
        "        return\n"
        "    raise SystemExit('garbage decoded as a container')\n"
        "scan(bytes(range(256)) * 4096)\n"
        "before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"
        "scan(bytes(range(256)) * (12 << 12))\n"  # 12 MiB of a non-container pattern
        "print(before, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    before, after = (int(v) for v in out.stdout.split()[-2:])
    # the input itself (12 MiB), its copy inside decode_bytes and a bounded scan window
    assert after - before < 64 * 1024, f"the scan added {(after - before) / 1024:.0f} MiB"


# ---- property: random containers, random damage ------------------------------------------

@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.binary(min_size=0, max_size=1500),
       code=st.sampled_from(["hamming-7-4", "secded-39-32", "golay-24-12", "rep-3"]),
       depth=st.sampled_from([1, 3, 8]),
       frame_bytes=st.integers(40, 400),
       damage=st.lists(st.tuples(st.sampled_from(["flip", "insert", "delete", "zero"]),
                                 st.floats(0, 1), st.integers(1, 24)), max_size=4),
       on_error=st.sampled_from(["keep", "zero", "drop"]))
def test_random_damage_never_crashes_and_never_passes_off_bad_data(data, code, depth, frame_bytes, damage, on_error):
    container = bytearray(bitmend.encode_bytes(data, code=code, depth=depth, frame_bytes=frame_bytes))
    for kind, where, size in damage:
        at = int(where * len(container))
        if kind == "flip":
            for b in range(8 * at, min(8 * len(container), 8 * at + size)):
                container[b >> 3] ^= 0x80 >> (b & 7)
        elif kind == "insert":
            container[at:at] = bytes([0xA5]) * size
        elif kind == "delete":
            del container[at: at + size]
        else:
            container[at: at + size] = bytes(len(container[at: at + size]))
    try:
        result = bitmend.decode_bytes(bytes(container), on_error=on_error)
    except bitmend.NotAContainerError:
        return
    assert_verified_frames_are_true(result, data, frame_bytes)
    if not damage:
        assert result.data == data and result.report.complete


def test_skipped_bytes_count_every_byte_outside_frames_in_megabytes_of_garbage():
    # the count used to stop at the last false marker match in the garbage (20 MB of garbage
    # was reported as 884,057 bytes): every byte before, between and after frames counts
    rng = np.random.default_rng(20)
    before, between, after = (rng.integers(0, 256, size, dtype=np.uint8).tobytes()
                              for size in (3 << 20, 1 << 20, (1 << 20) + 5))
    first = bitmend.encode_bytes(b"gauge 7 stage 1.42m\n" * 40, frame_bytes=300)
    second = bitmend.encode_bytes(b"gauge 8 stage 0.97m\n" * 40, frame_bytes=300)
    result = bitmend.decode_bytes(before + first + between + second + after)
    assert result.data == b"gauge 7 stage 1.42m\n" * 40 + b"gauge 8 stage 0.97m\n" * 40
    assert result.report.summary.skipped_bytes == len(before) + len(between) + len(after)
