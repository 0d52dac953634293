"""Bit interleaving of codewords: layout sizes, round trips, and the burst guarantee
(any D*t consecutive channel bits are corrected at depth D)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bitmend.codes.catalog import get_code
from bitmend.interleave import decode_segment, encode_segment, layout

from conftest import ALL_CODES, SECDED_CODES, codeword_error_bits, flip_bits, flip_run, random_bytes

BURST_CASES = [
    (name, depth)
    for name in ("rep-3", "hamming-7-4", "secded-39-32", "golay-23-12", "golay-24-12")
    for depth in (1, 3, 8, 255)
]


def test_layout_uses_ceiling_groups_and_at_least_one():
    code = get_code("hamming-7-4")
    assert layout(code, 8, 0).groups == 1
    assert layout(code, 8, 4).groups == 1  # 32 bits fit one group of 8 x 4 bits
    assert layout(code, 8, 5).groups == 2
    lay = layout(code, 3, 10)  # 80 bits over groups of 12 bits -> 7 groups
    assert (lay.groups, lay.blocks, lay.coded_bits, lay.coded_bytes) == (7, 21, 147, 19)


@pytest.mark.parametrize("name", ALL_CODES)
@pytest.mark.parametrize("depth", (1, 2, 8, 255))
def test_segment_round_trip_without_errors(name, depth):
    code = get_code(name)
    for size in (0, 1, 13, 300):
        message = random_bytes(size, seed=size + depth)
        coded = encode_segment(code, depth, message)
        assert len(coded) == layout(code, depth, size).coded_bytes
        out, status = decode_segment(code, depth, coded, size)
        assert out == message
        assert len(status) == layout(code, depth, size).blocks
        assert not status.any()


@settings(max_examples=40, deadline=None)
@given(name=st.sampled_from(ALL_CODES), depth=st.integers(1, 64), message=st.binary(max_size=200))
def test_segment_round_trip_for_any_message(name, depth, message):
    code = get_code(name)
    out, status = decode_segment(code, depth, encode_segment(code, depth, message), len(message))
    assert out == message and not status.any()


def test_depth_one_segment_is_plain_concatenation_of_codewords():
    code = get_code("hamming-7-4")
    message = bytes([0b10110010])  # messages 1011 and 0010
    expected = np.concatenate(code.encode(np.array([[1, 0, 1, 1], [0, 0, 1, 0]], dtype=np.uint8)))
    coded = encode_segment(code, 1, message)
    assert np.unpackbits(np.frombuffer(coded, np.uint8))[:14].tolist() == expected.tolist()


def test_interleaved_group_places_bit_j_of_codeword_i_at_j_times_depth_plus_i():
    code = get_code("hamming-7-4")
    depth = 4
    message = random_bytes(2, seed=4)  # 16 bits = one group of 4 codewords
    bits = np.unpackbits(np.frombuffer(message, np.uint8)).reshape(4, 4)
    words = code.encode(bits)
    coded = np.unpackbits(np.frombuffer(encode_segment(code, depth, message), np.uint8))
    for i in range(depth):
        for j in range(code.n):
            assert coded[j * depth + i] == words[i, j]


@pytest.mark.parametrize("name, depth", BURST_CASES)
def test_burst_of_depth_times_t_bits_is_corrected(name, depth):
    code = get_code(name)
    burst = depth * code.t
    message = random_bytes(max(64, 3 * depth * code.k // 8), seed=depth)
    coded = encode_segment(code, depth, message)
    group_bits = depth * code.n
    total_bits = layout(code, depth, len(message)).coded_bits
    rng = np.random.default_rng(depth * 31 + code.n)
    starts = {0, group_bits - burst // 2, total_bits - burst, *rng.integers(0, total_bits - burst, 6).tolist()}
    for start in sorted(starts):
        damaged = flip_run(coded, start, burst)
        out, status = decode_segment(code, depth, damaged, len(message))
        assert out == message, f"burst at bit {start} not corrected"
        assert (status != 255).all()
        assert int(status.sum()) == burst  # every flipped bit was counted as corrected


@pytest.mark.parametrize("name", SECDED_CODES)
@pytest.mark.parametrize("depth", (1, 8, 255))
def test_burst_one_longer_than_secded_corrects_is_reported_not_accepted(name, depth):
    code = get_code(name)
    message = random_bytes(2 * depth * code.k // 8 + 8, seed=depth)
    coded = encode_segment(code, depth, message)
    # depth+1 bits from a group start: codeword 0 of the group gets its bits 0 and 1
    # (both message bits), every other codeword one bit
    damaged = flip_run(coded, 0, depth + 1)
    out, status = decode_segment(code, depth, damaged, len(message))
    assert status[0] == 255
    assert (status[1:depth] == 1).all() and not status[depth:].any()
    assert out != message  # the uncorrectable block is left as received, and said so


@settings(max_examples=30, deadline=None)
@given(name=st.sampled_from(ALL_CODES), depth=st.integers(1, 40), seed=st.integers(0, 2**32 - 1))
def test_random_errors_within_t_per_codeword_are_all_corrected(name, depth, seed):
    code = get_code(name)
    rng = np.random.default_rng(seed)
    message = rng.integers(0, 256, size=int(rng.integers(1, 120)), dtype=np.uint8).tobytes()
    lay = layout(code, depth, len(message))
    coded = encode_segment(code, depth, message)
    # up to t distinct bits of each codeword
    positions = codeword_error_bits(code, depth, lay.blocks, lambda block: int(rng.integers(0, code.t + 1)), rng)
    out, status = decode_segment(code, depth, flip_bits(coded, positions), len(message))
    assert out == message
    assert int(status.sum()) == len(positions)


def test_short_coded_input_reads_missing_bits_as_zero():
    code = get_code("golay-24-12")
    message = random_bytes(90, seed=5)
    coded = encode_segment(code, 8, message)
    whole = decode_segment(code, 8, coded + b"", len(message))[0]
    assert whole == message
    # the first group (8 codewords x 24 bits = 24 bytes) arrives; its 12 message bytes survive
    out, status = decode_segment(code, 8, coded[:24], len(message))
    assert len(out) == len(message)
    assert out[:12] == message[:12]
    assert not status[:8].any()


# ---- the numpy twins used for small segments must match the compiled kernels ---------------------

@settings(max_examples=40, deadline=None)
@given(name=st.sampled_from(ALL_CODES), depth=st.integers(1, 40), seed=st.integers(0, 2**32 - 1))
def test_numpy_twin_kernels_are_bit_identical_to_the_compiled_ones(name, depth, seed):
    from bitmend.kernels import blockcode, small  # importing blockcode makes the compiled path the active one
    from bitmend.kernels.loader import compiled_loaded

    assert blockcode is not None and compiled_loaded()
    code = get_code(name)
    rng = np.random.default_rng(seed)
    message = rng.integers(0, 256, size=int(rng.integers(0, 150)), dtype=np.uint8).tobytes()
    lay = layout(code, depth, len(message))
    coded = encode_segment(code, depth, message)  # compiled
    assert small.encode(message, code.P, depth, lay.groups) == coded
    # random damage, including blocks beyond t, must get the same verdicts from both
    noisy = flip_bits(coded, rng.choice(lay.coded_bits, size=int(rng.integers(0, lay.coded_bits // 4 + 1)),
                                        replace=False).tolist())
    lead_m, _, weight = code.leader_tables
    twin_out, twin_status = small.decode(np.frombuffer(noisy, np.uint8), code.P, depth, lay.groups, lead_m,
                                         weight, len(message))
    out, status = decode_segment(code, depth, noisy, len(message))
    assert twin_out == out
    assert np.array_equal(np.asarray(twin_status), np.asarray(status))


def test_numpy_twin_marker_search_agrees_with_the_compiled_one():
    from bitmend.container import format as fmt
    from bitmend.kernels import bitfields, small

    rng = np.random.default_rng(5)
    data = bytearray(rng.integers(0, 256, 400, dtype=np.uint8).tobytes())
    data[200:208] = fmt.MARKER_BYTES
    noisy = flip_bits(bytes(data), [1600 + 3, 1600 + 40, 1600 + 61])  # marker at bit 1600, 3 bits off
    stop = 8 * len(noisy) - 64 + 1
    twin = small.find_pattern(noisy + bytes(8), 0, stop, fmt.MARKER, fmt.MARKER_SEARCH_TOLERANCE)
    fast = bitfields.find_pattern(bitfields.to_words(noisy), 0, stop, np.uint64(fmt.MARKER),
                                  fmt.MARKER_SEARCH_TOLERANCE)
    assert twin == int(fast) == 1600
