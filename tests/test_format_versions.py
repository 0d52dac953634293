"""Every format version ever written stays readable: the version 1 fixtures in
tests/fixtures/v1 were written by bitmend at commit 4d68adf (format version 1, before stream
identities) and must decode byte-identically forever."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pytest

import bitmend
from bitmend.container import format as fmt

from conftest import run_cli

V1 = Path(__file__).parent / "fixtures" / "v1"
V1_CASES = json.loads((V1 / "manifest.json").read_text())["cases"]


@pytest.mark.parametrize("case", V1_CASES, ids=[c["container"] for c in V1_CASES])
def test_version_1_fixture_decodes_byte_identically(case):
    blob = (V1 / case["container"]).read_bytes()
    expected = (V1 / case["payload"]).read_bytes()
    assert hashlib.sha256(expected).hexdigest() == case["payload_sha256"]
    result = bitmend.decode_bytes(blob)
    assert result.data == expected
    summary = result.report.summary
    assert summary.complete and summary.lost == summary.damaged == summary.duplicates == summary.foreign == 0
    # the same frame counts and corrections as the version 1 reader reported when they were written
    assert (summary.frames, summary.corrected, summary.corrected_symbols) == tuple(case["v1_decode"].values())
    assert all(f.stream is None for f in result.report.frames)


def test_version_1_fixtures_are_really_version_1():
    for case in V1_CASES:
        blob = (V1 / case["container"]).read_bytes()
        if "hit" in case["container"]:
            continue
        header = fmt.decode_header(blob[8: 8 + fmt.MAX_HEADER_BYTES])
        assert header.version == 1 and header.header_bytes == 33


def test_version_1_and_2_streams_concatenated_decode_in_order():
    old = (V1 / "golay-24-12-d8.bmd").read_bytes()
    new = bitmend.encode_bytes(b"after the upgrade", code="hamming-7-4", depth=2)
    result = bitmend.decode_bytes(old + new)
    assert result.data == (V1 / "golay-24-12-d8.txt").read_bytes() + b"after the upgrade"
    assert result.report.complete and result.report.summary.streams == 2


def test_version_1_fixture_decodes_through_the_cli(tmp_path):
    run = run_cli("decode", str(V1 / "concatenated-two-streams.bmd"))
    assert run.code == 0 and run.out == (V1 / "concatenated-two-streams.txt").read_bytes()


# ---- version 2: decoded and re-written byte for byte ------------------------------------------

V2 = Path(__file__).parent / "fixtures" / "v2"
V2_MANIFEST = json.loads((V2 / "manifest.json").read_text())
V2_CASES = V2_MANIFEST["cases"]


def _load_fixture_writer():
    """tools/write_fixtures.py, which holds how each case was encoded."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("write_fixtures", Path(__file__).parents[1] / "tools" /
                                                  "write_fixtures.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _v2_payload(case) -> bytes:
    source = (V2 / V2_MANIFEST["payload"]).read_bytes()
    assert hashlib.sha256(source).hexdigest() == V2_MANIFEST["payload_sha256"]
    return source[: case.get("payload_bytes", len(source))]


@pytest.mark.parametrize("case", V2_CASES, ids=[c["name"] for c in V2_CASES])
def test_version_2_fixture_is_written_again_byte_for_byte(case):
    # containers must not change when the code behind them is reorganised: the same data,
    # settings and stream identity give the same bytes as the fixture's writer produced
    writer = _load_fixture_writer()
    assert writer.STREAM_ID == V2_MANIFEST["stream_id"] and writer.CUSTOM_DEFINITION == V2_MANIFEST["custom_definition"]
    blob = writer.encode_case(case, _v2_payload(case))
    assert blob == (V2 / case["container"]).read_bytes()


@pytest.mark.parametrize("case", V2_CASES, ids=[c["name"] for c in V2_CASES])
def test_version_2_fixture_decodes_to_its_payload(case):
    blob = (V2 / case["container"]).read_bytes()
    assert hashlib.sha256(blob).hexdigest() == case["container_sha256"]
    key = bytes.fromhex(case["key_hex"]) if "key_hex" in case else None
    result = bitmend.decode_bytes(blob, key=key)
    assert result.data == _v2_payload(case)
    assert result.report.summary.complete
    assert {f.stream for f in result.report.frames} == {f"{V2_MANIFEST['stream_id']:016x}"}
