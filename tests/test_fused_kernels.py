"""The fused segment kernels (kernels.fused: depth 1 and multiples of 8) against two
independent references: the word-buffer kernels of kernels.blockcode, which wrote every
container before them, and the numpy twins in kernels.small. Bytes on the wire and
decoding verdicts must be identical, damage or not."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bitmend.codes.catalog import get_code
from bitmend.interleave import _plan, decode_segment, encode_segment, layout

from conftest import ALL_CODES, flip_bits, random_bytes

FUSED_DEPTHS = (1, 8, 16, 24)


def _blockcode_encode(code, depth: int, message: bytes) -> bytes:
    """The segment as the word-buffer kernels write it (one call, no chunking)."""
    from bitmend.kernels import bitfields, blockcode

    lay = layout(code, depth, len(message))
    out = bitfields.empty_words(lay.coded_bits)
    blockcode.encode_run(bitfields.to_words(message, lay.blocks * code.k), lay.blocks, code.k, code.r, depth,
                         code.parity_table, out)
    return bitfields.to_bytes(out, lay.coded_bytes)


def _blockcode_decode(code, depth: int, coded: bytes, message_bytes: int) -> tuple[bytes, np.ndarray]:
    from bitmend.kernels import bitfields, blockcode

    lay = layout(code, depth, message_bytes)
    lead_m, lead_p, weight = code.leader_tables
    out = bitfields.empty_words(lay.blocks * code.k)
    status = blockcode.decode_run(bitfields.to_words(coded[: lay.coded_bytes], lay.coded_bits), code.k, code.r,
                                  depth, lay.blocks, code.parity_table, lead_m, lead_p, weight, code.word_table, out)
    return bitfields.to_bytes(out, message_bytes), status


def _twin_decode(code, depth: int, coded: bytes, message_bytes: int) -> tuple[bytes, np.ndarray]:
    from bitmend.kernels import small

    lay = layout(code, depth, message_bytes)
    lead_m, _, weight = code.leader_tables
    return small.decode(np.frombuffer(coded, np.uint8)[: lay.coded_bytes], code.P, depth, lay.groups, lead_m,
                        weight, message_bytes)


@pytest.mark.parametrize("name", ALL_CODES)
def test_fused_encoding_writes_the_bytes_the_word_buffer_kernels_and_the_numpy_twin_write(name):
    from bitmend.kernels import small

    code = get_code(name)
    for depth in FUSED_DEPTHS:
        for size in (0, 1, 13, 1000):
            message = random_bytes(size, seed=size * 7 + depth)
            coded = encode_segment(code, depth, message)
            assert coded == _blockcode_encode(code, depth, message), (depth, size)
            assert coded == small.encode(message, code.P, depth, layout(code, depth, size).groups), (depth, size)


@pytest.mark.parametrize("name", ALL_CODES)
def test_fused_decoding_gives_the_reference_bytes_and_verdicts_under_light_and_heavy_damage(name):
    code = get_code(name)
    rng = np.random.default_rng(code.n * 101 + code.k)
    for depth in FUSED_DEPTHS:
        message = random_bytes(600, seed=depth)
        coded = encode_segment(code, depth, message)
        bits = 8 * len(coded)
        for flips in (1, bits // 1000 + 1, bits // 50, bits // 8):  # down to blocks far beyond t
            noisy = flip_bits(coded, rng.choice(bits, size=flips, replace=False).tolist())
            out, status = decode_segment(code, depth, noisy, len(message))
            ref_out, ref_status = _blockcode_decode(code, depth, noisy, len(message))
            twin_out, twin_status = _twin_decode(code, depth, noisy, len(message))
            assert out == ref_out == twin_out, (depth, flips)
            assert np.array_equal(status, ref_status) and np.array_equal(status, twin_status), (depth, flips)


@pytest.mark.parametrize("name", ("hamming-7-4", "golay-24-12", "hamming-31-26", "secded-72-64"))
@pytest.mark.parametrize("depth", (1, 8))
def test_every_single_bit_error_of_a_group_is_corrected_and_charged_to_its_own_codeword(name, depth):
    code = get_code(name)
    message = random_bytes(2 * code.k, seed=3)  # 16 k bits: 16 codewords, two octets
    coded = encode_segment(code, depth, message)
    for position in range(16 * code.n):
        out, status = decode_segment(code, depth, flip_bits(coded, [position]), len(message))
        # the codeword a stream bit belongs to: bit j*D + i of group g is codeword g*D + i
        group, offset = divmod(position, depth * code.n)
        block = group * depth + offset % depth
        assert out == message, position
        assert status[block] == 1 and int(status.sum()) == 1, position


@pytest.mark.parametrize("name", ("hamming-7-4", "golay-24-12", "secded-72-64"))
@pytest.mark.parametrize("depth", (1, 8, 16))
def test_a_truncated_segment_decodes_its_missing_bits_as_zero_like_the_twin(name, depth):
    code = get_code(name)
    message = random_bytes(500, seed=depth)
    coded = encode_segment(code, depth, message)
    for keep in (0, 1, len(coded) // 3, len(coded) - 1):
        out, status = decode_segment(code, depth, coded[:keep], len(message))
        twin_out, twin_status = _twin_decode(code, depth, coded[:keep] + bytes(len(coded) - keep), len(message))
        assert out == twin_out and np.array_equal(status, twin_status), keep


@settings(max_examples=25, deadline=None)
@given(name=st.sampled_from(ALL_CODES), depth=st.sampled_from(FUSED_DEPTHS), seed=st.integers(0, 2**32 - 1))
def test_fused_kernels_agree_with_the_numpy_twin_on_any_message_and_damage(name, depth, seed):
    from bitmend.kernels import small

    code = get_code(name)
    rng = np.random.default_rng(seed)
    message = rng.integers(0, 256, size=int(rng.integers(0, 400)), dtype=np.uint8).tobytes()
    lay = layout(code, depth, len(message))
    coded = encode_segment(code, depth, message)
    assert coded == small.encode(message, code.P, depth, lay.groups)
    noisy = flip_bits(coded, rng.choice(lay.coded_bits, size=int(rng.integers(0, lay.coded_bits // 6 + 1)),
                                        replace=False).tolist())
    out, status = decode_segment(code, depth, noisy, len(message))
    twin_out, twin_status = _twin_decode(code, depth, noisy, len(message))
    assert out == twin_out and np.array_equal(status, twin_status)


def test_each_code_and_depth_takes_the_kernel_chosen_for_it():
    # the dispatch the tests above rely on, so that every kernel kind is exercised
    kinds = {(name, depth): (_plan(get_code(name), depth).encode_kind, _plan(get_code(name), depth).decode_kind)
             for name, depth in (("hamming-7-4", 1), ("golay-24-12", 8), ("golay-24-12", 1), ("secded-72-64", 8),
                                 ("secded-72-64", 1), ("hamming-7-4", 16))}
    assert kinds == {("hamming-7-4", 1): ("linear", "linear"), ("golay-24-12", 8): ("linear", "linear"),
                     ("golay-24-12", 1): ("pairs", "pairs"), ("secded-72-64", 8): ("bytes", "bytes"),
                     ("secded-72-64", 1): ("bytes", "bytes"), ("hamming-7-4", 16): ("octets", "words")}


def test_byte_transpose_moves_byte_j_of_row_i_to_byte_i_of_row_j():
    from bitmend.kernels.fused import byte_transpose

    rows = np.random.default_rng(9).integers(0, 256, size=(8, 8), dtype=np.uint8)  # row i, byte j (MSB first)
    words = [np.uint64(int.from_bytes(rows[i].tobytes(), "big")) for i in range(8)]
    result = byte_transpose(*words)
    assert [int(w).to_bytes(8, "big") for w in result] == [rows[:, j].tobytes() for j in range(8)]


def test_the_reciprocal_divides_every_syndrome_offset_a_step_can_have() -> None:
    # the linear kernels find a syndrome bit's codeword as (x * reciprocal(r)) >> 16 in
    # place of x // r: exact for every offset x below 192 bits (a step's width) and r below 192
    from bitmend.kernels import fused

    x = np.arange(192, dtype=np.int64)
    for r in range(1, 192):
        assert np.array_equal((x * fused.reciprocal(r)) >> 16, x // r), r
