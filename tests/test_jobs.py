"""Worker processes (jobs=N, --jobs N): the same container, data, reports and errors as one job.

Slots are made small here (tens of KiB), so that a few hundred KiB of data already take many
batches, every slot is used again, and some frames are too big for a slot and are coded by
the parent in their place. No timing is measured here (benchmarks/jobs_scaling.py does).
"""

from __future__ import annotations

import io
import multiprocessing

import pytest

import bitmend
from bitmend.codes.custom import parse_code_definition
from bitmend.codes.catalog import get_code
from bitmend.container import workers
from bitmend.container.assembler import DamagedDataError
from bitmend.errors import SettingError

from conftest import check_report_lines, delete_bit, flip_run, random_bytes, run_cli

pytestmark = pytest.mark.skipif(not workers.available(), reason="worker processes need fork")

KEY = bytes(range(16, 48))


@pytest.fixture(autouse=True)
def small_slots(monkeypatch):
    monkeypatch.setattr(workers, "SLOT_INPUT_BYTES", 48 << 10)
    monkeypatch.setattr(workers, "SLOT_OUTPUT_BYTES", 192 << 10)


def _custom_code():
    """A Hamming (7, 4) code outside the catalog (two message columns swapped): it travels in
    the frames' definition blocks."""
    h = get_code("hamming-7-4").H[:, [1, 0, 2, 3, 4, 5, 6]]
    text = "parity-check\n" + "\n".join("".join(map(str, row)) for row in h) + "\n"
    return parse_code_definition(text, source="test")


SETTINGS = {
    "golay, depth 8": dict(code="golay-24-12", depth=8, frame_bytes=4096),
    "hamming, depth 3, repair": dict(code="hamming-7-4", depth=3, frame_bytes=2000, repair="2/5"),
    "bch, depth 2, key": dict(code="bch-63-51", depth=2, frame_bytes=5000, key=KEY),
    "reed-solomon, repair": dict(code="rs-255-223", depth=4, frame_bytes=3000, repair="1/4"),
    "custom code": dict(code=_custom_code(), depth=1, frame_bytes=1500),
    "frames bigger than a slot": dict(code="secded-72-64", depth=16, frame_bytes=70_000),
}


@pytest.fixture(scope="module")
def data() -> bytes:
    return random_bytes(300_000, seed=12)


def _encode(data: bytes, jobs: int, **settings) -> bytes:
    return bitmend.encode_bytes(data, stream_id=0x5EED, jobs=jobs, **settings)


@pytest.mark.parametrize("name", list(SETTINGS))
def test_the_container_is_the_same_for_one_two_and_three_jobs(data, name):
    settings = SETTINGS[name]
    one = _encode(data, 1, **settings)
    assert _encode(data, 2, **settings) == one
    assert _encode(data, 3, **settings) == one
    assert bitmend.decode_bytes(one, key=settings.get("key")).data == data


def _damaged(container: bytes) -> bytes:
    """Bursts through several frames, a lost bit (a slip), bytes cut out and bytes inserted,
    and the end cut off inside the last frame."""
    hit = container
    for start in range(3_000, len(hit) * 8 - 100_000, 97_003):
        hit = flip_run(hit, start, 40 + start % 200)
    hit = delete_bit(hit, len(hit) * 4 + 5)
    third = len(hit) // 3
    hit = hit[:third] + hit[third + 777:]
    hit = hit[:2 * third] + random_bytes(333, seed=4) + hit[2 * third:]
    return hit[:-50]


@pytest.mark.parametrize("name", list(SETTINGS))
@pytest.mark.parametrize("damage", [False, True], ids=["whole", "damaged"])
def test_decoding_gives_the_same_data_and_reports_with_two_and_three_jobs(data, name, damage):
    settings = SETTINGS[name]
    container = _encode(data, 1, **settings)
    if damage:
        container = _damaged(container)
    key = settings.get("key")
    one = bitmend.decode_bytes(container, key=key)
    assert bitmend.decode_bytes(container, key=key, jobs=2) == one  # data, frame reports and summary
    assert bitmend.decode_bytes(container, key=key, jobs=3) == one
    summary = one.report.summary
    if damage:  # the damage was seen (repair frames may still rebuild all of it)
        assert summary.corrected + summary.damaged + summary.lost + summary.rebuilt > 0
    else:
        assert one.data == data and summary.complete


@pytest.mark.parametrize("on_error", ["zero", "drop"])
def test_the_on_error_policies_act_the_same(data, on_error):
    container = _damaged(_encode(data, 1, code="hamming-15-11", depth=1, frame_bytes=3000))
    one = bitmend.decode_bytes(container, on_error=on_error)
    assert bitmend.decode_bytes(container, on_error=on_error, jobs=2) == one
    assert one.report.summary.damaged + one.report.summary.lost > 0


def test_a_failing_decode_stops_at_the_same_frame_with_the_same_bytes_before_it(data):
    container = _damaged(_encode(data, 1, code="golay-24-12", depth=8, frame_bytes=4096))

    def read_until_failure(jobs: int):
        decoder = bitmend.Decoder(io.BytesIO(container), on_error="fail", jobs=jobs)
        got = bytearray()
        with pytest.raises(DamagedDataError) as failure:
            while block := decoder.read1(1 << 16):
                got += block
        decoder.close()
        return bytes(got), str(failure.value)

    assert read_until_failure(2) == read_until_failure(1)


def test_wrong_key_and_missing_key_give_the_same_reports(data):
    container = _encode(data, 1, code="hamming-15-11", depth=4, frame_bytes=4000, key=KEY)
    for key in (bytes(32), None):
        one = bitmend.decode_bytes(container, key=key)
        assert bitmend.decode_bytes(container, key=key, jobs=2) == one
        assert one.data == b"" and not one.report.summary.complete


def test_concatenated_streams_decode_the_same(data):
    first = _encode(data[:100_000], 1, code="golay-24-12", depth=8, frame_bytes=4096)
    second = bitmend.encode_bytes(data[100_000:], "bch-31-21", 3, 2500, stream_id=0xB0A7, repair="1/3")
    joined = first + second + first  # the third is a replay of the first: its frames are duplicates
    one = bitmend.decode_bytes(joined)
    assert bitmend.decode_bytes(joined, jobs=2) == one
    assert one.report.summary.streams == 2 and one.report.summary.duplicates > 0


@pytest.mark.parametrize("size", [0, 1, 200])
def test_empty_and_tiny_inputs(size):
    data = random_bytes(size, seed=size)
    one = _encode(data, 1)
    assert _encode(data, 2) == one
    assert bitmend.decode_bytes(one, jobs=2) == bitmend.decode_bytes(one)
    assert bitmend.decode_bytes(one, jobs=2).data == data


def test_a_random_stream_id_is_drawn_once_for_all_frames(data):
    container = bitmend.encode_bytes(data, frame_bytes=2048, jobs=2)
    decoded = bitmend.decode_bytes(container)
    assert decoded.data == data and decoded.report.summary.complete and decoded.report.summary.streams == 1


def test_flushes_and_records_cut_the_same_frames_with_workers(data):
    def written(jobs: int) -> bytes:
        sink = io.BytesIO()
        with bitmend.Encoder(sink, "hamming-7-4", 8, 4096, stream_id=9, jobs=jobs) as enc:
            for start in range(0, 100_000, 7_001):
                enc.write(data[start: start + 7_001])
                enc.flush()  # a short frame now, and every frame queued is out
                assert enc.bytes_out == len(sink.getvalue())
            enc.send_record(b"a record of its own")
        return sink.getvalue()

    assert written(2) == written(1)


def test_an_abandoned_encoder_writes_what_was_queued_and_stops_its_workers(data):
    def abandoned(jobs: int) -> bytes:
        sink = io.BytesIO()
        with pytest.raises(RuntimeError):
            with bitmend.Encoder(sink, frame_bytes=3000, stream_id=3, jobs=jobs) as enc:
                enc.write(data[:100_000])
                raise RuntimeError("the source failed")
        return sink.getvalue()

    assert abandoned(2) == abandoned(1)
    assert not multiprocessing.active_children()
    decoded = bitmend.decode_bytes(abandoned(1))
    assert not decoded.report.summary.complete


def test_workers_are_gone_after_each_use(data):
    container = _encode(data, 2)
    bitmend.decode_bytes(container, jobs=2)
    with bitmend.Decoder(io.BytesIO(container), jobs=2) as decoder:
        decoder.read(1000)  # closed before the end
    assert not multiprocessing.active_children()


def _twice(token: int, slot: int, value: int) -> int:
    return 2 * value


def test_a_worker_that_dies_is_an_error_not_a_hang():
    pool = workers.SlotPool(1)
    try:
        assert pool.submit(_twice, 0, 21).result() == 42
        pool._workers[0].process.kill()
        pool._workers[0].process.join()
        with pytest.raises(bitmend.WorkerStoppedError, match="worker process stopped"):
            pool.submit(_twice, 0, 1).result()
    finally:
        pool.close()
    assert not multiprocessing.active_children()


def test_jobs_settings():
    assert workers.resolve_jobs(0) == workers.cpu_count()
    assert workers.resolve_jobs(1) == 1 and workers.resolve_jobs(3) == 3
    with pytest.raises(SettingError, match="jobs must be 0"):
        bitmend.encode_bytes(b"x", jobs=-1)
    with pytest.raises(TypeError):
        bitmend.decode_bytes(b"x", jobs=1.5)
    assert workers.automatic_jobs(None) == 1  # a pipe: no batching latency
    assert workers.automatic_jobs(1 << 20) == 1
    assert workers.automatic_jobs(workers.AUTOMATIC_MIN_BYTES) == workers.cpu_count()


def test_cli_round_trip_with_two_jobs(tmp_path, data):
    source = tmp_path / "in.bin"
    source.write_bytes(data)
    for jobs in ("1", "2"):
        run = run_cli("encode", str(source), "-o", str(tmp_path / f"c{jobs}.bmd"), "--jobs", jobs,
                      "--frame-bytes", "4096", "--repair", "1/4")
        assert run.code == 0, run.err
    container = (tmp_path / "c2.bmd").read_bytes()
    damaged = _damaged(container)
    (tmp_path / "hit.bmd").write_bytes(damaged)
    results = []
    for jobs in ("1", "2"):
        run = run_cli("decode", str(tmp_path / "hit.bmd"), "-o", str(tmp_path / f"out{jobs}"), "--jobs", jobs,
                      "--report", str(tmp_path / f"r{jobs}.jsonl"))
        report = (tmp_path / f"r{jobs}.jsonl").read_text()
        check_report_lines(report, (tmp_path / f"out{jobs}").read_bytes())
        results.append((run.code, run.err, report, (tmp_path / f"out{jobs}").read_bytes()))
    assert results[0] == results[1]
    assert results[0][0] in (0, 1)
    run = run_cli("decode", "--jobs", "2", stdin=container)
    assert run.code == 0 and run.out == data


def test_cli_refuses_jobs_for_records_and_a_negative_count(tmp_path):
    for args in (["encode", "--records", "line", "--jobs", "2"], ["decode", "--records", "u16", "--jobs", "2"],
                 ["encode", "--jobs", "-1"]):
        run = run_cli(*args, stdin=b"x\n")
        assert run.code == 2
        assert len(run.err_lines) == 1 and "--jobs" in run.err and "Traceback" not in run.err
