"""The byte-table kernels (kernels.bytetable: k a multiple of 8, check bits in one byte) against
the numpy twins in kernels.small and the word-buffer kernels (kernels.blockcode, the path
these codes took before), bit for bit: coded bytes, decoded bytes and every block status
(0 clean, 1 corrected, FAILED), on random data and errors, short tails, truncated and
unaligned buffers, and runs of segments end to end; the vector transposes of the depth-8
kernels against a numpy bit transpose, and their loop for kb = 8 against the loop for any kb."""

from __future__ import annotations

import sys
from functools import cache

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bitmend import interleave
from bitmend.codes.catalog import get_code
from bitmend.codes.families import hsiao_secded
from bitmend.codes.linear import BinaryLinearCode
from bitmend.interleave import _plan, decode_segment, decode_segments, encode_segment, encode_segments, layout
from bitmend.kernels import small
from bitmend.kernels.status import FAILED

from conftest import ALL_CODES, codeword_error_bits, flip_bits


@pytest.fixture(autouse=True, scope="module")
def _compiled_kernels():
    """Load the compiled kernels first: small segments would otherwise take the numpy twins."""
    from bitmend.kernels import blockcode  # noqa: F401
    from bitmend.kernels.loader import compiled_loaded

    assert compiled_loaded()


def _random_code(k: int, r: int, seed: int) -> BinaryLinearCode:
    """A systematic code with a random parity part (any distance, t = 0 included)."""
    P = np.random.default_rng(seed).integers(0, 2, size=(k, r), dtype=np.uint8)
    return BinaryLinearCode(f"random-{k + r}-{k}", P)


# (code, depth) pairs on the byte and pair paths: catalog codes, and custom ones for message
# bytes per codeword from 2 to 7, r below 8 (depth 8 only), random codes of any t (0
# included), and pairs of codewords of 5 and 8 bytes
CUSTOM = {"secded-24-16": hsiao_secded(16, 8), "secded-32-24": hsiao_secded(24, 8),
          "secded-47-40": hsiao_secded(40, 7), "secded-64-56": hsiao_secded(56, 8),
          "random-40-32": _random_code(32, 8, seed=4), "random-51-48": _random_code(48, 3, seed=5),
          "random-20-8": _random_code(8, 12, seed=7), "random-32-12": _random_code(12, 20, seed=8)}
BYTE_KINDS = ("bytes", "pairs")
BYTE_CASES = ([(name, depth) for name in ALL_CODES for depth in (1, 8)
               if _plan(get_code(name), depth).encode_kind in BYTE_KINDS]
              + [(name, depth) for name, code in CUSTOM.items() for depth in (1, 8)
                 if _plan(code, depth).encode_kind in BYTE_KINDS])


def _code(name: str):
    return CUSTOM[name] if name in CUSTOM else get_code(name)


def _reference(code, depth: int, message: bytes, coded: bytes) -> tuple[bytes, bytes, np.ndarray, bytes, np.ndarray]:
    """(twin coded, twin decoded, twin status, word-kernel decoded, word-kernel status) of
    message and of the received bytes coded (zero-padded to the layout)."""
    lay = layout(code, depth, len(message))
    lead_m, _, weight = code.leader_tables
    received = np.frombuffer(coded.ljust(lay.coded_bytes, b"\0"), np.uint8)
    twin_out, twin_status = small.decode(received, code.P, depth, lay.groups, lead_m, weight, len(message))
    words_out, words_status = interleave._decode_words(code, lay, received, len(message))
    return small.encode(message, code.P, depth, lay.groups), twin_out, twin_status, words_out, words_status


def test_the_byte_path_serves_the_codes_of_whole_message_bytes_and_one_check_byte():
    kinds = {(name, depth): (_plan(get_code(name), depth).encode_kind, _plan(get_code(name), depth).decode_kind)
             for name in ("secded-72-64", "secded-39-32") for depth in (1, 8, 16)}
    assert kinds == {("secded-72-64", 1): ("bytes", "bytes"), ("secded-72-64", 8): ("bytes", "bytes"),
                     ("secded-72-64", 16): ("octets", "words"), ("secded-39-32", 1): ("depth1", "depth1"),
                     ("secded-39-32", 8): ("bytes", "bytes"), ("secded-39-32", 16): ("octets", "words")}
    assert set(BYTE_CASES) >= {("secded-24-16", 1), ("secded-32-24", 8), ("secded-47-40", 8), ("random-51-48", 8),
                               ("random-40-32", 1), ("secded-64-56", 1)}
    assert ("secded-47-40", 1) not in BYTE_CASES  # r = 7 at depth 1: a codeword is not whole bytes
    pairs = {(name, depth) for name, depth in BYTE_CASES if _plan(_code(name), depth).encode_kind == "pairs"}
    assert pairs == {("golay-24-12", 1), ("random-20-8", 1), ("random-32-12", 1)}


def test_the_byte_path_encodes_the_same_bytes_as_the_word_kernels_and_the_twin():
    rng = np.random.default_rng(1)
    for name, depth in BYTE_CASES:
        code = _code(name)
        for size in (0, 1, 7, 8, 9, 63, 64, 65, 71, 72, 100, 511, 512, 513, 4099):
            message = rng.integers(0, 256, size=size, dtype=np.uint8).tobytes()
            lay = layout(code, depth, size)
            coded = encode_segment(code, depth, message)
            assert coded == small.encode(message, code.P, depth, lay.groups), (name, depth, size)
            assert coded == interleave._encode_words(code, lay, message), (name, depth, size)


@settings(max_examples=60, deadline=None)
@given(case=st.sampled_from(BYTE_CASES), seed=st.integers(0, 2**32 - 1), size=st.integers(0, 3000),
       density=st.sampled_from((0.0, 1e-3, 1e-2, 0.1)), cut=st.integers(0, 20))
def test_decoding_matches_the_twin_and_the_word_kernels_with_any_damage_and_truncation(case, seed, size, density,
                                                                                     cut):
    name, depth = case
    code = _code(name)
    rng = np.random.default_rng(seed)
    message = rng.integers(0, 256, size=size, dtype=np.uint8).tobytes()
    coded = encode_segment(code, depth, message)
    bits = 8 * len(coded)
    noisy = flip_bits(coded, rng.choice(bits, size=int(rng.binomial(bits, density)), replace=False).tolist())
    noisy = noisy[: max(0, len(noisy) - cut)]  # the last bytes lost: read as zero
    out, status = decode_segment(code, depth, noisy, size)
    _, twin_out, twin_status, words_out, words_status = _reference(code, depth, message, noisy)
    assert out == twin_out == words_out
    assert np.array_equal(status, twin_status) and np.array_equal(status, words_status)


@pytest.mark.parametrize("name, depth", BYTE_CASES)
def test_single_errors_are_corrected_and_double_errors_flagged_in_each_codeword(name, depth):
    # block b gets b mod 3 errors: clean, one (corrected, status 1), two (SECDED: FAILED, left as received)
    code = _code(name)
    rng = np.random.default_rng(code.n)
    message = rng.integers(0, 256, size=2000, dtype=np.uint8).tobytes()
    coded = encode_segment(code, depth, message)
    lay = layout(code, depth, len(message))
    noisy = flip_bits(coded, codeword_error_bits(code, depth, lay.blocks, lambda block: block % 3, rng))
    out, status = decode_segment(code, depth, noisy, len(message))
    _, twin_out, twin_status, words_out, words_status = _reference(code, depth, message, noisy)
    assert out == twin_out == words_out
    assert np.array_equal(status, twin_status) and np.array_equal(status, words_status)
    if name.startswith("secded"):
        assert status.tolist() == [(0, 1, FAILED)[b % 3] for b in range(lay.blocks)]


@pytest.mark.parametrize("name, depth", BYTE_CASES)
def test_every_cut_near_the_end_reads_the_missing_bytes_as_zero(name, depth):
    code = _code(name)
    message = np.random.default_rng(2).integers(0, 256, size=700, dtype=np.uint8).tobytes()
    coded = encode_segment(code, depth, message)
    for keep in range(max(0, len(coded) - 20), len(coded) + 1):
        out, status = decode_segment(code, depth, coded[:keep], len(message))
        _, twin_out, twin_status, _, _ = _reference(code, depth, message, coded[:keep])
        assert out == twin_out and np.array_equal(status, twin_status), keep


@pytest.mark.parametrize("name, depth", BYTE_CASES)
@pytest.mark.parametrize("offset", (1, 3, 7))
def test_unaligned_buffers_code_like_aligned_bytes(name, depth, offset):
    code = _code(name)
    rng = np.random.default_rng(offset)
    message = rng.integers(0, 256, size=1234, dtype=np.uint8).tobytes()
    shifted = np.frombuffer(bytes(offset) + message, np.uint8)[offset:]  # data at an odd address
    coded = encode_segment(code, depth, shifted)
    assert coded == encode_segment(code, depth, message)
    noisy = flip_bits(coded, rng.choice(8 * len(coded), size=40, replace=False).tolist())
    received = np.frombuffer(bytes(offset) + noisy, np.uint8)[offset:]
    out, status = decode_segment(code, depth, received, len(message))
    want_out, want_status = decode_segment(code, depth, noisy, len(message))
    assert out == want_out and np.array_equal(status, want_status)


@pytest.mark.parametrize("name, depth", [case for case in BYTE_CASES if case[0] in ("secded-72-64", "secded-39-32")])
def test_segments_end_to_end_code_and_decode_like_one_at_a_time(name, depth):
    code = _code(name)
    rng = np.random.default_rng(9)
    messages = rng.integers(0, 256, size=(5, 16388), dtype=np.uint8)
    coded = encode_segments(code, depth, messages)
    assert [bytes(row) for row in coded] == [encode_segment(code, depth, bytes(m)) for m in messages]
    noisy = np.frombuffer(flip_bits(coded.tobytes(), rng.choice(coded.size * 8, 300, replace=False).tolist()),
                          np.uint8).reshape(coded.shape)
    out, status = decode_segments(code, depth, noisy, messages.shape[1])
    for i in range(len(messages)):
        one, one_status = decode_segment(code, depth, bytes(noisy[i]), messages.shape[1])
        assert bytes(out[i]) == one and np.array_equal(status[i], one_status)


def test_a_code_of_64_bits_off_the_byte_path_decodes_on_the_word_kernels():
    # kernels.blockcode took its one-entry placeholder for a 2^64-entry word table (1 << 64
    # wraps to 1) and read far outside it; k = 60 is not whole bytes, so this code stays there
    code = _random_code(60, 4, seed=6)
    assert _plan(code, 1).decode_kind == "words"
    message = np.random.default_rng(6).integers(0, 256, size=999, dtype=np.uint8).tobytes()
    coded = encode_segment(code, 1, message)
    noisy = flip_bits(coded, [5, 300, 301, 4000])
    out, status = decode_segment(code, 1, noisy, len(message))
    _, twin_out, twin_status, _, _ = _reference(code, 1, message, noisy)
    assert out == twin_out and np.array_equal(status, twin_status)


@cache
def _octet_transposes():
    """Compiled calls of kernels.bytetable's store_slices and load_messages on one octet at
    the start of a buffer (intrinsics: callable only from compiled code)."""
    from bitmend.kernels import bytetable
    from bitmend.kernels.jit import njit

    @njit
    def slices(messages, kb, keep, out):
        bytetable.store_slices(messages.ctypes.data, 0, kb, keep, out.ctypes.data, 0)

    @njit
    def messages(slices, kb, out):
        words = bytetable.load_messages(slices.ctypes.data, 0, kb)
        for q in range(8):
            out[q] = words[q]

    return slices, messages


@pytest.mark.parametrize("kb", range(1, 9))
def test_the_vector_transposes_give_the_slices_of_a_bit_transpose_and_back(kb):
    # slice c byte i holds bit i of message byte c of codeword q at bit 7 - q: the transpose
    # of the 8 x 8kb bit matrix of the messages, packed by columns
    slices, messages = _octet_transposes()
    keep = np.uint64(int.from_bytes(bytes([255] * kb + [0] * (8 - kb)), sys.byteorder))  # first kb bytes, native
    rng = np.random.default_rng(kb)
    for _ in range(20):
        octet = rng.integers(0, 256, size=(8, kb), dtype=np.uint8)
        want = np.packbits(np.unpackbits(octet, axis=1).T, axis=1).reshape(-1)
        source = np.concatenate([octet.reshape(-1), rng.integers(0, 256, 8, dtype=np.uint8)])  # bytes past: ignored
        out = np.full(8 * kb + 16, 0xA5, dtype=np.uint8)
        slices(source, kb, keep, out)
        assert out[: 8 * kb].tobytes() == want.tobytes()
        assert (out[8 * kb:] == 0xA5).all()  # nothing stored past the slices
        received = np.concatenate([want, rng.integers(0, 256, 72, dtype=np.uint8)])  # bytes past: not read
        words = np.zeros(8, dtype=np.uint64)
        messages(received, kb, words)
        padded = np.zeros((8, 8), dtype=np.uint8)
        padded[:, :kb] = octet
        assert words.tobytes() == padded.tobytes()  # native words: message bytes in memory order, zeros past kb


@pytest.mark.parametrize("code", [get_code("secded-72-64"), _random_code(64, 5, seed=10)], ids=lambda c: c.name)
def test_the_octet_loops_for_kb_8_and_any_kb_agree_and_decode_as_the_twins(code):
    from bitmend.kernels import bytetable

    kb, r, octets = code.k // 8, code.r, 300
    table = _plan(code, 8).encode_table
    lead_m, _, weight = code.leader_tables
    rng = np.random.default_rng(3)
    message = rng.integers(0, 256, size=8 * kb * octets + 8, dtype=np.uint8)
    coded = [np.zeros(octets * (8 * kb + r) + 8, dtype=np.uint8) for _ in range(2)]
    bytetable._encode_octets(message.ctypes.data, table.ctypes.data, coded[0].ctypes.data, octets, kb, r)
    bytetable._encode_octets8(message.ctypes.data, table.ctypes.data, coded[1].ctypes.data, octets, r)
    assert coded[0].tobytes() == coded[1].tobytes()
    assert coded[0][: octets * (8 * kb + r)].tobytes() == small.encode(message[: 8 * kb * octets].tobytes(), code.P,
                                                                     8, octets)
    noisy = np.frombuffer(flip_bits(coded[0].tobytes(), rng.choice(8 * octets * (8 * kb + r), 400, replace=False)),
                          np.uint8)
    out = np.zeros(8 * kb * octets + 8, dtype=np.uint8)
    status = np.zeros(8 * octets, dtype=np.uint8)
    bytetable._decode_octets(noisy.ctypes.data, table.ctypes.data, out.ctypes.data, octets, 0, kb, r,
                             lead_m.ctypes.data, weight.ctypes.data, status.ctypes.data)
    want, want_status = small.decode(noisy[: octets * (8 * kb + r)].tobytes(), code.P, 8, octets, lead_m, weight,
                                     8 * kb * octets)
    assert out[: 8 * kb * octets].tobytes() == bytes(want) and np.array_equal(status, want_status)
    assert np.count_nonzero(status) > 0
