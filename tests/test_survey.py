"""container.survey: what `bitmend inspect` counts, as library objects (rows and totals)."""

from __future__ import annotations

import io
import json

import pytest

from conftest import random_bytes, run_cli

from bitmend.api import encode_bytes
from bitmend.container.assembler import NotAContainerError
from bitmend.container.survey import TABLE_HEADER, ContainerSurvey, survey_bytes


def test_survey_counts_frames_payload_and_wire_bytes_of_one_stream():
    data = random_bytes(1000, 11)
    blob = encode_bytes(data, "hamming-7-4", 4, frame_bytes=300)
    rows, summary = survey_bytes(blob)
    assert [r.seq for r in rows] == [0, 1, 2, 3]
    assert [r.payload_bytes for r in rows] == [300, 300, 300, 100]
    assert [r.position for r in rows] == [0, 300, 600, 900]
    assert [r.last for r in rows] == [False, False, False, True]
    assert sum(r.frame_bytes for r in rows) == len(blob) == summary.container_bytes
    assert (summary.frames, summary.payload_bytes, summary.skipped_bytes) == (4, 1000, 0)
    assert summary.streams == 1 and summary.stream_frames == ((rows[0].stream, 4),)
    assert summary.overhead == pytest.approx(len(blob) / 1000 - 1)
    assert [r.offset for r in rows] == [0, *[sum(r.frame_bytes for r in rows[:i]) for i in range(1, 4)]]


def test_survey_tallies_each_stream_and_counts_bytes_between_frames():
    a = encode_bytes(b"a" * 100, "golay-24-12", 8)
    b = encode_bytes(b"b" * 100, "golay-24-12", 8)
    rows, summary = survey_bytes(a + bytes(50) + b)
    assert summary.streams == 2 and [n for _, n in summary.stream_frames] == [1, 1]
    assert rows[0].stream != rows[1].stream
    assert summary.skipped_bytes == 50


def test_repair_frames_add_wire_bytes_but_no_payload():
    blob = encode_bytes(random_bytes(800, 3), "golay-24-12", 8, frame_bytes=200, repair="1/4")
    rows, summary = survey_bytes(blob)
    repairs = [r for r in rows if r.repair]
    assert repairs and all(r.position is None and "repair" in r.notes for r in repairs)
    assert summary.payload_bytes == 800
    assert summary.container_bytes == len(blob)


def test_no_frame_is_not_a_container():
    survey = ContainerSurvey(io.BytesIO(b"plain text, no frames\n" * 20))
    assert list(survey.frames()) == []
    with pytest.raises(NotAContainerError, match="no decodable bitmend frame"):
        survey.summary()


def test_summary_line_agrees_in_number():
    _, summary = survey_bytes(encode_bytes(b"x", "golay-24-12", 8))
    assert summary.one_line().startswith("1 frame in 1 stream, 1 payload byte in ")


def test_inspect_prints_the_survey_rows_and_summary():
    blob = encode_bytes(random_bytes(700, 9), "secded-16-11", 2, frame_bytes=256)
    rows, summary = survey_bytes(blob)
    text = run_cli("inspect", stdin=blob)
    assert text.code == 0, text.err
    assert text.out.decode().splitlines() == [TABLE_HEADER, *(r.table_row() for r in rows), summary.one_line()]
    as_json = run_cli("inspect", "--json", stdin=blob)
    lines = as_json.out.decode().splitlines()
    assert lines == [*(r.to_json() for r in rows), summary.to_json()]
    assert json.loads(lines[-1])["frames"] == len(rows) == 3
    assert set(json.loads(lines[0])) == {"type", "seq", "offset", "stream", "version", "position", "code", "depth",
                                         "payload_bytes", "frame_bytes", "last", "repair", "keyed", "truncated",
                                         "marker_distance"}


def test_inspect_of_no_container_is_one_line_and_exit_3():
    run = run_cli("inspect", stdin=b"nothing here\n")
    assert run.code == 3 and run.err_lines == ["bitmend: no decodable bitmend frame found in the input"]
