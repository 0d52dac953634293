"""The words a plan carries: the formulas behind its predictions, the assumptions they rest
on, and how depths, codes and repair ratios were chosen."""

from __future__ import annotations

from typing import Sequence

from bitmend.analysis import limits, residual
from bitmend.channel.models import BSC, ByteSubstitution
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import MAX_DEPTH
from bitmend.container import format as fmt
from bitmend.container.repair import MAX_GROUP, MAX_REPAIR
from bitmend.planning.model import WEIGHT_WORK_LIMIT, PlanChannel


def _repair_formulas(per: str) -> list[str]:
    """How a repair ratio R/K is predicted (with a drop channel)."""
    lines = ["repair R/K: a data frame is missing with q = 1 - (1 - p_drop)(1 - P_fail) = P_frame, P_fail its "
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
    return lines


def formulas(channel: PlanChannel, per: str, symbols: bool = False) -> tuple[str, ...]:
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
        lines += _repair_formulas(per)
    if channel.slip:
        lines.append("P_bit += P_slip / 4: a frame with a slip is delivered with the bits after it at random")
    return tuple(lines)


def _unweighted_text(unweighted: Sequence[BlockCode]) -> str:
    """Which binary codes go without a weight distribution, and why: skipped for cost (it
    could be listed, at more work than the plan spends on one code) or not known at all."""
    costly = [c.name for c in unweighted if c.weight_distribution_available]
    unknown = [c.name for c in unweighted if c.name not in costly]
    parts = []
    if costly:
        parts.append(f"weight distribution skipped for cost for {', '.join(costly)} (listing 2^min(k, n-k) words of "
                     f"n bits exceeds the {WEIGHT_WORK_LIMIT:,} bit-words the plan spends on one code)")
    if unknown:
        parts.append(f"no weight distribution known for {', '.join(unknown)} (too large to list)")
    return ("; ".join(parts) + ": every failure of these codes is counted as a miscorrection (m_i = 1), so their "
            "bit error is an upper bound; t is the designed t where only that is known")


def _counted_rate(channel: PlanChannel, per: str) -> str:
    """What the targeted rate counts."""
    if per == "frame":
        return "the frame rate counts frames not delivered verified: CRC failed, or lost"
    if channel.drop:
        return ("the bit rate counts payload bits as `decode --on-error keep` writes them, wrong or not, and, "
                "with a drop channel, every payload bit of a frame never delivered (neither arrived nor rebuilt) "
                "as a bad bit: otherwise frames lost would not count at all")
    return ("the bit rate counts payload bits as `decode --on-error keep` writes them, wrong or not, "
            "before the CRC flags the frame; frames lost outright deliver nothing and are not counted")


def _channel_assumptions(channel: PlanChannel) -> list[str]:
    """What the models of this channel take for granted: the chain's state, byte runs,
    several flip channels, and with a drop channel the repair's premises."""
    lines = []
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
    return lines


def assumptions(channel: PlanChannel, per: str, custom: bool, unweighted: Sequence[BlockCode] = (),
                 symbols: bool = False) -> tuple[str, ...]:
    """What every prediction of the plan takes for granted, in words."""
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
    lines.append(_counted_rate(channel, per))
    lines.append("codeword failures within a frame are taken as independent: 1 - (1 - P_B)^B; where errors come "
                 "in bursts they cluster, so this overstates the frame rate (it never exceeds B P_B)")
    lines.append("a frame is lost only when both copies of its header fail (they lie a payload apart: taken as "
                 "independent); a locked reader needs no marker" +
                 ("; a code defined in the stream likewise needs one of its two definition blocks" if custom else ""))
    lines += _channel_assumptions(channel)
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


def depth_rule(channel: PlanChannel, max_depth: int = MAX_DEPTH) -> str:
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


def limit_note(bsc_p: float | None) -> str:
    """What the rate-gap column means on a BSC with crossover bsc_p (None: not a BSC)."""
    if bsc_p is None:
        return ("limit: the distance to the best possible code (Polyanskiy, Poor and Verdu, 2010) is computed for "
                "a memoryless BSC only; this channel has memory or no bit flips, so the column is left empty")
    return (f"limit: 'rate gap' = the best rate any code of the same length (in bits) could have at the same block "
            f"error on this BSC (p = {bsc_p:.3g}), minus the code's rate: the binomial converse (no code does "
            f"better; 0 means none does), or the normal approximation above {limits.EXACT_MAX_N} bits "
            "(Polyanskiy, Poor and Verdu, IEEE Trans. IT 56(5), 2010)")
