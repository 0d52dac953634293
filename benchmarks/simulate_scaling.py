"""How a trial campaign scales with workers on this machine.

    python benchmarks/simulate_scaling.py [--code golay-24-12] [--depth 8] [--channel bsc:p=5.5e-4]
                                          [--units 8] [--workers 1,2] [--seed 1]

Runs the same campaign (same seed, `--units` work units of the default size, 2^27 payload
bits each) with each worker count, every configuration in a fresh Python process so that
each pays its own start-up: `--workers 1` runs the units in that process, `--workers N > 1`
starts a local Dask cluster of N processes, runs, and closes it. Prints for each:

- wall: the whole `campaign()` call (cluster start and close, worker imports, all units),
  and its speed-up over the first configuration;
- steady: units per second once every worker has finished its first unit (which carries
  the worker's imports and numba kernel loading), i.e. the rate that decides a long
  campaign, its speed-up, and the seconds one worker spends per unit;

then checks that every configuration measured the same counts.

The default channel puts golay-24-12 near a block error of 1e-9 (bounded-distance decoding,
t = 3: P_block ~ C(24,4) p^4 = 1e-9 at p ~ 5.5e-4), the case planned in docs/CAMPAIGNS.md.
Pick --units so that one worker takes 20-40 s, and a multiple of the largest worker count.
The machine is shared: the load average before and after each run is printed beside it.
This is a benchmark, not a test; it asserts only that the runs agree.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys

RUN_ONE = r"""
import json, sys, time
from bitmend.campaign import UNIT_BITS, campaign
code, depth, channel, units, seed, workers = sys.argv[1:7]
done = []  # when each unit finished (the progress callback runs once per finished unit)
t0 = time.perf_counter()
r = campaign(code, int(depth), channel, int(units) * UNIT_BITS, int(seed), workers=int(workers),
             progress=lambda snapshot: done.append(time.perf_counter() - t0))
wall = time.perf_counter() - t0
print(json.dumps({"wall": wall, "done": done, "payload_bits": r.payload_bits,
                  "counts": [r.block_error.events, r.bit_error.events, r.frame_error.events, r.channel.events]}))
"""


def load() -> str:
    one, five, _ = os.getloadavg()
    return f"{one:.2f}/{five:.2f}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--code", default="golay-24-12")
    parser.add_argument("--depth", type=int, default=8)
    parser.add_argument("--channel", default="bsc:p=5.5e-4")
    parser.add_argument("--units", type=int, default=8, help="work units of 2^27 payload bits (default 8)")
    parser.add_argument("--workers", default="1,2", help="worker counts to compare, e.g. 1,2")
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    counts = [int(w) for w in args.workers.split(",")]

    print(f"campaign: {args.code} depth {args.depth}, {args.channel}, {args.units} units of 2^27 payload bits, "
          f"seed {args.seed}; {os.cpu_count()} cores")
    print(f"{'workers':>7}  {'wall s':>6}  {'wall speed-up':>13}  {'steady units/s':>14}  {'steady speed-up':>15}  "
          f"{'s/unit/worker':>13}  load 1/5 min before -> after")
    first = first_steady = None
    seen = []
    for workers in counts:
        before = load()
        out = subprocess.run([sys.executable, "-c", RUN_ONE, args.code, str(args.depth), args.channel,
                              str(args.units), str(args.seed), str(workers)],
                             capture_output=True, text=True, check=True)
        got = json.loads(out.stdout.strip().splitlines()[-1])
        wall, done = got["wall"], got["done"]
        # steady: the units after each worker's first (which carries its imports and kernel loading)
        steady = (len(done) - workers) / (done[-1] - done[workers - 1])
        first = first or wall
        first_steady = first_steady or steady
        seen.append(got["counts"])
        print(f"{workers:>7}  {wall:>6.1f}  {first / wall:>12.2f}x  {steady:>14.3f}  {steady / first_steady:>14.2f}x  "
              f"{workers / steady:>13.2f}  {before} -> {load()}")
    assert all(c == seen[0] for c in seen), f"worker counts measured different counts: {seen}"
    print(f"every configuration measured the same counts (block, bit, frame errors, channel flips): {seen[0]}")


if __name__ == "__main__":
    main()
