"""Planning: which codes and depths meet a residual error target at the lowest overhead,
and whether the simulator agrees."""

from __future__ import annotations

import json

import pytest

import bitmend
from bitmend.analysis import residual, theory
from bitmend.codes.catalog import code_id, get_code
from bitmend.container import format as fmt
from bitmend.planning import PlanError, _weights, make_plan, parse_overhead
from bitmend.simulate import simulate

from conftest import run_cli

BURST = "burst:enter=1e-3,leave=0.1,bad=0.5"


def test_top_choice_for_a_bsc_at_1e_3_and_a_frame_target_is_confirmed_by_simulate():
    plan = make_plan("bsc:p=1e-3", target=0.05, per="frame", frame_bytes=256)
    top = plan.top
    assert top is not None and top.meets_target and top.prediction.frame_error <= 0.05
    # an independent run of the simulator, seeded apart from the plan's own --verify
    result = simulate(get_code(top.code), top.depth, "bsc:p=1e-3", bits=1 << 22, seed=20310, frame_bytes=256)
    assert result.frame_error.contains(top.prediction.payload_frame_error)
    assert result.frame_error.high <= plan.target  # the measurement confirms the target is met
    assert result.block_error.contains(top.prediction.block_error)


def test_verify_runs_the_top_choice_through_simulate_and_reports_both():
    plan = make_plan("bsc:p=1e-3", target=0.05, per="frame", frame_bytes=256, verify=True, seed=7)
    v = plan.verification
    assert v is not None and (v.code, v.depth) == (plan.top.code, plan.top.depth)
    assert v.prediction_inside and v.verdict == "confirmed" and v.high <= 0.05
    assert v.predicted == pytest.approx(plan.top.prediction.payload_frame_error)
    text = "\n".join(plan.render())
    assert "verification: simulate" in text and "predicted" in text and "measured" in text


def test_ranked_choices_all_meet_the_target_within_the_overhead_limit_cheapest_first():
    plan = make_plan("bsc:p=1e-3", target=1e-5, per="bit", frame_bytes=1024, max_overhead="110%")
    assert plan.ranked
    overheads = [c.overhead for c in plan.ranked]
    assert overheads == sorted(overheads)
    assert all(c.rate <= 1e-5 and c.overhead <= 1.10 for c in plan.ranked)
    cheaper_misses = [c for c in plan.candidates if c.overhead < plan.ranked[0].overhead and c.within_overhead]
    assert all(not c.meets_target for c in cheaper_misses)


def test_overhead_counts_the_whole_frame_on_the_wire():
    plan = make_plan("bsc:p=1e-4", target=1e-3, per="frame", frame_bytes=300)
    for c in plan.candidates:
        header = fmt.FrameHeader(code_id(c.code), c.depth, 0, 300)
        assert c.frame_wire_bytes == header.frame_bytes == len(fmt.encode_frame(header, bytes(300)))
        assert c.overhead == pytest.approx(header.frame_bytes / 300 - 1)


def test_bsc_prediction_is_the_closed_form_of_bounded_distance_decoding():
    p = 2e-3
    plan = make_plan(f"bsc:p={p}", target=0.5, per="frame", frame_bytes=500)
    for c in plan.candidates:
        code = get_code(c.code)
        assert c.depth == 1  # independent errors: no interleaving needed
        if getattr(code, "symbol_bits", 1) != 1:  # a byte symbol is wrong unless its 8 bits all pass
            assert c.prediction.block_error == pytest.approx(
                theory.bsc_block_error(code.n, code.t, 1 - (1 - p) ** 8), rel=1e-9)
            continue
        assert c.prediction.block_error == pytest.approx(theory.bsc_block_error(code.n, code.t, p), rel=1e-9)
        assert c.prediction.payload_frame_error == pytest.approx(theory.frame_error(c.prediction.block_error,
                                                                                    c.blocks), rel=1e-9)
        weights = _weights(code)  # None where too large to list: the bit error is then a bound
        expected_bits = residual.codeword_outcome(residual.bsc_error_counts(code.n, p), code.t, weights).bit_error
        assert c.prediction.bit_error == pytest.approx(expected_bits, rel=1e-9)


def test_burst_channel_gets_the_depth_with_the_cheapest_whole_frame_that_meets_the_target():
    from bitmend.channel.spec import parse_channels
    from bitmend.planning import _channel, predict_depths

    plan = make_plan(BURST, target=1e-2, per="frame", frame_bytes=512)
    assert plan.top is not None
    golay = next(c for c in plan.candidates if c.code == "golay-23-12")
    assert golay.meets_target and golay.depth > 1
    code = get_code("golay-23-12")
    every = predict_depths(code, tuple(range(1, 256)), _channel(parse_channels(BURST)), 512)
    meeting = [(header.frame_bytes, depth) for depth, (p, header) in enumerate(every, 1) if p.frame_error <= 1e-2]
    assert (golay.frame_wire_bytes, golay.depth) == min(meeting)  # least frame, the shallower on a tie
    assert golay.frame_wire_bytes == fmt.FrameHeader(code_id("golay-23-12"), golay.depth, 0, 512).frame_bytes
    # the depth corrects every burst up to D t bits; the plan says which share of spells that is
    assert golay.burst_covered_bits == golay.depth * code.t
    assert golay.burst_quantile == pytest.approx(1 - 0.9 ** (golay.depth * code.t))
    assert "10 bits on average" in plan.depth_rule and "99% at most 44" in plan.depth_rule
    assert "least whole-frame overhead" in plan.depth_rule and "--max-depth" in plan.depth_rule
    assert "whole frame" in plan.rank_rule


def test_a_deeper_cheaper_depth_outranks_a_shallow_dearer_one_on_the_issue_burst_channel():
    # issue 13: on this channel at 1e-9, rs-255-239 meets the target at a depth whose whole
    # frame costs less than rs-204-188 at the smallest depth where that one meets it
    plan = make_plan("burst:enter=1e-4,leave=0.1,bad=0.5", target=1e-9)
    names = [c.code for c in plan.ranked]
    assert names.index("rs-255-239") < names.index("rs-204-188")
    rs239 = next(c for c in plan.ranked if c.code == "rs-255-239")
    rs204 = next(c for c in plan.ranked if c.code == "rs-204-188")
    assert rs239.overhead < rs204.overhead and rs239.depth > rs204.depth
    for c in (rs239, rs204):  # overheads from the container's own header, whatever its version
        assert c.frame_wire_bytes == fmt.FrameHeader(code_id(c.code), c.depth, 0, 16384).frame_bytes
    overheads = [c.overhead for c in plan.ranked]
    assert overheads == sorted(overheads)


def test_max_depth_bounds_every_choice_and_is_said_in_the_output():
    plan = make_plan("burst:enter=1e-4,leave=0.1,bad=0.5", target=1e-9, max_depth=8)
    assert plan.max_depth == 8 and all(c.depth <= 8 for c in plan.candidates)
    free = make_plan("burst:enter=1e-4,leave=0.1,bad=0.5", target=1e-9)
    bounded = {c.code: c for c in plan.ranked}
    for c in free.ranked:  # a bound never makes a choice cheaper
        if c.code in bounded:
            assert bounded[c.code].overhead >= c.overhead - 1e-12
    assert "depths 1..8 (--max-depth" in "\n".join(plan.render())
    with pytest.raises(PlanError, match="--max-depth"):
        make_plan("bsc:p=1e-3", target=1e-6, max_depth=0)


def test_plan_says_which_weight_distributions_were_skipped_for_cost_and_bounds_their_bit_error():
    plan = make_plan("bsc:p=1e-2", target=0.5, per="frame", frame_bytes=1024)
    text = " ".join(plan.assumptions)
    code = get_code("bch-63-45")
    assert _weights(code) is None and code.weight_distribution is not None  # listable, but past the plan's budget
    assert "skipped for cost for" in text and "bch-63-45" in text and "upper bound" in text
    c = next(c for c in plan.candidates if c.code == "bch-63-45")
    assert not c.weights_known
    exact = residual.codeword_outcome(residual.bsc_error_counts(63, 1e-2), code.t,
                                      tuple(code.weight_distribution.counts)).bit_error
    assert c.prediction.codeword_bit_error >= exact  # the bound holds against the listed distribution


def test_on_a_bsc_each_choice_carries_its_rate_gap_to_the_converse():
    from bitmend.analysis import limits

    p = 1e-3
    plan = make_plan(f"bsc:p={p}", target=1e-6, per="bit", frame_bytes=2048)
    assert "rate gap" in "\n".join(plan.render()) and "converse" in plan.limit_note
    for c in plan.candidates:
        code = get_code(c.code)
        s = getattr(code, "symbol_bits", 1)
        if not 0 < c.prediction.block_error < limits.MAX_BLOCK_ERROR:
            assert c.limit is None
            continue
        best = limits.converse_log2m(c.n * s, p, c.prediction.block_error) / (c.n * s)
        assert c.limit_gap == pytest.approx(best - c.k / c.n, abs=1e-9)
        assert c.limit_gap >= -1e-9  # no code beats the converse
    hamming = next(c for c in plan.candidates if c.code == "hamming-7-4")
    assert hamming.limit_gap == 0.0  # a perfect code meets it
    burst = make_plan(BURST, target=1e-2, per="frame", frame_bytes=512)
    assert all(c.limit is None for c in burst.candidates) and "memoryless BSC only" in burst.limit_note


def test_burst_prediction_agrees_with_a_simulation_of_the_chain():
    plan = make_plan(BURST, target=1e-2, per="frame", frame_bytes=512)
    top = next(c for c in plan.candidates if c.code == "golay-23-12")
    result = simulate(get_code(top.code), top.depth, BURST, bits=1 << 22, seed=44, frame_bytes=512)
    assert result.block_error.contains(top.prediction.block_error)
    assert result.frame_error.low <= top.prediction.payload_frame_error  # independence overstates, never under


def test_when_nothing_meets_the_target_the_plan_says_so_and_shows_how_far_off():
    plan = make_plan("bsc:p=0.02", target=1e-12, per="frame", frame_bytes=16384, max_overhead=0.5)
    assert plan.top is None and plan.closest
    assert all(c.times_target > 1 and c.overhead <= 0.5 for c in plan.closest)
    rates = [c.rate for c in plan.closest]
    assert rates == sorted(rates)
    text = "\n".join(plan.render())
    assert "nothing meets the target" in text and "x the target" in text


def test_choices_that_meet_the_target_above_the_overhead_limit_are_named_apart():
    free = make_plan("bsc:p=1e-3", target=1e-3, per="frame", frame_bytes=4096)
    limit = free.top.overhead * 0.99  # just below the cheapest choice
    plan = make_plan("bsc:p=1e-3", target=1e-3, per="frame", frame_bytes=4096, max_overhead=limit)
    assert plan.top is None
    assert plan.over_budget and all(c.meets_target and c.overhead > limit for c in plan.over_budget)
    assert plan.over_budget[0].code == free.top.code
    assert "cost more than the overhead limit" in "\n".join(plan.render())


def test_a_custom_code_is_ranked_with_the_catalog_and_pays_for_its_definition_blocks(tmp_path):
    path = tmp_path / "h74.txt"
    path.write_text("parity-check\n" + "\n".join("".join(map(str, r)) for r in get_code("hamming-7-4").H))
    custom = bitmend.load_code_file(path)
    plan = make_plan("bsc:p=1e-4", target=1e-3, per="frame", frame_bytes=200, extra_codes=[custom])
    mine = next(c for c in plan.candidates if c.custom)
    catalog = next(c for c in plan.candidates if c.code == "hamming-7-4")
    assert mine.prediction.block_error == pytest.approx(catalog.prediction.block_error)
    header = fmt.FrameHeader.for_defined_code(custom, 1, 0, 200)
    assert mine.frame_wire_bytes == header.frame_bytes == catalog.frame_wire_bytes + 2 * header.definition_bytes


@pytest.mark.parametrize("text, value", [("25%", 0.25), ("0.25", 0.25), (None, None), ("150%", 1.5)])
def test_max_overhead_reads_a_fraction_or_a_percentage(text, value):
    assert parse_overhead(text) == value


@pytest.mark.parametrize("kwargs, words", [
    ({"target": 0.0}, "--target"),
    ({"target": 1.5}, "--target"),
    ({"target": 1e-6, "per": "packet"}, "--per"),
    ({"target": 1e-6, "max_overhead": "lots"}, "--max-overhead"),
    ({"target": 1e-6, "frame_bytes": 0}, "--frame-bytes"),
])
def test_plan_refuses_arguments_that_make_no_plan(kwargs, words):
    with pytest.raises(PlanError, match=words):
        make_plan("bsc:p=1e-3", **kwargs)


def test_frame_drops_set_a_floor_no_code_can_lower_and_repair_frames_lift_it():
    plan = make_plan(["bsc:p=1e-5", "drop:p=0.01"], target=1e-3, per="frame", frame_bytes=1000)
    # inside a frame no code helps: every prediction before repair stays above the drop rate
    assert all(c.prediction.frame_error >= 0.01 for c in plan.candidates)
    assert any("drop" in a for a in plan.assumptions)
    # repair frames across frames meet the target, and every choice needs them (tests/test_plan_repair.py)
    assert plan.top is not None and all(c.repair is not None for c in plan.ranked)


def test_plan_cli_json_and_text():
    run = run_cli("plan", "--channel", "bsc:p=1e-3", "--target", "1e-3", "--per", "frame", "--frame-bytes",
                  "2048", "--json")
    assert run.code == 0, run.err
    plan = json.loads(run.out)
    assert plan["met"] and plan["ranked"][0]["meets_target"]
    assert {"formulas", "assumptions", "depth_rule", "rank_rule", "max_depth", "limit_note"} <= set(plan)
    assert plan["ranked"][0]["limit"]["rate_converse"] >= plan["ranked"][0]["limit"]["rate"] - 1e-9
    assert plan["ranked"][0]["predicted"]["frame_error"] <= 1e-3
    text = run_cli("plan", "--channel", BURST, "--target", "1e-6")
    assert text.code == 0, text.err
    out = text.out.decode()
    assert "formulas:" in out and "assumptions:" in out and "bad spells" in out


@pytest.mark.parametrize("args", [
    ("plan", "--channel", "bsc:p=1e-3", "--target", "2"),
    ("plan", "--channel", "bsc:q=1e-3", "--target", "1e-6"),
    ("plan", "--channel", "bsc:p=1e-3", "--target", "1e-6", "--max-overhead", "cheap"),
    ("plan", "--channel", "bsc:p=1e-3"),
    ("plan", "--channel", "bsc:p=1e-3", "--target", "1e-6", "--max-depth", "256"),
])
def test_plan_usage_errors_exit_2_with_one_line(args):
    run = run_cli(*args)
    assert run.code == 2 and len(run.err_lines) == 1 and run.err_lines[0].startswith("bitmend: ")
    assert "Traceback" not in run.err


def test_byte_symbol_codes_are_planned_and_their_block_error_agrees_with_simulate():
    names = [c.code for c in make_plan(BURST, target=0.5, per="frame", frame_bytes=1024).candidates]
    symbol_codes = [n for n in names if getattr(get_code(n), "symbol_bits", 1) == 8]
    if not symbol_codes:
        pytest.skip("no code over bytes in the catalog")
    code = get_code(min(symbol_codes, key=lambda n: get_code(n).n))  # the shortest: most blocks per run
    from bitmend.channel.spec import parse_channels
    from bitmend.planning import _channel, predict
    spec = "burst:enter=2e-3,leave=0.05,bad=0.5"
    predicted = predict(code, 2, _channel(parse_channels(spec)), 1024)[0]
    result = simulate(code, 2, spec, bits=1 << 21, seed=11, frame_bytes=1024)
    assert result.block_error.contains(predicted.block_error)
    assert predicted.codeword_bit_error >= result.bit_error.low  # an upper bound, never below the measure
