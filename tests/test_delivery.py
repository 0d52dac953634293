"""Delivery rules of format version 2 (docs/FORMAT.md, "Delivery rules"): every stream is
delivered whole, in order, once; replayed, reordered and foreign frames never corrupt the
output, and `complete` (exit 0) holds only when the output is exactly what was written.

Containers are real encodes cut at the frame offsets that `bitmend inspect --json` gives."""

from __future__ import annotations

import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import bitmend
from bitmend.container.delivery import REORDER_WINDOW
from bitmend.report import CLEAN, CORRECTED, LOST

from conftest import flip_run, frame_spans, random_bytes, run_cli

FRAME = 1000  # payload bytes per frame in these tests


class Encoded:
    """One encode: its data, its container and the container cut into frames."""

    def __init__(self, data: bytes, stream_id: int, code: str = "hamming-15-11", depth: int = 4,
                 frame_bytes: int = FRAME) -> None:
        self.data = data
        self.blob = bitmend.encode_bytes(data, code=code, depth=depth, frame_bytes=frame_bytes, stream_id=stream_id)
        self.stream = f"{stream_id:016x}"
        self.spans = frame_spans(self.blob)
        self.frames = [self.blob[s.start: s.end] for s in self.spans]
        starts = [0]
        for s in self.spans:
            starts.append(starts[-1] + s.length)
        self.starts = starts  # stream offset of each frame's payload

    def payload(self, seq: int) -> bytes:
        return self.data[self.starts[seq]: self.starts[seq + 1]]

    def join(self, order) -> bytes:
        return b"".join(self.frames[i] for i in order)


def assert_verified_frames_hold_their_original_bytes(result, encodes: list[Encoded]) -> None:
    """The invariant of the whole container: a frame reported clean or corrected holds
    exactly the bytes that were written to it, at its output offset; exit 0 (complete)
    means the output is exactly the original stream(s)."""
    by_stream = {e.stream: e for e in encodes}
    for f in result.report.frames:
        if f.status in (CLEAN, CORRECTED):
            original = by_stream[f.stream]
            assert result.data[f.out_offset: f.out_offset + f.bytes] == original.payload(f.seq), f
    if result.report.complete:
        assert any(result.data == b"".join(e.data for e in encodes[:n]) for n in range(1, len(encodes) + 1))


@pytest.fixture(scope="module")
def gauge_a() -> Encoded:
    return Encoded(random_bytes(20 * FRAME - 300, 1), 0xA11CE)


@pytest.fixture(scope="module")
def gauge_b() -> Encoded:
    # another encode of the same size and settings: only the stream identity tells them apart
    return Encoded(random_bytes(20 * FRAME - 300, 2), 0xB0B)


# ---- through the command line, cut at the offsets `inspect --json` gives ------------------------

def _cut_with_inspect(blob: bytes) -> list[bytes]:
    run = run_cli("inspect", "--json", stdin=blob)
    assert run.code == 0, run.err
    objects = [json.loads(line) for line in run.out.decode().splitlines()]
    frames = [o for o in objects if o["type"] == "frame"]
    assert objects[-1]["type"] == "summary" and objects[-1]["streams"] == 1
    assert all(o["stream"] == frames[0]["stream"] and o["version"] == 2 for o in frames)
    return [blob[o["offset"]: o["offset"] + o["frame_bytes"]] for o in frames]


def test_replayed_frame_is_dropped_and_counted_through_the_cli(gauge_a, tmp_path):
    frames = _cut_with_inspect(gauge_a.blob)
    replayed = b"".join(frames[:4] + [frames[3]] + frames[4:])  # frame 3 twice
    report = tmp_path / "r.jsonl"
    run = run_cli("decode", "--report", str(report), stdin=replayed)
    assert run.code == 0 and run.out == gauge_a.data
    summary = json.loads(report.read_text().splitlines()[-1])
    assert summary["duplicates"] == 1 and summary["complete"] is True and summary["frames"] == 20
    assert "1 duplicate" in run.err


def test_frames_spliced_from_another_encode_are_foreign_and_never_delivered_through_the_cli(gauge_a, gauge_b, tmp_path):
    a, b = _cut_with_inspect(gauge_a.blob), _cut_with_inspect(gauge_b.blob)
    spliced = b"".join(b[i] if 5 <= i <= 12 else a[i] for i in range(20))
    report = tmp_path / "r.jsonl"
    run = run_cli("decode", "--report", str(report), stdin=spliced)
    assert run.code == 1
    lines = [json.loads(x) for x in report.read_text().splitlines()]
    summary = lines[-1]
    assert summary["foreign"] == 8 and summary["lost"] == 8 and summary["complete"] is False
    assert [f["seq"] for f in lines[:-1] if f["status"] == "lost"] == list(range(5, 13))
    assert run.out == gauge_a.data[:5 * FRAME] + gauge_a.data[13 * FRAME:]  # nothing of the other encode
    lost = [f for f in lines[:-1] if f["status"] == "lost"]
    assert lost[0]["gap_frames"] == 8 and lost[0]["gap_bytes"] == 8 * FRAME


def test_inspect_json_names_each_stream_and_counts_the_streams(gauge_a, gauge_b):
    run = run_cli("inspect", "--json", stdin=gauge_a.blob + gauge_b.blob)
    objects = [json.loads(line) for line in run.out.decode().splitlines()]
    summary = objects[-1]
    assert summary["streams"] == 2 and summary["frames"] == 40
    assert [s["stream"] for s in summary["stream_frames"]] == [gauge_a.stream, gauge_b.stream]
    assert {o["stream"] for o in objects[:20]} == {gauge_a.stream}
    assert [o["position"] for o in objects[:20]] == gauge_a.starts[:20]


# ---- the delivery rules, one case each ----------------------------------------------------------

def test_swapped_frames_are_put_back_in_place(gauge_a):
    order = [0, 1, 2, 4, 3] + list(range(5, 20))
    result = bitmend.decode_bytes(gauge_a.join(order))
    s = result.report.summary
    assert result.data == gauge_a.data and s.complete
    assert s.lost == 0 and s.reordered == 1
    assert [f.seq for f in result.report.frames] == list(range(20))


def test_a_reversed_stream_within_the_window_comes_out_in_order(gauge_a):
    assert 20 <= REORDER_WINDOW
    result = bitmend.decode_bytes(gauge_a.join(reversed(range(20))))
    assert result.data == gauge_a.data and result.report.complete
    assert result.report.summary.reordered == 19  # every frame but the last arrived after a later one


def test_a_repeated_closing_frame_is_a_duplicate_not_a_loss(gauge_a):
    result = bitmend.decode_bytes(gauge_a.blob + gauge_a.frames[-1])
    s = result.report.summary
    assert result.data == gauge_a.data and s.complete and s.lost == 0 and s.duplicates == 1


def test_a_whole_stream_replayed_after_it_closed_is_dropped(gauge_a):
    result = bitmend.decode_bytes(gauge_a.blob + gauge_a.blob)
    s = result.report.summary
    assert result.data == gauge_a.data and s.complete and s.duplicates == 20 and s.streams == 1


def test_two_streams_interleaved_frame_by_frame_are_never_mixed(gauge_a, gauge_b):
    mixed = b"".join(a + b for a, b in zip(gauge_a.frames, gauge_b.frames))
    result = bitmend.decode_bytes(mixed)
    s = result.report.summary
    assert result.data == gauge_a.data  # the first stream whole; none of the other's bytes
    assert s.foreign == 20 and not s.complete  # the input held data that was not delivered
    assert_verified_frames_hold_their_original_bytes(result, [gauge_a, gauge_b])


def test_concatenated_streams_are_delivered_one_after_the_other(gauge_a, gauge_b):
    result = bitmend.decode_bytes(gauge_a.blob + gauge_b.blob)
    s = result.report.summary
    assert result.data == gauge_a.data + gauge_b.data and s.complete and s.streams == 2
    assert {f.stream_index for f in result.report.frames} == {0, 1}


def test_an_unclosed_stream_followed_by_a_new_one_is_reported_as_such(gauge_a, gauge_b):
    cut = gauge_a.join(range(19))  # the closing frame never arrived
    result = bitmend.decode_bytes(cut + gauge_b.blob)
    s = result.report.summary
    assert result.data == gauge_a.data[:19 * FRAME] + gauge_b.data
    assert not s.complete and not s.end_seen and s.streams == 2 and s.foreign == 0
    assert any("without its closing frame" in note for note in s.notes)


def test_a_stream_that_joins_mid_way_is_foreign_not_a_new_stream(gauge_a, gauge_b):
    # the other stream's frames 10.. after an unclosed stream: no frame 0, so no fresh start
    result = bitmend.decode_bytes(gauge_a.join(range(15)) + gauge_b.join(range(10, 20)))
    assert result.data == gauge_a.data[:15 * FRAME] and result.report.summary.foreign == 10


def test_a_frame_later_than_the_window_is_lost_then_dropped_as_late():
    enc = Encoded(random_bytes(60 * 100, 3), 0x1A7E, frame_bytes=100)
    order = [i for i in range(60) if i != 5] + [5]  # frame 5 arrives 54 frames late
    result = bitmend.decode_bytes(enc.join(order))
    s = result.report.summary
    assert s.lost == 1 and s.late == 1 and not s.complete
    assert result.data == enc.data[:500] + enc.data[600:]
    assert_verified_frames_hold_their_original_bytes(result, [enc])


def test_an_intact_copy_replaces_a_damaged_one_still_waiting_in_the_window(gauge_a):
    damaged_4 = flip_run(gauge_a.frames[4], 8 * 200, 64)  # beyond what the code corrects
    # frame 3 is late: the damaged 4 waits for it, and its intact retransmission arrives meanwhile
    order = [gauge_a.frames[i] for i in (0, 1, 2)] + [damaged_4, gauge_a.frames[4], gauge_a.frames[3]] + \
        gauge_a.frames[5:]
    result = bitmend.decode_bytes(b"".join(order))
    assert result.data == gauge_a.data and result.report.complete and result.report.summary.duplicates == 1


# ---- lost frames: exact sizes from stream positions ----------------------------------------------

def test_a_lost_frame_is_zero_filled_with_its_exact_size_only(gauge_a):
    result = bitmend.decode_bytes(gauge_a.join(i for i in range(20) if i != 7), on_error="zero")
    lost = [f for f in result.report.frames if f.status == LOST]
    assert [(f.seq, f.missing_bytes, f.gap_bytes, f.bytes, f.out_offset) for f in lost] == [
        (7, FRAME, FRAME, FRAME, 7 * FRAME)]
    assert result.data == gauge_a.data[:7 * FRAME] + bytes(FRAME) + gauge_a.data[8 * FRAME:]


def test_lost_packets_of_different_sizes_never_shift_later_bytes():
    # one frame per packet (Encoder.flush), packets of different sizes; two lost in a row
    packets = [f"G{i:02d} stage={i * 0.37:.2f}m".encode() * (1 + i % 4) for i in range(12)]
    sink = __import__("io").BytesIO()
    with bitmend.Encoder(sink, "hamming-7-4", 2, stream_id=0x9AC) as enc:
        for p in packets:
            enc.write(p)
            enc.flush()
    spans = frame_spans(sink.getvalue())
    blob = b"".join(sink.getvalue()[s.start: s.end] for s in spans if s.seq not in (4, 5))
    result = bitmend.decode_bytes(blob, on_error="zero")
    gap = len(packets[4]) + len(packets[5])
    assert result.data == b"".join(packets[:4]) + bytes(gap) + b"".join(packets[6:])
    lost = [f for f in result.report.frames if f.status == LOST]
    assert [(f.seq, f.gap_frames, f.gap_bytes, f.missing_bytes) for f in lost] == [(4, 2, gap, None),
                                                                                   (5, 2, gap, None)]
    # without zero filling, nothing is made up at all
    kept = bitmend.decode_bytes(blob)
    assert kept.data == b"".join(packets[:4]) + b"".join(packets[6:])


def test_a_lost_run_at_the_end_of_an_unclosed_stream_is_never_zero_filled(gauge_a):
    result = bitmend.decode_bytes(gauge_a.join(range(17)), on_error="zero")
    assert result.data == gauge_a.data[:17 * FRAME] and not result.report.complete


# ---- one property over random reorderings, replays, losses and splices ---------------------------

@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(ops=st.lists(st.tuples(st.sampled_from(["swap", "replay", "drop", "splice", "move"]),
                              st.integers(0, 19), st.integers(0, 19)), max_size=6),
       tail=st.sampled_from(["none", "other stream", "replay all"]))
def test_any_shuffle_of_real_frames_delivers_only_verified_original_bytes(gauge_a, gauge_b, ops, tail):
    frames = [("a", i) for i in range(20)]
    for op, i, j in ops:
        i, j = i % max(1, len(frames)), j % max(1, len(frames))
        if not frames:
            break
        if op == "swap":
            frames[i], frames[j] = frames[j], frames[i]
        elif op == "replay":
            frames.insert(j, frames[i])
        elif op == "drop":
            frames.pop(i)
        elif op == "splice":
            frames[i] = ("b", frames[i][1])
        else:
            frames.insert(j, frames.pop(i))
    if tail == "other stream":
        frames += [("b", i) for i in range(20)]
    elif tail == "replay all":
        frames += [("a", i) for i in range(20)]
    source = {"a": gauge_a, "b": gauge_b}
    blob = b"".join(source[s].frames[i] for s, i in frames)
    if not blob:
        return
    result = bitmend.decode_bytes(blob)
    assert_verified_frames_hold_their_original_bytes(result, [gauge_a, gauge_b] if frames[0][0] == "a"
                                                     else [gauge_b, gauge_a])
    delivered = [(f.stream, f.seq) for f in result.report.frames if f.status != LOST]
    assert len(delivered) == len(set(delivered)), "a frame was delivered twice"
