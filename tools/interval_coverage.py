"""How often simulate's block-error interval covers the exact value, over many seeds.

    python tools/interval_coverage.py --code hamming-7-4 --depth 4 \
        --channel burst:enter=2e-3,leave=0.1,bad=0.5 --bits 5e4 --frame-bytes 512 --seeds 200 --first 5000

The exact value is the block error `plan` predicts for the code at that depth (a closed form:
binomial on a BSC, the forward recursion over a Gilbert-Elliott chain, byte substitutions at
depth >= 8). Each seed runs `simulate`; the script counts the seeds whose interval (batch
means where failures cluster, Clopper-Pearson on a BSC) holds the exact value, and, beside
it, how often a plain Clopper-Pearson interval on the same counts would have.
"""

from __future__ import annotations

import argparse

from bitmend.analysis import theory
from bitmend.channel.spec import parse_channels
from bitmend.codes.catalog import get_code
from bitmend.planning import _channel, predict
from bitmend.simulate import simulate


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--code", default="hamming-7-4")
    ap.add_argument("--depth", type=int, default=4)
    ap.add_argument("--channel", default="burst:enter=2e-3,leave=0.1,bad=0.5")
    ap.add_argument("--bits", type=float, default=5e4)
    ap.add_argument("--frame-bytes", type=int, default=512)
    ap.add_argument("--seeds", type=int, default=40)
    ap.add_argument("--first", type=int, default=2000, help="first seed")
    args = ap.parse_args()
    code = get_code(args.code)
    truth = predict(code, args.depth, _channel(parse_channels(args.channel)), args.frame_bytes)[0].block_error
    covered = binomial = events = 0
    effects = []
    for seed in range(args.first, args.first + args.seeds):
        r = simulate(code, args.depth, args.channel, int(args.bits), seed=seed, frame_bytes=args.frame_bytes)
        m = r.block_error
        covered += m.low <= truth <= m.high
        low, high = theory.binomial_interval(m.events, m.trials)
        binomial += low <= truth <= high
        events += m.events
        effects.append(m.design_effect)
    print(f"{args.code} depth {args.depth} on {args.channel}, {int(args.bits)} bits, frames of {args.frame_bytes} "
          f"bytes, seeds {args.first}..{args.first + args.seeds - 1}: exact block error {truth:.4g}; "
          f"{events / args.seeds:.1f} failed codewords per run; interval ({r.block_error.method}) covered "
          f"{covered}/{args.seeds}, plain Clopper-Pearson {binomial}/{args.seeds}; "
          f"mean design effect {sum(effects) / len(effects):.2f}")


if __name__ == "__main__":
    main()
