"""The top choice checked by running it: `verify_candidate` sets a simulation of its code
and depth (payload segments through the real coding path) beside the prediction, and
`verify_repair` sends whole groups with its repair ratio through the real encoder, `inject`
and decoder."""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from bitmend.analysis import repair_groups
from bitmend.channel.models import BSC
from bitmend.channel.spec import parse_channels
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import as_code
from bitmend.planning.plan import Candidate, Plan, RepairVerification, Verification

VERIFY_MIN_BITS = 1 << 17
VERIFY_MAX_BITS = 1 << 24  # a "short" run: a few seconds at simulate's speed
VERIFY_EVENTS = 30  # events the verification run aims to see at the predicted rate


def _code_of(candidate: Candidate, extra_codes: Sequence[BlockCode]) -> BlockCode:
    """The candidate's code: the custom code of its name among extra_codes, else the catalog's."""
    custom = next((c for c in extra_codes if c.name == candidate.code), None) if candidate.custom else None
    return custom if custom is not None else as_code(candidate.code)
VERIFY_REPAIR_BYTES = 8 << 20  # payload of the repair run: a few seconds through the real codec
VERIFY_REPAIR_FRAMES = 2048


def verify_repair(plan: Plan, candidate: Candidate, extra_codes: Sequence[BlockCode] = (), seed: int = 1,
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
    code = _code_of(candidate, extra_codes)
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


def _verdict(low: float, high: float, target: float) -> str:
    """confirmed (the interval lies at or below the target), refuted (above it) or consistent."""
    if high <= target:
        return "confirmed"
    return "refuted" if low > target else "consistent"


def _bits_to_decide(predicted: float, plan: Plan) -> int:
    """Payload bits for the 95% interval around the predicted rate r to clear the target:
    1.96^2 r / (target - r)^2 trials (normal approximation), and at least 3/target (the
    "rule of three": zero events in N trials put the upper bound near 3/N)."""
    r = predicted
    trials = max(3.0 / plan.target, 1.96 ** 2 * r / (plan.target - r) ** 2)
    return int(math.ceil(trials * (8 * plan.frame_bytes if plan.per == "frame" else 1)))


def verify_candidate(plan: Plan, candidate: Candidate, extra_codes: Sequence[BlockCode] = (),
                     bits: int | None = None, seed: int = 1) -> Verification:
    """Run the candidate through the simulator (payload segments through the real coding
    path) and set the measured rate beside the predicted one."""
    from bitmend.simulate import simulate

    code = _code_of(candidate, extra_codes)
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
    verdict = _verdict(measured.low, measured.high, plan.target)
    needed = _bits_to_decide(predicted, plan) if verdict == "consistent" and predicted < plan.target else None
    if plan.per == "bit":
        notes.append("the bit error interval is by batch means (a decoder leaves wrong bits in clusters); the "
                     "block error comparison is the sharper check")
    return Verification(candidate.code, candidate.depth, plan.per, plan.target, result.payload_bits, result.seed,
                        predicted, measured.rate, measured.low, measured.high, measured.events, measured.trials,
                        candidate.prediction.block_error, result.block_error.rate, result.block_error.low,
                        result.block_error.high, verdict, measured.low <= predicted <= measured.high, needed,
                        tuple(notes))
