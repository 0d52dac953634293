"""The command line, run as a real process with real pipes: `python -m bitmend ...`."""

from __future__ import annotations

import json
import subprocess

import pytest

from bitmend.container import format as fmt
from bitmend.interleave import encode_segment

from conftest import (CATALOG_CODES, REPO_ROOT, bitmend_command, check_report_lines, flip_run, frame_spans,
                      payload_slices, random_bytes, run_cli)

# MacWilliams & Sloane, The Theory of Error-Correcting Codes, ch. 2: extended Golay (24,12)
GOLAY_24_WEIGHTS = {"0": 1, "8": 759, "12": 2576, "16": 759, "24": 1}


def assert_one_clean_error_line(run, code):
    assert run.code == code, run.err
    assert len(run.err_lines) == 1, run.err
    assert "Traceback" not in run.err
    assert run.err_lines[0].startswith("bitmend")


@pytest.fixture(scope="module")
def telemetry() -> bytes:
    return random_bytes(5000, 77)


@pytest.fixture(scope="module")
def telemetry_container(telemetry) -> bytes:
    run = run_cli("encode", "--code", "golay-24-12", "--depth", "8", "--frame-bytes", "1000", stdin=telemetry)
    assert run.code == 0, run.err
    return run.out


# ---- encode / decode -----------------------------------------------------------------------------

def test_encode_piped_into_decode_gives_the_input_back(gauge_log):
    encoder = subprocess.Popen([*bitmend_command(), "encode", "--code", "hamming-31-26", "--frame-bytes", "700"],
                               stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    decoder = subprocess.Popen([*bitmend_command(), "decode"], stdin=encoder.stdout, stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE)
    encoder.stdout.close()  # the decoder owns the read end now
    encoder.stdin.write(gauge_log)
    encoder.stdin.close()
    out, err = decoder.communicate(timeout=120)
    assert encoder.wait(timeout=120) == 0, encoder.stderr.read()
    encoder.stderr.close()
    assert decoder.returncode == 0, err
    assert out == gauge_log
    lines = err.decode().splitlines()
    assert len(lines) == 1 and "all data verified" in lines[0]


def test_encode_and_decode_with_output_files_and_report(tmp_path, gauge_log):
    source = tmp_path / "gauges.log"
    source.write_bytes(gauge_log)
    coded, back, report = tmp_path / "gauges.bmd", tmp_path / "back.log", tmp_path / "report.jsonl"
    enc = run_cli("encode", str(source), "-o", str(coded), "--code", "secded-72-64", "--depth", "16",
                  "--frame-bytes", "2000")
    assert enc.code == 0 and enc.out == b"", enc.err
    assert len(frame_spans(coded.read_bytes())) == -(-len(gauge_log) // 2000)
    dec = run_cli("decode", str(coded), "-o", str(back), "--report", str(report))
    assert dec.code == 0 and dec.out == b"", dec.err
    assert back.read_bytes() == gauge_log
    objects = check_report_lines(report.read_text(), gauge_log)
    assert objects[-1]["complete"] is True
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".part")] == []


def test_decode_quiet_prints_nothing_on_stderr(telemetry, telemetry_container):
    run = run_cli("decode", "--quiet", stdin=telemetry_container)
    assert run.code == 0 and run.out == telemetry and run.err == ""


def test_decode_corrects_damage_and_reports_it_in_a_fresh_process(tmp_path, telemetry, telemetry_container):
    spans = frame_spans(telemetry_container)
    damaged = flip_run(telemetry_container, 8 * spans[2].payload_start + 5, 24)  # D*t at depth 8
    report = tmp_path / "r.jsonl"
    run = run_cli("decode", "--report", str(report), stdin=damaged)
    assert run.code == 0, run.err
    assert run.out == telemetry
    objects = check_report_lines(report.read_text(), telemetry)
    assert objects[2]["status"] == "corrected" and objects[2]["corrected_symbols"] == 24
    assert "24 bits corrected" in run.err


def test_empty_input_encodes_to_a_container_that_decodes_to_nothing():
    enc = run_cli("encode")
    assert enc.code == 0 and len(enc.out) > 0
    assert len(frame_spans(enc.out)) == 1
    dec = run_cli("decode", stdin=enc.out)
    assert dec.code == 0, dec.err
    assert dec.out == b""


def test_concatenated_containers_decode_to_both_inputs(tmp_path):
    a, b = random_bytes(3000, 1), random_bytes(1234, 2)
    first = run_cli("encode", "--code", "rep-3", "--frame-bytes", "512", stdin=a).out
    second = run_cli("encode", "--code", "golay-23-12", "--depth", "3", stdin=b).out
    run = run_cli("decode", stdin=first + second)
    assert run.code == 0, run.err
    assert run.out == a + b


def test_truncated_stream_exits_1_with_the_earlier_frames_delivered(telemetry, telemetry_container):
    spans = frame_spans(telemetry_container)
    cut = spans[3].start + 500  # inside frame 3
    run = run_cli("decode", stdin=telemetry_container[:cut])
    assert run.code == 1, run.err
    assert telemetry.startswith(run.out)
    assert len(run.out) >= 3 * 1000
    assert "Traceback" not in run.err and "INCOMPLETE" in run.err


def test_lost_frame_exits_1_and_is_listed_in_the_report(tmp_path, telemetry, telemetry_container):
    blob = bytearray(telemetry_container)
    target = frame_spans(telemetry_container)[1]
    blob[target.start: target.end] = bytes(target.size)
    report = tmp_path / "r.jsonl"
    run = run_cli("decode", "--report", str(report), stdin=bytes(blob))
    assert run.code == 1
    assert run.out == telemetry[:1000] + telemetry[2000:]
    objects = check_report_lines(report.read_text(), run.out)
    assert [o["seq"] for o in objects[:-1] if o["status"] == "lost"] == [1]
    assert objects[-1]["lost"] == 1 and objects[-1]["complete"] is False


# ---- on-error policies ------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def damaged_frame_two():
    data = random_bytes(1000, 1)
    blob = run_cli("encode", "--code", "hamming-7-4", "--depth", "4", "--frame-bytes", "128", stdin=data).out
    spans = frame_spans(blob)
    return data, flip_run(blob, 8 * spans[2].payload_start + 40, 400), payload_slices(spans)[2]


def test_on_error_keep_writes_the_damaged_frame_at_its_length(damaged_frame_two):
    data, blob, hit = damaged_frame_two
    run = run_cli("decode", "--on-error", "keep", stdin=blob)
    assert run.code == 1
    assert len(run.out) == len(data)
    assert run.out[: hit.start] == data[: hit.start] and run.out[hit.stop:] == data[hit.stop:]


def test_on_error_zero_writes_zeros_for_the_damaged_frame(damaged_frame_two):
    data, blob, hit = damaged_frame_two
    run = run_cli("decode", "--on-error", "zero", stdin=blob)
    assert run.code == 1
    assert run.out == data[: hit.start] + bytes(hit.stop - hit.start) + data[hit.stop:]


def test_on_error_drop_leaves_the_damaged_frame_out(damaged_frame_two):
    data, blob, hit = damaged_frame_two
    run = run_cli("decode", "--on-error", "drop", stdin=blob)
    assert run.code == 1
    assert run.out == data[: hit.start] + data[hit.stop:]


def test_on_error_fail_exits_1_after_writing_the_frames_before(damaged_frame_two):
    data, blob, hit = damaged_frame_two
    run = run_cli("decode", "--on-error", "fail", stdin=blob)
    assert run.code == 1
    assert run.out == data[: hit.start]
    assert "Traceback" not in run.err
    assert any("damaged" in line for line in run.err_lines)


# ---- codes and inspect --------------------------------------------------------------------------------

def test_codes_json_lists_every_catalog_code_with_its_parameters():
    run = run_cli("codes", "--json")
    assert run.code == 0, run.err
    facts = {c["name"]: c for c in json.loads(run.out)}
    assert list(facts) == list(CATALOG_CODES)
    assert (facts["golay-24-12"]["n"], facts["golay-24-12"]["k"], facts["golay-24-12"]["d"],
            facts["golay-24-12"]["t"]) == (24, 12, 8, 3)
    assert all(facts[f"secded-{s}"]["d"] == 4 for s in ("8-4", "16-11", "39-32", "72-64"))
    assert facts["hamming-63-57"]["rate"] == pytest.approx(57 / 63, abs=1e-6)
    assert {name for name, f in facts.items() if f["perfect"]} == {
        "rep-3", "hamming-7-4", "hamming-15-11", "hamming-31-26", "hamming-63-57", "golay-23-12"}


def test_codes_plain_listing_names_every_code():
    run = run_cli("codes")
    assert run.code == 0
    text = run.out.decode()
    for name in ("rep-3", "hamming-63-57", "secded-39-32", "golay-23-12"):
        assert name in text


def test_codes_show_golay_24_12_has_the_published_weight_distribution():
    run = run_cli("codes", "show", "golay-24-12", "--json")
    assert run.code == 0, run.err
    facts = json.loads(run.out)
    assert facts["weight_distribution"] == GOLAY_24_WEIGHTS
    assert (facts["n"], facts["k"], facts["d"]) == (24, 12, 8)
    assert len(facts["G"]) == 12 and all(len(row) == 24 for row in facts["G"])
    assert len(facts["H"]) == 12 and all(set(row) <= {"0", "1"} for row in facts["H"])


def test_codes_show_hamming_7_4_prints_its_weight_distribution():
    run = run_cli("codes", "show", "hamming-7-4")
    assert run.code == 0
    text = run.out.decode()
    # MacWilliams & Sloane ch. 1: 1 + 7z^3 + 7z^4 + z^7
    assert "A0=1, A3=7, A4=7, A7=1" in text


def test_inspect_json_lists_every_frame_at_its_offset(telemetry_container):
    run = run_cli("inspect", "--json", stdin=telemetry_container)
    assert run.code == 0, run.err
    objects = [json.loads(line) for line in run.out.decode().splitlines()]
    frames, summary = objects[:-1], objects[-1]
    spans = frame_spans(telemetry_container)
    assert [f["offset"] for f in frames] == [s.start for s in spans]
    assert [f["frame_bytes"] for f in frames] == [s.size for s in spans]
    assert [f["seq"] for f in frames] == list(range(len(spans)))
    assert all(f["code"] == "golay-24-12" and f["depth"] == 8 for f in frames)
    assert [f["last"] for f in frames] == [False] * (len(spans) - 1) + [True]
    assert summary["type"] == "summary" and summary["frames"] == len(spans)
    assert summary["payload_bytes"] == 5000 and summary["container_bytes"] == len(telemetry_container)


# ---- errors -------------------------------------------------------------------------------------------

@pytest.mark.parametrize("junk", [random_bytes(4000, 3), b"gauge 12 stage 1.7\n" * 100, b"\x00"])
def test_garbage_input_exits_3_with_one_line_and_no_traceback(junk):
    run = run_cli("decode", stdin=junk)
    assert_one_clean_error_line(run, 3)
    assert run.out == b""


def test_inspect_of_garbage_exits_3_with_one_error_line():
    run = run_cli("inspect", "--json", stdin=random_bytes(3000, 4))
    assert run.code == 3
    assert len(run.err_lines) == 1 and "Traceback" not in run.err


def test_missing_input_file_exits_3_with_one_line(tmp_path):
    run = run_cli("decode", str(tmp_path / "no-such-gauge.bmd"))
    assert_one_clean_error_line(run, 3)


def test_stream_with_only_an_oversized_header_exits_3_cleanly():
    blob = fmt.MARKER_BYTES + fmt.encode_header(fmt.FrameHeader(11, 8, 0, 2**31)) + random_bytes(500, 5)
    run = run_cli("decode", stdin=blob)
    assert run.code == 3 and "Traceback" not in run.err


def test_unknown_format_version_is_named_in_the_error():
    # a record of the version 2 layout that says version 3 (a newer writer): CRC and Golay check
    body = bytes([3]) + fmt.FrameHeader(11, 8, 0, 10).record()[1:-4]
    record = body + fmt.crc32c(body).to_bytes(4, "big")
    coded = encode_segment(fmt.header_code(), fmt.HEADER_DEPTH, record)
    blob = fmt.MARKER_BYTES + coded + bytes(300)
    run = run_cli("decode", stdin=blob)
    assert run.code == 3
    assert "version 3" in run.err and "reads versions 1 and 2" in run.err


@pytest.mark.parametrize("args", [
    ("encode", "--bogus"),
    ("encode", "--code", "hamming-8-4"),
    ("encode", "--depth", "0"),
    ("encode", "--depth", "256"),
    ("encode", "--depth", "eight"),
    ("encode", "--frame-bytes", "0"),
    ("decode", "--on-error", "ignore"),
    ("codes", "show", "golay-25-12"),
    ("gauge-report",),
])
def test_usage_errors_exit_2_with_one_line(args):
    run = run_cli(*args)
    assert_one_clean_error_line(run, 2)
    assert run.out == b""


def test_usage_error_hint_names_the_subcommand_when_run_as_a_module():
    run = run_cli("encode", "--bogus")
    assert "(see bitmend encode --help)" in run.err


def test_no_arguments_prints_help_without_an_empty_error_line():
    run = run_cli()
    assert b"encode" in run.out + run.err.encode()
    assert all(not line.startswith("bitmend:  (") for line in run.err_lines)


# ---- demo ---------------------------------------------------------------------------------------------

def test_demo_runs_on_the_bundled_sample_and_exits_0():
    if not (REPO_ROOT / "samples" / "gauge-telemetry.log").is_file():
        pytest.skip("bundled sample not generated yet")
    run = run_cli("demo", cwd=REPO_ROOT)
    assert run.code == 0, run.err
    assert "identical to the input" in run.out.decode()


def test_demo_runs_on_a_given_sample_and_exits_0(tmp_path, gauge_log):
    sample = tmp_path / "gauges.log"
    sample.write_bytes(gauge_log)
    run = run_cli("demo", "--sample", str(sample), "--seed", "5", cwd=tmp_path)
    assert run.code == 0, run.err
    text = run.out.decode()
    assert f"{len(gauge_log):,} bytes" in text and "identical to the input" in text


def test_demo_without_a_sample_fails_with_one_line(tmp_path):
    run = run_cli("demo", "--sample", str(tmp_path / "absent.log"), cwd=tmp_path)
    assert_one_clean_error_line(run, 3)


def test_on_error_fail_with_an_output_file_keeps_the_frames_before(tmp_path, damaged_frame_two):
    data, blob, hit = damaged_frame_two
    source, target = tmp_path / "in.bmd", tmp_path / "out.log"
    source.write_bytes(blob)
    run = run_cli("decode", str(source), "-o", str(target), "--on-error", "fail")
    assert run.code == 1 and "Traceback" not in run.err
    assert target.read_bytes() == data[: hit.start]
