"""Repair frames across frames (--repair R/K): any R frames of a group that are lost, damaged
or foreign are rebuilt exactly, verified by their own CRC-32C, reported `rebuilt`; frames
that arrive whole are delivered at once; more than R missing in a group stay lost."""

from __future__ import annotations

import io
import json

import pytest

import bitmend
from bitmend.container import format as fmt
from bitmend.container.delivery import Delivered, Sequencer
from bitmend.container.reader import FrameScanner
from bitmend.container.repair import GroupFields, parse_repair
from bitmend.report import LOST, REBUILT

from conftest import flip_run, random_bytes, run_cli

FRAME = 500


class Repaired:
    """A stream of 40 data frames with repair R/K, cut into its frames (data and repair)."""

    def __init__(self, repair: str, size: int = 40 * FRAME - 123, seed: int = 1, code: str = "hamming-15-11") -> None:
        self.data = random_bytes(size, seed)
        self.blob = bitmend.encode_bytes(self.data, code=code, depth=4, frame_bytes=FRAME, stream_id=0x5EED + seed,
                                         repair=repair)
        found = list(FrameScanner(io.BytesIO(self.blob), decode_payloads=False).frames())
        self.frames = [self.blob[f.offset: f.offset + f.header.frame_bytes] for f in found]
        self.headers = [f.header for f in found]
        self.data_index = {h.seq: i for i, h in enumerate(self.headers) if not h.repair}  # seq -> frame index

    def without(self, seqs=(), repairs=()) -> bytes:
        """The container with some data frames (by seq) and repair frames (by frame index) removed."""
        drop = {self.data_index[s] for s in seqs} | set(repairs)
        return b"".join(f for i, f in enumerate(self.frames) if i not in drop)


def test_repair_frames_follow_each_group_with_their_group_fields():
    stream = Repaired("4/16")
    repair = [(i, h) for i, h in enumerate(stream.headers) if h.repair]
    assert len(repair) == 12  # groups of 16, 16 and 8 data frames, 4 repair frames each
    fields = [GroupFields.of(h) for _, h in repair]
    assert [(h.seq, f.count, f.repairs, f.index, f.group) for (_, h), f in zip(repair, fields)][:5] == [
        (0, 16, 4, 0, 16), (0, 16, 4, 1, 16), (0, 16, 4, 2, 16), (0, 16, 4, 3, 16), (16, 16, 4, 0, 16)]
    assert [h.seq for _, h in repair[-4:]] == [32] * 4 and fields[-1].count == 8  # the short last group
    assert all(h.in_group for h in stream.headers if not h.repair)
    # repair frames come right after their group's last data frame
    assert [i for i, _ in repair[:4]] == [16, 17, 18, 19]
    result = bitmend.decode_bytes(stream.blob)
    assert result.data == stream.data and result.report.complete
    assert result.report.summary.repair_frames == 12 and result.report.summary.rebuilt == 0


@pytest.mark.parametrize("lost", [(0, 1, 2, 3), (5,), (12, 13, 14, 15), (3, 20, 33, 39), (36, 37, 38, 39)])
def test_any_r_lost_frames_of_a_group_are_rebuilt_exactly(lost):
    stream = Repaired("4/16")
    result = bitmend.decode_bytes(stream.without(lost))
    assert result.data == stream.data and result.report.complete
    rebuilt = [f.seq for f in result.report.frames if f.status == REBUILT]
    assert rebuilt == sorted(lost) and result.report.summary.rebuilt == len(lost)
    assert all(f.offset is None and f.crc_ok for f in result.report.frames if f.status == REBUILT)


def test_lost_repair_frames_cost_nothing_when_the_data_arrived():
    stream = Repaired("4/16")
    repair_indexes = [i for i, h in enumerate(stream.headers) if h.repair]
    result = bitmend.decode_bytes(stream.without((), repair_indexes[::2]))
    assert result.data == stream.data and result.report.complete and result.report.summary.rebuilt == 0


def test_more_losses_than_repair_frames_stay_lost_and_are_reported():
    stream = Repaired("2/16")
    result = bitmend.decode_bytes(stream.without((1, 2, 3, 20)))  # 3 lost in group 0 (only 2 repair), 1 in group 1
    statuses = {f.seq: f.status for f in result.report.frames}
    assert [s for s in (1, 2, 3) if statuses[s] == LOST] == [1, 2, 3] and statuses[20] == REBUILT
    assert not result.report.complete
    kept = result.data
    assert kept == stream.data[:FRAME] + stream.data[4 * FRAME:]


def test_damaged_and_foreign_frames_of_a_group_are_rebuilt():
    stream = Repaired("4/16")
    other = Repaired("4/16", seed=2)
    frames = list(stream.frames)
    frames[stream.data_index[4]] = flip_run(frames[stream.data_index[4]], 8 * 200, 400)  # beyond the code
    frames[stream.data_index[7]] = other.frames[other.data_index[7]]  # another stream's frame 7
    result = bitmend.decode_bytes(b"".join(frames))
    assert result.data == stream.data and result.report.complete is False  # a foreign frame was present
    statuses = {f.seq: f.status for f in result.report.frames}
    assert statuses[4] == REBUILT and statuses[7] == REBUILT
    assert result.report.summary.foreign == 1 and result.report.summary.damaged == 0


def test_frames_that_arrive_whole_are_delivered_before_their_repair_frames():
    stream = Repaired("4/16")
    sequencer = Sequencer()
    scanner = FrameScanner(io.BytesIO(stream.blob))
    delivered_before_any_repair = 0
    for frame in scanner.frames():
        if frame.header.repair:
            break
        events = sequencer.push(frame)
        assert [e.frame.header.seq for e in events if isinstance(e, Delivered)] == [frame.header.seq]
        delivered_before_any_repair += 1
    assert delivered_before_any_repair == 16


def test_records_with_repair_survive_lost_blobs():
    records = [f"gauge G{i:02d} stage={i / 7:.3f}m\n".encode() for i in range(30)]
    blobs = list(bitmend.encode_records(records, code="hamming-7-4", depth=2, frame_bytes=64, repair="2/8"))
    data_blobs = [b for b in blobs if not fmt.decode_header(b[8:8 + fmt.MAX_HEADER_BYTES]).repair]
    kept = [b for b in blobs if b not in (data_blobs[3], data_blobs[9], data_blobs[29])]
    reader = bitmend.decode_records(kept)
    assert list(reader) == records and reader.summary.rebuilt == 3 and reader.missing == []


@pytest.mark.parametrize("spec", ["4", "0/8", "4/0", "4/33", "x/y", "40/8"])
def test_a_bad_repair_spec_is_one_usage_error(spec):
    run = run_cli("encode", "--repair", spec, stdin=b"data")
    assert run.code == 2 and len(run.err.strip().splitlines()) == 1 and "--repair" in run.err


def test_repair_spec_parses_r_over_k():
    assert parse_repair("4/32") == (4, 32) and parse_repair(None) is None


def test_cli_repair_rebuilds_what_a_dropping_channel_lost_unless_a_group_lost_more_than_r(tmp_path):
    data = random_bytes(300 * 256, 5)
    source = tmp_path / "gauge.bin"
    source.write_bytes(data)
    enc = run_cli("encode", str(source), "--repair", "4/16", "--frame-bytes", "256", "--code", "hamming-15-11")
    frames = {o["offset"]: o for o in map(json.loads, run_cli("inspect", "--json", stdin=enc.out).out.splitlines())
              if o["type"] == "frame"}
    ledger = tmp_path / "hit.json"
    hit = run_cli("inject", "--channel", "drop:p=0.05", "--seed", "3", "--ledger", str(ledger), "-q", stdin=enc.out)
    assert hit.code == 0
    # from the channel's ledger: which frames of which group were dropped
    per_group: dict[int, list[dict]] = {}
    for d in json.loads(ledger.read_text())["stages"][0]["dropped_frames"]:
        frame = frames[d["offset"]]
        per_group.setdefault(frame["seq"] // 16, []).append(frame)
    beyond = sorted(f["seq"] for fs in per_group.values() if len(fs) > 4 for f in fs if not f["repair"])
    within = sorted(f["seq"] for fs in per_group.values() if len(fs) <= 4 for f in fs if not f["repair"])
    assert within  # the seed makes the channel hit some groups within what repair covers
    report = tmp_path / "r.jsonl"
    dec = run_cli("decode", "--report", str(report), stdin=hit.out)
    lines = [json.loads(x) for x in report.read_text().splitlines()]
    assert sorted(x["seq"] for x in lines[:-1] if x["status"] == "rebuilt") == within
    assert sorted(x["seq"] for x in lines[:-1] if x["status"] == "lost") == beyond
    assert (dec.code == 0) == (not beyond)
    lost_bytes = {seq: data[256 * seq: 256 * (seq + 1)] for seq in beyond}
    assert dec.out == b"".join(data[256 * i: 256 * (i + 1)] for i in range(300) if i not in lost_bytes)


def test_repair_refuses_frames_too_large_for_a_repair_frame_to_carry():
    # a repair symbol is a payload plus 15 bytes (flags, position, length, CRC-32C)
    with pytest.raises(ValueError, match="at most 1048561"):
        bitmend.encode_bytes(b"x", frame_bytes=fmt.MAX_PAYLOAD_BYTES, repair="1/4")
    blob = bitmend.encode_bytes(b"x" * 100, frame_bytes=fmt.MAX_PAYLOAD_BYTES - 15, repair="1/4")
    assert bitmend.decode_bytes(blob).report.summary.repair_frames == 1
