"""The unaligned-load kernels of kernels.fused (depth-1 codeword kernels, depth-8 octet
kernels, linear kernels with whole-word stores, and the load/store primitives under them)
against the numpy twins in kernels.small, bit for bit: coded bytes, decoded bytes and
every block status (0 clean, w corrected, FAILED), on random data and random errors."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bitmend.codes.catalog import get_code
from bitmend.interleave import _plan, decode_segment, encode_segment, layout
from bitmend.kernels.status import FAILED

from conftest import ALL_CODES, codeword_error_bits, flip_bits

@pytest.fixture(autouse=True, scope="module")
def _compiled_kernels():
    """Load the compiled kernels first: small segments would otherwise take the numpy twins
    (kernels.loader) and the tests would compare the twins with themselves."""
    from bitmend.kernels import blockcode  # noqa: F401
    from bitmend.kernels.loader import compiled_loaded

    assert compiled_loaded()


DEPTH1_CODES = tuple(name for name in ALL_CODES if _plan(get_code(name), 1).encode_kind == "depth1")


def _twin(code, depth: int, message: bytes, coded: bytes) -> tuple[bytes, bytes, np.ndarray]:
    from bitmend.kernels import small

    lay = layout(code, depth, len(message))
    lead_m, _, weight = code.leader_tables
    out, status = small.decode(np.frombuffer(coded, np.uint8)[: lay.coded_bytes], code.P, depth, lay.groups, lead_m,
                               weight, len(message))
    return small.encode(message, code.P, depth, lay.groups), out, status


OCTET8_CODES = tuple(name for name in ALL_CODES if _plan(get_code(name), 8).decode_kind == "octets")


def test_the_depth1_codeword_kernels_serve_the_engine_codes_of_17_to_57_bits_not_on_whole_bytes():
    # golay-24-12 (a pair of codewords is 6 whole bytes) takes kernels.bytetable: tests/test_bytetable.py
    assert set(DEPTH1_CODES) == {"hamming-31-26", "secded-39-32", "golay-23-12"}


def test_the_depth8_octet_decoder_serves_every_code_of_25_to_64_bits_not_on_byte_tables():
    # secded-39-32 (whole message bytes, one check byte) decodes on kernels.bytetable: tests/test_bytetable.py
    assert set(OCTET8_CODES) == {"hamming-31-26", "hamming-63-57"}


@settings(max_examples=40, deadline=None)
@given(name=st.sampled_from(ALL_CODES), depth=st.sampled_from((1, 8)), seed=st.integers(0, 2**32 - 1),
       size=st.integers(0, 3000), density=st.sampled_from((0.0, 1e-3, 2e-2, 0.2)))
def test_unaligned_kernels_match_the_numpy_twin_bit_for_bit_with_statuses(name, depth, seed, size, density):
    code = get_code(name)
    rng = np.random.default_rng(seed)
    message = rng.integers(0, 256, size=size, dtype=np.uint8).tobytes()
    coded = encode_segment(code, depth, message)
    bits = 8 * len(coded)
    flips = rng.choice(bits, size=int(rng.binomial(bits, density)), replace=False).tolist() if bits else []
    noisy = flip_bits(coded, flips)
    out, status = decode_segment(code, depth, noisy, len(message))
    twin_coded, twin_out, twin_status = _twin(code, depth, message, noisy)
    assert coded == twin_coded
    assert out == twin_out
    assert np.array_equal(status, twin_status)


@pytest.mark.parametrize(("name", "depth"), [(name, 1) for name in DEPTH1_CODES] + [(name, 8) for name in OCTET8_CODES])
def test_codeword_and_octet_kernels_report_clean_corrected_and_failed_blocks_like_the_twin(name, depth):
    code = get_code(name)
    rng = np.random.default_rng(code.n)
    message = rng.integers(0, 256, size=5000, dtype=np.uint8).tobytes()
    coded = encode_segment(code, depth, message)
    lay = layout(code, depth, len(message))
    # block b gets (b mod (t + 3)) errors: clean, correctable and beyond t all occur
    noisy = flip_bits(coded, codeword_error_bits(code, depth, lay.blocks, lambda block: block % (code.t + 3), rng))
    out, status = decode_segment(code, depth, noisy, len(message))
    _, twin_out, twin_status = _twin(code, depth, message, noisy)
    assert out == twin_out and np.array_equal(status, twin_status)
    assert {0, 1, FAILED} <= set(status.tolist()) or code.d % 2 == 1  # odd d: beyond t may miscorrect, not fail


@pytest.mark.parametrize("name", DEPTH1_CODES + ("hamming-7-4", "golay-24-12"))
@pytest.mark.parametrize("depth", (1, 8))
def test_truncated_input_reads_missing_bytes_as_zero_at_every_cut_near_the_end(name, depth):
    # the last 8 bytes are read byte by byte (no load past the buffer): every cut there
    code = get_code(name)
    message = np.random.default_rng(5).integers(0, 256, size=700, dtype=np.uint8).tobytes()
    coded = encode_segment(code, depth, message)
    for keep in range(max(0, len(coded) - 12), len(coded) + 1):
        out, status = decode_segment(code, depth, coded[:keep], len(message))
        _, twin_out, twin_status = _twin(code, depth, message, coded[:keep] + bytes(len(coded) - keep))
        assert out == twin_out and np.array_equal(status, twin_status), keep


def test_load_and_store_of_unaligned_big_endian_words_round_trip():
    from numba import njit

    from bitmend.kernels.fused import load_be64, store_be64

    @njit
    def copy_words(src, dst, at):
        store_be64(dst.ctypes.data, at + 1, load_be64(src.ctypes.data, at))
        return load_be64(src.ctypes.data, at)

    src = np.arange(1, 17, dtype=np.uint8)
    dst = np.zeros(16, dtype=np.uint8)
    value = copy_words(src, dst, 3)
    assert int(value) == int.from_bytes(src[3:11].tobytes(), "big")
    assert dst[4:12].tobytes() == src[3:11].tobytes() and not dst[:4].any() and not dst[12:].any()
