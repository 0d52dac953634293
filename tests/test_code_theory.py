"""The one theory module (bitmend.code_theory): what codes show, simulate and plan expect of a
code come from the same place and agree, and the words they print read right."""

from __future__ import annotations

from dataclasses import replace

import pytest

from bitmend.analysis import residual, theory
from bitmend.channel.spec import parse_channels
from bitmend.code_theory import (block_error_on_bsc, code_weights, codewords_per_frame, expected_rates,
                                 uncoded_rates)
from bitmend.codes.catalog import get_code
from bitmend.interleave import layout
from bitmend.wording import counted


def test_expected_rates_of_a_binary_code_on_a_bsc_are_the_closed_forms_of_bounded_distance_decoding():
    code, p = get_code("golay-24-12"), 1e-2
    got = expected_rates(code, 8, parse_channels("bsc:p=1e-2"), frame_bytes=1000)
    weights = tuple(code.weight_distribution.counts)
    split = theory.block_outcomes(24, 3, weights, p)
    # the chain's flip rate (1 - (1 - 2p)) / 2 is p to the last bits
    assert got.block_error == pytest.approx(theory.bsc_block_error(24, 3, p), rel=1e-12)
    assert got.detected == pytest.approx(split.detected, rel=1e-9)
    assert got.undetected == pytest.approx(split.undetected, rel=1e-9)
    blocks = layout(code, 8, 1000 + 4).blocks
    assert codewords_per_frame(code, 8, 1000) == blocks
    assert got.frame_error == pytest.approx(1 - (1 - got.block_error) ** blocks, rel=1e-12)
    bits = residual.codeword_outcome(residual.bsc_error_counts(24, p), 3, weights).bit_error
    assert got.bit_error == pytest.approx(bits, rel=1e-12)


def test_a_byte_code_on_a_bsc_counts_symbols_wrong_when_any_of_their_eight_bits_flips():
    code, p = get_code("rs-255-223"), 1e-3
    got = expected_rates(code, 1, parse_channels(f"bsc:p={p}"))
    q = 1 - (1 - p) ** 8
    assert got.block_error == pytest.approx(theory.bsc_block_error(255, 16, q), rel=1e-9)
    assert block_error_on_bsc(code, p) == pytest.approx(got.block_error, rel=1e-12)
    assert got.detected is None and "byte symbols" in got.basis


def test_uncoded_line_is_a_block_of_the_codes_message_bits_hit_at_least_once():
    got = uncoded_rates(get_code("rs-255-223"), parse_channels("bsc:p=1e-4"), frame_bytes=100)
    assert got.bit_error == pytest.approx(1e-4)
    assert got.block_error == pytest.approx(1 - (1 - 1e-4) ** (223 * 8), rel=1e-9)
    assert got.frame_error == pytest.approx(1 - (1 - 1e-4) ** 800, rel=1e-9)


def test_code_weights_are_the_codes_own_within_a_budget_and_none_beyond_it():
    code = get_code("bch-63-45")  # 2^18 dual words of 63 bits: listable, but not cheaply
    assert code_weights(code) == tuple(code.weight_distribution.counts)
    assert code_weights(code, max_work=(1 << 18) * 63 - 1) is None
    assert code_weights(code, max_work=(1 << 18) * 63) is not None
    assert code_weights(get_code("bch-255-223")) is None  # neither the code nor its dual can be listed


def test_codes_show_simulate_and_plan_expect_the_same_block_error_of_a_code_on_a_bsc():
    from bitmend.planning import make_plan
    from bitmend.properties import code_profile

    p = 1e-3
    shown = next(point for point in code_profile("hamming-15-11", grid=(p,)).bsc)
    simulated = expected_rates(get_code("hamming-15-11"), 1, parse_channels(f"bsc:p={p}"))
    planned = next(c for c in make_plan(f"bsc:p={p}", target=0.5, per="frame", frame_bytes=200).candidates
                   if c.code == "hamming-15-11")
    assert simulated.block_error == pytest.approx(shown.block_error, rel=1e-12)
    assert planned.prediction.block_error == pytest.approx(shown.block_error, rel=1e-12)


def test_counted_words_agree_with_their_number():
    assert counted(1, "frame") == "1 frame"
    assert counted(0, "frame") == "0 frames"
    assert counted(12345, "codeword", spec=",") == "12,345 codewords"


def test_codes_show_says_one_error_in_the_singular():
    from bitmend.properties import code_profile

    first = code_profile("hamming-7-4").render()[0]
    assert "up to 1 error while correcting" in first
    assert "up to 2 errors while correcting" in code_profile("secded-8-4").render()[0]


def test_simulate_report_names_the_detected_row_by_what_it_means_not_by_a_status_value():
    from bitmend.simulate import format_result, simulate

    result = simulate("hamming-7-4", 1, "bsc:p=1e-2", 8 * 200, seed=3, frame_bytes=200)
    table = "\n".join(format_result(result))
    assert "255" not in table.replace(f"{result.blocks:,}", "")
    assert "detected (uncorrectable)" in table
    assert "in 1 frame of 200 bytes" in table  # one frame, in the singular
    assert "group of 1 codeword," in " ".join(result.notes)


def test_plan_with_one_choice_says_it_meets_the_target():
    from bitmend.planning import make_plan

    plan = make_plan("bsc:p=1e-3", target=1e-6, frame_bytes=500)
    one = replace(plan, ranked=plan.ranked[:1])
    assert "1 choice meets the target" in "\n".join(one.render())
    assert f"{len(plan.ranked)} choices meet the target" in "\n".join(plan.render())
