"""Trial campaigns: fixed work units, seeds split with SeedSequence, the same result on any
number of workers, interruption, and the cluster's errors on the command line."""

from __future__ import annotations

import json
import logging
import sys

import numpy as np
import pytest

from bitmend import campaign as cmp
from bitmend.analysis.intervals import BatchTally
from bitmend.simulate import Measured, simulate
from conftest import run_cli

CODE, DEPTH, FRAME_BYTES = "golay-24-12", 8, 1024
BSC = "bsc:p=2e-2"  # golay-24-12 fails ~1 codeword in 800 here: a few dozen failures per campaign below
BURST = "burst:enter=1e-3,leave=0.1,bad=0.5"  # clustered failures: the batch-means intervals must merge too
UNIT_FRAMES = 2
BITS = 8 * FRAME_BYTES * (3 * UNIT_FRAMES + 1)  # 7 frames: three whole units and a short last one


def counts(result) -> dict:
    """Everything a campaign counts and every interval it gives, for comparing two runs."""
    out = {name: getattr(result, name) for name in ("frames", "blocks", "payload_bits", "coded_bits", "seed")}
    for name in ("channel", "bit_error", "block_error", "detected", "undetected", "frame_error"):
        m = result.measured(name)
        out[name] = (m.events, m.trials, m.low, m.high, m.method, m.design_effect)
    return out


@pytest.fixture
def bitmend_main(monkeypatch, capsys):
    """Run `bitmend ARGS` in this process (no interpreter start-up): (exit code, stdout, stderr).
    The command line installs its own signal handlers; pytest's are put back after."""
    import signal

    from bitmend import cli

    def run(*args: str) -> tuple[int, str, str]:
        saved = {s: signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP)}
        monkeypatch.setattr(sys, "argv", ["bitmend", *args])
        try:
            with pytest.raises(SystemExit) as done:
                cli.main()
        finally:
            for signum, handler in saved.items():
                signal.signal(signum, handler)
        captured = capsys.readouterr()
        return done.value.code, captured.out, captured.err

    return run


def test_unit_seeds_are_the_children_numpy_spawns_from_the_campaign_seed():
    for seed in (0, 7, 2 ** 62 + 3):
        children = np.random.SeedSequence(seed, spawn_key=(cmp.UNIT_STREAM,)).spawn(5)
        expected = [int(c.generate_state(1, np.uint64)[0]) >> 1 for c in children]
        assert [cmp.unit_seed(seed, i) for i in range(5)] == expected
    assert len({cmp.unit_seed(1, i) for i in range(1000)}) == 1000


def test_a_work_unit_is_simulate_with_its_own_seed_so_it_can_be_rerun_alone():
    job = cmp.UnitJob(CODE, DEPTH, (BSC,), 11, FRAME_BYTES)
    unit = cmp.run_unit(job, 3, UNIT_FRAMES)
    alone = simulate(CODE, DEPTH, BSC, UNIT_FRAMES * 8 * FRAME_BYTES, cmp.unit_seed(11, 3), frame_bytes=FRAME_BYTES)
    assert counts(unit) == counts(alone)


def test_the_work_cut_covers_every_frame_once_with_a_short_last_unit():
    cut = cmp.Cut(frames=7, unit_frames=2)
    assert cut.units == 4
    assert [cut.frames_of(i) for i in range(cut.units)] == [2, 2, 2, 1]
    assert cmp.Cut(frames=8, unit_frames=2).units == 4


@pytest.mark.parametrize("channel", [BSC, BURST])
def test_campaign_counts_are_the_sums_of_its_units_and_intervals_come_from_the_merged_batches(channel):
    result = cmp.campaign(CODE, DEPTH, channel, BITS, seed=5, frame_bytes=FRAME_BYTES, unit_frames=UNIT_FRAMES)
    job = cmp.UnitJob(CODE, DEPTH, (channel,), 5, FRAME_BYTES)
    units = [cmp.run_unit(job, i, f) for i, f in enumerate([2, 2, 2, 1])]
    assert result.frames == 7 and result.seed == 5
    assert result.block_error.events == sum(u.block_error.events for u in units) > 0
    assert result.bit_error.events == sum(u.bit_error.events for u in units)
    assert result.block_error.trials == sum(u.blocks for u in units)
    merged = BatchTally()
    for u in units:
        merged.merge(u.tallies["bits"])
    # the bit error is always a batch-means rate: its interval comes from every unit's batches
    assert result.bit_error == Measured.from_tally(merged)
    if channel == BSC:  # independent codewords: the exact binomial interval on the summed counts
        assert result.block_error == Measured.of(result.block_error.events, result.block_error.trials)
    else:
        assert result.block_error.method == "batch-means"
    assert any(note.startswith("campaign: 4 of 4 work units") for note in result.notes)


def test_same_seed_gives_identical_counts_in_process_and_on_a_two_worker_local_cluster():
    from distributed import Client, LocalCluster

    local = {ch: cmp.campaign(CODE, DEPTH, ch, BITS, seed=5, frame_bytes=FRAME_BYTES, unit_frames=UNIT_FRAMES)
             for ch in (BSC, BURST)}
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None,
                      silence_logs=logging.ERROR) as cluster, \
            Client(cluster, timeout=30, set_as_default=False) as client:
        client.wait_for_workers(2, timeout=30)
        on_cluster = {ch: cmp.campaign(CODE, DEPTH, ch, BITS, seed=5, frame_bytes=FRAME_BYTES,
                                       unit_frames=UNIT_FRAMES, scheduler=cluster.scheduler_address,
                                       connect_timeout=30)
                      for ch in (BSC, BURST)}
        # both workers took part (tasks are spread; a unit's worker does not change its result)
        assert len(client.scheduler_info()["workers"]) == 2
    for ch in (BSC, BURST):
        assert counts(on_cluster[ch]) == counts(local[ch])
        assert on_cluster[ch].block_error.events > 0
    other = cmp.campaign(CODE, DEPTH, BSC, BITS, seed=6, frame_bytes=FRAME_BYTES, unit_frames=UNIT_FRAMES)
    assert counts(other) != counts(local[BSC])


def test_interrupted_campaign_carries_what_the_finished_units_measured():
    seen = []

    def progress(snapshot: cmp.CampaignProgress) -> None:
        seen.append(snapshot)
        if snapshot.units_done == 2:
            raise KeyboardInterrupt

    with pytest.raises(cmp.CampaignInterrupted) as stopped:
        cmp.campaign(CODE, DEPTH, BSC, BITS, seed=5, frame_bytes=FRAME_BYTES, unit_frames=UNIT_FRAMES,
                     progress=progress)
    partial = stopped.value.partial
    assert isinstance(stopped.value.stop, KeyboardInterrupt)
    # exactly what a campaign of the first two units measures
    two_units = cmp.campaign(CODE, DEPTH, BSC, 2 * UNIT_FRAMES * 8 * FRAME_BYTES, seed=5, frame_bytes=FRAME_BYTES,
                             unit_frames=UNIT_FRAMES)
    assert {k: v for k, v in counts(partial).items()} == counts(two_units)
    assert "interrupted: 4 of 7 frames measured" in partial.notes[-1]
    # progress showed bits done and the running block-error interval after each unit
    assert [s.payload_bits_done for s in seen] == [2 * 8 * FRAME_BYTES, 4 * 8 * FRAME_BYTES]
    assert seen[-1].payload_bits == 7 * 8 * FRAME_BYTES
    assert seen[-1].block_error == two_units.block_error


def test_a_1e12_bit_campaign_allocates_nothing_in_proportion_to_its_size():
    import tracemalloc

    def stop_after_two(snapshot: cmp.CampaignProgress) -> None:
        if snapshot.units_done == 2:
            raise KeyboardInterrupt

    cmp.campaign(CODE, DEPTH, BSC, 8 * FRAME_BYTES, seed=3, frame_bytes=FRAME_BYTES)  # imports and tables first
    tracemalloc.start()
    try:
        with pytest.raises(cmp.CampaignInterrupted) as stopped:
            # 122 million units of one frame: a list or an array per unit would take gigabytes
            cmp.campaign(CODE, DEPTH, BSC, 10 ** 12, seed=3, frame_bytes=FRAME_BYTES, unit_frames=1,
                         progress=stop_after_two)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert stopped.value.partial.frames == 2
    assert f"of {-(-10 ** 12 // (8 * FRAME_BYTES)):,} frames measured" in stopped.value.partial.notes[-1]
    # one 8-byte entry per unit would be ~1 GB; the bound leaves room for what other threads
    # (the event loop an earlier Dask test left running) allocate while this runs
    assert peak < 100 << 20, peak


def test_interrupt_before_any_unit_finishes_carries_no_partial_result(monkeypatch):
    def stop(*args):
        raise KeyboardInterrupt

    monkeypatch.setattr(cmp, "run_unit", stop)
    with pytest.raises(cmp.CampaignInterrupted) as stopped:
        cmp.campaign(CODE, DEPTH, BSC, BITS, seed=5, frame_bytes=FRAME_BYTES, unit_frames=UNIT_FRAMES)
    assert stopped.value.partial is None


def test_interrupted_sweep_keeps_the_finished_points_and_the_finished_part_of_the_current_one():
    calls = []

    def progress(snapshot: cmp.CampaignProgress) -> None:
        calls.append(snapshot)
        if len(calls) == 5:  # the first point has 4 units: stop after the first unit of the second
            raise KeyboardInterrupt

    with pytest.raises(cmp.CampaignInterrupted) as stopped:
        cmp.campaign_sweep(CODE, DEPTH, BSC, "p=1e-2..3e-2:3", BITS, seed=5, frame_bytes=FRAME_BYTES,
                           unit_frames=UNIT_FRAMES, progress=progress)
    sweep = stopped.value.partial
    assert len(sweep.points) == 2 and sweep.points[0].frames == 7 and sweep.points[1].frames == UNIT_FRAMES
    assert sweep.values == pytest.approx((1e-2, 1e-2 * 3 ** 0.5))


def test_a_scheduler_without_workers_is_a_campaign_error():
    from distributed import LocalCluster

    with LocalCluster(n_workers=0, processes=False, dashboard_address=None, silence_logs=logging.ERROR) as cluster:
        with pytest.raises(cmp.CampaignError, match="has no workers"):
            cmp.campaign(CODE, DEPTH, BSC, BITS, seed=1, frame_bytes=FRAME_BYTES, scheduler=cluster.scheduler_address,
                         connect_timeout=1)


def test_a_unit_failing_on_the_cluster_is_a_campaign_error_naming_the_unit(monkeypatch):
    from distributed import LocalCluster

    real = cmp.run_unit

    def fail_third(job, index, frames):
        if index == 2:
            raise MemoryError("worker ran out")
        return real(job, index, frames)

    monkeypatch.setattr(cmp, "run_unit", fail_third)  # threads in this process: the workers see the patch
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=None,
                      silence_logs=logging.ERROR) as cluster:
        with pytest.raises(cmp.CampaignError, match="work unit 2 failed on the cluster: MemoryError: worker ran out"):
            cmp.campaign(CODE, DEPTH, BSC, BITS, seed=1, frame_bytes=FRAME_BYTES, unit_frames=UNIT_FRAMES,
                         scheduler=cluster.scheduler_address, connect_timeout=10)


def test_cli_interrupted_campaign_prints_what_it_measured_and_exits_130(monkeypatch, bitmend_main):
    monkeypatch.setattr(cmp, "UNIT_BITS", UNIT_FRAMES * 8 * FRAME_BYTES)  # small units for the test
    real = cmp.run_unit

    def stop_at_third(job, index, frames):
        if index == 2:
            raise KeyboardInterrupt
        return real(job, index, frames)

    monkeypatch.setattr(cmp, "run_unit", stop_at_third)
    code, out, err = bitmend_main("simulate", "--code", CODE, "--depth", str(DEPTH), "--channel", BSC,
                                  "--bits", str(BITS), "--seed", "5", "--frame-bytes", str(FRAME_BYTES),
                                  "--workers", "1", "--json")
    assert code == 130
    printed = json.loads(out)
    assert printed["frames"] == 2 * UNIT_FRAMES
    assert "interrupted: 4 of 7 frames measured" in printed["notes"][-1]
    assert "interrupted" in err and "Traceback" not in err


def test_cli_workers_1_gives_the_library_campaign_result(bitmend_main):
    code, out, err = bitmend_main("simulate", "--code", CODE, "--depth", str(DEPTH), "--channel", BSC,
                                  "--bits", str(BITS), "--seed", "9", "--frame-bytes", str(FRAME_BYTES),
                                  "--workers", "1", "--json")
    assert code == 0, err
    printed = json.loads(out)
    library = cmp.campaign(CODE, DEPTH, BSC, BITS, seed=9, frame_bytes=FRAME_BYTES)
    assert printed["measured"]["block_error"]["events"] == library.block_error.events > 0
    assert printed["measured"]["bit_error"] == library.bit_error.to_dict()


def test_cli_unreachable_scheduler_is_one_line_and_exit_3(bitmend_main):
    import socket

    with socket.socket() as closed:  # a port that was just free: nothing listens there
        closed.bind(("127.0.0.1", 0))
        port = closed.getsockname()[1]
    code, out, err = bitmend_main("simulate", "--channel", BSC, "--bits", "1e5", "--scheduler", f"127.0.0.1:{port}",
                                  "--connect-timeout", "1")
    assert code == 3
    lines = err.strip().splitlines()
    assert len(lines) == 1 and f"cannot reach a Dask scheduler at tcp://127.0.0.1:{port}" in lines[0]
    assert "Traceback" not in err and out == ""


@pytest.mark.parametrize("args, says", [
    (["--scheduler", "nonsense::"], "is not a Dask scheduler address"),
    (["--scheduler", "127.0.0.1"], "is not a Dask scheduler address"),
    (["--workers", "0"], "--workers"),
    (["--workers", "2", "--scheduler", "127.0.0.1:8786"], "not both"),
])
def test_cli_bad_campaign_options_are_one_line_and_exit_2(args, says, bitmend_main):
    code, out, err = bitmend_main("simulate", "--channel", BSC, "--bits", "1e5", *args)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and says in lines[0]
    assert "Traceback" not in err


def test_cli_unreachable_scheduler_as_a_process_prints_no_traceback():
    # the same through a real process: nothing from Dask's threads or finalisers reaches stderr
    run = run_cli("simulate", "--channel", BSC, "--bits", "1e5", "--scheduler", "127.0.0.1:1",
                  "--connect-timeout", "1")
    assert run.code == 3 and len(run.err_lines) == 1 and "Traceback" not in run.err


def test_importing_bitmend_and_encoding_do_not_import_dask():
    import subprocess

    probe = ("import sys, bitmend; bitmend.encode_bytes(b'x' * 100); import bitmend.cli; "
             "print(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed')))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"
