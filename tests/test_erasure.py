"""The erasure code across frames (codes/erasure.py, kernels/erasure.py, kernels/erasure_small.py).

Oracle: the galois library's GF(2^8) with the irreducible polynomial 0x11D (the field of
bitmend's Reed-Solomon codes), for the matrix, the products and the MDS property.
"""

from __future__ import annotations

import itertools
import tracemalloc

import galois
import numpy as np
import pytest

import bitmend.codes.erasure as erasure_mod
from bitmend.codes.erasure import (
    ErasureCodeError,
    FrameErasureCode,
    NotEnoughSymbolsError,
    cauchy_matrix,
    erasure_code,
)
from bitmend.kernels import erasure as compiled_kernels
from bitmend.kernels import erasure_small
from bitmend.kernels.erasure_small import SingularMatrixError, coefficient_masks, gf_inverse, gf_matmul

GF = galois.GF(2**8, irreducible_poly=0x11D)
KERNELS = {"numpy": erasure_small.combine_rows, "compiled": compiled_kernels.combine_rows}
SMALL_CODES = [(k, r) for n in range(2, 9) for k in range(1, n) for r in [n - k]]  # k + r <= 8


@pytest.fixture(params=sorted(KERNELS))
def kernel(request, monkeypatch):
    """Run the public code through one path: the numpy twin (plans in Python) or the
    compiled kernels (plans in the kernel), whatever the size of the work."""
    chosen = compiled_kernels if request.param == "compiled" else None
    monkeypatch.setattr(erasure_mod, "_compiled", lambda work_bits: chosen)
    return request.param


def _group(code: FrameErasureCode, size: int, rng) -> tuple[np.ndarray, np.ndarray]:
    sources = rng.integers(0, 256, (code.k, size), dtype=np.uint8)
    return sources, np.vstack([sources, code.repair_symbols(sources)])


# ---- the matrix --------------------------------------------------------------------------------

@pytest.mark.parametrize("k, r", [(1, 1), (4, 2), (32, 4), (16, 239), (200, 55)])
def test_matrix_is_the_cauchy_matrix_one_over_xi_plus_yj_computed_by_galois(k, r):
    x = GF(np.array([255 - i for i in range(r)]))  # x_i = 255 - i
    y = GF(np.arange(k))  # y_j = j
    expected = GF(np.ones((r, k), dtype=int)) / (x[:, None] + y[None, :])
    assert np.array_equal(cauchy_matrix(k, r), np.asarray(expected))
    assert np.array_equal(erasure_code(k, r).matrix, np.asarray(expected))


def test_format_doc_example_bytes_are_fixed():
    # the example in docs/FORMAT.md, "Repair code": part of the file
    # format, so a change of construction fails here
    assert cauchy_matrix(4, 2).tolist() == [[253, 126, 255, 127], [126, 253, 127, 255]]
    repair = erasure_code(3, 2).repair_symbols([b"gauge", b"7", b"ok"])
    assert [bytes(row).hex(" ") for row in repair] == ["ca 8a 22 ae 49", "cc 40 a5 ea 16"]
    padded = GF(np.array([list(b"gauge"), list(b"7\0\0\0\0"), list(b"ok\0\0\0")]))
    assert np.array_equal(repair, np.asarray(GF(cauchy_matrix(3, 2)) @ padded))


def test_short_group_code_is_the_top_left_corner_of_the_full_code():
    full = cauchy_matrix(32, 4)
    for k, r in [(1, 1), (7, 4), (31, 2), (32, 4)]:
        assert np.array_equal(cauchy_matrix(k, r), full[:r, :k])


def test_short_group_repair_equals_full_code_with_zero_sources():
    rng = np.random.default_rng(11)
    short = rng.integers(0, 256, (5, 300), dtype=np.uint8)
    padded = np.zeros((32, 300), dtype=np.uint8)
    padded[:5] = short
    assert np.array_equal(erasure_code(5, 4).repair_symbols(short), erasure_code(32, 4).repair_symbols(padded))


@pytest.mark.parametrize("k, r", SMALL_CODES + [(3, 12), (5, 5)])
def test_every_k_rows_of_the_generator_are_invertible_mds(k, r):
    generator = GF(erasure_code(k, r).generator)
    assert np.array_equal(np.asarray(generator[:k]), np.eye(k, dtype=np.uint8))  # systematic
    for rows in itertools.combinations(range(k + r), k):
        assert np.linalg.det(generator[list(rows)]) != 0, rows


@pytest.mark.parametrize("k, r, size", [(1, 1, 1), (4, 2, 33), (32, 4, 100), (8, 64, 17)])
def test_repair_symbols_are_the_galois_matrix_product(kernel, k, r, size):
    rng = np.random.default_rng(k * 1000 + r)
    sources = rng.integers(0, 256, (k, size), dtype=np.uint8)
    expected = GF(cauchy_matrix(k, r)) @ GF(sources)
    assert np.array_equal(erasure_code(k, r).repair_symbols(sources), np.asarray(expected))


@pytest.mark.parametrize("k, r", [(4, 4), (32, 4), (10, 20)])
def test_recovery_matrix_times_used_generator_rows_gives_the_lost_unit_rows(k, r):
    code = erasure_code(k, r)
    generator = GF(code.generator)
    rng = np.random.default_rng(k + r)
    for _ in range(10):
        arrived = sorted(rng.choice(k + r, k, replace=False).tolist())
        plan = code.recovery_plan(arrived)
        product = GF(np.asarray(plan.matrix)) @ generator[list(plan.used)]
        assert np.array_equal(np.asarray(product), np.eye(k, dtype=np.uint8)[list(plan.lost)])


def test_gf_inverse_and_matmul_agree_with_galois():
    rng = np.random.default_rng(5)
    for n in (1, 2, 5, 17):
        a = rng.integers(0, 256, (n, n), dtype=np.uint8)
        if np.linalg.det(GF(a)) == 0:
            continue
        assert np.array_equal(gf_inverse(a), np.asarray(np.linalg.inv(GF(a))))
        b = rng.integers(0, 256, (n, 3), dtype=np.uint8)
        assert np.array_equal(gf_matmul(a, b), np.asarray(GF(a) @ GF(b)))


def test_gf_inverse_of_a_singular_matrix_is_a_clear_error():
    with pytest.raises(SingularMatrixError, match="singular"):
        gf_inverse(np.array([[3, 6], [3, 6]], dtype=np.uint8))


# ---- rebuilding --------------------------------------------------------------------------------

@pytest.mark.parametrize("k, r", SMALL_CODES)
def test_every_set_of_k_symbols_rebuilds_the_sources_exhaustively(kernel, k, r):
    code = erasure_code(k, r)
    rng = np.random.default_rng(100 * k + r)
    sources, symbols = _group(code, 13, rng)
    for rows in itertools.combinations(range(k + r), k):
        assert np.array_equal(code.recover({i: symbols[i] for i in rows}), sources), rows
        # the same symbols as (indices, array), given in a scrambled order
        order = rng.permutation(rows)
        assert np.array_equal(code.recover((order, symbols[order])), sources), rows


@pytest.mark.parametrize("k, r, size", [(4, 32, 2049), (8, 64, 16), (1, 1, 4100), (32, 223, 40),
                                        (32, 4, 5000), (200, 55, 9), (16, 4, 0)])
def test_random_losses_of_up_to_r_symbols_rebuild_larger_codes(kernel, k, r, size):
    code = erasure_code(k, r)
    rng = np.random.default_rng(k * 7 + r)
    sources, symbols = _group(code, size, rng)
    for _ in range(4):
        lost_sources = rng.choice(k, min(k, r), replace=False)  # as many sources as possible lost
        keep = sorted(set(range(k + r)) - set(lost_sources.tolist()))
        arrived = rng.choice(keep, k, replace=False)
        rebuilt = code.recover({int(i): symbols[i] for i in arrived})
        assert rebuilt.shape == (k, size)
        assert np.array_equal(rebuilt, sources)


def test_recover_groups_rebuilds_each_group_from_its_own_pattern(kernel):
    code = erasure_code(32, 4)
    rng = np.random.default_rng(3)
    groups, size = 6, 200
    sources = rng.integers(0, 256, (groups, 32, size), dtype=np.uint8)
    repair = code.repair_symbols_groups(sources)
    for g in range(groups):
        assert np.array_equal(repair[g], code.repair_symbols(sources[g]))
    everything = np.concatenate([sources, repair], axis=1)
    indices = np.stack([rng.choice(36, 32, replace=False) for _ in range(groups)])
    indices[0] = np.arange(32)  # a group that lost nothing
    received = np.take_along_axis(everything, indices[:, :, None], axis=1)
    assert np.array_equal(code.recover_groups(received, indices), sources)


def test_more_than_k_symbols_and_repeated_indices_still_rebuild():
    code = erasure_code(4, 3)
    sources, symbols = _group(code, 21, np.random.default_rng(8))
    rows = [6, 0, 5, 6, 2, 4]  # 6 twice, 5 distinct symbols, source 1 and 3 lost
    assert np.array_equal(code.recover((rows, symbols[rows])), sources)
    assert np.array_equal(code.recover({i: symbols[i] for i in range(7)}), sources)


def test_short_symbols_are_zero_padded_to_the_group_size():
    code = erasure_code(3, 2)
    payloads = [b"river gauge 7", b"level 2.31 m", b"ok"]
    repair = code.repair_symbols(payloads)
    assert repair.shape == (2, 13)
    padded = np.zeros((3, 13), dtype=np.uint8)
    for row, p in zip(padded, payloads):
        row[: len(p)] = np.frombuffer(p, dtype=np.uint8)
    assert np.array_equal(repair, code.repair_symbols(padded))
    rebuilt = code.recover({2: payloads[2], 3: repair[0].tobytes(), 4: repair[1]}, size=13)
    assert np.array_equal(rebuilt, padded)
    assert bytes(rebuilt[1, : len(payloads[1])]) == payloads[1]


def test_too_few_symbols_is_a_not_enough_symbols_error():
    code = erasure_code(4, 2)
    _, symbols = _group(code, 8, np.random.default_rng(1))
    with pytest.raises(NotEnoughSymbolsError, match="needs 4 distinct symbols of 6; got 3"):
        code.recover({0: symbols[0], 1: symbols[1], 5: symbols[5]})
    with pytest.raises(NotEnoughSymbolsError):  # four symbols, but one index twice
        code.recover(([0, 1, 5, 5], symbols[[0, 1, 5, 5]]))
    with pytest.raises(NotEnoughSymbolsError, match="group 1"):
        code.recover_groups(np.stack([symbols[:4], symbols[:4]]), np.array([[0, 1, 2, 3], [0, 0, 4, 5]]))
    assert issubclass(NotEnoughSymbolsError, ValueError)


def test_bad_parameters_indices_and_sizes_are_clear_errors():
    with pytest.raises(ErasureCodeError, match="k \\+ r <= 255"):
        FrameErasureCode(250, 6)
    with pytest.raises(ErasureCodeError, match="k >= 1"):
        FrameErasureCode(0, 2)
    code = erasure_code(2, 2)
    with pytest.raises(ErasureCodeError, match="0..3, got \\[4\\]"):
        code.recover({0: b"ab", 4: b"cd"})
    with pytest.raises(ErasureCodeError, match="longer than the symbol size 2"):
        code.recover({0: b"ab", 1: b"cde"}, size=2)
    with pytest.raises(ErasureCodeError, match="shape \\(2, S\\)"):
        code.repair_symbols(np.zeros((3, 4), dtype=np.uint8))


def test_erasure_code_instances_are_cached():
    assert erasure_code(32, 4) is erasure_code(32, 4)
    assert erasure_code(31, 4) is not erasure_code(32, 4)


# ---- kernels -----------------------------------------------------------------------------------

@pytest.mark.parametrize("groups, k, m, size, shared", [(3, 5, 2, 37, False), (2, 32, 4, 4099, True),
                                                        (1, 1, 1, 0, True), (4, 3, 3, 8, False)])
def test_compiled_kernel_and_numpy_twin_give_identical_bytes(groups, k, m, size, shared):
    rng = np.random.default_rng(groups * 31 + k)
    inputs = rng.integers(0, 256, (groups, k, size), dtype=np.uint8)
    coefs = rng.integers(0, 256, (1 if shared else groups, m, k), dtype=np.uint8)
    coefs[..., 0] = 1  # the XOR-only path
    coefs[..., -1] = 0  # the skipped path
    masks = coefficient_masks(coefs)
    rows = k + m
    targets = np.tile(np.arange(k, rows, dtype=np.int64), (masks.shape[0], 1))
    targets[:, 0] = -1  # a combination not written
    copies = np.full((1, rows), -1, dtype=np.int64)
    copies[0, :k] = np.arange(k)[::-1]
    results = {}
    for name, combine in KERNELS.items():
        out = np.full((groups, rows, size), 0xA5, dtype=np.uint8)  # unwritten rows stay 0xA5
        combine(inputs, masks, targets, copies, out)
        results[name] = out
    assert np.array_equal(results["numpy"], results["compiled"])
    out = results["compiled"]
    assert np.array_equal(out[:, :k], inputs[:, ::-1])
    assert (out[:, k] == 0xA5).all()
    for g in range(groups):
        expected = GF(coefs[0 if shared else g]) @ GF(inputs[g])
        assert np.array_equal(out[g, k + 1:], np.asarray(expected)[1:])


@pytest.mark.parametrize("k, r", [(1, 1), (4, 3), (32, 4), (20, 30)])
def test_compiled_recovery_plans_equal_the_numpy_plans(k, r, monkeypatch):
    code = erasure_code(k, r)
    rng = np.random.default_rng(k * r)
    rows = np.stack([rng.choice(k + r, k, replace=False) for _ in range(12)]).astype(np.int64)
    masks = np.empty((12, r, k, 8), dtype=np.uint64)
    targets = np.empty((12, r), dtype=np.int64)
    copies = np.empty((12, k), dtype=np.int64)
    status = compiled_kernels.recovery_masks(code.matrix, rows, erasure_small.mul_table(),
                                             erasure_small.inv_table(), masks, targets, copies)
    assert not status.any()
    for g, row in enumerate(rows.tolist()):
        g_masks, g_targets, g_copies = code._make_row_plan(tuple(row))
        e = len(g_targets)
        assert np.array_equal(masks[g, :e], g_masks)
        assert np.array_equal(targets[g, :e], g_targets) and (targets[g, e:] == -1).all()
        assert np.array_equal(copies[g], g_copies)


def test_public_layer_makes_no_copy_of_large_aligned_sources():
    code = erasure_code(8, 2)
    size = 1 << 20
    sources = np.random.default_rng(0).integers(0, 256, (8, size), dtype=np.uint8)
    code.repair_symbols(sources[:, :64])  # compile or load outside the traced region
    tracemalloc.start()
    try:
        repair = code.repair_symbols(sources)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert repair.shape == (2, size)
    assert peak < repair.nbytes + (256 << 10)  # the output and nothing that grows with the input


def test_numpy_twin_works_in_bounded_blocks():
    code = erasure_code(8, 2)
    size = 1 << 20
    sources = np.random.default_rng(1).integers(0, 256, (8, size), dtype=np.uint8)
    masks = coefficient_masks(code.matrix)[None]
    out = np.empty((1, 2, size), dtype=np.uint8)
    tracemalloc.start()
    try:
        erasure_small.combine_rows(sources[None], masks, np.arange(2, dtype=np.int64)[None],
                                   np.full((1, 0), -1, dtype=np.int64), out)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert np.array_equal(out[0, :, -4096:], np.asarray(GF(code.matrix) @ GF(sources[:, -4096:])))
    assert peak < 8 << 20  # products of at most 1 MiB per step, never the (2, 8, S) array (16 MiB)
