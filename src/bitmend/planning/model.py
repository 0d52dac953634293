"""The plan's model of a frame on a channel: the channel split into bit flips, frame drops
and slips (`PlanChannel`), and the predicted rates of one code at every depth
(`predict_depths`): errors per codeword from `bitmend.code_theory`, bounded-distance
decoding, the frame's codewords, its two header copies (and, for a code defined in the
stream, its two definition blocks) and the channel's own losses."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from bitmend.analysis import theory
from bitmend.channel.models import BSC, BitSlip, ByteSubstitution, ChannelModel, FrameDrop, GilbertElliott
from bitmend.code_theory import SYMBOL_WRONG_BIT_SHARE, code_weights, codeword_rates, codewords_per_frame, error_counts
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import code_id
from bitmend.container import format as fmt
from bitmend.planning.plan import PlanError, Prediction

WEIGHT_WORK_LIMIT = 1 << 22  # words x length the plan spends on one code's weight distribution


@dataclass(frozen=True)
class PlanChannel:
    """The channel as the plan sees it: flips inside codewords, and whole frames lost."""

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
        return error_counts(self.flips, n, (depth,), symbol_bits)[0]

    def error_counts_by_depth(self, n: int, depths: tuple[int, ...], symbol_bits: int = 1) -> np.ndarray:
        return error_counts(self.flips, n, depths, symbol_bits)


def _channel(models: Sequence[ChannelModel]) -> PlanChannel:
    """The models of a chain sorted into flips, drops and slips (several drops or slips
    combine: a frame or a bit passes only when it passes each)."""
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
    return PlanChannel(tuple(flips), drop, slip)


def _weights(code: BlockCode) -> tuple[int, ...] | None:
    """The weight distribution where it is cheap to list (it refines the bit error through
    the miscorrection share); None otherwise, and the bit error is then an upper bound.
    None for codes over symbols of several bits: the share is counted in binary patterns."""
    return code_weights(code, WEIGHT_WORK_LIMIT) if code.symbol_bits == 1 else None


def _plannable(code: BlockCode) -> bool:
    """Binary codes, and codes over bytes (symbol interleaving keeps them byte-aligned)."""
    return code.symbol_bits in SYMBOL_WRONG_BIT_SHARE


def _frame_header(code: BlockCode, custom: bool, depth: int, frame_bytes: int) -> fmt.FrameHeader:
    if custom:
        return fmt.FrameHeader.for_defined_code(code, depth, 0, frame_bytes)
    return fmt.FrameHeader(code_id(code.name), depth, 0, frame_bytes)


def _block_failure(channel: PlanChannel, n: int, t: int, depth: int, codewords: int) -> float:
    """P(at least one of `codewords` Golay-style blocks of length n at depth fails)."""
    per_block = float(min(1.0, channel.error_counts(n, depth)[t + 1:].sum()))
    return 1.0 - (1.0 - per_block) ** codewords if per_block < 1 else 1.0


def _headers_survive(code: BlockCode, channel: PlanChannel, custom: bool) -> float:
    """P(a frame's header survives): one of its two copies (HEADER_DEPTH codewords of the
    header code, interleaved HEADER_DEPTH deep) decodes, 1 - P_H^2; for a code defined in
    the stream, one of its two definition blocks must decode as well."""
    golay = fmt.header_code()
    one_header = _block_failure(channel, golay.n, golay.t, fmt.HEADER_DEPTH, fmt.HEADER_DEPTH)
    survive = 1.0 - one_header ** 2
    if custom:
        def_depth = fmt.definition_depth(code.k, code.r)
        one_definition = _block_failure(channel, golay.n, golay.t, def_depth, def_depth)
        survive *= 1.0 - one_definition ** 2
    return survive


def predict(code: BlockCode, depth: int, channel: PlanChannel, frame_bytes: int, custom: bool = False,
            weights: tuple[int, ...] | None = None) -> tuple[Prediction, fmt.FrameHeader]:
    """Predicted rates of code at depth on the channel, for full frames of frame_bytes."""
    return predict_depths(code, (depth,), channel, frame_bytes, custom, weights)[0]


def predict_depths(code: BlockCode, depths: tuple[int, ...], channel: PlanChannel, frame_bytes: int,
                   custom: bool = False,
                   weights: tuple[int, ...] | None = None) -> list[tuple[Prediction, fmt.FrameHeader]]:
    """predict() at every depth of `depths` (the error counts of all depths at once):
    P_frame = 1 - (1 - P_B)^B (1 - P_H^2) (1 - P_loss), P_loss = 1 - (1 - p_drop)(1 - p_slip)^W."""
    counts = channel.error_counts_by_depth(code.n, tuple(depths), code.symbol_bits)
    block, wrong, bits = codeword_rates(code, counts, weights)
    survive_headers = _headers_survive(code, channel, custom)
    out = []
    for i, depth in enumerate(depths):
        header = _frame_header(code, custom, depth, frame_bytes)
        payload = theory.frame_error(float(block[i]), codewords_per_frame(code, depth, frame_bytes))
        wire_bits = 8 * header.frame_bytes
        slipped = -math.expm1(wire_bits * math.log1p(-channel.slip)) if channel.slip < 1 else 1.0
        channel_loss = 1.0 - (1.0 - channel.drop) * (1.0 - slipped)
        frame = 1.0 - (1.0 - payload) * survive_headers * (1.0 - channel_loss)
        # a slipped frame is delivered (keep) with the bits after the slip at random: a quarter wrong
        bit_error = min(1.0, float(bits[i]) * (1.0 - slipped) + slipped / 4)
        out.append((Prediction(float(block[i]), float(wrong[i]), bit_error, float(bits[i]), payload,
                               1.0 - survive_headers, channel_loss, min(1.0, frame)), header))
    return out
