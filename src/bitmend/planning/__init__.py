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

Modules: `plan` (what a plan holds), `model` (the channel as the plan sees it, predictions),
`search` (`make_plan`: every code at its cheapest depth and repair ratio, ranked), `verify`
(the top choice run through simulate and through encode | inject | decode), `words` (the
formulas, assumptions and rules a plan carries) and `render` (the plan as text).
"""

from __future__ import annotations

from bitmend.planning.model import WEIGHT_WORK_LIMIT, PlanChannel, predict, predict_depths
# the plan's channel and weight rules, for tests and tools that predict one code by hand
from bitmend.planning.model import _channel, _plannable, _weights  # noqa: F401
from bitmend.planning.plan import (PER_CHOICES, SHOWN, Candidate, Plan, PlanError, Prediction, RepairChoice,
                                   RepairVerification, Verification)
from bitmend.planning.search import make_plan, parse_overhead
from bitmend.planning.verify import verify_bits_for, verify_candidate, verify_repair

__all__ = ["PER_CHOICES", "SHOWN", "WEIGHT_WORK_LIMIT", "Candidate", "Plan", "PlanChannel", "PlanError", "Prediction",
           "RepairChoice", "RepairVerification", "Verification", "make_plan", "parse_overhead", "predict",
           "predict_depths", "verify_bits_for", "verify_candidate", "verify_repair"]
