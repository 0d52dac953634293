"""The plan as text for a terminal: the ranked choices, the worked numbers of the top one,
the checks, formulas and assumptions."""

from __future__ import annotations

from typing import TYPE_CHECKING

from bitmend.container import format as fmt
from bitmend.container.repair import MAX_GROUP, MAX_REPAIR, SYMBOL_OVERHEAD
from bitmend.wording import counted

if TYPE_CHECKING:
    from bitmend.planning.plan import Candidate, Plan, RepairChoice, RepairVerification, Verification


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
        row += (f"   bursts <= {counted(c.burst_covered_bits, 'bit')} "
                f"({'all' if share == 'all' else share + ' of'} bad spells)")
    return row


def render_plan(plan: Plan, shown: int) -> list[str]:
    """The whole plan: what was asked and how choices are made, the choices (or the nearest
    misses), the checks of the top choice, formulas and assumptions."""
    repairs = bool(plan.repair_rule)
    head = (f"{'code':<16}{'depth':>6}{'repair' if repairs else '':>{7 if repairs else 0}}{'overhead':>10}"
            f"{'bit err':>11}{'frame err':>12}{'block err':>12}{'rate gap':>9}")
    lines = _render_question(plan)
    lines += _render_ranked(plan, shown, head) if plan.ranked else _render_unmet(plan, head)
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


def _render_question(plan: Plan) -> list[str]:
    """The channel, the target and the rules the choices follow."""
    what = "wrong bits per delivered payload bit" if plan.per == "bit" else "frames not delivered verified"
    limit = "no limit" if plan.max_overhead is None else f"at most {_pct(plan.max_overhead)}"
    lines = ["channel:"] + [f"  {spec}: {text}" for spec, text in zip(plan.channels, plan.channel_lines)]
    lines += [f"target: at most {plan.target:.3g} {what}; frames of {plan.frame_bytes} payload bytes; "
              f"overhead {limit}", f"rank: {plan.rank_rule}", f"depth: {plan.depth_rule}"]
    if plan.repair_rule:
        lines.append(f"repair: {plan.repair_rule}")
    return lines + [plan.limit_note, ""]


def _render_ranked(plan: Plan, shown: int, head: str) -> list[str]:
    """The choices that meet the target, cheapest first, and the top one's command and numbers."""
    repairs = bool(plan.repair_rule)
    count = len(plan.ranked)
    lines = [f"{counted(count, 'choice')} {'meets' if count == 1 else 'meet'} the target; cheapest whole frame first:",
             "rank " + head]
    if repairs:
        lines.append("     (bit err and frame err after the repair frames; bits never delivered count as bad)")
    for i, c in enumerate(plan.ranked[:shown], 1):
        lines.append(f"{i:>4} " + _describe(c, plan.per, repairs))
    top = plan.ranked[0]
    code = f"--code-file <the file of {top.code}>" if top.custom else f"--code {top.code}"
    repair = f" --repair {top.repair_spec}" if top.repair is not None else ""
    lines += ["", f"choice: bitmend encode {code} --depth {top.depth} --frame-bytes {plan.frame_bytes}{repair}"]
    return lines + _worked(top, plan)


def _render_unmet(plan: Plan, head: str) -> list[str]:
    """Nothing meets the target: why not, and the nearest misses."""
    repairs = bool(plan.repair_rule)
    lines = [f"nothing meets the target {plan.target:.3g} "
             f"{'within the overhead limit' if plan.max_overhead is not None else ''}".rstrip() + "."]
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
    return lines


def _worked(c: Candidate, plan: Plan) -> list[str]:
    p = c.prediction
    frame_overhead = c.frame_wire_bytes / plan.frame_bytes - 1.0
    lines = [f"  {c.code} ({c.n},{c.k}), d = {c.d}, t = {c.t}, depth {c.depth}: one frame is {c.frame_wire_bytes} "
             f"bytes on the wire for {plan.frame_bytes} payload bytes ({_pct(frame_overhead)} overhead), "
             f"B = {counted(c.blocks, 'codeword')}",
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
    lines = [f"  repair {rc.spec}: {counted(rc.r, 'repair frame')} of {rc.repair_frame_bytes} bytes after every "
             f"{counted(rc.k, 'data frame')}: R W_r / (K B) = {rc.r} x {rc.repair_frame_bytes} / "
             f"({rc.k} x {plan.frame_bytes}) "
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
    lines = [f"repair check: {counted(v.frames, 'data frame')} ({counted(v.groups, 'group')}) of {v.code} "
             f"at depth {v.depth} with "
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
