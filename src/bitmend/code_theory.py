"""What theory expects of one code, at its depth and in its frames, on a channel.

The one place where a code object meets the closed forms of `bitmend.analysis`: `codes show`
(`bitmend.properties`), `simulate` and `plan` all take their expected rates from here. Every
number rests on the code's own interface (`n`, `k`, `t`, `symbol_bits`,
`weight_distribution`) and on the channel models; the formulas themselves live in
`analysis.theory` (closed forms on a BSC), `analysis.residual` (errors per interleaved
codeword on each model, and what bounded-distance decoding leaves) and `analysis.limits`.

- Errors per codeword. P(i), the chance of i wrong symbols among a codeword's n, for a
  codeword interleaved at depth D (`error_counts`): Binomial(n, q) on a BSC with q the
  chance that a symbol of s bits is wrong, q = 1 - (1-p)^s; an exact forward recursion on
  a Gilbert-Elliott chain; runs of ceil(8/D) bits sharing a byte under byte substitutions
  (exact at D >= 8). Several flip channels: the convolution of their counts.
- Decoding. Block error P_B = sum_{i>t} P(i); the share of those that end in a wrong
  codeword comes from the weight distribution (MacWilliams & Sloane; Lin & Costello ch. 10).
- The frame. A frame of B codewords fails when any does: 1 - (1 - P_B)^B, for independent
  codewords (`codewords_per_frame` gives B from the segment layout).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Sequence

import numpy as np

from bitmend.analysis import limits, residual, theory
from bitmend.channel.models import BSC, ByteSubstitution, ChannelModel, GilbertElliott
from bitmend.codes.base import BlockCode
from bitmend.container.format import CRC_BYTES, DEFAULT_FRAME_BYTES
from bitmend.interleave import layout

#: share of a wrong s-bit symbol's bits taken as wrong: all of a bit; 128/255 of a byte, the
#: mean over the 255 other values (a BSC at small p flips fewer, so a bit error is a bound)
SYMBOL_WRONG_BIT_SHARE = {1: 1.0, 8: 128 / 255}


# ---- the code ------------------------------------------------------------------------------------

def code_weights(code: BlockCode, max_work: int | None = None) -> tuple[int, ...] | None:
    """A_0 .. A_n, the number of codewords of each weight (in symbols), or None when the
    code has none listed or when listing it would take more than `max_work` bit-words
    (2^min(k, n-k) words of n bits: the codewords or the dual's, whichever are fewer)."""
    if max_work is not None and (1 << min(code.k, code.r)) * code.n > max_work:
        return None
    distribution = code.weight_distribution
    return None if distribution is None else tuple(distribution.counts)


def bits_of(code: BlockCode) -> tuple[int, int]:
    """(n, k) counted in bits: a code over s-bit symbols is an (n s, k s) binary code."""
    return code.n * code.symbol_bits, code.k * code.symbol_bits


def codewords_per_frame(code: BlockCode, depth: int, frame_bytes: int = DEFAULT_FRAME_BYTES) -> int:
    """B: the codewords that carry a full frame's payload and its CRC-32C at `depth` (whole
    groups of `depth` codewords)."""
    return layout(code, depth, frame_bytes + CRC_BYTES).blocks


# ---- the channel ---------------------------------------------------------------------------------

def combined_flip_rate(models: Sequence[ChannelModel]) -> float | None:
    """Per-bit flip probability of independent flip channels in a chain: a bit ends flipped
    when an odd number of them flip it, (1 - prod(1 - 2 r_i)) / 2. None when a model has no
    single flip rate (drop, slip)."""
    rates = [m.flip_rate for m in models]
    if any(r is None for r in rates):
        return None
    return (1.0 - math.prod(1.0 - 2.0 * r for r in rates)) / 2.0


def bsc_crossover(models: Sequence[ChannelModel]) -> float | None:
    """The crossover probability p when every model is a memoryless BSC (one or several,
    combined) and 0 < p < 1/2, where the finite-blocklength limits apply; else None."""
    if not models or not all(isinstance(m, BSC) for m in models):
        return None
    p = combined_flip_rate(models)
    return p if 0.0 < p < 0.5 else None


@lru_cache(maxsize=256)
def error_counts(flips: tuple[ChannelModel, ...], n: int, depths: tuple[int, ...],
                 symbol_bits: int = 1) -> np.ndarray:
    """One row per depth: P(i), i = 0..n, the distribution of wrong symbols (bits, for a
    binary code) in a codeword of n symbols interleaved at that depth, on the flip
    channels `flips` (BSC, Gilbert-Elliott, byte substitutions; others are ignored)."""
    bsc = [m for m in flips if isinstance(m, BSC)]
    counts = None
    if bsc:
        # a symbol of s bits, its bits apart from its codeword's others: wrong unless all s pass
        p = combined_flip_rate(bsc)
        counts = residual.bsc_error_counts(n, theory.symbol_error(p, symbol_bits))
    for m in flips:
        if isinstance(m, (GilbertElliott, ByteSubstitution)):
            more = _memory_counts(m, n, depths, symbol_bits)
            counts = more if counts is None else residual.add_error_counts(counts, more)
    if counts is None:
        counts = np.zeros(n + 1)
        counts[0] = 1.0
    return np.broadcast_to(np.atleast_2d(counts), (len(depths), n + 1))


def _memory_counts(model: GilbertElliott | ByteSubstitution, n: int, depths: tuple[int, ...],
                   symbol_bits: int) -> np.ndarray:
    """Error counts by depth of one channel whose errors depend on where the bits lie."""
    if isinstance(model, GilbertElliott):
        m = model
        if symbol_bits == 1:
            return residual.gilbert_elliott_error_counts_by_depth(n, depths, m.enter, m.leave, m.bad, m.good)
        return residual.gilbert_elliott_symbol_error_counts_by_depth(n, symbol_bits, depths, m.enter, m.leave,
                                                                     m.bad, m.good)
    if symbol_bits == 1:
        return residual.byte_substitution_error_counts_by_depth(n, depths, model.p)
    if symbol_bits == 8:  # byte-aligned symbols: a substituted byte is one wrong symbol
        return residual.bsc_error_counts(n, model.p)
    raise ValueError(f"byte substitutions on {symbol_bits}-bit symbols are not modelled")


# ---- decoding --------------------------------------------------------------------------------------

def codeword_rates(code: BlockCode, counts: np.ndarray,
                   weights: tuple[int, ...] | None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(block error, miscorrected, bit error) per row of error counts, for bounded-distance
    decoding up to t symbols: P_B = sum_{i>t} P(i); miscorrected from the weight
    distribution (every failure without one); bit error
    P_bit = (share/n) sum_{i>t} P(i) (i + m_i (min(n, i+t) - i)) (`residual.codeword_outcomes`)."""
    return residual.codeword_outcomes(counts, code.t, weights, SYMBOL_WRONG_BIT_SHARE[code.symbol_bits])


def block_error_on_bsc(code: BlockCode, p: float) -> float:
    """The block error at bit flip probability p under bounded-distance decoding: more than
    t of n bits wrong, or, for a code over s-bit symbols, more than t of n symbols (each
    wrong with 1 - (1-p)^s)."""
    if code.symbol_bits == 1:
        return theory.bsc_block_error(code.n, code.t, p)
    return theory.bsc_symbol_block_error(code.n, code.t, p, code.symbol_bits)


def distance_to_limit(code: BlockCode, p: float, block_error: float | None = None) -> limits.DistanceToLimit | None:
    """The code against the best code of its length and size in bits on a BSC with
    crossover p, at the code's block error there (its own, unless given); None where that
    block error is 0 or (nearly) 1."""
    n, k = bits_of(code)
    return limits.distance_to_limit(n, k, p, block_error_on_bsc(code, p) if block_error is None else block_error)


@dataclass(frozen=True)
class BscPoint:
    """Per-codeword probabilities at one bit flip probability p (None: needs the weight
    distribution, which is not available)."""

    p: float
    undetected: float | None  # the code used for detection only: the error is a non-zero codeword
    block_error: float  # correcting up to t: more than t errors
    miscorrected: float | None  # of which decoded to a wrong codeword
    detected: float | None  # of which flagged uncorrectable

    def to_dict(self) -> dict:
        return {"p": self.p, "undetected": self.undetected, "block_error": self.block_error,
                "miscorrected": self.miscorrected, "detected": self.detected}


def bsc_point(code: BlockCode, p: float, weights: tuple[int, ...] | None) -> BscPoint:
    """A binary code's outcomes per codeword on a BSC with bit flip probability p:
    P_ud = sum_{w>0} A_w p^w (1-p)^(n-w) used for detection only; correcting up to t,
    P_B = sum_{i>t} C(n,i) p^i (1-p)^(n-i), split into miscorrected and detected."""
    block = theory.bsc_block_error(code.n, code.t, p)
    if weights is None:
        return BscPoint(p, None, block, None, None)
    outcome = theory.block_outcomes(code.n, code.t, weights, p)
    # detected = block error - miscorrected: a difference of two nearly equal sums for a
    # perfect code (which detects nothing), so rounding residue shows as 0
    detected = outcome.detected if outcome.detected > 1e-9 * outcome.block_error else 0.0
    return BscPoint(p, theory.undetected_error(weights, p), block, outcome.undetected, detected)


# ---- a code in its frames on a channel ---------------------------------------------------------------

@dataclass(frozen=True)
class Expected:
    """Rates from a formula (theory or the uncoded channel); None where none applies."""

    bit_error: float | None = None
    block_error: float | None = None
    detected: float | None = None
    undetected: float | None = None
    frame_error: float | None = None
    basis: str = ""  # what the numbers rest on, in words

    def to_dict(self) -> dict:
        return {"bit_error": self.bit_error, "block_error": self.block_error, "detected": self.detected,
                "undetected": self.undetected, "frame_error": self.frame_error, "basis": self.basis}


def _single(models: Sequence[ChannelModel], kind: type) -> ChannelModel | None:
    """The one model of the chain when it is of `kind`, else None."""
    return models[0] if len(models) == 1 and isinstance(models[0], kind) else None


def uncoded_rates(code: BlockCode, models: Sequence[ChannelModel],
                  frame_bytes: int = DEFAULT_FRAME_BYTES) -> Expected:
    """The same channel without coding: bit error = the channel's flip rate, and a block of
    the code's k s message bits, or a frame of raw data, hit at least once."""
    frame_bits = 8 * frame_bytes
    block_bits = code.k * code.symbol_bits
    rate = combined_flip_rate(models)
    if all(isinstance(m, BSC) for m in models):
        return Expected(bit_error=rate, block_error=theory.uncoded_block_error(block_bits, rate),
                        frame_error=theory.uncoded_block_error(frame_bits, rate),
                        basis=f"raw bits on the same BSC: {block_bits}-bit blocks, {frame_bits}-bit frames")
    if m := _single(models, GilbertElliott):
        raw = residual.gilbert_elliott_error_counts(block_bits, 1, m.enter, m.leave, m.bad, m.good)
        return Expected(bit_error=m.flip_rate, block_error=float(min(1.0, raw[1:].sum())),
                        frame_error=theory.gilbert_elliott_hit(frame_bits, m.enter, m.leave, m.bad, m.good),
                        basis=f"raw bits on the same chain: {block_bits} consecutive bits, {frame_bits}-bit frames")
    if m := _single(models, ByteSubstitution):
        return Expected(bit_error=m.flip_rate, basis="raw bits: average flip rate of the substitutions")
    if rate is not None:
        return Expected(bit_error=rate, basis="raw bits: combined flip rate of the chain")
    return Expected()


def expected_rates(code: BlockCode, depth: int, models: Sequence[ChannelModel],
                   frame_bytes: int = DEFAULT_FRAME_BYTES) -> Expected:
    """The code at `depth` on the channel models, where a closed form exists.

    Binary codes on a BSC chain: bounded-distance block error (exact), its detected and
    undetected parts (from the weight distribution, when known) and a residual bit error
    estimate (`residual.codeword_outcome`). Codes over s-bit symbols (Reed-Solomon): a
    symbol is wrong with q = 1 - (1-p)^s on a BSC, or p under byte substitutions (symbols
    are whole stream bytes), independently, so the block error is the same binomial tail in
    symbols. Binary codes on one Gilbert-Elliott chain: exact block error at the given
    depth; on byte substitutions at depth >= 8: exact. Frame error: any of the frame's
    codewords failing, for independent codewords."""
    if code.symbol_bits != 1:
        return _symbol_code_rates(code, depth, models, frame_bytes)
    if all(isinstance(m, BSC) for m in models):
        return _bsc_rates(code, combined_flip_rate(models), codewords_per_frame(code, depth, frame_bytes))
    n, t = code.n, code.t
    if _single(models, GilbertElliott):
        counts = error_counts(tuple(models), n, (depth,))[0]
        return Expected(block_error=float(min(1.0, counts[t + 1:].sum())),
                        basis=f"more than t = {t} of a codeword's {n} bits, taken {depth} apart, flipped by the "
                              "stationary Gilbert-Elliott chain (exact)")
    if _single(models, ByteSubstitution):
        if depth >= 8:  # every codeword bit in its own byte: independent flips at the mean rate
            counts = error_counts(tuple(models), n, (depth,))[0]
            return Expected(block_error=float(min(1.0, counts[t + 1:].sum())),
                            basis="depth >= 8 puts each codeword bit in its own byte: independent flips (exact)")
        return Expected(basis="no closed form: at depth < 8 a substituted byte can hit a codeword more than once")
    return Expected(basis="no closed form for this chain of channels")


def _bsc_rates(code: BlockCode, p: float, blocks: int) -> Expected:
    """A binary code on a BSC with crossover p, B = `blocks` codewords per frame."""
    n, t = code.n, code.t
    weights = code_weights(code)
    block = theory.bsc_block_error(n, t, p)
    if weights is None:
        return Expected(block_error=block, frame_error=theory.frame_error(block, blocks),
                        basis=f"bounded-distance decoding on a BSC with p = {p:.4g} (block error exact; "
                              "no weight distribution for the detected/undetected split)")
    split = theory.block_outcomes(n, t, weights, p)
    outcome = residual.codeword_outcome(residual.bsc_error_counts(n, p), t, weights)
    return Expected(
        bit_error=outcome.bit_error, block_error=split.block_error, detected=split.detected,
        undetected=split.undetected, frame_error=theory.frame_error(split.block_error, blocks),
        basis=f"bounded-distance decoding on a BSC with p = {p:.4g} (block error exact; detected/undetected "
              "from the weight distribution; bit error approximate; frame error counts any failed codeword)")


def _symbol_code_rates(code: BlockCode, depth: int, models: Sequence[ChannelModel], frame_bytes: int) -> Expected:
    """A code over s-bit symbols where its symbols go wrong independently: on a BSC, each
    with q = 1 - (1-p)^s; under byte substitutions (symbols are whole bytes), with p."""
    if all(isinstance(m, BSC) for m in models):
        q = theory.symbol_error(combined_flip_rate(models), code.symbol_bits)
    elif m := _single(models, ByteSubstitution):
        q = m.p
    else:
        return Expected(basis="no closed form for symbol codes on this channel")
    block = theory.bsc_block_error(code.n, code.t, q)
    return Expected(block_error=block, frame_error=theory.frame_error(block, codewords_per_frame(code, depth,
                                                                                                  frame_bytes)),
                    basis=f"bounded-distance decoding of byte symbols, each wrong independently with probability "
                          f"{q:.4g} (block error exact; frame error counts any failed codeword)")


def theory_for(code: BlockCode, depth: int, models: Sequence[ChannelModel],
               frame_bytes: int = DEFAULT_FRAME_BYTES) -> tuple[Expected, Expected]:
    """(theory, uncoded): `expected_rates` and `uncoded_rates` side by side."""
    return expected_rates(code, depth, models, frame_bytes), uncoded_rates(code, models, frame_bytes)
