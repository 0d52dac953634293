"""One code interface: every catalog code, a custom code and codes outside the catalog
through BlockCode's public API, and code objects wherever a name works.

Outside values: weight enumerators of the Hamming (7, 4) and Golay codes from MacWilliams &
Sloane, The Theory of Error-Correcting Codes (ch. 1 and ch. 2; recalled from memory); the
galois library as an independent implementation of BCH and Reed-Solomon encoding.
"""

from __future__ import annotations

import subprocess
import sys
from math import comb

import galois
import numpy as np
import pytest

import bitmend
from bitmend.codes.base import FAILED, BlockCode
from bitmend.codes.bch import BCHCode
from bitmend.codes.catalog import catalog_id, code_id, code_names, get_code
from bitmend.codes.custom import parse_code_definition
from bitmend.codes.linear import BinaryLinearCode
from bitmend.codes.reed_solomon import ReedSolomonCode
from bitmend.container import format as fmt
from bitmend.errors import CodeError
from bitmend.kernels import status

from conftest import frame_spans

# an invented (7, 4) code: a Hamming code in another column order (not the catalog's)
CUSTOM_DEFINITION = "generator\n1000110\n0100011\n0010111\n0001101\n"
OUTSIDE_CODES = {  # built on demand: codes that are not in the catalog
    "custom-7-4": lambda: parse_code_definition(CUSTOM_DEFINITION, "test definition"),
    "bch-25-15": lambda: BCHCode(5, 2, 25),
    "rs-64-48": lambda: ReedSolomonCode(64, 48),
}
ALL = [*code_names(), *OUTSIDE_CODES]


def code_of(name: str) -> BlockCode:
    return OUTSIDE_CODES[name]() if name in OUTSIDE_CODES else get_code(name)


def random_messages(code: BlockCode, count: int, seed: int) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, 1 << code.symbol_bits, (count, code.k), dtype=np.uint8)


def with_errors(words: np.ndarray, weight: int, symbol_bits: int, rng) -> np.ndarray:
    """Each word with `weight` symbols changed at random positions (a changed byte by a
    random non-zero value, a changed bit flipped)."""
    out = words.copy()
    count, n = words.shape
    positions = np.argsort(rng.random((count, n)), axis=1)[:, :weight]
    values = rng.integers(1, 1 << symbol_bits, (count, weight), dtype=np.uint8)
    np.bitwise_xor.at(out, (np.arange(count)[:, None], positions), values)
    return out


def symbol_distance(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return (a != b).sum(axis=-1)


# ---- one vector and a matrix ------------------------------------------------------------------------

@pytest.mark.parametrize("name", ALL)
def test_one_vector_and_a_matrix_give_the_same_answers(name):
    code = code_of(name)
    rng = np.random.default_rng(11)
    messages = random_messages(code, 6, seed=1)
    words = code.encode(messages)
    received = with_errors(words, min(code.t + 1, code.n), code.symbol_bits, rng)
    decoded, statuses = code.decode(received)
    syndromes = code.syndromes(received)
    flags = code.detect(received)
    assert words.shape == (6, code.n) and decoded.shape == (6, code.k) and statuses.shape == (6,)
    for i in range(6):
        assert np.array_equal(code.encode(messages[i]), words[i])
        one, one_status = code.decode(received[i])
        assert one.shape == (code.k,) and np.ndim(one_status) == 0
        assert np.array_equal(one, decoded[i]) and one_status == statuses[i]
        assert np.array_equal(code.syndromes(received[i]), syndromes[i])
        assert code.detect(received[i]) == flags[i]


# ---- decoding guarantees ------------------------------------------------------------------------------

@pytest.mark.parametrize("name", ALL)
def test_every_sampled_pattern_of_up_to_t_errors_is_corrected_and_counted(name):
    code = code_of(name)
    rng = np.random.default_rng(code.n)
    messages = random_messages(code, 12, seed=2)
    words = code.encode(messages)
    for weight in range(code.t + 1):
        decoded, statuses = code.decode(with_errors(words, weight, code.symbol_bits, rng))
        assert np.array_equal(decoded, messages), weight
        assert (statuses == weight).all(), weight


@pytest.mark.parametrize("name", ALL)
def test_beyond_t_decode_reports_failed_or_a_codeword_within_t(name):
    code = code_of(name)
    rng = np.random.default_rng(code.k)
    words = code.encode(random_messages(code, 16, seed=3))
    for weight in range(code.t + 1, min(code.t + 4, code.n) + 1):
        received = with_errors(words, weight, code.symbol_bits, rng)
        decoded, statuses = code.decode(received)
        failed = statuses == FAILED
        # flagged words are left as received, never guessed
        assert np.array_equal(decoded[failed], received[failed, : code.k])
        # a word not flagged was decoded to a codeword no further than t from what arrived
        distance = symbol_distance(code.encode(decoded[~failed]), received[~failed])
        assert np.array_equal(distance, statuses[~failed]) and (distance <= code.t).all()


@pytest.mark.parametrize("name", ALL)
def test_detect_agrees_with_nonzero_syndromes(name):
    code = code_of(name)
    rng = np.random.default_rng(5)
    words = code.encode(random_messages(code, 10, seed=4))
    received = np.vstack([words, with_errors(words, 1, code.symbol_bits, rng),
                          rng.integers(0, 1 << code.symbol_bits, (10, code.n), dtype=np.uint8)])
    flags = code.detect(received)
    assert np.array_equal(flags, code.syndromes(received).any(axis=1))
    assert not flags[:10].any() and flags[10:20].all()  # every single error is seen (d >= 2)


@pytest.mark.parametrize("name", ALL)
def test_properties_hang_together(name):
    code = code_of(name)
    assert code.r == code.n - code.k and code.rate == code.k / code.n
    assert code.t == (code.d - 1) // 2 and code.detects == code.d - 1 - code.t
    assert sorted(code.column_order) == list(range(code.n))
    q = 1 << code.symbol_bits
    hamming_bound = sum(comb(code.n, i) * (q - 1) ** i for i in range(code.t + 1))
    assert hamming_bound <= q ** code.r and code.is_perfect == (hamming_bound == q ** code.r)
    if code.weight_distribution_available:
        counts = code.weight_distribution.counts
        assert sum(counts) == q ** code.k and code.weight_distribution_note == ""
        assert code.minimum_distance == min(w for w, a in enumerate(counts) if w and a)
        assert code.minimum_distance == code.d if code.distance_kind == "exact" else code.minimum_distance >= code.d
    assert np.array_equal(code.encode(np.eye(code.k, dtype=np.uint8)), code.G)
    assert not code.syndromes(code.G).any()


def test_a_code_whose_distribution_cannot_be_listed_says_why():
    code = get_code("bch-255-223")
    assert code.weight_distribution is None and code.minimum_distance is None
    assert "not available" in code.weight_distribution_note


def test_failed_is_the_one_shared_status():
    assert FAILED == status.FAILED == 255


def test_erasures_are_refused_by_codes_without_them_and_taken_by_reed_solomon():
    word = get_code("bch-15-7").encode(np.zeros(7, np.uint8))
    with pytest.raises(ValueError, match="takes no erasures"):
        get_code("bch-15-7").decode(word, np.zeros(15, np.uint8))
    rs = get_code("rs-32-28")
    damaged = rs.encode(np.arange(28, dtype=np.uint8))
    damaged[[3, 7, 20, 30]] ^= 0x5A  # four wrong symbols: twice t, but marked as erasures
    marks = np.zeros(32, np.uint8)
    marks[[3, 7, 20, 30]] = 1
    message, count = rs.decode(damaged, marks)
    assert np.array_equal(message, np.arange(28)) and count == 4


def test_rows_of_the_wrong_shape_are_refused_with_one_line():
    with pytest.raises(ValueError, match=r"\(N, 2\)"):
        get_code("bch-15-7").encode_rows(np.zeros((3, 3), np.uint8))


# ---- published values -----------------------------------------------------------------------------------

def test_hamming_7_4_weight_enumerator_is_the_published_one():
    # MacWilliams & Sloane ch. 1: 1 + 7z^3 + 7z^4 + z^7 (recalled from memory)
    assert get_code("hamming-7-4").weight_distribution.counts == (1, 0, 0, 7, 7, 0, 0, 1)


def test_golay_weight_enumerators_are_the_published_ones():
    # MacWilliams & Sloane ch. 2 (recalled from memory): (23, 12) 1, 253, 506, 1288, 1288, 506,
    # 253, 1 at weights 0, 7, 8, 11, 12, 15, 16, 23; (24, 12) 1, 759, 2576, 759, 1 at 0, 8, 12, 16, 24
    g23 = dict(enumerate(get_code("golay-23-12").weight_distribution.counts))
    g24 = dict(enumerate(get_code("golay-24-12").weight_distribution.counts))
    assert {w: a for w, a in g23.items() if a} == {0: 1, 7: 253, 8: 506, 11: 1288, 12: 1288, 15: 506, 16: 253,
                                                   23: 1}
    assert {w: a for w, a in g24.items() if a} == {0: 1, 8: 759, 12: 2576, 16: 759, 24: 1}


def test_bch_codewords_outside_the_catalog_equal_galois():
    # galois' BCH(31, 11) (t = 5) and, shortened, our bch-25-15: its codewords are those of
    # bch-31-21 with six leading zeros not sent
    rng = np.random.default_rng(31)
    full = BCHCode(5, 5)
    messages = rng.integers(0, 2, (20, 11), dtype=np.uint8)
    theirs = galois.BCH(31, 11)
    assert np.array_equal(full.encode(messages), np.asarray(theirs.encode(galois.GF2(messages))))
    short = BCHCode(5, 2, 25)
    messages = rng.integers(0, 2, (20, 15), dtype=np.uint8)
    padded = np.hstack([np.zeros((20, 6), np.uint8), messages])
    expected = np.asarray(galois.BCH(31, 21).encode(galois.GF2(padded)))[:, 6:]
    assert np.array_equal(short.encode(messages), expected)


def test_reed_solomon_codewords_outside_the_catalog_equal_galois_shortened():
    rng = np.random.default_rng(64)
    code = ReedSolomonCode(64, 48)
    messages = rng.integers(0, 256, (10, 48), dtype=np.uint8)
    theirs = galois.ReedSolomon(255, 239)
    padded = np.hstack([np.zeros((10, 191), np.uint8), messages])
    expected = np.asarray(theirs.encode(theirs.field(padded)))[:, 191:]
    assert np.array_equal(code.encode(messages), expected)


# ---- code objects wherever a name works -------------------------------------------------------------------

def test_codes_equal_by_family_and_defining_parameters():
    assert BCHCode(4, 2) == get_code("bch-15-7") and hash(BCHCode(4, 2)) == hash(get_code("bch-15-7"))
    assert BCHCode(4, 3) != get_code("bch-15-7")
    assert ReedSolomonCode(32, 28) == get_code("rs-32-28")
    same = BinaryLinearCode.from_parity_check(get_code("hamming-7-4").H, name="my-hamming")
    assert same == get_code("hamming-7-4") and catalog_id(same) == code_id("hamming-7-4")
    assert catalog_id(code_of("custom-7-4")) is None and catalog_id(BCHCode(5, 2, 25)) is None


@pytest.mark.parametrize("name, code", [("bch-15-7", lambda: BCHCode(4, 2)),
                                        ("rs-32-28", lambda: ReedSolomonCode(32, 28)),
                                        ("hamming-7-4", lambda: BinaryLinearCode.from_parity_check(
                                            get_code("hamming-7-4").H, name="my-hamming"))])
def test_a_code_object_equal_to_a_catalog_code_writes_the_same_bytes_as_its_name(name, code):
    data = b"Cinder Bend gauge 2.41 m\n" * 30
    by_object = bitmend.encode_bytes(data, code=code(), depth=4, frame_bytes=300, stream_id=77)
    assert by_object == bitmend.encode_bytes(data, code=name, depth=4, frame_bytes=300, stream_id=77)


def test_a_bch_code_outside_the_catalog_travels_as_a_defined_code():
    data = b"Brackwater Weir 0.82 m\n" * 60
    blob = bitmend.encode_bytes(data, code=BCHCode(5, 2, 25), depth=3, frame_bytes=400)
    headers = [fmt.decode_header(blob[span.start + 8: span.start + 8 + fmt.HEADER_BYTES]) for span in frame_spans(blob)]
    assert len(headers) > 1 and {(h.code_id, h.shape) for h in headers} == {(fmt.CUSTOM_CODE_ID, (15, 10))}
    result = bitmend.decode_bytes(blob)
    assert result.data == data and result.report.complete


def test_a_reed_solomon_code_outside_the_catalog_gets_one_code_error_naming_the_catalog_ones():
    with pytest.raises(CodeError, match="rs-64-48 is not in the catalog.*rs-255-223") as caught:
        bitmend.encode_bytes(b"x", code=ReedSolomonCode(64, 48))
    assert "\n" not in str(caught.value)


# ---- small work stays in numpy ----------------------------------------------------------------------

def test_one_word_of_each_family_is_coded_without_loading_numba():
    script = ("import sys; import numpy as np; from bitmend import get_code\n"
              "for name in ('hamming-7-4', 'golay-24-12', 'bch-15-7', 'rs-32-28'):\n"
              "    code = get_code(name); word = code.encode(np.ones(code.k, np.uint8))\n"
              "    code.decode(word); code.detect(word); code.syndromes(word)\n"
              "print('numba' in sys.modules)")
    run = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True)
    assert run.stdout.strip() == "False"
