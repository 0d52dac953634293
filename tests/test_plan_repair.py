"""Planning for lost frames: the repair ratio R/K chosen for a drop channel, its formula
against a brute-force count, and against the real encoder, fault injector and decoder."""

from __future__ import annotations

import itertools
import json
import math
import random

import numpy as np
import pytest

import bitmend
from bitmend.analysis import repair_groups
from bitmend.analysis.intervals import clopper_pearson
from bitmend.channel.spec import parse_channels
from bitmend.codes.catalog import get_code
from bitmend.container.repair import SYMBOL_OVERHEAD
from bitmend.inject import inject_bytes
from bitmend.planning import _channel, make_plan, predict

from conftest import run_cli


def _brute_residual(k: int, r: int, q: float, q_r: float) -> float:
    """E[data frames lost for good] / K over every one of the 2^(K+R) patterns of missing
    frames: a group with more than R missing loses all its missing data frames."""
    total = 0.0
    for pattern in itertools.product((0, 1), repeat=k + r):
        data, repair = pattern[:k], pattern[k:]
        weight = math.prod(q if m else 1 - q for m in data) * math.prod(q_r if m else 1 - q_r for m in repair)
        if sum(pattern) > r:
            total += weight * sum(data)
    return total / k


@pytest.mark.parametrize("k, r, q, q_r", [(1, 1, 0.3, 0.3), (4, 2, 0.1, 0.1), (5, 3, 0.2, 0.35), (7, 1, 0.05, 0.02),
                                          (3, 4, 0.5, 0.4)])
def test_residual_frame_loss_equals_a_count_over_every_loss_pattern(k, r, q, q_r):
    assert repair_groups.residual_loss(k, r, q, q_r) == pytest.approx(_brute_residual(k, r, q, q_r), rel=1e-12)
    # the distribution of frames lost per group has that mean, and its P[L > 0] is P[M > R]
    pmf = repair_groups.lost_per_group_pmf(k, r, q, q_r)
    assert pmf.sum() == pytest.approx(1.0) and (pmf >= 0).all()
    assert float(pmf @ np.arange(k + 1)) / k == pytest.approx(_brute_residual(k, r, q, q_r), rel=1e-12)
    assert 1 - pmf[0] == pytest.approx(repair_groups.group_failure(k, r, q, q_r), rel=1e-12)


@pytest.mark.parametrize("k, r, q", [(32, 4, 0.02), (28, 6, 0.02), (8, 2, 0.1), (1, 32, 0.5), (16, 1, 1e-4)])
def test_the_sum_over_groups_and_the_tail_of_the_other_frames_are_the_same_number(k, r, q):
    by_sum = repair_groups.residual_loss_sum(k, r, q)
    tail = q * sum(math.comb(k + r - 1, j) * q ** j * (1 - q) ** (k + r - 1 - j) for j in range(r, k + r))
    assert repair_groups.residual_loss(k, r, q) == pytest.approx(by_sum, rel=1e-10)
    assert by_sum == pytest.approx(tail, rel=1e-10)


def test_the_table_of_every_ratio_agrees_with_one_ratio_at_a_time_and_tiny_rates_keep_their_precision():
    q = np.array([1e-6, 0.02, 0.3])
    q_r = q * 1.1
    table = repair_groups.not_rebuilt_table(q, q_r)
    for i, k, r in [(0, 32, 1), (1, 28, 6), (2, 5, 9), (1, 1, 0), (2, 32, 32)]:
        assert q[i] * table[i, k - 1, r] == pytest.approx(repair_groups.residual_loss(k, r, q[i], q_r[i]), rel=1e-12)
    # at q = 1e-6 and R = 1 the rate is q (31 q + q_r) to first order: ~3.2e-11, not lost to rounding
    assert q[0] * table[0, 31, 1] == pytest.approx(1e-6 * (31e-6 + 1.1e-6), rel=1e-4)
    assert (table[..., 0] == 1.0).all()  # no repair: a missing frame stays missing


def test_no_drop_channel_no_repair_proposed_and_the_plan_is_unchanged():
    plan = make_plan("bsc:p=1e-3", target=1e-6, per="frame", frame_bytes=1024, max_depth=4)
    assert plan.repair_rule == "" and all(c.repair is None and c.after_repair is None for c in plan.candidates)
    assert all(c.overhead == pytest.approx(c.frame_wire_bytes / 1024 - 1) for c in plan.candidates)
    text = "\n".join(plan.render())
    assert "--repair" not in text and "repair R/K" not in text


def test_a_drop_channel_gets_the_cheapest_repair_ratio_that_meets_the_frame_target():
    target = 1e-6
    plan = make_plan("drop:p=0.02", target=target, per="frame", frame_bytes=1024, max_depth=2)
    top = plan.top
    assert top is not None and top.repair is not None
    rc = top.repair
    # q = 1 - (1 - p_drop)(1 - P_fail), no bit errors here: q is the drop rate itself
    assert rc.frame_loss == pytest.approx(0.02, rel=1e-9)
    assert top.rate == pytest.approx(repair_groups.residual_loss(rc.k, rc.r, 0.02), rel=1e-9) and top.rate <= target
    # wire bytes from the real encoder: a full group of K data frames and its R repair frames
    blob = bitmend.encode_bytes(bytes(1024 * rc.k), code=top.code, depth=top.depth, frame_bytes=1024,
                                repair=rc.spec, stream_id=1)
    assert len(blob) == rc.k * top.frame_wire_bytes + rc.r * rc.repair_frame_bytes
    assert top.overhead == pytest.approx(len(blob) / (1024 * rc.k) - 1)
    # no other ratio meets the target for less (same code and depth, same frame sizes)
    for k in range(1, 33):
        for r in range(0, 33):
            cost = (k * top.frame_wire_bytes + r * rc.repair_frame_bytes) / k
            if cost < (rc.k * top.frame_wire_bytes + rc.r * rc.repair_frame_bytes) / rc.k - 1e-9:
                assert repair_groups.residual_loss(k, r, 0.02) > target
    # the plan says how: the formula, the combination, the independence, the command
    text = "\n".join(plan.render())
    assert f"--repair {rc.spec}" in text and "q P[Binomial(K+R-1, q) >= R]" in text
    assert "q = 1 - (1 - p_drop)(1 - P_fail)" in text and "independent from frame to frame" in text


def test_chained_with_bit_errors_the_frame_failures_join_the_drops():
    channels = ["bsc:p=1e-3", "drop:p=0.02"]
    plan = make_plan(channels, target=1e-6, per="frame", frame_bytes=2048, max_depth=2)
    for c in plan.ranked:
        code = get_code(c.code)
        alone = predict(code, c.depth, _channel(parse_channels(["bsc:p=1e-3"])), 2048)[0]
        fail = alone.frame_error  # the frame failure the plan computes for the bit-error channel
        q = 1 - (1 - 0.02) * (1 - fail)
        rc = c.repair
        assert rc is not None and rc.frame_loss == pytest.approx(q, rel=1e-9)
        repair_alone = predict(code, c.depth, _channel(parse_channels(["bsc:p=1e-3"])), 2048 + SYMBOL_OVERHEAD)[0]
        q_r = 1 - (1 - 0.02) * (1 - repair_alone.frame_error)
        assert c.rate == pytest.approx(repair_groups.residual_loss(rc.k, rc.r, q, q_r), rel=1e-9) and c.rate <= 1e-6


def test_the_bit_target_counts_the_bits_of_frames_never_delivered():
    plan = make_plan(["bsc:p=1e-3", "drop:p=0.02"], target=1e-6, per="bit", frame_bytes=2048, max_depth=2)
    top = plan.top
    assert top is not None and top.repair is not None
    rc, p = top.repair, top.prediction
    lost = 1 - (1 - 0.02) * (1 - p.header_loss)
    bad = lost + (1 - lost) * p.bit_error
    assert rc.bad_bits == pytest.approx(bad, rel=1e-9) and bad >= 0.02
    assert top.rate == pytest.approx(bad * rc.not_rebuilt, rel=1e-9) and top.rate <= 1e-6
    assert any("never delivered" in a for a in plan.assumptions)


def test_without_a_feasible_ratio_the_plan_says_so():
    plan = make_plan("drop:p=0.5", target=1e-12, per="frame", frame_bytes=512, max_depth=1)
    assert plan.top is None
    best = plan.closest[0]
    assert best.repair is not None and best.rate == pytest.approx(0.5 ** 33, rel=1e-6)  # 32 repair frames for 1
    assert "no repair ratio R/K" in "\n".join(plan.render())


def test_frames_too_large_for_a_repair_symbol_get_no_repair_and_the_plan_says_why():
    from bitmend.container import format as fmt

    plan = make_plan("drop:p=0.01", target=1e-3, per="frame", frame_bytes=fmt.MAX_PAYLOAD_BYTES, max_depth=1)
    assert plan.top is None and all(c.repair is None for c in plan.candidates)
    assert f"--frame-bytes {fmt.MAX_PAYLOAD_BYTES - SYMBOL_OVERHEAD} or less" in "\n".join(plan.render())


def test_plan_cli_json_gives_r_and_k():
    run = run_cli("plan", "--channel", "drop:p=0.02", "--target", "1e-6", "--per", "frame", "--frame-bytes", "1024",
                  "--max-depth", "2", "--json")
    assert run.code == 0, run.err
    out = json.loads(run.out)
    repair = out["ranked"][0]["repair"]
    assert 1 <= repair["R"] <= 32 and 1 <= repair["K"] <= 32 and repair["spec"] == f"{repair['R']}/{repair['K']}"
    assert out["ranked"][0]["rate"] <= 1e-6 and out["repair_rule"]


def _sum_of_groups_pmf(pmf: np.ndarray, groups: int) -> np.ndarray:
    """The exact distribution of data frames lost over `groups` independent groups."""
    total = np.array([1.0])
    for _ in range(groups):
        total = np.convolve(total, pmf)
    return total


def test_the_chosen_ratio_through_encode_inject_decode_loses_what_the_plan_predicts():
    p_drop, frame_bytes = 0.1, 32
    plan = make_plan(f"drop:p={p_drop}", target=2e-2, per="frame", frame_bytes=frame_bytes, max_depth=2)
    top = plan.top
    rc = top.repair
    assert rc is not None
    groups = 2000 // rc.k  # about 70 groups of 27 + 5 frames: a few seconds through the real codec
    frames = groups * rc.k  # whole groups only: the last group is full too
    data = random.Random(5).randbytes(frame_bytes * frames)
    blob = bitmend.encode_bytes(data, code=top.code, depth=top.depth, frame_bytes=frame_bytes, repair=rc.spec)
    damaged, ledger = inject_bytes(blob, [f"drop:p={p_drop}"], seed=2026)
    decoded = bitmend.decode_bytes(damaged, on_error="drop")
    delivered = {f.seq for f in decoded.report.frames if f.status in ("clean", "corrected", "rebuilt")}
    lost = [seq for seq in range(frames) if seq not in delivered]
    failed_groups = len({seq // rc.k for seq in lost})
    # the channel itself: frames dropped at p (data and repair alike)
    stage = ledger.stages[0]
    low, high = clopper_pearson(stage["frames_dropped"], stage["frames_seen"], 0.99)
    assert low <= p_drop <= high
    # groups that lost data for good: independent trials, binomial at P[M > R]
    low, high = clopper_pearson(failed_groups, groups, 0.99)
    assert low <= rc.group_failure <= high, (failed_groups, groups, rc.group_failure)
    # frames lost for good: inside the central 99% of their exact predicted distribution
    total = np.cumsum(_sum_of_groups_pmf(repair_groups.lost_per_group_pmf(rc.k, rc.r, p_drop), groups))
    lo_count, hi_count = int(np.searchsorted(total, 0.005)), int(np.searchsorted(total, 0.995))
    assert lo_count <= len(lost) <= hi_count, (len(lost), lo_count, hi_count, top.rate * frames)
    assert top.rate == pytest.approx(rc.frame_error) and lo_count <= top.rate * frames <= hi_count
    # the delivered frames, rebuilt ones included, are exactly the bytes sent; repair saved most drops
    expected = b"".join(data[seq * frame_bytes:(seq + 1) * frame_bytes] for seq in sorted(delivered))
    assert decoded.data == expected
    assert decoded.report.summary.rebuilt > len(lost)
    assert len(lost) < 0.5 * stage["frames_dropped"]


def test_plan_verify_runs_the_repair_ratio_through_inject_with_the_bit_errors_and_agrees():
    from bitmend.planning import verify_repair

    channels = ["bsc:p=2e-3", "drop:p=0.05"]
    plan = make_plan(channels, target=1e-2, per="frame", frame_bytes=32, max_depth=2)
    top = plan.top
    assert top is not None and top.repair is not None
    assert top.prediction.payload_frame_error > 1e-3  # the bit errors add to the drops here
    check = verify_repair(plan, top, seed=3, frames=800)
    assert check.frames == check.groups * top.repair.k and check.frames >= 800 - top.repair.k
    # before repair: drops and decoding failures together, at q = 1 - (1 - p_drop)(1 - P_fail)
    assert check.missing_low <= top.repair.frame_loss <= check.missing_high
    assert check.missing > 0.05 * check.frames * 0.5
    assert check.group_low <= top.repair.group_failure <= check.group_high
    assert check.lost_low <= check.lost <= check.lost_high and check.exact and check.agrees
    text = "\n".join(_render_check(plan, check))
    assert f"--repair {top.repair.spec}" in text and "agrees with the prediction" in text


def _render_check(plan, check):
    from bitmend.planning import Plan

    return Plan(**{**plan.__dict__, "repair_verification": check}).render()
