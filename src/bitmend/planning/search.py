"""Choose a code and an interleaving depth that meet a residual error target on a channel,
at the lowest overhead.

    plan = make_plan("burst:enter=1e-4,leave=0.1,bad=0.5", target=1e-6, per="frame")
    plan.ranked[0].code, plan.ranked[0].depth, plan.ranked[0].overhead

For every candidate code (the catalog, plus any custom codes given) and depth, the
prediction runs in three steps, all closed forms from `bitmend.analysis`:

1. the distribution P(i) of the number of errors in one codeword interleaved at depth D,
   from the channel models (`analysis.residual`: exact for a BSC and for a Gilbert-Elliott
   chain; exact for byte substitutions at D >= 8);
2. bounded-distance decoding: block error P_B = sum_{i>t} P(i); residual bit error
   P_bit = (1/n) sum_{i>t} P(i) (i + m_i (min(n, i+t) - i)), m_i the share of weight-i
   patterns that are miscorrected (from the weight distribution);
3. the frame: P_frame = 1 - (1 - P_B)^B (1 - P_H^2) (1 - P_loss), with B codewords per
   frame, P_H the chance that one copy of the header fails, P_loss the channel's own
   frame losses (drop, slip).

Overhead counts everything on the wire for a full frame: marker, header and its copy
(128 bytes in format version 2), the payload CRC-32C (4 bytes), the code's parity, padding to whole groups of D
codewords and to whole bytes, and, for a code defined in the stream, its two
definition blocks. `FrameHeader(...).frame_bytes` gives the exact size.

Every depth 1..max_depth (255 unless `--max-depth` bounds it: latency and memory grow with
the depth) is evaluated at once; each code runs at the depth that meets the target with the
least whole-frame overhead (the shallower on a tie), and codes are ranked by that overhead.
The overhead is not monotone in the depth (padding to whole groups of D codewords), so the
smallest depth that meets the target is not always the cheapest. On a burst channel the plan
says which share of the chain's bad spells the depth covers: depth D corrects every burst of
up to D t bits, and spell lengths are geometric with mean 1/leave.

With a drop channel (`drop:p=`, whole frames lost) each code and depth is also tried with
every repair ratio R/K of `encode --repair` (R repair frames after every K data frames,
1 <= K, R <= 32) and without; a data frame is missing with q = 1 - (1 - p_drop)(1 - P_fail),
P_fail its failure after decoding (the P_frame above without the drop), and is lost for good
when at least R of the other K + R - 1 frames of its group are missing too:
P_res = q P[Binomial(K+R-1, q) >= R] (`analysis.repair_groups`, which also takes a repair
frame's own, slightly larger, miss probability). The repair frames' wire bytes, R/K of a
repair frame per data frame, join the whole-frame overhead the codes are ranked by. For a
bit target the bits of a frame never delivered count as bad bits. Without a drop channel no
repair is proposed.

On a binary symmetric channel each choice also carries its distance to the limit
(`analysis.limits`): the best rate any code of its length could have at its block error
(the binomial converse of Polyanskiy, Poor and Verdu, 2010; the normal approximation beyond
EXACT_MAX_N bits), minus its own rate.

Codes over bytes (Reed-Solomon) are planned in wrong symbols instead of wrong bits; codes
whose weight distribution is not listed count every failure as a miscorrection, so their
bit error is an upper bound. Both are said in the plan's assumptions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache
from typing import Sequence

import numpy as np

from bitmend.analysis import limits, repair_groups, residual
from bitmend.channel.models import BSC, BitSlip, ByteSubstitution, ChannelModel, FrameDrop, GilbertElliott
from bitmend.channel.spec import ChannelSpecError, parse_channels
from bitmend.codes.catalog import MAX_DEPTH, code_names, get_code
from bitmend.codes.linear import BinaryLinearCode
from bitmend.container import format as fmt
from bitmend.container.repair import MAX_GROUP, MAX_REPAIR, SYMBOL_OVERHEAD
from bitmend.errors import SettingError
from bitmend.interleave import layout

PER_CHOICES = ("bit", "frame")
SHOWN = 5  # candidates listed by default
VERIFY_MIN_BITS = 1 << 17
VERIFY_MAX_BITS = 1 << 24  # a "short" run: a few seconds at simulate's speed
VERIFY_EVENTS = 30  # events the verification run aims to see at the predicted rate


class PlanError(SettingError):
    """Arguments that make no plan (one line)."""


# ---- predictions -----------------------------------------------------------------------

@dataclass(frozen=True)
class Prediction:
    """Predicted rates for one code at one depth and frame size."""

    block_error: float  # per codeword: more than t errors
    miscorrected: float  # per codeword: decoded to a wrong codeword (the frame CRC catches it)
    bit_error: float  # wrong payload bits per delivered payload bit (as --on-error keep writes them)
    codeword_bit_error: float  # the part of bit_error left by decoding (without slips)
    payload_frame_error: float  # a frame's CRC fails because a codeword failed: 1 - (1-P_B)^B
    header_loss: float  # both header copies (and, for a code in the stream, both definitions) fail
    channel_loss: float  # frames dropped or slipped by the channel
    frame_error: float  # a frame not delivered verified, all causes

    def rate(self, per: str) -> float:
        return self.bit_error if per == "bit" else self.frame_error

    def to_dict(self) -> dict:
        return {"block_error": self.block_error, "miscorrected": self.miscorrected, "bit_error": self.bit_error,
                "codeword_bit_error": self.codeword_bit_error,
                "payload_frame_error": self.payload_frame_error, "header_loss": self.header_loss,
                "channel_loss": self.channel_loss, "frame_error": self.frame_error}


@dataclass(frozen=True)
class RepairChoice:
    """R repair frames after every K data frames (`encode --repair R/K`), and what they buy.

    q is the chance that a data frame is missing before repair (dropped, or failed after
    decoding): q = 1 - (1 - p_drop) (1 - P_fail), the prediction's frame_error. A missing
    data frame stays missing when at least R of the other K + R - 1 frames of its group are
    missing too (analysis.repair_groups): residual = e P[Bin(K-1, q) + Bin(R, q_r) >= R],
    e = q for frames, e = the bad-bit share of a data frame for bits."""

    r: int
    k: int
    repair_frame_bytes: int  # one repair frame on the wire (its payload: a frame's + the 15-byte symbol head and CRC)
    overhead: float  # R W_r / (K B): the repair frames' share, included in the candidate's overhead
    frame_loss: float  # q, before repair
    repair_frame_loss: float  # q_r: a repair frame missing
    bad_bits: float  # e for bits: share of a data frame's payload bits lost or wrong, before repair
    not_rebuilt: float  # P[a missing data frame is not rebuilt]
    group_failure: float  # P[more than R of a group's K + R frames missing]
    frame_error: float  # residual frame loss after repair: q x not_rebuilt
    bit_error: float  # residual bad-bit share after repair: bad_bits x not_rebuilt

    @property
    def spec(self) -> str:
        return f"{self.r}/{self.k}"

    def to_dict(self) -> dict:
        return {"R": self.r, "K": self.k, "spec": self.spec, "repair_frame_wire_bytes": self.repair_frame_bytes,
                "overhead": self.overhead, "frame_loss_before": self.frame_loss,
                "repair_frame_loss": self.repair_frame_loss, "bad_bits_before": self.bad_bits,
                "not_rebuilt": self.not_rebuilt, "group_failure": self.group_failure,
                "frame_error": self.frame_error, "bit_error": self.bit_error}


@dataclass(frozen=True)
class Candidate:
    code: str
    n: int
    k: int
    d: int
    t: int
    depth: int
    custom: bool
    frame_wire_bytes: int  # one full frame on the wire
    blocks: int  # codewords per full frame
    overhead: float  # frame_wire_bytes / frame_bytes - 1
    prediction: Prediction
    rate: float  # the targeted rate (bit or frame)
    meets_target: bool
    within_overhead: bool
    target: float
    burst_covered_bits: int | None = None  # D t, on a burst channel
    burst_quantile: float | None = None  # share of bad spells no longer than D t
    weights_known: bool = True  # False: every failure counted as a miscorrection (bit error a bound)
    limit: limits.DistanceToLimit | None = None  # on a BSC: the best code of the same length, same block error
    repair: RepairChoice | None = None  # with a drop channel: the repair frames chosen (None: none needed)
    lost_bits_counted: bool = False  # a drop channel: the bit rate counts bits never delivered too
    after_repair: tuple[float, float] | None = None  # a drop channel: (bit, frame) rates after the repair chosen

    @property
    def repair_spec(self) -> str | None:
        return None if self.repair is None else self.repair.spec

    @property
    def limit_gap(self) -> float | None:
        """Best rate of a code of the same length at the same block error minus this code's
        rate: the converse (no code does better) where computed, else the normal approximation."""
        if self.limit is None:
            return None
        gap = self.limit.rate_gap_most if self.limit.exact else self.limit.rate_gap
        return 0.0 if abs(gap) < 1e-9 else gap

    @property
    def times_target(self) -> float:
        """How far the predicted rate is from the target (below 1: meets it)."""
        return self.rate / self.target

    def to_dict(self) -> dict:
        out = {"code": self.code, "n": self.n, "k": self.k, "d": self.d, "t": self.t, "depth": self.depth,
               "custom": self.custom, "frame_wire_bytes": self.frame_wire_bytes, "codewords_per_frame": self.blocks,
               "overhead": self.overhead, "rate": self.rate, "times_target": self.times_target,
               "meets_target": self.meets_target, "within_overhead": self.within_overhead,
               "weights_known": self.weights_known,
               "predicted": self.prediction.to_dict(),
               "repair": None if self.repair is None else self.repair.to_dict(),
               "after_repair": None if self.after_repair is None else
               {"bit_error": self.after_repair[0], "frame_error": self.after_repair[1],
                "lost_bits_counted": self.lost_bits_counted},
               "limit": None if self.limit is None else {**self.limit.to_dict(), "rate_gap_shown": self.limit_gap}}
        if self.burst_covered_bits is not None:
            out["burst_covered_bits"] = self.burst_covered_bits
            out["burst_quantile"] = self.burst_quantile
        return out


@dataclass(frozen=True)
class Verification:
    """The top choice run through `bitmend.simulate` beside its prediction."""

    code: str
    depth: int
    per: str
    target: float
    bits: int
    seed: int
    predicted: float  # the rate simulate measures: payload only (no headers, drop or slip)
    measured: float
    low: float
    high: float
    events: int
    trials: int
    predicted_block_error: float
    measured_block_error: float
    block_low: float
    block_high: float
    verdict: str  # confirmed | consistent | refuted
    prediction_inside: bool
    bits_to_decide: int | None  # payload bits a run would need to confirm the target
    notes: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {k: (list(v) if isinstance(v, tuple) else v) for k, v in self.__dict__.items()}


@dataclass(frozen=True)
class RepairVerification:
    """The top choice's repair ratio run through the real encoder, `inject` (every channel
    of the plan) and decoder, beside the prediction. Over G whole groups of K data frames:
    data frames missing before repair (rebuilt or lost) against q, groups that lost data for
    good against P[M > R] (independent trials: Clopper-Pearson), and data frames lost for
    good against the exact distribution of their total (G independent groups)."""

    spec: str
    code: str
    depth: int
    seed: int
    frames: int  # data frames sent (whole groups)
    groups: int
    missing: int  # data frames that needed a rebuild: dropped or damaged
    predicted_q: float
    missing_low: float
    missing_high: float
    failed_groups: int
    predicted_group_failure: float
    group_low: float
    group_high: float
    lost: int  # data frames lost for good
    predicted_lost: float  # frames x the predicted residual frame loss
    lost_low: int  # central 95% of the predicted total
    lost_high: int
    exact: bool  # every delivered frame is byte for byte what was sent

    @property
    def agrees(self) -> bool:
        return (self.missing_low <= self.predicted_q <= self.missing_high
                and self.group_low <= self.predicted_group_failure <= self.group_high
                and self.lost_low <= self.lost <= self.lost_high and self.exact)

    def to_dict(self) -> dict:
        return {**self.__dict__, "agrees": self.agrees}


@dataclass(frozen=True)
class Plan:
    channels: tuple[str, ...]
    channel_lines: tuple[str, ...]
    target: float
    per: str
    frame_bytes: int
    max_overhead: float | None
    candidates: tuple[Candidate, ...]  # every code, at its chosen depth
    ranked: tuple[Candidate, ...]  # meet the target within the overhead limit, cheapest first
    closest: tuple[Candidate, ...]  # when nothing is ranked: nearest misses
    over_budget: tuple[Candidate, ...]  # meet the target, but above the overhead limit
    formulas: tuple[str, ...]
    assumptions: tuple[str, ...]
    depth_rule: str
    skipped: tuple[str, ...] = ()
    verification: Verification | None = None
    repair_verification: RepairVerification | None = None
    max_depth: int = MAX_DEPTH
    rank_rule: str = ""
    limit_note: str = ""
    repair_rule: str = ""  # with a drop channel: how R/K is chosen; empty otherwise (no repair proposed)

    @property
    def top(self) -> Candidate | None:
        return self.ranked[0] if self.ranked else None

    def to_dict(self) -> dict:
        return {"channels": list(self.channels), "target": self.target, "per": self.per,
                "frame_bytes": self.frame_bytes, "max_overhead": self.max_overhead,
                "met": bool(self.ranked),
                "ranked": [c.to_dict() for c in self.ranked],
                "closest": [c.to_dict() for c in self.closest],
                "over_budget": [c.to_dict() for c in self.over_budget],
                "formulas": list(self.formulas), "assumptions": list(self.assumptions),
                "depth_rule": self.depth_rule, "rank_rule": self.rank_rule, "max_depth": self.max_depth,
                "limit_note": self.limit_note, "repair_rule": self.repair_rule, "skipped": list(self.skipped),
                "verification": self.verification.to_dict() if self.verification else None,
                "repair_verification": self.repair_verification.to_dict() if self.repair_verification else None}

    def render(self, shown: int = SHOWN) -> list[str]:
        """The plan as text lines for a terminal."""
        return _render(self, shown)


# ---- the channel, as the plan sees it ------------------------------------------------------

@dataclass(frozen=True)
class _Channel:
    flips: tuple[ChannelModel, ...]  # bsc, burst, bytes: flips inside codewords
    drop: float  # per frame
    slip: float  # per wire bit

    @property
    def has_memory(self) -> bool:
        """Depth matters only when errors are correlated from bit to bit."""
        return any(isinstance(m, (GilbertElliott, ByteSubstitution)) for m in self.flips)

    @property
    def bursts(self) -> tuple[GilbertElliott, ...]:
        return tuple(m for m in self.flips if isinstance(m, GilbertElliott))

    def error_counts(self, n: int, depth: int, symbol_bits: int = 1) -> np.ndarray:
        return _error_counts(self.flips, n, (depth,), symbol_bits)[0]

    def error_counts_by_depth(self, n: int, depths: tuple[int, ...], symbol_bits: int = 1) -> np.ndarray:
        return _error_counts(self.flips, n, depths, symbol_bits)


@lru_cache(maxsize=256)
def _error_counts(flips: tuple[ChannelModel, ...], n: int, depths: tuple[int, ...],
                  symbol_bits: int = 1) -> np.ndarray:
    """One row per depth: the distribution of wrong symbols (bits, for a binary code) in a
    codeword of n symbols."""
    bsc = [m.p for m in flips if isinstance(m, BSC)]
    # independent flips on the same bit combine exactly: flipped when an odd number flip it
    p = (1.0 - math.prod(1.0 - 2.0 * p for p in bsc)) / 2.0
    # a symbol of s bits on different bytes from its codeword's others: wrong unless all s pass
    counts = residual.bsc_error_counts(n, -math.expm1(symbol_bits * math.log1p(-p)) if p < 1 else 1.0) \
        if bsc else None
    for m in flips:
        if isinstance(m, GilbertElliott):
            if symbol_bits == 1:
                more = residual.gilbert_elliott_error_counts_by_depth(n, depths, m.enter, m.leave, m.bad, m.good)
            else:
                more = residual.gilbert_elliott_symbol_error_counts_by_depth(n, symbol_bits, depths, m.enter,
                                                                             m.leave, m.bad, m.good)
        elif isinstance(m, ByteSubstitution):
            if symbol_bits == 1:
                more = residual.byte_substitution_error_counts_by_depth(n, depths, m.p)
            elif symbol_bits == 8:  # byte-aligned symbols: a substituted byte is one wrong symbol
                more = residual.bsc_error_counts(n, m.p)
            else:
                raise ValueError(f"byte substitutions on {symbol_bits}-bit symbols are not modelled")
        else:
            continue
        counts = more if counts is None else residual.add_error_counts(counts, more)
    if counts is None:
        counts = np.zeros(n + 1)
        counts[0] = 1.0
    return np.broadcast_to(np.atleast_2d(counts), (len(depths), n + 1))


def _channel(models: Sequence[ChannelModel]) -> _Channel:
    flips, drop, slip = [], 0.0, 0.0
    for m in models:
        if isinstance(m, (BSC, GilbertElliott, ByteSubstitution)):
            flips.append(m)
        elif isinstance(m, FrameDrop):
            drop = 1.0 - (1.0 - drop) * (1.0 - m.p)
        elif isinstance(m, BitSlip):
            slip = 1.0 - (1.0 - slip) * (1.0 - m.p)
        else:
            raise PlanError(f"plan has no model for the channel {m.spec}")
    return _Channel(tuple(flips), drop, slip)


# ---- one code at one depth -----------------------------------------------------------------

WEIGHT_WORK_LIMIT = 1 << 22  # words x length the plan spends on one code's weight distribution


def _weights(code) -> tuple[int, ...] | None:
    """The weight distribution where it is cheap to list (it refines the bit error through
    the miscorrection share); None otherwise, and the bit error is then an upper bound.
    None for codes over symbols of several bits: the share is counted in binary patterns."""
    if _symbol_bits(code) != 1 or (1 << min(code.k, code.n - code.k)) * code.n > WEIGHT_WORK_LIMIT:
        return None
    try:
        wd = code.weight_distribution
    except (AttributeError, ValueError):
        return None
    return None if wd is None else tuple(wd.counts)


def _symbol_bits(code) -> int:
    return getattr(code, "symbol_bits", 1)


#: share of a wrong 8-bit symbol's bits taken as wrong: 128/255, the mean over the 255
#: other values of a byte (a BSC at small p flips fewer, so the bit error is an upper bound)
SYMBOL_WRONG_BIT_SHARE = {1: 1.0, 8: 128 / 255}


def _plannable(code) -> bool:
    """Binary codes, and codes over bytes (symbol interleaving keeps them byte-aligned)."""
    return isinstance(code, BinaryLinearCode) or _symbol_bits(code) in SYMBOL_WRONG_BIT_SHARE


def _frame_header(code: BinaryLinearCode, custom: bool, depth: int, frame_bytes: int) -> fmt.FrameHeader:
    if custom:
        return fmt.FrameHeader.for_defined_code(code, depth, 0, frame_bytes)
    from bitmend.codes.catalog import code_id

    return fmt.FrameHeader(code_id(code.name), depth, 0, frame_bytes)


def _block_failure(channel: _Channel, n: int, t: int, depth: int, codewords: int) -> float:
    """P(at least one of `codewords` Golay-style blocks of length n at depth fails)."""
    per_block = float(min(1.0, channel.error_counts(n, depth)[t + 1:].sum()))
    return 1.0 - (1.0 - per_block) ** codewords if per_block < 1 else 1.0


def predict(code: BinaryLinearCode, depth: int, channel: _Channel, frame_bytes: int, custom: bool = False,
            weights: tuple[int, ...] | None = None) -> tuple[Prediction, fmt.FrameHeader]:
    """Predicted rates of code at depth on the channel, for full frames of frame_bytes."""
    return predict_depths(code, (depth,), channel, frame_bytes, custom, weights)[0]


def predict_depths(code, depths: tuple[int, ...], channel: _Channel, frame_bytes: int, custom: bool = False,
                   weights: tuple[int, ...] | None = None) -> list[tuple[Prediction, fmt.FrameHeader]]:
    """predict() at every depth of `depths` (the error counts of all depths at once)."""
    symbol_bits = _symbol_bits(code)
    counts = channel.error_counts_by_depth(code.n, tuple(depths), symbol_bits)
    block, wrong, bits = residual.codeword_outcomes(counts, code.t, weights, SYMBOL_WRONG_BIT_SHARE[symbol_bits])
    golay = fmt.header_code()
    one_header = _block_failure(channel, golay.n, golay.t, fmt.HEADER_DEPTH, fmt.HEADER_DEPTH)
    survive_headers = 1.0 - one_header ** 2
    if custom:
        def_depth = fmt.definition_depth(code.k, code.r)
        one_definition = _block_failure(channel, golay.n, golay.t, def_depth, def_depth)
        survive_headers *= 1.0 - one_definition ** 2
    out = []
    for i, depth in enumerate(depths):
        header = _frame_header(code, custom, depth, frame_bytes)
        payload = _frame_error(float(block[i]), _blocks(header))
        wire_bits = 8 * header.frame_bytes
        slipped = -math.expm1(wire_bits * math.log1p(-channel.slip)) if channel.slip < 1 else 1.0
        channel_loss = 1.0 - (1.0 - channel.drop) * (1.0 - slipped)
        frame = 1.0 - (1.0 - payload) * survive_headers * (1.0 - channel_loss)
        # a slipped frame is delivered (keep) with the bits after the slip at random: a quarter wrong
        bit_error = min(1.0, float(bits[i]) * (1.0 - slipped) + slipped / 4)
        out.append((Prediction(float(block[i]), float(wrong[i]), bit_error, float(bits[i]), payload,
                               1.0 - survive_headers, channel_loss, min(1.0, frame)), header))
    return out


def _blocks(header: fmt.FrameHeader) -> int:
    return layout(header.code, header.depth, header.length + fmt.CRC_BYTES).blocks


def _frame_error(block_error: float, blocks: int) -> float:
    if block_error >= 1.0:
        return 1.0
    return -math.expm1(blocks * math.log1p(-block_error))


# ---- the search -------------------------------------------------------------------------------

@dataclass
class _Setup:
    channel: _Channel
    target: float
    per: str
    frame_bytes: int
    max_overhead: float | None
    max_depth: int = MAX_DEPTH

    @property
    def bsc_p(self) -> float | None:
        """The crossover probability when the flips are those of a memoryless BSC (one or
        several combined); None for channels with memory, where the limits do not apply."""
        flips = self.channel.flips
        if not flips or not all(isinstance(m, BSC) for m in flips):
            return None
        p = (1.0 - math.prod(1.0 - 2.0 * m.p for m in flips)) / 2.0
        return p if 0.0 < p < 0.5 else None


def _candidate(setup: _Setup, code, custom: bool, depth: int, prediction: Prediction,
               header: fmt.FrameHeader, weights_known: bool = True) -> Candidate:
    if header.frame_bytes > fmt.MAX_FRAME_WIRE_BYTES:
        raise ValueError(f"frames of {setup.frame_bytes} bytes would take {header.frame_bytes} bytes on the wire, "
                         f"above the {fmt.MAX_FRAME_WIRE_BYTES} a reader accepts")
    rate = prediction.rate(setup.per)
    overhead = header.frame_bytes / setup.frame_bytes - 1.0
    covered = quantile = None
    bursts = setup.channel.bursts
    if bursts and code.t > 0:
        bits = _symbol_bits(code)
        # t wrong symbols per codeword: any burst within D t symbols; s-bit symbols need the
        # burst inside D t whole symbols, which any burst of s (D t - 1) + 1 bits is
        covered = depth * code.t if bits == 1 else bits * (depth * code.t - 1) + 1
        quantile = min(residual.burst_length_quantile(m.leave, covered) for m in bursts)
    limit = None
    p = setup.bsc_p
    if p is not None:
        bits = _symbol_bits(code)
        limit = limits.distance_to_limit(code.n * bits, code.k * bits, p, prediction.block_error)
    return Candidate(code.name, code.n, code.k, code.d, code.t, depth, custom, header.frame_bytes, _blocks(header),
                     overhead, prediction, rate, rate <= setup.target,
                     setup.max_overhead is None or overhead <= setup.max_overhead + 1e-12, setup.target,
                     covered, quantile, weights_known, limit)


def _cheapest_depth(setup: _Setup, code, custom: bool) -> Candidate:
    """The code at the depth of 1..max_depth that meets the target with the least
    whole-frame overhead (the shallower on a tie: less latency and memory), or, when none
    meets it, at the depth that comes closest. Every depth is evaluated (the error counts of
    all depths come out of one recursion; on a memoryless channel they are the same at every
    depth): neither the rate nor the overhead is monotone in the depth at fine grain, because
    the padding to whole groups changes the number of codewords per frame."""
    depths = tuple(range(1, setup.max_depth + 1))
    weights = _weights(code)
    predictions = predict_depths(code, depths, setup.channel, setup.frame_bytes, custom, weights)
    rates = [prediction.rate(setup.per) for prediction, _ in predictions]
    meeting = [i for i, rate in enumerate(rates) if rate <= setup.target]
    if meeting:
        pick = min(meeting, key=lambda i: (predictions[i][1].frame_bytes, i))
    else:
        pick = min(range(len(depths)), key=lambda i: (rates[i], i))
    return _candidate(setup, code, custom, depths[pick], *predictions[pick], weights_known=weights is not None)


def _bad_bits(prediction: Prediction, channel: _Channel) -> float:
    """The share of a data frame's payload bits that go bad before repair, with a drop
    channel: all of them when the frame is lost outright (dropped, or both header copies
    failed: nothing is delivered), else the wrong bits as delivered (prediction.bit_error)."""
    lost = 1.0 - (1.0 - channel.drop) * (1.0 - prediction.header_loss)
    return min(1.0, lost + (1.0 - lost) * prediction.bit_error)


def _cheapest_with_repair(setup: _Setup, code, custom: bool) -> Candidate:
    """With a drop channel: the code at the depth D and repair ratio R/K (R = 0: no repair
    frames) whose stream meets the target with the fewest wire bytes per data frame,
    W(D) + (R/K) W_r(D); on a tie the smaller group K (a rebuilt frame waits for its group),
    then the shallower depth. Every depth 1..max_depth and every R, K of 1..32 is evaluated
    (analysis.repair_groups.not_rebuilt_table does all R and K at once). When nothing meets
    the target: the choice with the lowest rate within the overhead limit (else overall)."""
    depths = tuple(range(1, setup.max_depth + 1))
    weights = _weights(code)
    data = predict_depths(code, depths, setup.channel, setup.frame_bytes, custom, weights)
    # a repair frame's payload is the group's longest source symbol: a full frame's payload
    # plus its 11-byte head (flags, position, length) and 4-byte CRC-32C (container/repair.py)
    repair_bytes = setup.frame_bytes + SYMBOL_OVERHEAD
    repairs = (predict_depths(code, depths, setup.channel, repair_bytes, custom, weights)
               if repair_bytes <= fmt.MAX_PAYLOAD_BYTES else None)
    q = np.array([p.frame_error for p, _ in data])
    wire = np.array([h.frame_bytes for _, h in data], dtype=float)
    if repairs is None:  # a frame so large that its repair symbol would pass the reader's limit
        q_r, wire_r, max_r = q, wire, 0
    else:
        q_r = np.array([p.frame_error for p, _ in repairs])
        wire_r = np.array([h.frame_bytes for _, h in repairs], dtype=float)
        max_r = MAX_REPAIR
    bad = q if setup.per == "frame" else np.array([_bad_bits(p, setup.channel) for p, _ in data])
    table = repair_groups.not_rebuilt_table(q, q_r, MAX_GROUP, max_r)  # [depth, K - 1, R]
    rates = bad[:, None, None] * table
    ks = np.arange(1, MAX_GROUP + 1, dtype=float)[None, :, None]
    rs = np.arange(max_r + 1, dtype=float)[None, None, :]
    # wire bytes per data frame; (K W + R W_r) / K rounds the same rational the same way
    # for equal ratios (1/8, 2/16), so equal overheads tie exactly
    cost = (ks * wire[:, None, None] + rs * wire_r[:, None, None]) / ks
    d_idx, k_idx, r_idx = np.indices(rates.shape)
    meets = rates <= setup.target
    if meets.any():
        pool = meets
        order = np.lexsort((r_idx[pool], d_idx[pool], k_idx[pool], cost[pool]))
    else:
        within = (cost / setup.frame_bytes - 1.0 <= setup.max_overhead + 1e-12) if setup.max_overhead is not None \
            else np.ones_like(meets)
        pool = within if within.any() else np.ones_like(meets)
        order = np.lexsort((d_idx[pool], k_idx[pool], cost[pool], rates[pool]))
    pick = order[0]
    di, ki, ri = int(d_idx[pool][pick]), int(k_idx[pool][pick]), int(r_idx[pool][pick])
    prediction, header = data[di]
    base = _candidate(setup, code, custom, depths[di], prediction, header, weights_known=weights is not None)
    k, r = ki + 1, ri
    overhead = float(cost[di, ki, ri]) / setup.frame_bytes - 1.0
    rate = float(rates[di, ki, ri])
    qd, qr, kept = float(q[di]), float(q_r[di]), float(table[di, ki, ri])
    bits = _bad_bits(prediction, setup.channel)
    choice = None
    if r > 0:
        choice = RepairChoice(r, k, int(wire_r[di]), r * float(wire_r[di]) / (k * setup.frame_bytes), qd, qr, bits,
                              kept, repair_groups.group_failure(k, r, qd, qr), qd * kept, bits * kept)
    return replace(base, overhead=overhead, rate=rate, meets_target=rate <= setup.target,
                   within_overhead=setup.max_overhead is None or overhead <= setup.max_overhead + 1e-12,
                   repair=choice, lost_bits_counted=True, after_repair=(bits * kept, qd * kept))


def parse_overhead(text: str | float | None) -> float | None:
    """'25%' or '0.25' -> 0.25; None stays None (no limit)."""
    if text is None or isinstance(text, (int, float)):
        value = None if text is None else float(text)
    else:
        raw = text.strip()
        try:
            value = float(raw[:-1]) / 100 if raw.endswith("%") else float(raw)
        except ValueError:
            raise PlanError(f"--max-overhead {text!r} is not a number or a percentage (e.g. 0.25 or 25%)") from None
    if value is not None and not (value >= 0 and math.isfinite(value)):
        raise PlanError(f"--max-overhead must be a non-negative fraction, got {text}")
    return value


def make_plan(channels: str | ChannelModel | Sequence[str | ChannelModel], target: float, per: str = "bit",
              frame_bytes: int = fmt.DEFAULT_FRAME_BYTES, max_overhead: float | str | None = None,
              extra_codes: Sequence[BinaryLinearCode] = (), verify: bool = False, verify_bits: int | None = None,
              seed: int = 1, max_depth: int = MAX_DEPTH) -> Plan:
    """Rank catalog codes (and extra_codes), each at its cheapest depth of 1..max_depth that
    meets the target, by whole-frame overhead."""
    try:
        models = parse_channels(channels)
    except ChannelSpecError as exc:
        raise PlanError(str(exc)) from None
    if not (0.0 < target < 1.0):
        raise PlanError(f"--target must be a rate between 0 and 1, got {target:g}")
    if per not in PER_CHOICES:
        raise PlanError(f"--per must be bit or frame, got {per!r}")
    if not 1 <= frame_bytes <= fmt.MAX_PAYLOAD_BYTES:
        raise PlanError(f"--frame-bytes must be 1..{fmt.MAX_PAYLOAD_BYTES}, got {frame_bytes}")
    if not 1 <= max_depth <= MAX_DEPTH:
        raise PlanError(f"--max-depth must be 1..{MAX_DEPTH}, got {max_depth}")
    limit = parse_overhead(max_overhead)
    channel = _channel(models)
    setup = _Setup(channel, float(target), per, frame_bytes, limit, int(max_depth))

    codes: list[tuple[BinaryLinearCode, bool]] = []
    skipped = []
    for name in code_names():
        code = get_code(name)
        if not _plannable(code):
            skipped.append(f"{name}: symbols of {_symbol_bits(code)} bits are not modelled")
            continue
        codes.append((code, False))
    codes += [(code, True) for code in extra_codes]

    candidates = []
    search = _cheapest_with_repair if channel.drop > 0 else _cheapest_depth  # no drop: no repair proposed
    for code, custom in codes:
        try:
            candidates.append(search(setup, code, custom))
        except ValueError as exc:  # e.g. a custom code's frames too large for the reader's limit
            skipped.append(f"{code.name}: {exc}")
    ranked = sorted((c for c in candidates if c.meets_target and c.within_overhead),
                    key=lambda c: (c.overhead, c.rate, c.depth))
    over = sorted((c for c in candidates if c.meets_target and not c.within_overhead), key=lambda c: c.overhead)
    closest = () if ranked else tuple(sorted((c for c in candidates if c.within_overhead and not c.meets_target),
                                             key=lambda c: (c.rate, c.prediction.bit_error,
                                                            c.prediction.block_error, c.overhead))[:3])
    plan = Plan(tuple(m.spec for m in models), tuple(m.describe() for m in models), float(target), per,
                frame_bytes, limit, tuple(candidates), tuple(ranked), closest, tuple(over[:3]),
                _formulas(channel, per, any(_symbol_bits(code) > 1 for code, _ in codes)),
                _assumptions(channel, per, any(custom for _, custom in codes),
                             [code for code, _ in codes if _weights(code) is None and _symbol_bits(code) == 1],
                             any(_symbol_bits(code) > 1 for code, _ in codes)),
                _depth_rule(channel, setup.max_depth), tuple(skipped), max_depth=setup.max_depth,
                rank_rule=RANK_RULE, limit_note=_limit_note(setup),
                repair_rule=REPAIR_RULE if channel.drop > 0 else "")
    if verify and ranked:
        plan = Plan(**{**plan.__dict__, "verification": verify_candidate(plan, ranked[0], extra_codes,
                                                                          verify_bits, seed)})
        if ranked[0].repair is not None:
            plan = Plan(**{**plan.__dict__, "repair_verification": verify_repair(plan, ranked[0], extra_codes, seed)})
    return plan


VERIFY_REPAIR_BYTES = 8 << 20  # payload of the repair run: a few seconds through the real codec
VERIFY_REPAIR_FRAMES = 2048


def verify_repair(plan: Plan, candidate: Candidate, extra_codes: Sequence[BinaryLinearCode] = (), seed: int = 1,
                  frames: int | None = None) -> RepairVerification:
    """Encode random whole groups with the candidate's code, depth and --repair R/K, send
    them through `inject` with every channel of the plan, decode, and count what was
    missing before repair and what stayed lost (module bitmend.analysis.repair_groups)."""
    import random

    from bitmend.analysis.intervals import clopper_pearson
    from bitmend.api import decode_bytes, encode_bytes
    from bitmend.inject import inject_bytes

    rc = candidate.repair
    if rc is None:
        raise ValueError("the candidate sends no repair frames")
    code = next((c for c in extra_codes if c.name == candidate.code), None) if candidate.custom else None
    code = code if code is not None else candidate.code
    wanted = frames or min(VERIFY_REPAIR_FRAMES, max(1, VERIFY_REPAIR_BYTES // plan.frame_bytes))
    groups = max(1, wanted // rc.k)
    count = groups * rc.k  # whole groups: the last one is full too
    data = random.Random(seed).randbytes(count * plan.frame_bytes)
    blob = encode_bytes(data, code=code, depth=candidate.depth, frame_bytes=plan.frame_bytes, repair=rc.spec)
    damaged, _ = inject_bytes(blob, list(plan.channels), seed=seed)
    decoded = decode_bytes(damaged, on_error="drop")  # frames not delivered verified leave no bytes
    status = {f.seq: f.status for f in decoded.report.frames if f.seq is not None and f.seq < count}
    delivered = sorted(seq for seq, st in status.items() if st in ("clean", "corrected", "rebuilt"))
    lost = [seq for seq in range(count) if status.get(seq) not in ("clean", "corrected", "rebuilt")]
    missing = sum(1 for seq in range(count) if status.get(seq) not in ("clean", "corrected"))
    failed = len({seq // rc.k for seq in lost})
    fb = plan.frame_bytes
    exact = decoded.data == b"".join(data[seq * fb:(seq + 1) * fb] for seq in delivered)
    m_low, m_high = clopper_pearson(missing, count)
    g_low, g_high = clopper_pearson(failed, groups)
    # the total lost over independent groups: the per-group distribution convolved G times
    per_group = repair_groups.lost_per_group_pmf(rc.k, rc.r, rc.frame_loss, rc.repair_frame_loss)
    total = np.array([1.0])
    for _ in range(groups):
        total = np.convolve(total, per_group)
    cdf = np.cumsum(total)
    low, high = int(np.searchsorted(cdf, 0.025)), int(np.searchsorted(cdf, 0.975))
    return RepairVerification(rc.spec, candidate.code, candidate.depth, seed, count, groups, missing, rc.frame_loss,
                              m_low, m_high, failed, rc.group_failure, g_low, g_high, len(lost),
                              rc.frame_error * count, low, high, exact)


# ---- verification -------------------------------------------------------------------------------

def verify_bits_for(candidate: Candidate, per: str, frame_bytes: int, target: float) -> int:
    """Payload bits for a short run: enough to expect about VERIFY_EVENTS events at the
    predicted rate r, and for the 95% interval around r to clear the target (about
    2 x 1.96^2 r / (target - r)^2 trials), within [VERIFY_MIN_BITS, VERIFY_MAX_BITS]."""
    p = candidate.prediction
    rate = p.payload_frame_error if per == "frame" else p.codeword_bit_error
    rate = max(rate, 1e-300)
    trials = VERIFY_EVENTS / rate
    if rate < target:
        trials = max(trials, 2 * 1.96 ** 2 * rate / (target - rate) ** 2)
    wanted = trials * (8 * frame_bytes if per == "frame" else 1)
    return int(min(VERIFY_MAX_BITS, max(VERIFY_MIN_BITS, 8 * frame_bytes, wanted)))


def verify_candidate(plan: Plan, candidate: Candidate, extra_codes: Sequence[BinaryLinearCode] = (),
                     bits: int | None = None, seed: int = 1) -> Verification:
    """Run the candidate through the simulator (payload segments through the real coding
    path) and set the measured rate beside the predicted one."""
    from bitmend.simulate import simulate

    code = next((c for c in extra_codes if c.name == candidate.code), None) if candidate.custom else None
    code = code if code is not None else get_code(candidate.code)
    flips = tuple(m for m in parse_channels(plan.channels) if m.acts_on_bits)
    notes = []
    if len(flips) < len(plan.channels):
        notes.append("simulate runs the flip channels only; drop and slip losses are in the prediction, "
                     "not in the measurement")
    if candidate.repair is not None:
        notes.append(f"with --repair {candidate.repair.spec} the target applies after repair; this run checks the "
                     "frame failure before repair (P_fail), the repair check below the rest")
    if not flips:
        flips = (BSC(0.0),)
    bits = bits or verify_bits_for(candidate, plan.per, plan.frame_bytes, plan.target)
    result = simulate(code, candidate.depth, flips, bits, seed, frame_bytes=plan.frame_bytes)
    measured = result.frame_error if plan.per == "frame" else result.bit_error
    predicted = (candidate.prediction.payload_frame_error if plan.per == "frame"
                 else candidate.prediction.codeword_bit_error)
    if measured.high <= plan.target:
        verdict = "confirmed"
    elif measured.low > plan.target:
        verdict = "refuted"
    else:
        verdict = "consistent"
    needed = None
    if verdict == "consistent" and predicted < plan.target:
        # trials for the 95% interval around the predicted rate r to clear the target:
        # 1.96^2 r / (target - r)^2 (normal approximation), and at least 3/target (the
        # "rule of three": zero events in N trials put the upper bound near 3/N)
        r = predicted
        trials = max(3.0 / plan.target, 1.96 ** 2 * r / (plan.target - r) ** 2)
        needed = int(math.ceil(trials * (8 * plan.frame_bytes if plan.per == "frame" else 1)))
    if plan.per == "bit":
        notes.append("the bit error interval is by batch means (a decoder leaves wrong bits in clusters); the "
                     "block error comparison is the sharper check")
    return Verification(candidate.code, candidate.depth, plan.per, plan.target, result.payload_bits, result.seed,
                        predicted, measured.rate, measured.low, measured.high, measured.events, measured.trials,
                        candidate.prediction.block_error, result.block_error.rate, result.block_error.low,
                        result.block_error.high, verdict, measured.low <= predicted <= measured.high, needed,
                        tuple(notes))


# ---- words -----------------------------------------------------------------------------------

def _formulas(channel: _Channel, per: str, symbols: bool = False) -> tuple[str, ...]:
    lines = []
    if any(isinstance(m, BSC) for m in channel.flips):
        lines.append("BSC: P(i) = C(n,i) p^i (1-p)^(n-i) errors among a codeword's n bits, whatever the depth")
    if channel.bursts:
        lines.append("Gilbert-Elliott: P(i) by a forward recursion over the codeword's n bits, taken D apart: "
                     "D-step transitions T^D = Pi + lambda^D (I - Pi), lambda = 1 - enter - leave; "
                     "a bit flips with 'bad' or 'good' by state")
    if any(isinstance(m, ByteSubstitution) for m in channel.flips):
        lines.append("bytes: runs of ceil(8/D) codeword bits share a byte; a run is hit with probability p "
                     "and then flips j of its s bits with probability C(s,j) 2^(8-s) / 255")
    if len(channel.flips) > 1:
        lines.append("several flip channels: P(i) is the convolution of their error counts")
    if symbols:
        lines.append("codes over bytes (Reed-Solomon): i counts wrong symbols; a symbol is wrong when any of its "
                     "8 bits is (BSC: 1 - (1-p)^8; Gilbert-Elliott: the recursion carries the chain through each "
                     "symbol's 8 bits, K = Q (T Q)^7 for a clean symbol, then D*8 - 7 steps to the next); "
                     "P_bit = (128/255) (1/n) sum_{i>t} P(i) min(n, i+t)")
    lines += ["P_B = sum_{i>t} P(i)   (bounded-distance decoding fails)",
              "P_bit = (1/n) sum_{i>t} P(i) (i + m_i (min(n, i+t) - i)),  m_i = N_i / C(n,i), N_i the weight-i "
              "patterns within t of a non-zero codeword (from the weight distribution)",
              f"P_frame = 1 - (1 - P_B)^B (1 - P_H^2) (1 - P_loss),  B codewords per frame, "
              f"P_H = 1 - (1 - P_G)^{fmt.HEADER_DEPTH} for one header copy ({fmt.HEADER_DEPTH} {fmt.HEADER_CODE} "
              f"codewords at depth {fmt.HEADER_DEPTH}, P_G their block error)"]
    if channel.drop or channel.slip:
        lines.append("P_loss = 1 - (1 - p_drop) (1 - p_slip)^W,  W the frame's wire bits")
    if channel.drop:
        lines += ["repair R/K: a data frame is missing with q = 1 - (1 - p_drop)(1 - P_fail) = P_frame, P_fail its "
                  "failure after decoding (CRC, both headers, slip); in a group of K data + R repair frames the "
                  "missing count M is Binomial(K+R, q), and a data frame is delivered unless M > R (any K of the "
                  "K+R rebuild the group)",
                  "residual frame loss = E[missing data frames in groups with M > R] / K "
                  "= (1/(K+R)) sum_{m=R+1}^{K+R} m C(K+R,m) q^m (1-q)^(K+R-m) = q P[Binomial(K+R-1, q) >= R] "
                  "(a data frame is lost when it is missing and at least R of the other K+R-1 are too)",
                  "a repair frame carries B + 15 payload bytes (symbol head and CRC-32C), so its own q_r is "
                  "computed at that size and the residual taken exactly as q P[Bin(K-1, q) + Bin(R, q_r) >= R]",
                  "overhead with repair = (K W + R W_r) / (K B) - 1,  W and W_r the wire bytes of a data and a "
                  "repair frame, B the payload bytes of a data frame"]
        if per == "bit":
            lines.append("bit rate with repair = e P[Bin(K-1, q) + Bin(R, q_r) >= R],  e = P_lost + (1 - P_lost) "
                         "P_bit, P_lost = 1 - (1 - p_drop)(1 - P_H^2): a frame that is not rebuilt loses all its "
                         "bits when it never arrived, and keeps its wrong bits when it arrived damaged")
    if channel.slip:
        lines.append("P_bit += P_slip / 4: a frame with a slip is delivered with the bits after it at random")
    return tuple(lines)


def _unweighted_text(unweighted: Sequence) -> str:
    """Which binary codes go without a weight distribution, and why: skipped for cost (it
    could be listed, at more work than the plan spends on one code) or not known at all."""
    costly = [c.name for c in unweighted if getattr(c, "weight_distribution_available", True)]
    unknown = [c.name for c in unweighted if c.name not in costly]
    parts = []
    if costly:
        parts.append(f"weight distribution skipped for cost for {', '.join(costly)} (listing 2^min(k, n-k) words of "
                     f"n bits exceeds the {WEIGHT_WORK_LIMIT:,} bit-words the plan spends on one code)")
    if unknown:
        parts.append(f"no weight distribution known for {', '.join(unknown)} (too large to list)")
    return ("; ".join(parts) + ": every failure of these codes is counted as a miscorrection (m_i = 1), so their "
            "bit error is an upper bound; t is the designed t where only that is known")


def _assumptions(channel: _Channel, per: str, custom: bool, unweighted: Sequence = (),
                 symbols: bool = False) -> tuple[str, ...]:
    lines = ["bounded-distance decoding: up to t errors per codeword are corrected; more are flagged or "
             "miscorrected, and the frame's CRC-32C catches a miscorrection (it lets one through with "
             "probability about 2^-32, not counted)",
             "given i errors in a codeword, every placement is equally likely (exact on a BSC); this sets the "
             "miscorrection share m_i"]
    if symbols:
        lines.append("Reed-Solomon: errors only, no erasures (the decoder's use of known-bad symbols is not "
                     "counted, so the prediction errs on the safe side); every failure counts as a "
                     "miscorrection and a wrong byte as 128/255 wrong bits, so the bit error is an upper bound")
    if unweighted:
        lines.append(_unweighted_text(unweighted))
    if per == "bit" and channel.drop:
        lines.append("the bit rate counts payload bits as `decode --on-error keep` writes them, wrong or not, and, "
                     "with a drop channel, every payload bit of a frame never delivered (neither arrived nor rebuilt) "
                     "as a bad bit: otherwise frames lost would not count at all")
    elif per == "bit":
        lines.append("the bit rate counts payload bits as `decode --on-error keep` writes them, wrong or not, "
                     "before the CRC flags the frame; frames lost outright deliver nothing and are not counted")
    else:
        lines.append("the frame rate counts frames not delivered verified: CRC failed, or lost")
    lines.append("codeword failures within a frame are taken as independent: 1 - (1 - P_B)^B; where errors come "
                 "in bursts they cluster, so this overstates the frame rate (it never exceeds B P_B)")
    lines.append("a frame is lost only when both copies of its header fail (they lie a payload apart: taken as "
                 "independent); a locked reader needs no marker" +
                 ("; a code defined in the stream likewise needs one of its two definition blocks" if custom else ""))
    if channel.bursts:
        lines.append("the Gilbert-Elliott chain is in its stationary state at each codeword's first bit; "
                     "codeword bits lie D apart on the wire inside a group (docs/FORMAT.md), so the recursion "
                     "over D-step transitions is exact for one codeword")
    if any(isinstance(m, ByteSubstitution) for m in channel.flips):
        lines.append("byte substitutions: exact for D >= 8 (each codeword bit in its own byte); below that, "
                     "runs of ceil(8/D) bits are treated as one byte, which errs towards more errors")
    if len(channel.flips) > 1:
        lines.append("flips of different channels on the same bit would cancel; adding the counts ignores "
                     "that, an upper bound")
    if channel.drop:
        lines += ["drop combined with the bit-error channel: the drop channel takes each frame with probability "
                  "p_drop, independently of the bit errors, and a frame that is not dropped fails with the "
                  "probability P_fail predicted above; so a frame is missing with q = 1 - (1 - p_drop)(1 - P_fail)",
                  "losses are independent from frame to frame (drop draws each frame apart; bit errors in one frame "
                  "say nothing of the next: a frame spans far more bits than a burst lasts), so the missing "
                  "frames of a group are binomial; clustered losses (a fade longer than a frame) would cost more",
                  "repair: the erasure code is MDS (any K of a group's K+R frames rebuild it; fewer rebuild none of "
                  "the missing data frames); groups are full (a stream's last, shorter group is stronger); the "
                  "reader holds a whole group (at most 32 data frames, within its reorder window); a rebuilt frame "
                  "is verified by its CRC-32C",
                  "without repair frames no code inside a frame restores a frame that vanished: the frame loss "
                  "stays at p_drop or above"]
    if channel.slip:
        lines.append("slip: a slip anywhere in a frame costs that frame; the reader resynchronises at the next")
    lines.append(f"overhead = wire bytes / payload bytes - 1 for a full frame: marker, header and copy "
                 f"({len(fmt.MARKER_BYTES) + 2 * fmt.HEADER_BYTES} bytes), "
                 "CRC-32C (4), parity, padding to whole groups and bytes" +
                 (", two code-definition blocks for a code in the stream" if custom else ""))
    return tuple(lines)


REPAIR_RULE = (f"a drop channel loses whole frames, which no code inside a frame restores: each code and depth is "
               f"tried with every repair ratio R/K (R repair frames after every K data frames, 1 <= K <= {MAX_GROUP}, "
               f"1 <= R <= {MAX_REPAIR}; `encode --repair R/K`) and without; the repair frames' wire bytes "
               "(R/K of a repair frame per data frame) are added to the whole-frame overhead, and the cheapest "
               "combination that meets the target is kept (on a tie the smaller group K: a rebuilt frame waits for "
               "its group; frames that arrive whole wait for nothing)")


RANK_RULE = ("codes are ranked by the overhead of a whole frame on the wire (marker, both headers, CRC, parity, "
             "padding), cheapest first, each at its cheapest depth that meets the target")


def _depth_rule(channel: _Channel, max_depth: int = MAX_DEPTH) -> str:
    bound = (f"depths 1..{max_depth} (--max-depth; latency and memory grow with the depth)" if max_depth < MAX_DEPTH
             else f"depths 1..{MAX_DEPTH} (bound them with --max-depth: latency and memory grow with the depth)")
    if not channel.has_memory:
        return (f"each code runs at the depth with the least whole-frame overhead that meets the target, over {bound}; "
                "errors are independent from bit to bit, so interleaving changes only the padding")
    parts = [f"each code runs at the depth D with the least whole-frame overhead whose predicted rate meets the "
             f"target, over {bound}; the shallower on a tie "
             "(deeper spreads a burst over more codewords: a burst of b bits puts at most ceil(b/D) "
             "errors in any one codeword, so D corrects every burst up to D t bits)"]
    for m in channel.bursts:
        if m.leave > 0:
            q90 = residual.burst_length_for_quantile(m.leave, 0.9)
            q99 = residual.burst_length_for_quantile(m.leave, 0.99)
            parts.append(f"bad spells of {m.spec} last {m.mean_burst_bits:.3g} bits on average (1/leave); "
                         f"90% are at most {q90:.0f} bits, 99% at most {q99:.0f} (geometric lengths). Rarer, "
                         "longer spells may cost less than the target allows, and a spell flips only about "
                         "'bad' x its length bits, so even some longer ones are corrected")
        else:
            parts.append(f"{m.spec}: a bad spell never ends (leave = 0); no depth covers it")
    return "; ".join(parts)


def _limit_note(setup: _Setup) -> str:
    if setup.bsc_p is None:
        return ("limit: the distance to the best possible code (Polyanskiy, Poor and Verdu, 2010) is computed for "
                "a memoryless BSC only; this channel has memory or no bit flips, so the column is left empty")
    return (f"limit: 'rate gap' = the best rate any code of the same length (in bits) could have at the same block "
            f"error on this BSC (p = {setup.bsc_p:.3g}), minus the code's rate: the binomial converse (no code does "
            f"better; 0 means none does), or the normal approximation above {limits.EXACT_MAX_N} bits "
            "(Polyanskiy, Poor and Verdu, IEEE Trans. IT 56(5), 2010)")


def _gap(c: Candidate) -> str:
    gap = c.limit_gap
    return f"{'-':>9}" if gap is None else f"{gap:>+9.4f}"


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def _share(q: float) -> str:
    """A share close to 1 written so that its distance from 1 stays visible."""
    if 1 - q <= 0:
        return "all"
    return f"{100 * q:.1f}%" if 1 - q >= 1e-3 else f"all but {1 - q:.1e}"


def _after_repair(c: Candidate) -> tuple[float, float]:
    """(bit, frame) rates as the target counts them: after repair with a drop channel (bits
    never delivered counted as bad), else the prediction's own."""
    p = c.prediction
    return c.after_repair if c.after_repair is not None else (p.bit_error, p.frame_error)


def _describe(c: Candidate, per: str, repair_column: bool = False) -> str:
    p = c.prediction
    bit, frame = _after_repair(c) if repair_column else (p.bit_error, p.frame_error)
    repair = f"{c.repair_spec or '-':>7}" if repair_column else ""
    row = (f"{c.code:<16}{c.depth:>6}{repair}{_pct(c.overhead):>10}{bit:>11.2e}{frame:>12.2e}"
           f"{p.block_error:>12.2e}{_gap(c)}")
    if c.burst_covered_bits is not None:
        share = _share(c.burst_quantile)
        row += f"   bursts <= {c.burst_covered_bits} bits ({'all' if share == 'all' else share + ' of'} bad spells)"
    return row


def _render(plan: Plan, shown: int) -> list[str]:
    what = "wrong bits per delivered payload bit" if plan.per == "bit" else "frames not delivered verified"
    limit = "no limit" if plan.max_overhead is None else f"at most {_pct(plan.max_overhead)}"
    lines = ["channel:"] + [f"  {spec}: {text}" for spec, text in zip(plan.channels, plan.channel_lines)]
    lines += [f"target: at most {plan.target:.3g} {what}; frames of {plan.frame_bytes} payload bytes; "
              f"overhead {limit}", f"rank: {plan.rank_rule}", f"depth: {plan.depth_rule}"]
    repairs = bool(plan.repair_rule)
    if repairs:
        lines.append(f"repair: {plan.repair_rule}")
    lines += [plan.limit_note, ""]
    head = (f"{'code':<16}{'depth':>6}{'repair' if repairs else '':>{7 if repairs else 0}}{'overhead':>10}{'bit err':>11}"
            f"{'frame err':>12}{'block err':>12}{'rate gap':>9}")
    if plan.ranked:
        lines.append(f"{len(plan.ranked)} choice{'s' * (len(plan.ranked) != 1)} meet the target; "
                     f"cheapest whole frame first:")
        lines.append("rank " + head)
        if repairs:
            lines.append("     (bit err and frame err after the repair frames; bits never delivered count as bad)")
        for i, c in enumerate(plan.ranked[:shown], 1):
            lines.append(f"{i:>4} " + _describe(c, plan.per, repairs))
        top = plan.ranked[0]
        code = f"--code-file <the file of {top.code}>" if top.custom else f"--code {top.code}"
        repair = f" --repair {top.repair_spec}" if top.repair is not None else ""
        lines += ["", f"choice: bitmend encode {code} --depth {top.depth} --frame-bytes {plan.frame_bytes}{repair}"]
        lines += _worked(top, plan)
    else:
        lines.append(f"nothing meets the target {plan.target:.3g} "
                     f"{'within the overhead limit' if plan.max_overhead is not None else ''}".rstrip() + ".")
        if repairs and plan.frame_bytes + SYMBOL_OVERHEAD > fmt.MAX_PAYLOAD_BYTES:
            lines.append(f"no repair frames at this frame size: a repair frame carries {SYMBOL_OVERHEAD} bytes more "
                         f"than a data frame, above the reader's {fmt.MAX_PAYLOAD_BYTES}-byte payload limit; "
                         f"use --frame-bytes {fmt.MAX_PAYLOAD_BYTES - SYMBOL_OVERHEAD} or less")
        elif repairs:
            lines.append(f"no repair ratio R/K (1 <= K <= {MAX_GROUP}, 1 <= R <= {MAX_REPAIR}) with any code and depth "
                         "brings the lost frames down to the target" +
                         (" within the overhead limit" if plan.max_overhead is not None else ""))
        if plan.closest:
            lines.append("closest within the limit:" if plan.max_overhead is not None else "closest:")
            lines.append("     " + head + "   off by")
            for c in plan.closest:
                lines.append("     " + _describe(c, plan.per, repairs) + f"   {c.times_target:.3g}x the target")
            lines += _worked(plan.closest[0], plan)
    if plan.over_budget:
        lines.append("")
        lines.append("meet the target but cost more than the overhead limit:")
        for c in plan.over_budget:
            lines.append("     " + _describe(c, plan.per, repairs))
    if plan.verification:
        lines += [""] + _render_verification(plan.verification)
    if plan.repair_verification:
        lines += [""] + _render_repair_verification(plan.repair_verification, plan.target)
    lines += ["", "formulas:"] + [f"  {f}" for f in plan.formulas]
    lines += ["assumptions:"] + [f"  - {a}" for a in plan.assumptions]
    if plan.skipped:
        lines += ["not planned:"] + [f"  {s}" for s in plan.skipped]
    return lines


def _worked(c: Candidate, plan: Plan) -> list[str]:
    p = c.prediction
    frame_overhead = c.frame_wire_bytes / plan.frame_bytes - 1.0
    lines = [f"  {c.code} ({c.n},{c.k}), d = {c.d}, t = {c.t}, depth {c.depth}: one frame is {c.frame_wire_bytes} "
             f"bytes on the wire for {plan.frame_bytes} payload bytes ({_pct(frame_overhead)} overhead), "
             f"B = {c.blocks} codewords",
             f"  P_B = sum_(i>{c.t}) P(i) = {p.block_error:.3g} "
             + (f"(miscorrected {p.miscorrected:.3g}); " if c.weights_known else
                "(every failure counted as a miscorrection: no weight distribution); ")
             + f"P_bit = {p.bit_error:.3g}{'' if c.weights_known else ' (an upper bound)'}",
             f"  P_frame = 1 - (1 - {p.block_error:.3g})^{c.blocks} x (1 - {p.header_loss:.2g}) x "
             f"(1 - {p.channel_loss:.2g}) = {p.frame_error:.3g}"]
    if c.repair is not None:
        lines += _worked_repair(c.repair, plan)
    elif c.lost_bits_counted:
        lines.append("  no repair frames: a frame that is dropped or fails stays lost "
                     f"(frame loss {p.frame_error:.3g}, bad bits {c.after_repair[0]:.3g})")
    return lines


def _worked_repair(rc: RepairChoice, plan: Plan) -> list[str]:
    """The repair choice's numbers in the formula's terms."""
    n = rc.k + rc.r
    lines = [f"  repair {rc.spec}: {rc.r} repair frame{'s' * (rc.r != 1)} of {rc.repair_frame_bytes} bytes after every "
             f"{rc.k} data frames: R W_r / (K B) = {rc.r} x {rc.repair_frame_bytes} / ({rc.k} x {plan.frame_bytes}) "
             f"= {_pct(rc.overhead)} of the payload, included in the overhead above",
             f"  q = P_frame = {rc.frame_loss:.3g} per data frame (q_r = {rc.repair_frame_loss:.3g} per repair frame); "
             f"P(more than {rc.r} of a group's {n} frames missing) = {rc.group_failure:.3g}",
             f"  residual frame loss = q P[Bin({rc.k - 1}, q) + Bin({rc.r}, q_r) >= {rc.r}] = {rc.frame_loss:.3g} x "
             f"{rc.not_rebuilt:.3g} = {rc.frame_error:.3g}"]
    if plan.per == "bit":
        lines.append(f"  residual bad bits = e x {rc.not_rebuilt:.3g} = {rc.bit_error:.3g}, e = {rc.bad_bits:.3g} "
                     "(a lost frame's bits all count; a damaged one's wrong bits as delivered)")
    return lines


def _render_repair_verification(v: RepairVerification, target: float) -> list[str]:
    lines = [f"repair check: {v.frames} data frames ({v.groups} groups) of {v.code} at depth {v.depth} with "
             f"--repair {v.spec} through encode | inject (every channel above, seed {v.seed}) | decode:",
             f"  missing before repair: {v.missing} ({v.missing / v.frames:.3g}; 95% interval {v.missing_low:.3g} .. "
             f"{v.missing_high:.3g}), predicted q = {v.predicted_q:.3g}",
             f"  groups that lost data for good: {v.failed_groups} of {v.groups} (95% interval {v.group_low:.3g} .. "
             f"{v.group_high:.3g}), predicted {v.predicted_group_failure:.3g}",
             f"  data frames lost for good: {v.lost}, predicted {v.predicted_lost:.3g} (95% of runs lose "
             f"{v.lost_low} .. {v.lost_high}); delivered frames {'exact' if v.exact else 'NOT EXACT'}",
             "  " + ("agrees with the prediction" if v.agrees else "DISAGREES with the prediction")
             + (f"; a run this short cannot show a loss as rare as {target:.3g}: the formula carries that "
                "(tests/test_plan_repair.py checks it at a loss a run can measure)"
                if v.predicted_lost < 3 else "")]
    return lines


def _render_verification(v: Verification) -> list[str]:
    what = "frame error" if v.per == "frame" else "bit error"
    lines = [f"verification: simulate {v.code} at depth {v.depth}, {v.bits} payload bits, seed {v.seed}:",
             f"  {what}: predicted {v.predicted:.3g}, measured {v.measured:.3g} "
             f"({v.events} in {v.trials}; 95% interval {v.low:.3g} .. {v.high:.3g})"
             f" -> prediction {'inside' if v.prediction_inside else 'OUTSIDE'} the interval",
             f"  block error: predicted {v.predicted_block_error:.3g}, measured {v.measured_block_error:.3g} "
             f"(95% interval {v.block_low:.3g} .. {v.block_high:.3g})"]
    if v.verdict == "confirmed":
        lines.append(f"  confirmed: the measured interval lies below the target {v.target:.3g}")
    elif v.verdict == "refuted":
        lines.append(f"  REFUTED: the measured rate is above the target {v.target:.3g} beyond doubt")
    else:
        more = (f"; about {v.bits_to_decide:.2g} payload bits would decide it (--verify-bits)"
                if v.bits_to_decide else "")
        lines.append(f"  consistent, not decided: the interval reaches above the target {v.target:.3g}{more}")
    lines += [f"  note: {n}" for n in v.notes]
    return lines
