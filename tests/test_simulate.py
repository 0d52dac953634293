"""Monte Carlo trials through the real coding path, held against closed forms."""

from __future__ import annotations

import csv
import io
import json
from math import comb

import numpy as np
import pytest

from bitmend.analysis import theory
from bitmend.channel.models import BSC
from bitmend.channel.spec import ChannelSpecError
from bitmend.codes.catalog import get_code
from bitmend.interleave import layout
from bitmend.simulate import CSV_COLUMNS, SimulationResult, format_result, format_sweep, simulate, sweep, to_csv


def bounded_distance_block_error(n: int, t: int, p: float) -> float:
    """P(more than t of n bits flip) = sum_{i>t} C(n,i) p^i (1-p)^(n-i): the block error of a
    t-error-correcting code under bounded-distance decoding on a BSC (Lin & Costello, Error
    Control Coding, ch. 10; written out here independently of bitmend.analysis)."""
    return sum(comb(n, i) * p ** i * (1 - p) ** (n - i) for i in range(t + 1, n + 1))


@pytest.mark.parametrize("code, p, bits", [
    ("hamming-7-4", 1e-2, 4_000_000),    # P_B = 2.03e-3: ~2000 failed codewords expected
    ("hamming-7-4", 3e-2, 1_000_000),    # P_B = 1.71e-2
    ("golay-23-12", 2e-2, 4_000_000),    # P_B = 1.04e-3
    ("golay-23-12", 5e-2, 1_000_000),    # P_B = 2.58e-2
])
def test_bsc_block_error_rate_interval_holds_the_closed_form(code, p, bits):
    c = get_code(code)
    result = simulate(code, 1, f"bsc:p={p}", bits, seed=2026)
    expected = bounded_distance_block_error(c.n, c.t, p)
    assert result.block_error.events > 100
    assert result.block_error.low <= expected <= result.block_error.high, (result.block_error, expected)
    assert result.theory.block_error == pytest.approx(expected, rel=1e-9)


def test_perfect_codes_never_flag_a_block_every_failure_is_a_miscorrection():
    # in a perfect code every received word lies within t of a codeword (Hamming bound met
    # with equality): bounded-distance decoding always decodes, rightly or wrongly
    for code in ("hamming-7-4", "golay-23-12"):
        result = simulate(code, 1, "bsc:p=0.05", 200_000, seed=1)
        assert result.detected.events == 0 and result.undetected.events == result.block_error.events > 0


def test_secded_detected_and_undetected_rates_hold_their_closed_forms():
    result = simulate("secded-72-64", 1, "bsc:p=2e-3", 20_000_000, seed=7)
    for name in ("detected", "undetected"):
        measured = result.measured(name)
        assert measured.events > 10
        assert measured.low <= getattr(result.theory, name) <= measured.high, (name, measured)
    # most SECDED failures are double errors, which are always flagged
    assert result.detected.events > 10 * result.undetected.events


def test_interleaving_does_not_change_block_errors_on_a_memoryless_channel():
    deep = simulate("hamming-15-11", 16, "bsc:p=1e-2", 2_000_000, seed=3)
    c = get_code("hamming-15-11")
    expected = bounded_distance_block_error(c.n, c.t, 1e-2)
    assert deep.block_error.low <= expected <= deep.block_error.high


def test_residual_bit_error_is_near_its_approximation_for_a_perfect_code():
    # leading term: two flips, the decoder adds a third; the estimate is approximate, so 15%
    result = simulate("hamming-7-4", 1, "bsc:p=1e-2", 4_000_000, seed=4)
    assert result.bit_error.rate == pytest.approx(result.theory.bit_error, rel=0.15)
    assert result.bit_error.rate < result.uncoded.bit_error / 5


def test_frame_error_of_small_frames_holds_the_any_codeword_fails_formula():
    # hamming-7-4 never flags a block, so a frame's CRC fails exactly when a codeword failed
    frame_bytes = 64
    result = simulate("hamming-7-4", 1, "bsc:p=3e-3", 4_000_000, seed=5, frame_bytes=frame_bytes)
    c = get_code("hamming-7-4")
    blocks = layout(c, 1, frame_bytes + 4).blocks
    expected = 1 - (1 - bounded_distance_block_error(7, 1, 3e-3)) ** blocks
    assert result.frame_error.events > 50
    assert result.frame_error.low <= expected <= result.frame_error.high


def test_channel_rate_measured_is_the_channel_asked_for():
    result = simulate("golay-24-12", 8, "bsc:p=1e-2", 2_000_000, seed=6)
    assert result.channel.low <= 1e-2 <= result.channel.high
    assert result.channel.trials >= result.coded_bits


def test_burst_at_depth_one_fails_where_depth_covering_the_bursts_corrects():
    # solid bursts (bad = 1) of Geometric(0.5) length, mean 2 bits: a codeword of golay-24-12
    # (t = 3) fails at depth 1 whenever a burst of 4 or more bits lands in it; at depth 16 a
    # burst must exceed 48 bits to put 4 errors in one codeword (chance 2^-48 per burst)
    channel = "burst:enter=1e-4,leave=0.5,bad=1"
    shallow = simulate("golay-24-12", 1, channel, 2_000_000, seed=8)
    deep = simulate("golay-24-12", 16, channel, 2_000_000, seed=8)
    assert shallow.block_error.events > 20 and shallow.frame_error.events > 0
    assert deep.block_error.events == 0 and deep.frame_error.events == 0 and deep.bit_error.events == 0
    assert deep.channel.events > 500


def test_burst_block_error_averages_to_the_exact_gilbert_elliott_value():
    # bursts make failures cluster, so one run's binomial interval is too narrow; the mean of
    # several seeds is held to the exact value (forward recursion over the chain) within 12%
    channel = "burst:enter=1e-3,leave=0.1,bad=0.5"
    runs = [simulate("golay-24-12", 8, channel, 1_000_000, seed=s) for s in range(8)]
    events = sum(r.block_error.events for r in runs)
    trials = sum(r.block_error.trials for r in runs)
    assert events / trials == pytest.approx(runs[0].theory.block_error, rel=0.12)
    assert any("cluster" in note and "batch means" in note for note in runs[0].notes)
    assert all(r.block_error.method == "batch-means" and r.block_error.design_effect > 1 for r in runs)


def test_byte_substitutions_at_depth_eight_average_to_the_binomial_value():
    # at depth >= 8 each bit of a codeword lies in its own byte: per codeword, independent flips
    # at the mean rate. A hit byte still touches several codewords of its group, so failures
    # cluster and one run's interval is too narrow: the mean of several seeds is held within 10%
    runs = [simulate("hamming-7-4", 8, "bytes:p=0.02", 1_000_000, seed=s) for s in range(8)]
    events = sum(r.block_error.events for r in runs)
    trials = sum(r.block_error.trials for r in runs)
    assert events / trials == pytest.approx(runs[0].theory.block_error, rel=0.10)


def test_same_seed_same_result_other_seed_other_result():
    a = simulate("hamming-7-4", 2, "bsc:p=1e-2", 300_000, seed=10)
    b = simulate("hamming-7-4", 2, "bsc:p=1e-2", 300_000, seed=10)
    c = simulate("hamming-7-4", 2, "bsc:p=1e-2", 300_000, seed=11)
    assert a == b and a.block_error != c.block_error


def test_code_and_channel_objects_are_accepted_as_well_as_names():
    by_name = simulate("hamming-7-4", 1, "bsc:p=1e-2", 200_000, seed=12)
    by_object = simulate(get_code("hamming-7-4"), 1, [BSC(p=0.01)], 200_000, seed=12)
    assert by_object.block_error == by_name.block_error


@pytest.mark.parametrize("channel", ["drop:p=0.1", "slip:p=1e-4"])
def test_drop_and_slip_are_refused_with_a_reason(channel):
    with pytest.raises(ChannelSpecError, match="inject"):
        simulate("hamming-7-4", 1, channel, 1000, seed=1)


def test_bits_are_rounded_up_to_whole_frames():
    result = simulate("hamming-7-4", 1, "bsc:p=0", 1, seed=1, frame_bytes=100)
    assert result.frames == 1 and result.payload_bits == 800 and result.block_error.events == 0
    assert result.blocks == layout(get_code("hamming-7-4"), 1, 104).blocks


def test_result_json_carries_measured_theory_and_uncoded():
    result = simulate("secded-39-32", 4, "bsc:p=1e-3", 500_000, seed=13)
    record = json.loads(result.to_json())
    assert record["code"] == "secded-39-32" and record["depth"] == 4 and record["seed"] == 13
    for name in ("bit_error", "block_error", "detected", "undetected", "frame_error"):
        m = record["measured"][name]
        assert m["low"] <= m["rate"] <= m["high"]
        assert set(m) == {"events", "trials", "rate", "low", "high", "method", "design_effect"}
        assert name in record["theory"]
    assert record["uncoded"]["bit_error"] == pytest.approx(1e-3)
    assert isinstance(result, SimulationResult)


def test_intervals_are_exact_binomial():
    result = simulate("hamming-7-4", 1, "bsc:p=1e-2", 200_000, seed=14)
    m = result.block_error
    assert (m.low, m.high) == theory.binomial_interval(m.events, m.trials)


def test_sweep_runs_each_grid_point_with_the_same_seed():
    s = sweep("hamming-7-4", 1, "bsc:p=1e-3", "p=1e-3..1e-1:3", bits=100_000, seed=15)
    assert s.parameter == "p" and len(s.points) == 3
    assert [pt.channels[0] for pt in s.points] == ["bsc:p=0.001", "bsc:p=0.01", "bsc:p=0.1"]
    assert all(pt.seed == 15 for pt in s.points)
    rates = [pt.block_error.rate for pt in s.points]
    assert rates == sorted(rates)
    alone = simulate("hamming-7-4", 1, "bsc:p=0.01", 100_000, seed=15)
    assert alone == s.points[1]
    assert "bsc:p=0.001..0.1" in "\n".join(format_sweep(s))


def test_csv_has_one_row_per_point_with_named_columns():
    s = sweep("hamming-7-4", 1, "bsc:p=1e-3", "p=1e-3..1e-2:2", bits=50_000, seed=16)
    rows = list(csv.DictReader(io.StringIO(to_csv(s.points))))
    assert len(rows) == 2 and list(rows[0]) == CSV_COLUMNS
    assert float(rows[1]["block_error_theory"]) == pytest.approx(s.points[1].theory.block_error)


def test_text_report_shows_measured_interval_theory_and_uncoded():
    text = "\n".join(format_result(simulate("golay-24-12", 8, "bsc:p=2e-2", 200_000, seed=17)))
    for words in ("residual bit error", "block error", "detected", "undetected", "frame error", "theory",
                  "uncoded", "seed 17"):
        assert words in text


@pytest.mark.parametrize("suffix, magic", [(".png", b"\x89PNG"), (".svg", b"<?xml")])
def test_plot_writes_the_chart_file(tmp_path, suffix, magic):
    pytest.importorskip("matplotlib")
    from bitmend.plot import plot_results

    s = sweep("hamming-7-4", 1, "bsc:p=1e-3", "p=1e-4..1e-1:3", bits=50_000, seed=18)
    target = tmp_path / f"chart{suffix}"
    plot_results(s, str(target))
    assert target.read_bytes().startswith(magic)


def test_plot_refuses_other_file_types(tmp_path):
    from bitmend.plot import check_plot_path

    with pytest.raises(ValueError, match=".png or .svg"):
        check_plot_path(str(tmp_path / "chart.pdf"))


def test_simulate_decodes_with_the_same_segment_functions_as_the_container(monkeypatch):
    # the trials must run the real path: count the calls into bitmend.interleave
    import bitmend.interleave as interleave
    import bitmend.simulate as sim
    import bitmend.simulate.trials as trials  # where the trials call the segment functions

    calls = {"encode": 0, "decode": 0}
    real_encode, real_decode = interleave.encode_segment, interleave.decode_segment

    def encode(*args):
        calls["encode"] += 1
        return real_encode(*args)

    def decode(*args):
        calls["decode"] += 1
        return real_decode(*args)

    monkeypatch.setattr(trials, "encode_segment", encode)
    monkeypatch.setattr(trials, "decode_segment", decode)
    assert trials.encode_segment is encode and real_encode is interleave.encode_segment
    result = sim.simulate("hamming-7-4", 1, "bsc:p=1e-3", 3 * 8 * 1000, seed=1, frame_bytes=1000)
    assert calls == {"encode": 3, "decode": 3} and result.frames == 3


def test_residual_errors_never_exceed_what_the_channel_did_without_coding_at_low_p():
    result = simulate("golay-24-12", 8, "bsc:p=1e-3", 1_000_000, seed=19)
    assert result.bit_error.events == 0 and result.uncoded.bit_error == pytest.approx(1e-3)
    assert np.isclose(result.uncoded.block_error, theory.uncoded_block_error(12, 1e-3))
