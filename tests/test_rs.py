"""Reed-Solomon codes over GF(2^8): generator, systematic encoding, errors-and-erasures
decoding, the numpy twins, symbol interleaving, the container and the symbol error theory.

Outside values: the galois library as an independent implementation of GF(2^8) and of
Reed-Solomon codes (galois.ReedSolomon(255, k): field x^8 + x^4 + x^3 + x^2 + 1 = 0x11D,
alpha = x, first consecutive root alpha^1, systematic, message first - the same choices as
bitmend's, so codewords must be equal); the closed-form weight distribution of MDS codes
(MacWilliams & Sloane, The Theory of Error-Correcting Codes, ch. 11, Theorem 6).
"""

from __future__ import annotations

from itertools import product
from math import comb

import galois
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import bitmend
from bitmend.analysis import theory
from bitmend.codes.catalog import code_by_id, code_id, get_code
from bitmend.codes.reed_solomon import ReedSolomonCode, ReedSolomonParameterError, mds_weight_distribution
from bitmend.container import format as fmt
from bitmend.interleave import decode_segment, encode_segment, layout
from bitmend.kernels import cyclic_small
from bitmend.report import CLEAN, CORRECTED, DAMAGED

from conftest import RS_CODES, flip_run, frame_spans, random_bytes

FAILED = 255

CATALOG_RS = {"rs-255-239": (22, 255, 239), "rs-255-223": (23, 255, 223), "rs-204-188": (24, 204, 188),
              "rs-128-96": (25, 128, 96), "rs-32-28": (26, 32, 28)}


def galois_rs(code: ReedSolomonCode):
    """galois' code of length 255 with the same n - k; shortened codes by shorter messages."""
    return galois.ReedSolomon(255, 255 - code.r)


def symbol_errors(words: np.ndarray, counts, rng, erasures=None):
    """Copy of words with counts[i] random symbols of row i changed to a different value;
    with erasures (a list of counts), the first erasures[i] of those are also marked."""
    out = words.copy()
    marks = np.zeros(words.shape, dtype=np.uint8)
    for i, c in enumerate(counts):
        pos = rng.choice(words.shape[1], int(c), replace=False)
        out[i, pos] ^= rng.integers(1, 256, int(c)).astype(np.uint8)
        if erasures is not None:
            marks[i, pos[: erasures[i]]] = 1
    return out, marks


# ---- field and generator --------------------------------------------------------------------------

def test_field_is_gf256_mod_0x11d_with_alpha_2_as_in_galois():
    code = get_code("rs-255-223")
    gf = code.field
    assert gf.polynomial == 0x11D == int(galois.GF(2**8).irreducible_poly)
    theirs = galois.GF(2**8)
    assert int(theirs.primitive_element) == 2
    a = np.arange(256)
    assert np.array_equal(gf.mul_table, np.asarray(theirs(a)[:, None] * theirs(a)[None, :]))
    assert np.array_equal(gf.inv_table[1:], np.asarray(theirs(a[1:]) ** -1))


@pytest.mark.parametrize("name", RS_CODES)
def test_generator_polynomial_equals_galois_and_has_roots_alpha_1_to_alpha_r(name):
    code = get_code(name)
    theirs = galois_rs(code)
    assert theirs.c == code.first_root == 1
    assert code.generator_poly == [int(c) for c in theirs.generator_poly.coeffs]
    gf = code.field
    assert all(gf.poly_eval(code.generator_poly, gf.alpha(j)) == 0 for j in range(1, code.r + 1))
    assert gf.poly_eval(code.generator_poly, 1) != 0


def test_catalog_rs_codes_have_stable_ids_and_mds_parameters():
    assert set(RS_CODES) == set(CATALOG_RS)
    for name, (ident, n, k) in CATALOG_RS.items():
        code = get_code(name)
        assert code_id(name) == ident and code_by_id(ident) is code
        assert (code.n, code.k, code.d, code.t) == (n, k, n - k + 1, (n - k) // 2)
        assert code.symbol_bits == 8 and code.distance_kind == "exact" and not code.is_perfect
        assert code.detects == code.d - 1 - code.t


def test_parameters_outside_the_family_are_refused():
    for n, k in ((256, 200), (255, 222), (10, 10), (10, 0)):
        with pytest.raises(ReedSolomonParameterError):
            ReedSolomonCode(n, k)


# ---- weight distribution (closed form for MDS codes) -----------------------------------------------

@pytest.mark.parametrize("n, k", [(3, 1), (4, 2), (6, 2)])
def test_mds_weight_distribution_equals_listing_every_codeword(n, k):
    code = ReedSolomonCode(n, k)
    messages = np.array(list(product(range(256), repeat=k)), dtype=np.uint8)
    weights = (code.encode(messages) != 0).sum(axis=1)
    counts = code.weight_distribution.counts
    assert list(counts) == np.bincount(weights, minlength=n + 1).tolist()
    assert counts[code.d] == comb(n, code.d) * 255  # A_d = C(n, d)(q - 1)


@pytest.mark.parametrize("name", RS_CODES)
def test_catalog_weight_distributions_count_every_codeword(name):
    code = get_code(name)
    counts = code.weight_distribution.counts
    assert sum(counts) == 256 ** code.k
    assert min(w for w, a in enumerate(counts) if w and a) == code.d
    assert counts == mds_weight_distribution(code.n, code.k, 256)


# ---- encoding ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", RS_CODES)
def test_systematic_codewords_equal_galois(name):
    code = get_code(name)
    theirs = galois_rs(code)
    messages = np.random.default_rng(code.n).integers(0, 256, (30, code.k), dtype=np.uint8)
    words = code.encode(messages)
    assert np.array_equal(words[:, : code.k], messages)
    assert np.array_equal(words, np.asarray(theirs.encode(theirs.field(messages))))
    assert not code.syndromes(words).any()
    assert np.array_equal(code.encode(messages[0]), words[0])


# ---- decoding -------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", RS_CODES)
def test_every_pattern_of_up_to_t_symbol_errors_is_corrected_on_sampled_positions(name):
    code = get_code(name)
    rng = np.random.default_rng(code.k)
    messages = rng.integers(0, 256, (200, code.k), dtype=np.uint8)
    counts = rng.integers(0, code.t + 1, 200)
    counts[:4] = code.t
    received, _ = symbol_errors(code.encode(messages), counts, rng)
    # the first and the last t positions (the highest and lowest degrees)
    received[:2] = code.encode(messages[:2])
    received[0, : code.t] ^= 0xFF
    received[1, -code.t:] ^= np.arange(1, code.t + 1, dtype=np.uint8)
    decoded, status = code.decode(received)
    assert np.array_equal(decoded, messages)
    assert status.tolist() == counts.tolist()
    # every error value 1..255 at one position
    word = code.encode(messages[5])
    noisy = np.repeat(word[None, :], 255, axis=0)
    noisy[:, code.n // 2] ^= np.arange(1, 256, dtype=np.uint8)
    decoded, status = code.decode(noisy)
    assert (decoded == messages[5]).all() and (status == 1).all()


@pytest.mark.parametrize("name", ("rs-255-223", "rs-204-188", "rs-32-28"))
def test_decode_agrees_with_galois_within_t_and_beyond(name):
    code = get_code(name)
    theirs = galois_rs(code)
    rng = np.random.default_rng(11)
    messages = rng.integers(0, 256, (40, code.k), dtype=np.uint8)
    counts = rng.integers(0, code.t + 4, 40)
    received, _ = symbol_errors(code.encode(messages), counts, rng)
    decoded, status = code.decode(received)
    their_messages, their_count = theirs.decode(theirs.field(received), errors=True)
    assert np.array_equal(np.where(status == FAILED, -1, status.astype(np.int64)), np.asarray(their_count))
    ok = status != FAILED
    assert np.array_equal(decoded[ok], np.asarray(their_messages)[ok])
    assert (status[counts > code.t] == FAILED).any()  # beyond t: flagged, not guessed


@pytest.mark.parametrize("name", RS_CODES)
def test_errors_and_erasures_within_2e_plus_f_at_most_n_minus_k_are_corrected(name):
    code = get_code(name)
    rng = np.random.default_rng(code.n + 1)
    rows = 120
    f = rng.integers(0, code.r + 1, rows)
    f[:2] = (code.r, 0)
    e = np.array([rng.integers(0, (code.r - fi) // 2 + 1) for fi in f])
    e[1] = code.t
    messages = rng.integers(0, 256, (rows, code.k), dtype=np.uint8)
    received, marks = symbol_errors(code.encode(messages), e + f, rng, erasures=f)
    decoded, status = code.decode(received, marks)
    assert np.array_equal(decoded, messages)
    assert status.tolist() == (e + f).tolist()  # every changed symbol was erased or in error


def test_erasures_agree_with_galois():
    code = get_code("rs-255-223")
    theirs = galois_rs(code)
    rng = np.random.default_rng(3)
    f = rng.integers(0, 40, 30)
    e = rng.integers(0, 12, 30)
    messages = rng.integers(0, 256, (30, code.k), dtype=np.uint8)
    received, marks = symbol_errors(code.encode(messages), e + f, rng, erasures=f)
    decoded, status = code.decode(received, marks)
    their_messages, their_count = theirs.decode(theirs.field(received), erasures=marks.astype(bool), errors=True)
    ok = status != FAILED
    assert ok.tolist() == (np.asarray(their_count) >= 0).tolist()
    assert np.array_equal(decoded[ok], np.asarray(their_messages)[ok])
    within = 2 * e + f <= code.r
    assert ok[within].all() and np.array_equal(decoded[within], messages[within])


def test_erased_symbols_that_happen_to_be_right_cost_nothing():
    code = get_code("rs-32-28")
    message = np.arange(28, dtype=np.uint8)
    word = code.encode(message)
    marks = np.zeros(32, np.uint8)
    marks[[0, 5, 9, 31]] = 1
    decoded, status = code.decode(word, marks)
    assert (decoded == message).all() and status == 0
    too_many = marks.copy()
    too_many[1] = 1
    noisy = word.copy()
    noisy[[0, 1]] ^= 7
    assert code.decode(noisy, too_many)[1] == FAILED  # 5 erasures > n - k = 4


def test_beyond_t_a_block_is_flagged_or_decoded_to_a_codeword_within_t():
    code = get_code("rs-32-28")
    rng = np.random.default_rng(9)
    messages = rng.integers(0, 256, (400, code.k), dtype=np.uint8)
    received, _ = symbol_errors(code.encode(messages), [code.t + 1] * 400, rng)
    decoded, status = code.decode(received)
    assert (status == FAILED).mean() > 0.8
    for i in np.nonzero(status != FAILED)[0]:  # a miscorrection: still a codeword within t
        assert (code.encode(decoded[i]) != received[i]).sum() <= code.t


# ---- the numpy twins agree with the compiled kernels ---------------------------------------------

@settings(max_examples=25, deadline=None)
@given(name=st.sampled_from(RS_CODES), seed=st.integers(0, 2**32 - 1), with_erasures=st.booleans())
def test_numpy_twins_are_bit_identical_to_the_compiled_kernels(name, seed, with_erasures):
    from bitmend.kernels import cyclic

    code = get_code(name)
    gf = code.field
    rng = np.random.default_rng(seed)
    messages = rng.integers(0, 256, (20, code.k), dtype=np.uint8)
    a = np.zeros((20, code.n), np.uint8)
    a[:, : code.k] = messages
    b = a.copy()
    cyclic.rs_encode_rows(a, code.k, code.r, code.register_table)
    cyclic_small.rs_encode_rows(b, code.k, code.r, code.register_table)
    assert np.array_equal(a, b)
    f = rng.integers(0, code.r + 3, 20) if with_erasures else np.zeros(20, int)
    e = rng.integers(0, code.t + 3, 20)
    a, marks = symbol_errors(a, np.minimum(e + f, code.n), rng, erasures=f)
    b = a.copy()
    if not with_erasures:
        marks = np.zeros((0, code.n), np.uint8)
    sa, sb = np.zeros(20, np.uint8), np.zeros(20, np.uint8)
    cyclic.rs_decode_rows(a, code.r, code.first_root, code.register_table, gf.mul_table, gf.inv_table, gf.exp,
                          gf.order, marks, sa)
    cyclic_small.rs_decode_rows(b, code.r, code.first_root, code.register_table, gf.mul_table, gf.inv_table, gf.exp,
                                gf.order, marks, sb)
    assert np.array_equal(sa, sb) and np.array_equal(a, b)


# ---- symbol interleaving and the container ----------------------------------------------------

def test_group_places_symbol_j_of_codeword_i_at_j_times_depth_plus_i():
    code = get_code("rs-32-28")
    depth = 6
    message = random_bytes(depth * code.k, seed=2)  # exactly one group
    words = code.encode(np.frombuffer(message, np.uint8).reshape(depth, code.k))
    coded = encode_segment(code, depth, message)
    assert len(coded) == depth * code.n == layout(code, depth, len(message)).coded_bytes
    for i in range(depth):
        for j in range(code.n):
            assert coded[j * depth + i] == words[i, j]


@pytest.mark.parametrize("name", ("rs-255-223", "rs-204-188", "rs-32-28"))
@pytest.mark.parametrize("depth", (1, 4, 17))
def test_burst_of_depth_times_t_symbols_is_corrected_in_a_segment(name, depth):
    code = get_code(name)
    message = random_bytes(2 * depth * code.k + 100, seed=depth)
    coded = encode_segment(code, depth, message)
    total = layout(code, depth, len(message)).coded_bytes
    burst = depth * code.t  # symbols (bytes)
    for start in (0, depth * code.n - burst // 2, total - burst, 1 + 131 % (total - burst - 1)):
        damaged = bytearray(coded)
        for p in range(start, start + burst):
            damaged[p] ^= 0xA5
        out, status = decode_segment(code, depth, bytes(damaged), len(message))
        assert out == message and int(status.sum()) == burst


@pytest.mark.parametrize("name", RS_CODES)
@pytest.mark.parametrize("depth", (1, 2, 8))
def test_round_trip_through_the_container(name, depth):
    data = random_bytes(1500, seed=depth)
    for frame_bytes in (100, 1500):
        result = bitmend.decode_bytes(bitmend.encode_bytes(data, code=name, depth=depth, frame_bytes=frame_bytes))
        assert result.data == data and result.report.summary.complete


@settings(max_examples=30, deadline=None)
@given(data=st.binary(max_size=700), name=st.sampled_from(RS_CODES), depth=st.integers(1, 255),
       frame_bytes=st.integers(1, 400))
def test_round_trip_any_bytes_depth_and_frame_size(data, name, depth, frame_bytes):
    result = bitmend.decode_bytes(bitmend.encode_bytes(data, code=name, depth=depth, frame_bytes=frame_bytes))
    assert result.data == data and result.report.summary.complete


@pytest.mark.parametrize("name, depth", [("rs-255-223", 1), ("rs-255-223", 8), ("rs-204-188", 12),
                                         ("rs-32-28", 255)])
def test_burst_of_depth_times_t_symbols_is_corrected_through_the_container(name, depth):
    code = get_code(name)
    burst_bits = 8 * depth * code.t
    data = random_bytes(6000, depth)
    blob = bitmend.encode_bytes(data, code=name, depth=depth, frame_bytes=2000)
    target = frame_spans(blob)[1]
    header = fmt.decode_header(blob[target.header_start: target.payload_start])
    coded_bits = layout(code, depth, header.length + fmt.CRC_BYTES).coded_bits
    for offset in (0, 8 * 3, coded_bits - burst_bits):  # symbol-aligned bursts of D*t bytes
        result = bitmend.decode_bytes(flip_run(blob, 8 * target.payload_start + offset, burst_bits))
        assert result.data == data and result.report.summary.complete
        frames = result.report.frames
        assert frames[1].status == CORRECTED and frames[1].corrected_symbols == depth * code.t
        assert all(f.status == CLEAN for i, f in enumerate(frames) if i != 1)


def test_unaligned_burst_touching_depth_times_t_bytes_is_corrected():
    # 8 D t - 7 bits starting 3 bits into a byte touch exactly D t bytes (symbols)
    code = get_code("rs-255-239")
    depth = 4
    data = random_bytes(3000, 5)
    blob = bitmend.encode_bytes(data, code=code.name, depth=depth, frame_bytes=3000)
    span = frame_spans(blob)[0]
    result = bitmend.decode_bytes(flip_run(blob, 8 * span.payload_start + 8 * 100 + 3, 8 * depth * code.t - 7))
    assert result.data == data and result.report.summary.complete


def test_truncated_frame_rebuilds_the_cut_group_from_erasures():
    code = get_code("rs-255-223")
    depth = 4
    data = random_bytes(4000, 8)
    blob = bitmend.encode_bytes(data, code=code.name, depth=depth, frame_bytes=4000)
    span = frame_spans(blob)[0]
    group = depth * code.n
    # the cut leaves the first group whole and 200 of the second group's 255 symbol columns:
    # every codeword of that group lost 55 symbols > n - k = 32, so nothing beyond group 1
    cut_late = span.payload_start + group + 200 * depth
    result = bitmend.decode_bytes(blob[:cut_late])
    assert result.data == data[: depth * code.k]
    # a cut after 230 columns: 25 erasures per codeword <= 32, the whole group is rebuilt
    cut = span.payload_start + group + 230 * depth
    result = bitmend.decode_bytes(blob[:cut])
    assert result.data == data[: 2 * depth * code.k]
    frame = result.report.frames[0]
    assert frame.status == DAMAGED and not frame.crc_ok  # a truncated frame is never called verified
    # a cut inside a column: the codewords before it have one erasure fewer
    cut = span.payload_start + group + 224 * depth + 2
    assert bitmend.decode_bytes(blob[:cut]).data == data[: 2 * depth * code.k]


def test_truncated_frame_with_errors_in_the_cut_group_still_rebuilds_within_2e_plus_f():
    code = get_code("rs-255-223")
    depth = 2
    data = random_bytes(2000, 3)
    blob = bytearray(bitmend.encode_bytes(data, code=code.name, depth=depth, frame_bytes=2000))
    span = frame_spans(bytes(blob))[0]
    group = depth * code.n
    cut = span.payload_start + group + 235 * depth  # 20 erasures per codeword of group 1
    for i in range(depth):  # and 6 errors in each (2*6 + 20 = 32)
        for j in (1, 50, 90, 120, 160, 200):
            blob[span.payload_start + group + j * depth + i] ^= 0x3C
    assert bitmend.decode_bytes(bytes(blob[:cut])).data == data[: 2 * depth * code.k]


def test_golden_payload_of_rs_32_28_pins_the_construction():
    # computed with the library once (codewords are checked above against galois): the 19
    # payload bytes, their CRC-32C d90c9abd, 5 zero bytes of padding, 4 parity bytes
    blob = bitmend.encode_bytes(b"gauge 7 stage 1.42m", code="rs-32-28", depth=1)
    assert len(blob) == 106 + 54  # 54 more header bytes in format version 2 than in version 1
    assert blob[68:-60].hex() == "6761756765203720737461676520312e34326d" "d90c9abd" "0000000000" "e5c54288"


# ---- symbol error theory -------------------------------------------------------------------------

def test_symbol_block_error_on_a_bsc_is_the_binomial_tail_over_byte_errors():
    p = 1e-3
    q = 1 - (1 - p) ** 8
    assert theory.symbol_error(p) == pytest.approx(q, rel=1e-12)
    expected = sum(comb(255, i) * q ** i * (1 - q) ** (255 - i) for i in range(17, 256))
    assert theory.bsc_symbol_block_error(255, 16, p) == pytest.approx(expected, rel=1e-9)
    # t = 0: any of the 255 * 8 bits
    assert theory.bsc_symbol_block_error(255, 0, p) == pytest.approx(1 - (1 - p) ** 2040, rel=1e-9)
    # tiny p keeps its precision: the leading term C(n, t+1) q^(t+1)
    tiny = theory.bsc_symbol_block_error(255, 16, 1e-9)
    assert tiny == pytest.approx(comb(255, 17) * (8e-9) ** 17, rel=1e-5)
