"""Distance to the limit on a BSC: capacity, dispersion, the normal approximation, the RCU
achievability bound and the binomial converse (Polyanskiy, Poor and Verdu, IEEE Trans. Inf.
Theory 56(5), 2010), each held to a computation written another way."""

from __future__ import annotations

import math
from decimal import Decimal, getcontext
from fractions import Fraction
from statistics import NormalDist

import numpy as np
import pytest

from bitmend.analysis import limits, theory
from bitmend.codes.catalog import code_names, get_code


def _code_bits(name: str) -> tuple[int, int, float]:
    """(n, k, block error at p) in bits, as `codes show --at` takes them."""
    code = get_code(name)
    s = getattr(code, "symbol_bits", 1)
    return code.n * s, code.k * s, s


# ---- capacity, dispersion, normal approximation ---------------------------------------------------

@pytest.mark.parametrize("p", [1e-6, 1e-3, 0.01, 0.11, 0.3])
def test_capacity_and_dispersion_are_the_mean_and_variance_of_the_information_density(p):
    # with a uniform input the information density of a BSC is log2(2(1-p)) with probability
    # 1-p and log2(2p) with probability p: C is its mean, V its variance (PPV, sec. IV)
    values = np.array([math.log2(2 * (1 - p)), math.log2(2 * p)])
    weights = np.array([1 - p, p])
    mean = float(weights @ values)
    variance = float(weights @ (values - mean) ** 2)
    assert limits.capacity(p) == pytest.approx(mean, rel=1e-12, abs=1e-15)
    assert limits.dispersion(p) == pytest.approx(variance, rel=1e-9)


def test_capacity_of_the_papers_bsc_example_is_one_half():
    # the paper's BSC example uses crossover 0.11, capacity about 0.5 bits (recalled from memory)
    assert limits.capacity(0.11) == pytest.approx(0.5, abs=1e-3)


@pytest.mark.parametrize("n, p, eps", [(100, 0.11, 1e-3), (1023, 0.01, 1e-6), (7, 0.05, 0.1)])
def test_normal_approximation_is_the_three_term_formula(n, p, eps):
    # written with the standard library's normal quantile instead of scipy
    c = 1 + p * math.log2(p) + (1 - p) * math.log2(1 - p)
    v = p * (1 - p) * math.log2((1 - p) / p) ** 2
    expected = n * c - math.sqrt(n * v) * NormalDist().inv_cdf(1 - eps) + 0.5 * math.log2(n)
    assert limits.normal_approximation_log2m(n, p, eps) == pytest.approx(expected, rel=1e-9)
    # turned around: the block error at which the approximation allows exactly that many words
    assert limits.normal_approximation_block_error(n, expected, p) == pytest.approx(eps, rel=1e-6)


# ---- the exact bounds against computations written another way ---------------------------------------

def _rcu_by_enumeration(n: int, words: int, p: Fraction) -> Fraction:
    """The RCU bound by its definition: send 0, receive the error pattern e; a random
    codeword w competes when d(w, e) <= d(0, e); sum P(e) min(1, (M-1) P(competes))."""
    weights = [bin(w).count("1") for w in range(1 << n)]
    total = Fraction(0)
    for e in range(1 << n):
        t = weights[e]
        competing = sum(1 for w in range(1 << n) if weights[w ^ e] <= t)
        total += p ** t * (1 - p) ** (n - t) * min(Fraction(1), (words - 1) * Fraction(competing, 1 << n))
    return total


@pytest.mark.parametrize("n, log2m, p", [(8, 3, Fraction(1, 20)), (9, 4, Fraction(1, 10)), (10, 2, Fraction(1, 7))])
def test_rcu_bound_equals_its_definition_summed_over_every_error_pattern(n, log2m, p):
    expected = _rcu_by_enumeration(n, 1 << log2m, p)
    assert limits.rcu_block_error(n, log2m, float(p)) == pytest.approx(float(expected), rel=1e-10)


def test_rcu_bound_of_a_long_code_equals_a_high_precision_direct_sum():
    getcontext().prec = 60
    n, log2m, p = 500, 190, Decimal("0.11")
    total, seen = Decimal(0), 0
    for t in range(n + 1):
        seen += math.comb(n, t)
        inner = min(Decimal(1), Decimal(2 ** log2m - 1) * Decimal(seen) / Decimal(2 ** n))
        total += Decimal(math.comb(n, t)) * p ** t * (1 - p) ** (n - t) * inner
    assert limits.rcu_block_error(n, log2m, 0.11) == pytest.approx(float(total), rel=1e-9)


def _converse_by_enumeration(n: int, p: Fraction, eps: Fraction) -> Fraction:
    """beta_{1-eps} by the Neyman-Pearson lemma on every single output pattern: take patterns
    in falling order of P(e) / 2^-n, the last one in part, until P holds 1 - eps."""
    patterns = sorted(range(1 << n), key=lambda e: bin(e).count("1"))
    need, beta = 1 - eps, Fraction(0)
    for e in patterns:
        w = bin(e).count("1")
        mass = p ** w * (1 - p) ** (n - w)
        take = min(Fraction(1), need / mass)
        beta += take * Fraction(1, 1 << n)
        need -= take * mass
        if need <= 0:
            break
    return beta


@pytest.mark.parametrize("n, p, eps", [(9, Fraction(1, 20), Fraction(1, 100)), (10, Fraction(1, 8), Fraction(1, 30)),
                                       (11, Fraction(1, 50), Fraction(1, 1000))])
def test_binomial_converse_equals_the_neyman_pearson_test_over_every_pattern(n, p, eps):
    beta = _converse_by_enumeration(n, p, eps)
    assert limits.converse_log2m(n, float(p), float(eps)) == pytest.approx(-math.log2(beta), rel=1e-10)
    # and the other way round: at M = 1/beta the least block error is eps
    assert limits.converse_block_error(n, -math.log2(beta), float(p)) == pytest.approx(float(eps), rel=1e-8)


PERFECT = [name for name in code_names() if name in ("hamming-7-4", "hamming-15-11", "hamming-31-26",
                                                     "hamming-63-57", "golay-23-12", "rep-3")]


@pytest.mark.parametrize("name", PERFECT)
@pytest.mark.parametrize("p", [1e-4, 1e-2, 0.1])
def test_perfect_codes_meet_the_binomial_converse_with_equality(name, p):
    # a perfect code's decoding spheres are the Neyman-Pearson regions of the converse, so no
    # code of its length and size has a lower block error (MacWilliams & Sloane ch. 6 for
    # which codes are perfect)
    code = get_code(name)
    own = theory.bsc_block_error(code.n, code.t, p)
    assert limits.converse_block_error(code.n, code.k, p) == pytest.approx(own, rel=1e-9)
    gap = limits.distance_to_limit(code.n, code.k, p, own)
    assert gap.rate_converse == pytest.approx(code.k / code.n, rel=1e-9)
    assert gap.p_converse == pytest.approx(p, rel=1e-6)


@pytest.mark.parametrize("name", [n for n in code_names() if get_code(n).n * getattr(get_code(n), "symbol_bits", 1) <= 2048])
def test_no_catalog_code_beats_the_converse_at_its_own_block_error(name):
    n, k, s = _code_bits(name)
    code = get_code(name)
    for p in (1e-4, 3e-3, 3e-2):
        own = (theory.bsc_symbol_block_error(code.n, code.t, p) if s == 8
               else theory.bsc_block_error(code.n, code.t, p))
        gap = limits.distance_to_limit(n, k, p, own)
        if gap is None:  # a code that (nearly) always fails at this p: nothing to compare
            assert own == 0 or own > limits.MAX_BLOCK_ERROR
            continue
        assert gap.rate <= gap.rate_converse + 1e-9
        assert gap.p_converse >= p * (1 - 1e-6)  # no code of its size stands more noise than the bound
        assert gap.rate_achievable <= gap.rate_converse


@pytest.mark.parametrize("n, p, eps", [(100, 0.11, 1e-3), (500, 0.11, 1e-3), (2000, 0.11, 1e-3), (1000, 0.01, 1e-6)])
def test_achievability_lies_below_the_converse_and_the_normal_approximation_near_both(n, p, eps):
    r = limits.rcu_log2m(n, p, eps)
    c = limits.converse_log2m(n, p, eps)
    na = limits.normal_approximation_log2m(n, p, eps)
    assert r <= c
    # in the regime the paper draws (moderate eps and p) the exact bounds pin log2 M* within
    # a few bits at every length, and the approximation lands within a few bits of both
    assert c - r < 4
    assert abs(na - r) < 10 and abs(na - c) < 10


def test_papers_bsc_figure_n_500_lies_just_below_four_tenths():
    # the paper's BSC figure (crossover 0.11, block error 1e-3) shows the converse and the
    # achievability bounds close together near rate 0.38-0.39 at n = 500, below capacity 0.5
    # (recalled from memory, read loosely: checked to two decimals only)
    n, p, eps = 500, 0.11, 1e-3
    for bound in (limits.rcu_log2m(n, p, eps), limits.converse_log2m(n, p, eps),
                  limits.normal_approximation_log2m(n, p, eps)):
        assert 0.36 < bound / n < 0.40


def test_crossover_solutions_reach_the_block_error_they_were_asked_for():
    n, k, p = 255, 223, 1e-3
    eps = theory.bsc_block_error(n, 4, p)
    gap = limits.distance_to_limit(n, k, p, eps)
    assert limits.normal_approximation_block_error(n, k, gap.p_normal) == pytest.approx(eps, rel=1e-6)
    assert limits.converse_block_error(n, k, gap.p_converse) == pytest.approx(eps, rel=1e-4)
    assert limits.rcu_block_error(n, k, gap.p_achievable) == pytest.approx(eps, rel=1e-4)
    assert gap.p_achievable <= gap.p_converse
    # a 4-error-correcting BCH code is far from the best code of its length: the best one
    # stands more noise
    assert gap.p_converse > p


def test_capacity_crossover_inverts_capacity():
    for rate in (0.1, 0.5, 12 / 23, 0.9):
        p = limits.crossover_at_capacity(rate)
        assert limits.capacity(p) == pytest.approx(rate, abs=1e-12)


def test_block_error_of_zero_or_one_has_no_distance():
    assert limits.distance_to_limit(7, 4, 1e-3, 0.0) is None
    assert limits.distance_to_limit(7, 4, 1e-3, 1.0) is None
    with pytest.raises(ValueError):
        limits.distance_to_limit(7, 4, 0.6, 0.1)


# ---- codes show --at ---------------------------------------------------------------------------------

def test_codes_show_at_gives_the_distance_to_the_limit_in_json_and_text():
    import json

    from conftest import run_cli

    run = run_cli("codes", "show", "golay-23-12", "--at", "1e-2", "--json")
    assert run.code == 0, run.err
    limit = json.loads(run.out)["limit"]
    assert limit["block_error"] == pytest.approx(theory.bsc_block_error(23, 3, 1e-2), rel=1e-12)
    assert limit["capacity"] == pytest.approx(limits.capacity(1e-2))
    assert limit["rate_converse"] == pytest.approx(12 / 23, rel=1e-9)  # perfect: meets the converse
    assert limit["p_converse"] == pytest.approx(1e-2, rel=1e-6)
    assert "Polyanskiy" in limit["formulas"]["source"]
    text = run_cli("codes", "show", "bch-255-223", "--at", "1e-3").out.decode()
    assert "distance to the limit on a BSC with p = 0.001" in text and "normal approximation" in text
    assert "converse" in text and "RCU" in text


def test_codes_show_at_a_symbol_code_counts_in_bits():
    from bitmend.properties import code_profile

    profile = code_profile("rs-255-223", at=1e-3)
    assert (profile.limit.n, profile.limit.k) == (2040, 1784)
    assert profile.limit.block_error == pytest.approx(theory.bsc_symbol_block_error(255, 16, 1e-3), rel=1e-12)


@pytest.mark.parametrize("value", ["0.7", "0", "-1e-3"])
def test_codes_show_at_outside_zero_to_one_half_is_a_usage_error(value):
    from conftest import run_cli

    run = run_cli("codes", "show", "hamming-7-4", f"--at={value}")
    assert run.code == 2 and len(run.err_lines) == 1 and "--at" in run.err


# ---- the curves on simulate --plot ---------------------------------------------------------------------

def test_plot_limit_curves_lie_below_the_codes_own_block_error_and_mark_capacity():
    from bitmend.plot import limit_curves

    code = get_code("bch-31-16")
    xs = np.logspace(-3, -1, 9)
    curves = limit_curves(code, ("bsc:p=0.001",), "p", xs)
    own = np.array([theory.bsc_block_error(31, code.t, x) for x in xs])
    assert np.all(curves["converse"] <= own * (1 + 1e-9))  # no (31, 16) code does better than the converse
    assert np.all(curves["converse"] <= curves["rcu"])
    assert curves["normal"][4] == pytest.approx(limits.normal_approximation_block_error(31, 16, xs[4]))
    assert limits.capacity(curves["capacity_p"][0]) == pytest.approx(16 / 31, abs=1e-9)
    assert limit_curves(code, ("burst:enter=1e-3,leave=0.1,bad=0.5",), "bad", xs) is None  # BSC only


def test_the_normal_approximation_is_flagged_where_the_code_itself_beats_it():
    # at n = 7 the approximation says no (7, 4) code reaches hamming-7-4's own block error at
    # its own p; the code is a witness that this is wrong, and the report must say so
    own = theory.bsc_block_error(7, 1, 1e-2)
    gap = limits.distance_to_limit(7, 4, 1e-2, own)
    assert gap.rate_normal < gap.rate and gap.normal_within_bounds is False
    long = limits.distance_to_limit(2000, 860, 0.11, 1e-3)  # the paper's regime (a code RCU says exists): it agrees
    assert long.normal_within_bounds is True
