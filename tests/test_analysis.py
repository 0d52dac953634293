"""Code analysis: bounds, weight distributions against the dual, error probabilities on a
BSC and on burst channels, and what `codes show` reports."""

from __future__ import annotations

import itertools
import json
from math import comb

import numpy as np
import pytest

from bitmend.analysis import residual, theory
from bitmend.analysis.bounds import code_bounds, hamming_bound_t, singleton_bound, sphere_volume
from bitmend.codes.catalog import code_names, get_code
from bitmend.properties import code_profile

from conftest import SECDED_CODES, run_cli


def _binary_codes(max_dual_work: int = 1 << 22):
    """Catalog codes with bit-level matrices whose dual is small enough to list here."""
    out = []
    for name in code_names():
        code = get_code(name)
        if getattr(code, "symbol_bits", 1) != 1 or code.n - code.k > 20:
            continue
        if code.k * (1 << (code.n - code.k)) > max_dual_work:
            continue
        out.append(name)
    return out


BINARY_CODES = _binary_codes()


def _is_known_perfect(n: int, k: int, d: int) -> bool:
    """The perfect binary codes are the odd-length repetition codes, the Hamming codes and
    the (23, 12) Golay code (Tietavainen and van Lint; MacWilliams & Sloane ch. 6)."""
    m = (n + 1).bit_length() - 1
    hamming = (1 << m) - 1 == n and k == n - m and d == 3
    repetition = k == 1 and d == n and n % 2 == 1
    return hamming or repetition or (n, k, d) == (23, 12, 7)


# ---- bounds ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", BINARY_CODES)
def test_a_catalog_code_is_perfect_exactly_when_it_is_a_known_perfect_code(name):
    code = get_code(name)
    d = code_profile(code).d
    bounds = code_bounds(code.n, code.k, d)
    assert bounds.perfect == _is_known_perfect(code.n, code.k, d)
    if bounds.perfect:  # the Hamming bound met with equality: V(n, t) = 2^(n-k)
        assert sum(comb(code.n, i) for i in range((d - 1) // 2 + 1)) == 2 ** (code.n - code.k)


@pytest.mark.parametrize("name", ["rep-3", "hamming-7-4", "hamming-15-11", "hamming-31-26", "hamming-63-57",
                                  "golay-23-12"])
def test_every_perfect_catalog_code_meets_the_hamming_bound_with_equality(name):
    code = get_code(name)
    bounds = code_bounds(code.n, code.k, code.d)
    assert bounds.perfect and bounds.sphere_volume == bounds.cosets
    assert bounds.hamming_t == code.t  # nothing of this length and dimension corrects more


@pytest.mark.parametrize("name", [*SECDED_CODES, "golay-24-12"])
def test_secded_and_extended_golay_do_not_meet_the_hamming_bound(name):
    code = get_code(name)
    bounds = code_bounds(code.n, code.k, code.d)
    assert not bounds.perfect
    assert bounds.sphere_volume < bounds.cosets


def test_hamming_bound_and_singleton_bound_values():
    # V(24, 3) = 1 + 24 + 276 + 2024 = 2325 <= 4096 < V(24, 4) = 12951 (binomial sums)
    assert sphere_volume(24, 3) == 2325 and sphere_volume(24, 4) == 12951
    assert hamming_bound_t(24, 12) == 3
    assert hamming_bound_t(23, 12) == 3
    assert singleton_bound(7, 4) == 4 and singleton_bound(255, 223) == 33
    # Reed-Solomon codes are MDS: d = n - k + 1 meets the Singleton bound (q = 256)
    assert code_bounds(255, 223, 33, q=256).meets_singleton


def test_bounds_refuse_a_distance_no_code_can_have():
    with pytest.raises(ValueError, match="Singleton"):
        code_bounds(7, 4, 5)
    with pytest.raises(ValueError, match="V\\(n, t\\)"):
        code_bounds(8, 4, 5)  # Singleton allows 5, but V(8, 2) = 37 > 16


# ---- weight distributions and the dual -------------------------------------------------------------

def _enumerate_weights(generator_rows: np.ndarray) -> list[int]:
    """Weight distribution of the code spanned by the rows, by listing every combination
    (independent of bitmend.analysis.weights)."""
    rows, n = generator_rows.shape
    basis = generator_rows.astype(np.int64)
    counts = np.zeros(n + 1, dtype=np.int64)
    for start in range(0, 1 << rows, 1 << 16):
        index = np.arange(start, min(1 << rows, start + (1 << 16)))
        combination = (index[:, None] >> np.arange(rows)) & 1  # which rows are summed
        words = (combination @ basis) % 2
        counts += np.bincount(words.sum(axis=1), minlength=n + 1)
    return [int(c) for c in counts]


def _krawtchouk(n: int, j: int, i: int) -> int:
    return sum((-1) ** s * comb(i, s) * comb(n - i, j - s) for s in range(j + 1))


def _transform(distribution: list[int], n: int) -> list[int]:
    """MacWilliams identity: the dual's distribution from a code's (MacWilliams & Sloane
    ch. 5, Theorem 1): B_j = |C|^-1 sum_i A_i K_j(i)."""
    size = sum(distribution)
    out = []
    for j in range(n + 1):
        total = sum(a * _krawtchouk(n, j, i) for i, a in enumerate(distribution) if a)
        assert total % size == 0
        out.append(total // size)
    return out


@pytest.mark.parametrize("name", BINARY_CODES)
def test_weight_distribution_agrees_with_the_dual_through_the_macwilliams_identity(name):
    code = get_code(name)
    dual = _enumerate_weights(np.asarray(code.H, dtype=np.uint8))  # the dual code is spanned by H
    assert sum(dual) == 2 ** (code.n - code.k)
    counts = list(code.weight_distribution.counts)
    assert sum(counts) == 2 ** code.k
    # the code's distribution from its dual's, and the dual's back from the code's
    assert _transform(dual, code.n) == counts
    assert _transform(counts, code.n) == dual


@pytest.mark.parametrize("name, expected", [
    # MacWilliams & Sloane ch. 1 and ch. 2: Hamming (7,4) 1 + 7z^3 + 7z^4 + z^7; Golay (23,12)
    # and (24,12) distributions
    ("hamming-7-4", {0: 1, 3: 7, 4: 7, 7: 1}),
    ("golay-23-12", {0: 1, 7: 253, 8: 506, 11: 1288, 12: 1288, 15: 506, 16: 253, 23: 1}),
    ("golay-24-12", {0: 1, 8: 759, 12: 2576, 16: 759, 24: 1}),
])
def test_published_weight_distributions_come_out_of_an_independent_enumeration(name, expected):
    code = get_code(name)
    listed = _enumerate_weights(np.asarray(code.G, dtype=np.uint8))
    assert {w: a for w, a in enumerate(listed) if a} == expected


# ---- error probabilities on a BSC ------------------------------------------------------------------

@pytest.mark.parametrize("p", [1e-6, 1e-3, 0.01, 0.2, 0.5])
def test_undetected_error_of_hamming_7_4_is_the_closed_form(p):
    # P_ud = 7 p^3 (1-p)^4 + 7 p^4 (1-p)^3 + p^7 from A = 1 + 7z^3 + 7z^4 + z^7
    # (MacWilliams & Sloane ch. 1; Lin & Costello ch. 3)
    expected = 7 * p ** 3 * (1 - p) ** 4 + 7 * p ** 4 * (1 - p) ** 3 + p ** 7
    weights = get_code("hamming-7-4").weight_distribution.counts
    assert theory.undetected_error(weights, p) == pytest.approx(expected, rel=1e-12)
    profile = code_profile("hamming-7-4", grid=(p,))
    assert profile.bsc[0].undetected == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("name", ["hamming-7-4", "secded-8-4", "hamming-15-11", "secded-16-11"])
def test_miscorrecting_pattern_counts_match_the_decoder_on_every_error_pattern(name):
    code = get_code(name)
    n = code.n
    patterns = np.array(list(itertools.product((0, 1), repeat=n)), dtype=np.uint8)  # sent: the zero word
    messages, status = code.decode(patterns)
    wrong = (status != 255) & messages.any(axis=1)
    weights = patterns.sum(axis=1)
    by_weight = np.bincount(weights[wrong], minlength=n + 1)
    assert list(by_weight) == residual.miscorrecting_patterns(code.weight_distribution.counts, code.t)


@pytest.mark.parametrize("name", ["hamming-7-4", "secded-39-32", "golay-23-12", "golay-24-12"])
@pytest.mark.parametrize("p", [1e-4, 1e-2, 0.1])
def test_codeword_outcome_on_a_bsc_agrees_with_the_closed_forms(name, p):
    code = get_code(name)
    weights = code.weight_distribution.counts
    outcome = residual.codeword_outcome(residual.bsc_error_counts(code.n, p), code.t, weights)
    assert outcome.block_error == pytest.approx(theory.bsc_block_error(code.n, code.t, p), rel=1e-9)
    assert outcome.miscorrected == pytest.approx(theory.miscorrection(weights, code.t, p), rel=1e-9)
    assert outcome.detected + outcome.miscorrected == pytest.approx(outcome.block_error, rel=1e-9)


def test_bit_error_of_a_perfect_code_is_exact_for_t_plus_one_errors():
    # Hamming (7,4): any 2 errors are miscorrected onto a weight-3 codeword, 3 wrong bits of 7
    p = 1e-5
    outcome = residual.codeword_outcome(residual.bsc_error_counts(7, p), 1, get_code("hamming-7-4")
                                        .weight_distribution.counts)
    two = comb(7, 2) * p ** 2 * (1 - p) ** 5
    assert outcome.bit_error == pytest.approx(3 / 7 * two, rel=1e-3)


# ---- burst and byte channels --------------------------------------------------------------------

def _brute_force_gilbert_elliott(n, depth, enter, leave, bad, good):
    """Error count distribution by summing over every state sequence of the n sampled bits."""
    step = np.linalg.matrix_power(np.array([[1 - enter, enter], [leave, 1 - leave]]), depth)
    pi = np.array([leave, enter]) / (enter + leave)
    flip = (good, bad)
    out = np.zeros(n + 1)
    for states in itertools.product((0, 1), repeat=n):
        weight = pi[states[0]]
        for a, b in zip(states, states[1:]):
            weight *= step[a, b]
        dist = np.array([1.0])
        for s in states:
            dist = np.convolve(dist, [1 - flip[s], flip[s]])
        out += weight * dist
    return out


@pytest.mark.parametrize("depth", [1, 3, 20])
def test_gilbert_elliott_error_counts_equal_a_brute_force_sum_over_state_sequences(depth):
    args = (7, depth, 0.05, 0.2, 0.6, 0.01)
    assert residual.gilbert_elliott_error_counts(*args) == pytest.approx(_brute_force_gilbert_elliott(*args),
                                                                         rel=1e-12, abs=1e-18)


def _bitwise_symbol_counts(n, s, depth, enter, leave, bad, good):
    """Wrong symbols of a codeword whose symbol j covers bits j*depth*s .. j*depth*s + s-1,
    by a recursion over every channel bit (state, wrong symbols so far, current symbol hit)."""
    step = np.array([[1 - enter, enter], [leave, 1 - leave]])
    flip = (good, bad)
    dist = {(state, 0, 0): p for state, p in enumerate(np.array([leave, enter]) / (enter + leave))}
    last = (n - 1) * depth * s + s
    for bit in range(last):
        if bit:
            moved = {}
            for (state, wrong, hit), p in dist.items():
                for new in (0, 1):
                    moved[new, wrong, hit] = moved.get((new, wrong, hit), 0.0) + p * step[state, new]
            dist = moved
        offset = bit % (depth * s)
        if offset < s:  # a bit of this codeword's symbol
            flipped = {}
            for (state, wrong, hit), p in dist.items():
                for f in (0, 1):
                    key = (state, wrong, hit or f)
                    if offset == s - 1:
                        key = (state, wrong + (hit or f), 0)
                    flipped[key] = flipped.get(key, 0.0) + p * (flip[state] if f else 1 - flip[state])
            dist = flipped
    out = np.zeros(n + 1)
    for (_, wrong, _), p in dist.items():
        out[wrong] += p
    return out


@pytest.mark.parametrize("n, s, depth", [(4, 3, 2), (5, 8, 1), (3, 8, 3)])
def test_symbol_error_counts_on_a_burst_channel_equal_a_bit_by_bit_recursion(n, s, depth):
    args = (0.05, 0.2, 0.6, 0.01)
    fast = residual.gilbert_elliott_symbol_error_counts_by_depth(n, s, [depth], *args)[0]
    assert fast == pytest.approx(_bitwise_symbol_counts(n, s, depth, *args), rel=1e-12, abs=1e-18)


def test_gilbert_elliott_with_equal_flip_rates_is_a_bsc():
    counts = residual.gilbert_elliott_error_counts(24, 5, 0.01, 0.1, 0.03, 0.03)
    assert counts == pytest.approx(residual.bsc_error_counts(24, 0.03), abs=1e-15)


def test_gilbert_elliott_at_great_depth_approaches_independent_flips_at_the_average_rate():
    enter, leave, bad = 1e-3, 0.1, 0.5
    average = enter / (enter + leave) * bad
    far = residual.gilbert_elliott_error_counts(24, 100_000, enter, leave, bad)
    assert far == pytest.approx(residual.bsc_error_counts(24, average), abs=1e-12)


def test_deeper_interleaving_lowers_the_block_error_on_a_burst_channel():
    failures = [residual.gilbert_elliott_error_counts(24, d, 1e-3, 0.1, 0.5)[4:].sum() for d in (1, 4, 16, 64)]
    assert failures == sorted(failures, reverse=True) and failures[-1] < failures[0] / 100


def test_byte_substitutions_at_depth_8_are_independent_flips_at_128_of_255():
    # a substituted byte takes one of the 255 other values: each bit differs with
    # probability 128/255 (128 of the 255 non-zero masks have a given bit set)
    p = 1e-3
    counts = residual.byte_substitution_error_counts(24, 8, p)
    assert counts == pytest.approx(residual.bsc_error_counts(24, p * 128 / 255), abs=1e-15)


def test_byte_substitution_counts_at_depth_1_by_enumerating_masks():
    # a 16-bit codeword at depth 1 covers two whole bytes: list every pair of masks
    p = 0.01
    per_byte = np.zeros(9)
    per_byte[0] = 1 - p
    for mask in range(1, 256):
        per_byte[bin(mask).count("1")] += p / 255
    assert residual.byte_substitution_error_counts(16, 1, p) == pytest.approx(np.convolve(per_byte, per_byte),
                                                                               abs=1e-15)


def test_burst_length_quantile_is_geometric():
    # P(spell <= L) = 1 - (1 - leave)^L
    assert residual.burst_length_quantile(0.1, 44) == pytest.approx(1 - 0.9 ** 44)
    assert residual.burst_length_for_quantile(0.1, 0.99) == 44  # 0.9^43 > 0.01 >= 0.9^44


# ---- codes show ----------------------------------------------------------------------------------

def test_codes_show_json_carries_bounds_weights_method_and_a_bsc_table():
    run = run_cli("codes", "show", "golay-23-12", "--json")
    assert run.code == 0, run.err
    facts = json.loads(run.out)
    assert facts["perfect"] is True and facts["bounds"]["perfect"] is True
    bounds = facts["bounds"]
    assert bounds["singleton_d"] == 12 and bounds["sphere_volume"] == 2048 == bounds["cosets"]
    assert facts["weight_distribution_method"] in ("enumeration", "macwilliams")
    ps = [row["p"] for row in facts["bsc"]]
    assert ps == sorted(ps) and len(ps) >= 5 and ps[0] <= 1e-5 and ps[-1] == 0.5
    at_half = facts["bsc"][-1]
    # at p = 1/2 every word is equally likely: P_ud = (2^k - 1) / 2^n
    assert at_half["undetected"] == pytest.approx((2 ** 12 - 1) / 2 ** 23)


def test_codes_show_text_names_the_method_the_bounds_and_the_bsc_table():
    run = run_cli("codes", "show", "secded-72-64")
    assert run.code == 0, run.err
    text = run.out.decode()
    assert "MacWilliams identity" in text and "dual code" in text
    assert "Singleton: d <= n - k + 1 = 9" in text
    assert "Hamming:" in text and "perfect" not in text.splitlines()[0]
    assert "undetected" in text and "P_ud(p) = sum_{w>0} A_w p^w (1-p)^(n-w)" in text


def test_codes_show_without_a_name_or_file_is_a_usage_error():
    run = run_cli("codes", "show")
    assert run.code == 2 and len(run.err_lines) == 1 and run.err_lines[0].startswith("bitmend: ")
