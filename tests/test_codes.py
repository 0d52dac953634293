"""The code engine and the catalog: parameters, matrices, decoding guarantees, and
weight distributions checked against published values and against the galois library."""

from __future__ import annotations

from itertools import combinations
from math import comb

import galois
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bitmend.analysis.weights import krawtchouk, macwilliams
from bitmend.codes import families
from bitmend.codes.catalog import CATALOG, code_by_id, code_id, code_names, get_code, UnknownCodeError
from bitmend.codes.linear import FAILED, BinaryLinearCode, CodeDefinitionError

from conftest import ALL_CODES, HAMMING_CODES, SECDED_CODES

GF2 = galois.GF2

# name: (n, k, d, t) -- Hamming codes d=3, Hsiao SECDED d=4, Golay 7 and 8, repetition d=n.
EXPECTED_PARAMETERS = {
    "rep-3": (3, 1, 3, 1),
    "hamming-7-4": (7, 4, 3, 1),
    "hamming-15-11": (15, 11, 3, 1),
    "hamming-31-26": (31, 26, 3, 1),
    "hamming-63-57": (63, 57, 3, 1),
    "secded-8-4": (8, 4, 4, 1),
    "secded-16-11": (16, 11, 4, 1),
    "secded-39-32": (39, 32, 4, 1),
    "secded-72-64": (72, 64, 4, 1),
    "golay-23-12": (23, 12, 7, 3),
    "golay-24-12": (24, 12, 8, 3),
}
PERFECT_CODES = ("rep-3", *HAMMING_CODES, "golay-23-12")
IMPERFECT_CODES = (*SECDED_CODES, "golay-24-12")

# Published weight distributions, {weight: count}.
# MacWilliams & Sloane, The Theory of Error-Correcting Codes, ch. 1 (Hamming (7,4)) and ch. 2 (Golay).
HAMMING_7_4_WEIGHTS = {0: 1, 3: 7, 4: 7, 7: 1}
GOLAY_23_WEIGHTS = {0: 1, 7: 253, 8: 506, 11: 1288, 12: 1288, 15: 506, 16: 253, 23: 1}
GOLAY_24_WEIGHTS = {0: 1, 8: 759, 12: 2576, 16: 759, 24: 1}


def as_dict(counts) -> dict[int, int]:
    return {w: int(a) for w, a in enumerate(counts) if a}


def random_messages(code: BinaryLinearCode, count: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    m = rng.integers(0, 2, size=(count, code.k), dtype=np.uint8)
    m[0] = 0  # always include the all-zero and all-one messages
    m[1] = 1
    return m


def all_codewords(G: np.ndarray) -> np.ndarray:
    """Every codeword spanned by the rows of G (small k only), by plain matrix arithmetic."""
    k = G.shape[0]
    messages = ((np.arange(1 << k)[:, None] >> np.arange(k - 1, -1, -1)) & 1).astype(np.int64)
    return (messages @ G.astype(np.int64)) % 2


def error_patterns(n: int, weights) -> np.ndarray:
    """Every error pattern of the given weights, one per row."""
    rows = []
    for w in weights:
        idx = np.array(list(combinations(range(n), w)), dtype=np.intp)
        e = np.zeros((len(idx), n), dtype=np.uint8)
        np.put_along_axis(e, idx, 1, axis=1)
        rows.append(e)
    return np.vstack(rows)


# ---- catalog -------------------------------------------------------------------------------

def test_catalog_holds_the_eleven_engine_codes_first_in_order():
    # BCH and Reed-Solomon entries follow them (ids 12 on; see test_bch.py, test_rs.py)
    assert code_names()[:11] == list(EXPECTED_PARAMETERS) == list(ALL_CODES)


def test_catalog_ids_are_unique_and_resolve_back_to_their_codes():
    ids = [e.code_id for e in CATALOG]
    assert len(set(ids)) == len(ids)
    assert 0 not in ids  # reserved for codes defined inside the stream
    for name in code_names():
        assert code_by_id(code_id(name)) is get_code(name)


def test_unknown_code_name_raises_a_readable_error_listing_known_codes():
    with pytest.raises(UnknownCodeError) as info:
        get_code("hamming-8-4")
    assert "hamming-8-4" in str(info.value) and "golay-24-12" in str(info.value)
    assert isinstance(info.value, KeyError)


@pytest.mark.parametrize("name", ALL_CODES)
def test_code_parameters_n_k_d_t_match_the_family(name):
    code = get_code(name)
    n, k, d, t = EXPECTED_PARAMETERS[name]
    assert (code.n, code.k, code.d, code.t) == (n, k, d, t)
    assert code.r == n - k
    assert code.rate == pytest.approx(k / n)
    assert code.detects == d - 1 - t
    assert code.name == name


@pytest.mark.parametrize("name", PERFECT_CODES)
def test_perfect_code_meets_the_hamming_bound_with_equality(name):
    code = get_code(name)
    n, k, _, t = EXPECTED_PARAMETERS[name]
    assert sum(comb(n, i) for i in range(t + 1)) == 2 ** (n - k)
    assert code.is_perfect


@pytest.mark.parametrize("name", IMPERFECT_CODES)
def test_secded_and_extended_golay_fall_short_of_the_hamming_bound(name):
    code = get_code(name)
    n, k, _, t = EXPECTED_PARAMETERS[name]
    assert sum(comb(n, i) for i in range(t + 1)) < 2 ** (n - k)
    assert not code.is_perfect


# ---- matrices -----------------------------------------------------------------------------

@pytest.mark.parametrize("name", ALL_CODES)
def test_generator_is_systematic_and_orthogonal_to_parity_check(name):
    code = get_code(name)
    G, H = code.G.astype(np.int64), code.H.astype(np.int64)
    assert G.shape == (code.k, code.n) and H.shape == (code.r, code.n)
    assert np.array_equal(G[:, : code.k], np.eye(code.k, dtype=np.int64))
    assert np.array_equal(G[:, code.k:], code.P)
    assert np.array_equal(H[:, code.k:], np.eye(code.r, dtype=np.int64))
    assert not ((G @ H.T) % 2).any()


@pytest.mark.parametrize("name", ALL_CODES)
def test_galois_oracle_ranks_and_product_of_generator_and_parity_check(name):
    # oracle: galois' own GF(2) arithmetic, independent of bitmend.kernels.gf2
    code = get_code(name)
    G, H = GF2(code.G.astype(np.uint8)), GF2(code.H.astype(np.uint8))
    assert np.linalg.matrix_rank(G) == code.k
    assert np.linalg.matrix_rank(H) == code.r
    assert not np.any(G @ H.T)


@pytest.mark.parametrize("name", HAMMING_CODES)
def test_hamming_parity_check_has_every_nonzero_column_once(name):
    code = get_code(name)
    H = code.H.astype(np.int64)
    columns = (H * (1 << np.arange(code.r - 1, -1, -1))[:, None]).sum(axis=0)
    assert sorted(columns.tolist()) == list(range(1, code.n + 1))


@pytest.mark.parametrize("name", SECDED_CODES)
def test_secded_columns_are_distinct_odd_weight_and_rows_balanced(name):
    code = get_code(name)
    H = code.H.astype(np.int64)
    weights = H.sum(axis=0)
    assert (weights % 2 == 1).all()  # Hsiao's odd-weight-column construction
    columns = {tuple(c) for c in H.T}
    assert len(columns) == code.n
    row_weights = H.sum(axis=1)
    assert row_weights.max() - row_weights.min() <= 1


def test_secded_72_64_has_216_ones_as_in_hsiao():
    # Hsiao (1970), the (72,64) odd-weight-column code: 56 weight-3 and 8 weight-5 data
    # columns plus the 8 check columns = 216 ones, 27 per row (recalled from memory)
    H = get_code("secded-72-64").H.astype(np.int64)
    assert int(H.sum()) == 216
    assert set(H.sum(axis=1).tolist()) == {27}


def test_hamming_7_4_from_parity_check_and_from_generator_define_the_same_code():
    built = families.hamming(3)
    from_h = BinaryLinearCode.from_parity_check(built.H)
    from_g = BinaryLinearCode.from_generator(from_h.G)
    assert np.array_equal(from_h.G, built.G)
    assert np.array_equal(from_g.G, from_h.G)
    assert np.array_equal(from_g.H, from_h.H)
    words_h = {tuple(w) for w in all_codewords(from_h.G)}
    words_g = {tuple(w) for w in all_codewords(from_g.G)}
    assert words_h == words_g and len(words_h) == 16
    # and the code's codewords are exactly the null space of its parity-check matrix
    every_word = ((np.arange(128)[:, None] >> np.arange(6, -1, -1)) & 1)
    null = {tuple(w) for w in every_word if not ((built.H.astype(np.int64) @ w) % 2).any()}
    assert null == words_h


def test_non_systematic_generator_is_permuted_to_an_equivalent_code():
    # the first two columns are equal, so positions 0 and 1 cannot both carry information
    G = np.array([[1, 1, 0, 1, 0, 0],
                  [0, 0, 1, 1, 1, 0],
                  [1, 1, 1, 0, 0, 1]], dtype=np.uint8)
    code = BinaryLinearCode.from_generator(G)
    assert code.column_order != tuple(range(6))
    assert sorted(code.column_order) == list(range(6))
    theirs = sorted(as_dict(np.bincount(all_codewords(G).sum(axis=1), minlength=7)).items())
    assert sorted(as_dict(code.weight_distribution.counts).items()) == theirs


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(3, 20), data=st.data())
def test_random_generator_codewords_lie_in_the_original_row_space(seed, n, data):
    k = data.draw(st.integers(1, n - 1))
    rng = np.random.default_rng(seed)
    G = rng.integers(0, 2, size=(k, n), dtype=np.uint8)
    if np.linalg.matrix_rank(GF2(G)) < k:  # oracle: galois rank
        with pytest.raises(CodeDefinitionError):
            BinaryLinearCode.from_generator(G)
        return
    if n - k > 20:
        return
    code = BinaryLinearCode.from_generator(G)
    assert (code.n, code.k) == (n, k)
    words = code.encode(rng.integers(0, 2, size=(8, k), dtype=np.uint8))
    original = np.zeros_like(words)
    original[:, list(code.column_order)] = words  # undo the column permutation
    for w in original:
        assert np.linalg.matrix_rank(GF2(np.vstack([G, w]))) == k


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(3, 20), data=st.data())
def test_random_parity_check_codewords_satisfy_every_check(seed, n, data):
    r = data.draw(st.integers(1, n - 1))
    rng = np.random.default_rng(seed)
    H = rng.integers(0, 2, size=(r, n), dtype=np.uint8)
    if np.linalg.matrix_rank(GF2(H)) < r:
        with pytest.raises(CodeDefinitionError):
            BinaryLinearCode.from_parity_check(H)
        return
    code = BinaryLinearCode.from_parity_check(H)
    assert (code.n, code.k) == (n, n - r)
    words = code.encode(rng.integers(0, 2, size=(8, n - r), dtype=np.uint8))
    original = np.zeros_like(words)
    original[:, list(code.column_order)] = words
    assert not ((original.astype(np.int64) @ H.T.astype(np.int64)) % 2).any()


@pytest.mark.parametrize("matrix, maker", [
    ([[1, 0, 1], [1, 0, 1]], BinaryLinearCode.from_generator),  # dependent rows
    ([[1, 0], [0, 1]], BinaryLinearCode.from_generator),  # k == n
    ([[1, 1, 0], [1, 1, 0]], BinaryLinearCode.from_parity_check),  # dependent checks
    ([[1, 2, 0]], BinaryLinearCode.from_generator),  # not binary
])
def test_unusable_matrices_are_refused_with_value_error(matrix, maker):
    with pytest.raises(ValueError):
        maker(np.array(matrix))


# ---- encoding ---------------------------------------------------------------------------------

@pytest.mark.parametrize("name", ALL_CODES)
def test_table_encoder_agrees_with_plain_matrix_product(name):
    code = get_code(name)
    m = random_messages(code, 64, seed=11)
    expected = (m.astype(np.int64) @ code.G.astype(np.int64)) % 2
    assert np.array_equal(code.encode(m), expected)
    assert np.array_equal(code.encode(m[5]), expected[5])  # single-vector form
    assert not code.syndromes(code.encode(m)).any()


@settings(max_examples=30, deadline=None)
@given(name=st.sampled_from(ALL_CODES), seed=st.integers(0, 2**32 - 1))
def test_encoding_is_linear_sum_of_codewords_is_codeword_of_sum(name, seed):
    code = get_code(name)
    rng = np.random.default_rng(seed)
    a, b = rng.integers(0, 2, size=(2, code.k), dtype=np.uint8)
    assert np.array_equal(code.encode(a) ^ code.encode(b), code.encode(a ^ b))


def test_bit_array_api_rejects_wrong_shapes_and_non_binary_values():
    code = get_code("hamming-7-4")
    with pytest.raises(ValueError):
        code.encode(np.zeros(5, dtype=np.uint8))
    with pytest.raises(ValueError):
        code.decode(np.zeros((2, 8), dtype=np.uint8))
    with pytest.raises(ValueError):
        code.encode(np.array([0, 1, 2, 0]))


# ---- decoding guarantees ---------------------------------------------------------------------

@pytest.mark.parametrize("name", ALL_CODES)
def test_clean_codewords_decode_to_their_messages_with_status_zero(name):
    code = get_code(name)
    m = random_messages(code, 32, seed=3)
    decoded, status = code.decode(code.encode(m))
    assert np.array_equal(decoded, m)
    assert (status == 0).all()


@pytest.mark.parametrize("name", ALL_CODES)
def test_every_single_bit_error_is_corrected(name):
    code = get_code(name)
    m = random_messages(code, 24, seed=5)
    words = code.encode(m)
    # received[i * n + j] = codeword i with bit j flipped
    received = np.repeat(words, code.n, axis=0) ^ np.tile(np.eye(code.n, dtype=np.uint8), (len(m), 1))
    decoded, status = code.decode(received)
    assert np.array_equal(decoded, np.repeat(m, code.n, axis=0))
    assert (status == 1).all()


def test_every_pattern_of_up_to_three_errors_is_corrected_golay_23_12():
    code = get_code("golay-23-12")
    m = random_messages(code, 4, seed=23)
    errors = error_patterns(23, (1, 2, 3))
    assert len(errors) == comb(23, 1) + comb(23, 2) + comb(23, 3)
    for message, word in zip(m, code.encode(m)):
        decoded, status = code.decode(word ^ errors)
        assert (decoded == message).all()
        assert np.array_equal(status, errors.sum(axis=1))


def test_every_pattern_of_up_to_three_errors_is_corrected_golay_24_12():
    code = get_code("golay-24-12")
    m = random_messages(code, 3, seed=24)
    errors = error_patterns(24, (1, 2, 3))
    for message, word in zip(m, code.encode(m)):
        decoded, status = code.decode(word ^ errors)
        assert (decoded == message).all()
        assert np.array_equal(status, errors.sum(axis=1))


def test_every_four_error_pattern_is_detected_golay_24_12():
    code = get_code("golay-24-12")
    m = random_messages(code, 2, seed=42)
    errors = error_patterns(24, (4,))
    assert len(errors) == comb(24, 4)
    for word in code.encode(m):
        received = word ^ errors
        decoded, status = code.decode(received)
        assert (status == FAILED).all()
        assert np.array_equal(decoded, received[:, :12])  # left as received, never guessed


@pytest.mark.parametrize("name", SECDED_CODES)
def test_every_double_error_is_detected_never_miscorrected(name):
    code = get_code(name)
    m = random_messages(code, 3, seed=72)
    errors = error_patterns(code.n, (2,))
    assert len(errors) == comb(code.n, 2)
    for word in code.encode(m):
        received = word ^ errors
        decoded, status = code.decode(received)
        assert (status == 255).all()
        assert np.array_equal(decoded, received[:, : code.k])  # not changed into another message


@pytest.mark.parametrize("name", PERFECT_CODES)
def test_perfect_code_decodes_every_received_word_without_failure(name):
    # every word lies within t of exactly one codeword, so no syndrome lacks a leader
    code = get_code(name)
    rng = np.random.default_rng(9)
    words = rng.integers(0, 2, size=(4000, code.n), dtype=np.uint8)
    decoded, status = code.decode(words)
    assert (status != FAILED).all()
    assert (status <= code.t).all()
    # the decoded message re-encodes to a codeword within t of what was received
    distance = (code.encode(decoded) ^ words).sum(axis=1)
    assert np.array_equal(distance, status)


@settings(max_examples=40, deadline=None)
@given(name=st.sampled_from(ALL_CODES), seed=st.integers(0, 2**32 - 1), data=st.data())
def test_any_error_pattern_within_t_is_corrected_and_counted(name, seed, data):
    code = get_code(name)
    weight = data.draw(st.integers(0, code.t))
    rng = np.random.default_rng(seed)
    message = rng.integers(0, 2, size=code.k, dtype=np.uint8)
    error = np.zeros(code.n, dtype=np.uint8)
    error[rng.choice(code.n, size=weight, replace=False)] = 1
    decoded, status = code.decode(code.encode(message) ^ error)
    assert np.array_equal(decoded, message)
    assert int(status) == weight  # one word in, one status out


# ---- weight distributions --------------------------------------------------------------------

def test_weight_distribution_hamming_7_4_is_published_one():
    assert as_dict(get_code("hamming-7-4").weight_distribution.counts) == HAMMING_7_4_WEIGHTS


def test_weight_distribution_golay_23_12_is_published_one():
    assert as_dict(get_code("golay-23-12").weight_distribution.counts) == GOLAY_23_WEIGHTS


def test_weight_distribution_golay_24_12_is_published_one():
    assert as_dict(get_code("golay-24-12").weight_distribution.counts) == GOLAY_24_WEIGHTS


def test_weight_distribution_rep_3_is_zero_and_all_ones():
    assert as_dict(get_code("rep-3").weight_distribution.counts) == {0: 1, 3: 1}


def _hamming_enumerator(n: int) -> list[int]:
    """A(z) = ((1+z)^n + n (1-z)(1-z^2)^((n-1)/2)) / (n+1) for the (n, n-m) Hamming code.
    MacWilliams & Sloane, ch. 1 (recalled from memory)."""
    def mul(a, b):
        out = [0] * (len(a) + len(b) - 1)
        for i, x in enumerate(a):
            for j, y in enumerate(b):
                out[i + j] += x * y
        return out

    first = [comb(n, i) for i in range(n + 1)]
    second = [n, -n]  # n (1 - z)
    for _ in range((n - 1) // 2):
        second = mul(second, [1, 0, -1])
    total = [a + b for a, b in zip(first, second + [0] * (len(first) - len(second)))]
    assert all(c % (n + 1) == 0 for c in total)
    return [c // (n + 1) for c in total]


@pytest.mark.parametrize("name", HAMMING_CODES)
def test_weight_distribution_of_hamming_codes_follows_closed_form(name):
    code = get_code(name)
    assert list(code.weight_distribution.counts) == _hamming_enumerator(code.n)


@pytest.mark.parametrize("name", ALL_CODES)
def test_weight_distribution_counts_every_codeword_once(name):
    wd = get_code(name).weight_distribution
    assert sum(wd.counts) == 2 ** get_code(name).k
    assert len(wd.counts) == get_code(name).n + 1
    assert wd.counts[0] == 1


@pytest.mark.parametrize("name", ("rep-3", "hamming-7-4", "secded-8-4", "secded-16-11", "golay-24-12"))
def test_weight_distribution_matches_brute_force_enumeration(name):
    code = get_code(name)
    weights = all_codewords(code.G).sum(axis=1)
    assert list(code.weight_distribution.counts) == np.bincount(weights, minlength=code.n + 1).tolist()


def test_macwilliams_transform_of_simplex_7_gives_hamming_7_4():
    # the dual of Hamming (7,4) is the (7,3) simplex code, weights 1 + 7 z^4
    # (MacWilliams & Sloane ch. 1 and the MacWilliams identity, ch. 5)
    assert macwilliams([1, 0, 0, 0, 7, 0, 0, 0], 7) == [1, 0, 0, 7, 7, 0, 0, 1]


def test_krawtchouk_values_for_small_lengths():
    # K_j(0) = C(n, j); K_0(i) = 1; K_1(i) = n - 2i (standard identities, recalled from memory)
    for n in (5, 8):
        for j in range(n + 1):
            assert krawtchouk(n, j, 0) == comb(n, j)
        for i in range(n + 1):
            assert krawtchouk(n, 0, i) == 1
            assert krawtchouk(n, 1, i) == n - 2 * i


# ---- galois as an independent oracle -----------------------------------------------------------
# galois 0.4 has no Hamming class; a primitive binary BCH code with designed distance 3
# is the cyclic Hamming code, so galois.BCH(2^m - 1, 2^m - 1 - m) stands in for it.

@pytest.mark.parametrize("name", HAMMING_CODES)
def test_galois_oracle_bch_hamming_code_has_same_dual_weights_and_distance(name):
    ours = get_code(name)
    theirs = galois.BCH(ours.n, ours.k)
    assert (theirs.n, theirs.k, theirs.d) == (ours.n, ours.k, ours.d)

    def dual_weights(H):
        words = all_codewords(np.asarray(H, dtype=np.uint8))
        return np.bincount(words.sum(axis=1), minlength=ours.n + 1).tolist()

    # equal dual distributions imply equal code distributions (MacWilliams identity)
    assert dual_weights(theirs.H) == dual_weights(ours.H)


def test_galois_oracle_hamming_7_4_codewords_have_same_weight_distribution():
    theirs = galois.BCH(7, 4)
    weights = all_codewords(np.asarray(theirs.G, dtype=np.uint8)).sum(axis=1)
    assert as_dict(np.bincount(weights, minlength=8)) == as_dict(get_code("hamming-7-4").weight_distribution.counts)


def test_galois_oracle_golay_generator_divides_x23_plus_1():
    g = galois.Poly.Int(families.GOLAY_23_GENERATOR)
    x23 = galois.Poly.Degrees([23, 0])  # x^23 + 1 = x^23 - 1 over GF(2)
    assert g.degree == 11
    assert x23 % g == galois.Poly.Zero()
    assert g.is_irreducible()
    # x^23 - 1 = (x + 1) g(x) g*(x) with g* the reciprocal of g (MacWilliams & Sloane ch. 7,
    # recalled from memory)
    reciprocal = galois.Poly(g.coeffs[::-1])
    assert (galois.Poly.Degrees([1, 0]) * g * reciprocal) == x23


def test_galois_oracle_golay_23_12_weight_distribution_from_galois_bch():
    # the narrow-sense BCH code of length 23 with designed distance 5 is the Golay code
    theirs = galois.BCH(23, d=5, extension_field=galois.GF(2**11))
    assert theirs.k == 12
    weights = all_codewords(np.asarray(theirs.G, dtype=np.uint8)).sum(axis=1)
    counts = as_dict(np.bincount(weights, minlength=24))
    assert counts == GOLAY_23_WEIGHTS
    assert counts == as_dict(get_code("golay-23-12").weight_distribution.counts)


def test_golay_23_12_is_cyclic():
    code = get_code("golay-23-12")
    words = code.encode(random_messages(code, 50, seed=1))
    for shift in (1, 5, 22):
        assert not code.syndromes(np.roll(words, shift, axis=1)).any()


def test_golay_24_12_words_have_even_overall_parity():
    code = get_code("golay-24-12")
    words = code.encode(random_messages(code, 200, seed=2))
    assert (words.sum(axis=1) % 4 == 0).all()  # doubly even, per the published distribution
