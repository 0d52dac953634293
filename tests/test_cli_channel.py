"""`bitmend inject`, `bitmend simulate` and the demo, run as processes with real pipes."""

from __future__ import annotations

import csv
import io
import json
import subprocess

import numpy as np
import pytest

from bitmend.codes.catalog import get_code
from bitmend.container import format as fmt
from bitmend.inject import inject_bytes

from conftest import REPO_ROOT, bitmend_command, check_report_lines, frame_spans, hamming_distance, random_bytes, run_cli


def assert_one_clean_error_line(run, code: int) -> str:
    assert run.code == code, run.err
    assert len(run.err_lines) == 1, run.err
    assert "Traceback" not in run.err and run.err_lines[0].startswith("bitmend: ")
    return run.err_lines[0]


def flips_per_codeword(container: bytes, positions: list[int], code_name: str, depth: int) -> tuple[dict, int]:
    """Map flipped container bits to (frame, codeword) -> count, for flips inside coded
    payloads; also the number of flips elsewhere (markers, headers, padding bits).
    Codeword i of an interleaved group sends its bit j at group bit j * depth + i."""
    code = get_code(code_name)
    group_bits = depth * code.n
    counts: dict[tuple[int, int], int] = {}
    outside = 0
    spans = frame_spans(container)
    for bit in positions:
        span = next((s for s in spans if 8 * s.payload_start <= bit < 8 * s.payload_end), None)
        if span is None:
            outside += 1
            continue
        rel = bit - 8 * span.payload_start
        blocks = -(-8 * (span.length + fmt.CRC_BYTES) // (depth * code.k)) * depth
        group, offset = divmod(rel, group_bits)
        block = group * depth + offset % depth
        if block >= blocks:
            outside += 1  # padding bits after the last group
            continue
        counts[(span.seq, block)] = counts.get((span.seq, block), 0) + 1
    return counts, outside


# ---- inject -------------------------------------------------------------------------------------------

def test_inject_is_a_filter_whose_ledger_counts_the_flipped_bits(tmp_path):
    data = random_bytes(60_000, 1)
    ledger = tmp_path / "ledger.json"
    run = run_cli("inject", "--channel", "bsc:p=1e-3", "--seed", "7", "--ledger", str(ledger), stdin=data)
    assert run.code == 0, run.err
    record = json.loads(ledger.read_text())
    assert len(run.out) == len(data)
    assert record["bits_flipped"] == hamming_distance(data, run.out) > 0
    assert record["bits_seen"] == 8 * len(data) and record["seed"] == 7
    assert run.err_lines == [f"bitmend inject: seed 7: {8 * len(data):,} bits seen, {record['bits_flipped']:,} "
                             "bits flipped"]


def test_inject_with_the_same_seed_gives_the_same_bytes_as_the_library(tmp_path):
    data = random_bytes(30_000, 2)
    source, target = tmp_path / "in.bin", tmp_path / "out.bin"
    source.write_bytes(data)
    specs = ["burst:enter=1e-3,leave=0.1,bad=0.5", "bytes:p=1e-3"]
    args = [a for s in specs for a in ("--channel", s)]
    first = run_cli("inject", str(source), "-o", str(target), *args, "--seed", "11", "-q")
    second = run_cli("inject", *args, "--seed", "11", stdin=data)
    assert first.code == second.code == 0 and first.err == ""
    assert target.read_bytes() == second.out == inject_bytes(data, specs, seed=11)[0]


def test_inject_without_a_seed_names_the_seed_so_the_run_can_be_repeated(tmp_path):
    data = random_bytes(5_000, 3)
    first = run_cli("inject", "--channel", "bsc:p=1e-2", stdin=data)
    seed = first.err_lines[0].split("seed ")[1].split(":")[0]
    again = run_cli("inject", "--channel", "bsc:p=1e-2", "--seed", seed, "-q", stdin=data)
    assert again.out == first.out


@pytest.mark.parametrize("code, depth, p, seed", [("hamming-7-4", 1, 1e-4, 3), ("golay-24-12", 8, 2e-3, 4)])
def test_inject_then_decode_corrects_exactly_the_ledgers_flips_when_no_block_has_more_than_t(
        tmp_path, gauge_log, code, depth, p, seed):
    data = gauge_log * 8
    container = run_cli("encode", "--code", code, "--depth", str(depth), "--frame-bytes", "4000", stdin=data).out
    ledger_path, report_path = tmp_path / "ledger.json", tmp_path / "report.jsonl"
    hit = run_cli("inject", "--channel", f"bsc:p={p}", "--seed", str(seed), "--ledger", str(ledger_path),
                  stdin=container)
    ledger = json.loads(ledger_path.read_text())
    counts, outside = flips_per_codeword(container, ledger["stages"][0]["flip_positions"], code, depth)
    # the premise of the check: the channel put at most t errors in every codeword
    assert counts and max(counts.values()) <= get_code(code).t
    back = run_cli("decode", "--report", str(report_path), stdin=hit.out)
    assert back.code == 0, back.err
    assert back.out == data
    summary = check_report_lines(report_path.read_text(), back.out)[-1]
    assert summary["corrected_symbols"] == sum(counts.values()) == ledger["bits_flipped"] - outside


def test_a_burst_channel_defeats_depth_1_and_is_corrected_at_a_depth_that_covers_the_bursts(tmp_path):
    # solid bursts (bad = 1), Geometric(0.5) long: golay-24-12 corrects 3 errors per codeword,
    # so depth 1 fails on any burst of 4+ bits inside a codeword while depth 16 corrects every
    # burst of up to 48 bits
    data = random_bytes(120_000, 5)
    channel = "burst:enter=2e-4,leave=0.5,bad=1"
    results = {}
    for depth in (1, 16):
        container = run_cli("encode", "--code", "golay-24-12", "--depth", str(depth), stdin=data).out
        ledger_path = tmp_path / f"ledger{depth}.json"
        hit = run_cli("inject", "--channel", channel, "--seed", "6", "--ledger", str(ledger_path), stdin=container)
        pos = np.array(json.loads(ledger_path.read_text())["stages"][0]["flip_positions"])
        longest = max(len(run) for run in np.split(pos, np.flatnonzero(np.diff(pos) > 1) + 1))
        results[depth] = (run_cli("decode", "-q", stdin=hit.out), longest, len(pos))
    shallow, deep = results[1][0], results[16][0]
    assert results[16][2] > 50 and results[16][1] <= 16 * 3  # premise: many bursts, none longer than D * t
    assert shallow.code == 1 and shallow.out != data
    assert deep.code == 0 and deep.out == data


def test_frames_dropped_by_inject_are_the_frames_decode_reports_lost(tmp_path):
    data = random_bytes(30_000, 7)
    container = run_cli("encode", "--code", "secded-72-64", "--depth", "4", "--frame-bytes", "1000", stdin=data).out
    ledger_path, report_path = tmp_path / "ledger.json", tmp_path / "report.jsonl"
    hit = run_cli("inject", "--channel", "drop:p=0.25", "--seed", "8", "--ledger", str(ledger_path), stdin=container)
    assert hit.code == 0, hit.err
    ledger = json.loads(ledger_path.read_text())
    dropped = sorted(f["seq"] for f in ledger["stages"][0]["dropped_frames"])
    assert dropped and ledger["frames_seen"] == len(frame_spans(container))
    back = run_cli("decode", "--report", str(report_path), stdin=hit.out)
    assert back.code == 1
    report = check_report_lines(report_path.read_text(), back.out)
    lost = [f["seq"] for f in report[:-1] if f["status"] == "lost"]
    last_received = max(f["seq"] for f in report[:-1] if f["status"] != "lost")
    assert lost == [s for s in dropped if s < last_received]


def test_a_real_shell_pipeline_encode_inject_decode_streams_through(gauge_log):
    command = " ".join(bitmend_command())
    proc = subprocess.run(f"{command} encode --code golay-24-12 --depth 8 | {command} inject --channel bsc:p=5e-4 "
                          f"--seed 2 -q | {command} decode -q", shell=True, input=gauge_log, capture_output=True,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout == gauge_log


@pytest.mark.parametrize("spec", ["bsc:p=2", "bsc", "burst:enter=1e-3", "gauss:p=0.1", "bsc:p=abc", "bsc:q=0.1",
                                  "slip:p=0.1,p=0.2"])
def test_a_bad_channel_spec_exits_2_with_one_line_and_writes_nothing(tmp_path, spec):
    target = tmp_path / "out.bin"
    run = run_cli("inject", "-o", str(target), "--channel", spec, stdin=b"gauge")
    line = assert_one_clean_error_line(run, 2)
    assert "channel" in line and not target.exists() and run.out == b""


def test_inject_without_a_channel_is_a_usage_error():
    assert_one_clean_error_line(run_cli("inject", stdin=b"x"), 2)


def test_drop_on_a_stream_that_is_not_a_container_exits_3_and_says_why(tmp_path):
    ledger = tmp_path / "ledger.json"
    run = run_cli("inject", "--channel", "drop:p=0.1", "--ledger", str(ledger), stdin=random_bytes(10_000, 9))
    line = assert_one_clean_error_line(run, 3)
    assert "no bitmend frame" in line and "container" in line
    assert not ledger.exists()


def test_inject_of_a_missing_file_exits_3(tmp_path):
    assert_one_clean_error_line(run_cli("inject", str(tmp_path / "absent"), "--channel", "bsc:p=0.1"), 3)


# ---- simulate -------------------------------------------------------------------------------------------

def test_simulate_json_holds_the_measured_interval_around_the_closed_form():
    run = run_cli("simulate", "--code", "hamming-7-4", "--depth", "1", "--channel", "bsc:p=0.01", "--bits", "2e6",
                  "--seed", "1", "--json")
    assert run.code == 0, run.err
    record = json.loads(run.out)
    block = record["measured"]["block_error"]
    assert block["low"] <= record["theory"]["block_error"] <= block["high"]
    assert record["seed"] == 1 and record["channels"] == ["bsc:p=0.01"]


def test_simulate_text_report_has_every_rate_and_the_seed():
    run = run_cli("simulate", "--code", "secded-72-64", "--channel", "bsc:p=1e-3", "--bits", "1e6", "--seed", "3")
    assert run.code == 0 and run.err == ""
    text = run.out.decode()
    for words in ("residual bit error", "block error", "detected", "undetected", "frame error (CRC-32C fails)",
                  "seed 3", "theory", "uncoded"):
        assert words in text


def test_simulate_sweep_writes_csv_rows_and_a_plot(tmp_path):
    pytest.importorskip("matplotlib")
    chart = tmp_path / "sweep.svg"
    run = run_cli("simulate", "--code", "golay-23-12", "--depth", "1", "--channel", "bsc:p=1e-2", "--bits", "2e5",
                  "--sweep", "p=1e-3..1e-1:4", "--seed", "4", "--csv", "--plot", str(chart))
    assert run.code == 0, run.err
    rows = list(csv.DictReader(io.StringIO(run.out.decode())))
    assert [r["channels"] for r in rows] == ["bsc:p=0.001", "bsc:p=0.00464159", "bsc:p=0.0215443", "bsc:p=0.1"]
    assert chart.read_bytes().startswith(b"<?xml")


@pytest.mark.parametrize("args, words", [
    (["--channel", "drop:p=0.1"], "inject"),
    (["--channel", "slip:p=1e-4"], "inject"),
    (["--channel", "bsc:p=7"], "probability"),
    (["--channel", "bsc:p=1e-3", "--sweep", "q=1e-3..1e-2:3"], "belongs to none"),
    (["--channel", "bsc:p=1e-3", "--sweep", "p=1e-3..1e-2"], "NAME=LOW..HIGH:COUNT"),
    (["--channel", "bsc:p=1e-3", "--json", "--csv"], "one of"),
    (["--channel", "bsc:p=1e-3", "--plot", "chart.pdf"], ".png or .svg"),
    (["--channel", "bsc:p=1e-3", "--bits", "0"], "--bits"),
    (["--channel", "bsc:p=1e-3", "--code", "nosuch-1-1"], "unknown code"),
    (["--channel", "bsc:p=1e-3", "--depth", "0"], "--depth"),
    (["--code", "hamming-7-4"], "--channel"),
])
def test_simulate_usage_errors_exit_2_with_one_line(tmp_path, args, words):
    run = run_cli("simulate", *args, cwd=tmp_path)
    assert words in assert_one_clean_error_line(run, 2)
    assert not (tmp_path / "chart.pdf").exists()


# ---- demo ----------------------------------------------------------------------------------------------------

def test_demo_shows_the_ledger_beside_the_report_and_they_agree():
    if not (REPO_ROOT / "samples" / "gauge-telemetry.log").is_file():
        pytest.skip("bundled sample not generated yet")
    run = run_cli("demo", cwd=REPO_ROOT)
    assert run.code == 0, run.err
    text = run.out.decode()
    assert "ledger" in text and "report" in text
    assert "equal" in text and "identical to the input" in text


def test_demo_with_a_dropping_channel_lists_the_frames_on_both_sides(tmp_path, gauge_log):
    sample = tmp_path / "gauges.log"
    sample.write_bytes(gauge_log * 60)
    run = run_cli("demo", "--sample", str(sample), "--channel", "drop:p=0.3", "--seed", "3", cwd=tmp_path)
    assert run.code == 1
    assert "frames dropped in the ledger" in run.out.decode()


def test_demo_with_a_bad_flip_rate_exits_2():
    assert_one_clean_error_line(run_cli("demo", "--flip-rate", "2"), 2)
