"""What a plan holds: the predicted rates of one code at one depth (`Prediction`), a repair
ratio and what it buys (`RepairChoice`), a ranked code (`Candidate`), the checks of the top
choice by simulation (`Verification`, `RepairVerification`) and the plan itself (`Plan`),
with their JSON forms."""

from __future__ import annotations

from dataclasses import dataclass

from bitmend.analysis import limits
from bitmend.codes.catalog import MAX_DEPTH
from bitmend.errors import SettingError
from bitmend.planning.render import render_plan

PER_CHOICES = ("bit", "frame")
SHOWN = 5  # candidates listed by default


class PlanError(SettingError):
    """Arguments that make no plan (one line)."""


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
        return render_plan(self, shown)
