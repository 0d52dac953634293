"""The search: every plannable code at every depth 1..max_depth (and, with a drop channel,
every repair ratio R/K), each at its cheapest choice that meets the target, ranked by
whole-frame overhead (`make_plan`; the method is in the package docstring)."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np

from bitmend.analysis import repair_groups, residual
from bitmend.channel.models import ChannelModel
from bitmend.channel.spec import ChannelSpecError, parse_channels
from bitmend.code_theory import bsc_crossover, codewords_per_frame, distance_to_limit
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import MAX_DEPTH, code_names, get_code
from bitmend.container import format as fmt
from bitmend.container.repair import MAX_GROUP, MAX_REPAIR, SYMBOL_OVERHEAD
from bitmend.planning import words
from bitmend.planning.model import PlanChannel, _channel, _plannable, _weights, predict_depths
from bitmend.planning.plan import PER_CHOICES, Candidate, Plan, PlanError, Prediction, RepairChoice
from bitmend.planning.verify import verify_candidate, verify_repair


@dataclass
class _Setup:
    channel: PlanChannel
    target: float
    per: str
    frame_bytes: int
    max_overhead: float | None
    max_depth: int = MAX_DEPTH

    @property
    def bsc_p(self) -> float | None:
        """The crossover probability when the flips are those of a memoryless BSC (one or
        several combined); None for channels with memory, where the limits do not apply."""
        return bsc_crossover(self.channel.flips)


def _candidate(setup: _Setup, code: BlockCode, custom: bool, depth: int, prediction: Prediction,
               header: fmt.FrameHeader, weights_known: bool = True) -> Candidate:
    if header.frame_bytes > fmt.MAX_FRAME_WIRE_BYTES:
        raise ValueError(f"frames of {setup.frame_bytes} bytes would take {header.frame_bytes} bytes on the wire, "
                         f"above the {fmt.MAX_FRAME_WIRE_BYTES} a reader accepts")
    rate = prediction.rate(setup.per)
    overhead = header.frame_bytes / setup.frame_bytes - 1.0
    covered, quantile = _bursts_covered(setup.channel, code, depth)
    p = setup.bsc_p
    limit = None if p is None else distance_to_limit(code, p, prediction.block_error)
    return Candidate(code.name, code.n, code.k, code.d, code.t, depth, custom, header.frame_bytes,
                     codewords_per_frame(code, depth, setup.frame_bytes), overhead, prediction, rate,
                     rate <= setup.target,
                     setup.max_overhead is None or overhead <= setup.max_overhead + 1e-12, setup.target,
                     covered, quantile, weights_known, limit)


def _bursts_covered(channel: PlanChannel, code: BlockCode, depth: int) -> tuple[int | None, float | None]:
    """On a burst channel: (the longest burst every codeword survives at this depth, the
    share of the chain's bad spells no longer than that); (None, None) elsewhere."""
    bursts = channel.bursts
    if not bursts or code.t == 0:
        return None, None
    bits = code.symbol_bits
    # t wrong symbols per codeword: any burst within D t symbols; s-bit symbols need the
    # burst inside D t whole symbols, which any burst of s (D t - 1) + 1 bits is
    covered = depth * code.t if bits == 1 else bits * (depth * code.t - 1) + 1
    return covered, min(residual.burst_length_quantile(m.leave, covered) for m in bursts)


def _cheapest_depth(setup: _Setup, code: BlockCode, custom: bool) -> Candidate:
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


def _bad_bits(prediction: Prediction, channel: PlanChannel) -> float:
    """The share of a data frame's payload bits that go bad before repair, with a drop
    channel: all of them when the frame is lost outright (dropped, or both header copies
    failed: nothing is delivered), else the wrong bits as delivered (prediction.bit_error)."""
    lost = 1.0 - (1.0 - channel.drop) * (1.0 - prediction.header_loss)
    return min(1.0, lost + (1.0 - lost) * prediction.bit_error)


@dataclass(frozen=True)
class _RepairTable:
    """Every depth D, group size K and repair count R at once, each array [depth, K - 1, R]:
    the residual rate after repair, the wire bytes per data frame, and P[a missing data
    frame is not rebuilt]; q and q_r (data and repair frame missing) by depth."""

    rates: np.ndarray
    cost: np.ndarray
    not_rebuilt: np.ndarray
    q: np.ndarray
    q_r: np.ndarray
    wire_r: np.ndarray


def _repair_table(setup: _Setup, data: list, repairs: list | None) -> _RepairTable:
    """The table from the predictions of data frames and of repair frames (None: a repair
    frame would pass the reader's payload limit, so no repair frames are possible)."""
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
    ks = np.arange(1, MAX_GROUP + 1, dtype=float)[None, :, None]
    rs = np.arange(max_r + 1, dtype=float)[None, None, :]
    # wire bytes per data frame; (K W + R W_r) / K rounds the same rational the same way
    # for equal ratios (1/8, 2/16), so equal overheads tie exactly
    cost = (ks * wire[:, None, None] + rs * wire_r[:, None, None]) / ks
    return _RepairTable(bad[:, None, None] * table, cost, table, q, q_r, wire_r)


def _pick_repair(setup: _Setup, t: _RepairTable) -> tuple[int, int, int]:
    """(depth index, K - 1, R) of the cheapest entry that meets the target (ties: smaller K,
    then shallower, then fewer R); when none does, the lowest rate within the overhead
    limit (else overall)."""
    d_idx, k_idx, r_idx = np.indices(t.rates.shape)
    meets = t.rates <= setup.target
    if meets.any():
        pool = meets
        order = np.lexsort((r_idx[pool], d_idx[pool], k_idx[pool], t.cost[pool]))
    else:
        within = (t.cost / setup.frame_bytes - 1.0 <= setup.max_overhead + 1e-12) \
            if setup.max_overhead is not None else np.ones_like(meets)
        pool = within if within.any() else np.ones_like(meets)
        order = np.lexsort((d_idx[pool], k_idx[pool], t.cost[pool], t.rates[pool]))
    pick = order[0]
    return int(d_idx[pool][pick]), int(k_idx[pool][pick]), int(r_idx[pool][pick])


def _cheapest_with_repair(setup: _Setup, code: BlockCode, custom: bool) -> Candidate:
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
    table = _repair_table(setup, data, repairs)
    di, ki, ri = _pick_repair(setup, table)
    prediction, header = data[di]
    base = _candidate(setup, code, custom, depths[di], prediction, header, weights_known=weights is not None)
    k, r = ki + 1, ri
    overhead = float(table.cost[di, ki, ri]) / setup.frame_bytes - 1.0
    rate = float(table.rates[di, ki, ri])
    qd, qr, kept = float(table.q[di]), float(table.q_r[di]), float(table.not_rebuilt[di, ki, ri])
    bits = _bad_bits(prediction, setup.channel)
    choice = None
    if r > 0:
        wire_r = float(table.wire_r[di])
        choice = RepairChoice(r, k, int(wire_r), r * wire_r / (k * setup.frame_bytes), qd, qr, bits,
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


def _check_settings(target: float, per: str, frame_bytes: int, max_depth: int) -> None:
    """Refuse a target, unit, frame size or depth bound that makes no plan (PlanError)."""
    if not (0.0 < target < 1.0):
        raise PlanError(f"--target must be a rate between 0 and 1, got {target:g}")
    if per not in PER_CHOICES:
        raise PlanError(f"--per must be bit or frame, got {per!r}")
    if not 1 <= frame_bytes <= fmt.MAX_PAYLOAD_BYTES:
        raise PlanError(f"--frame-bytes must be 1..{fmt.MAX_PAYLOAD_BYTES}, got {frame_bytes}")
    if not 1 <= max_depth <= MAX_DEPTH:
        raise PlanError(f"--max-depth must be 1..{MAX_DEPTH}, got {max_depth}")


def _codes(extra_codes: Sequence[BlockCode]) -> tuple[list[tuple[BlockCode, bool]], list[str]]:
    """([(code, custom)], skipped): the catalog codes the plan can model, then extra_codes."""
    codes, skipped = [], []
    for name in code_names():
        code = get_code(name)
        if _plannable(code):
            codes.append((code, False))
        else:
            skipped.append(f"{name}: symbols of {code.symbol_bits} bits are not modelled")
    return codes + [(code, True) for code in extra_codes], skipped


def _sorted_candidates(candidates: list[Candidate]) -> tuple[tuple[Candidate, ...], ...]:
    """(ranked, over budget, closest): those that meet the target within the overhead limit,
    cheapest first; those that meet it above the limit (three cheapest); and, when none is
    ranked, the three nearest misses within the limit."""
    ranked = sorted((c for c in candidates if c.meets_target and c.within_overhead),
                    key=lambda c: (c.overhead, c.rate, c.depth))
    over = sorted((c for c in candidates if c.meets_target and not c.within_overhead), key=lambda c: c.overhead)
    closest = () if ranked else tuple(sorted((c for c in candidates if c.within_overhead and not c.meets_target),
                                             key=lambda c: (c.rate, c.prediction.bit_error,
                                                            c.prediction.block_error, c.overhead))[:3])
    return tuple(ranked), tuple(over[:3]), closest


def make_plan(channels: str | ChannelModel | Sequence[str | ChannelModel], target: float, per: str = "bit",
              frame_bytes: int = fmt.DEFAULT_FRAME_BYTES, max_overhead: float | str | None = None,
              extra_codes: Sequence[BlockCode] = (), verify: bool = False, verify_bits: int | None = None,
              seed: int = 1, max_depth: int = MAX_DEPTH) -> Plan:
    """Rank catalog codes (and extra_codes), each at its cheapest depth of 1..max_depth that
    meets the target, by whole-frame overhead."""
    try:
        models = parse_channels(channels)
    except ChannelSpecError as exc:
        raise PlanError(str(exc)) from None
    _check_settings(target, per, frame_bytes, max_depth)
    limit = parse_overhead(max_overhead)
    channel = _channel(models)
    setup = _Setup(channel, float(target), per, frame_bytes, limit, int(max_depth))
    codes, skipped = _codes(extra_codes)
    candidates = []
    search = _cheapest_with_repair if channel.drop > 0 else _cheapest_depth  # no drop: no repair proposed
    for code, custom in codes:
        try:
            candidates.append(search(setup, code, custom))
        except ValueError as exc:  # e.g. a custom code's frames too large for the reader's limit
            skipped.append(f"{code.name}: {exc}")
    ranked, over, closest = _sorted_candidates(candidates)
    symbols = any(code.symbol_bits > 1 for code, _ in codes)
    unweighted = [code for code, _ in codes if _weights(code) is None and code.symbol_bits == 1]
    plan = Plan(tuple(m.spec for m in models), tuple(m.describe() for m in models), float(target), per,
                frame_bytes, limit, tuple(candidates), ranked, closest, over,
                words.formulas(channel, per, symbols),
                words.assumptions(channel, per, any(custom for _, custom in codes), unweighted, symbols),
                words.depth_rule(channel, setup.max_depth), tuple(skipped), max_depth=setup.max_depth,
                rank_rule=words.RANK_RULE, limit_note=words.limit_note(setup.bsc_p),
                repair_rule=words.REPAIR_RULE if channel.drop > 0 else "")
    return _verified(plan, extra_codes, verify_bits, seed) if verify and ranked else plan


def _verified(plan: Plan, extra_codes: Sequence[BlockCode], verify_bits: int | None, seed: int) -> Plan:
    """The plan with its top choice run through simulate (and its repair ratio through the
    real encoder, inject and decoder)."""
    top = plan.ranked[0]
    plan = replace(plan, verification=verify_candidate(plan, top, extra_codes, verify_bits, seed))
    if top.repair is not None:
        plan = replace(plan, repair_verification=verify_repair(plan, top, extra_codes, seed))
    return plan
