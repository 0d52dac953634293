"""Speed of the erasure code across frames (repair frames), on one core.

    python benchmarks/repair_speed.py [--k 32] [--r 4] [--lost 4] [--mib 16] [--repeat 3] [--cpu 0]

For each symbol (frame payload) size S in --sizes (default 16384 and 200 bytes), groups of
k source symbols are made at random, then timed:

- encode:  the r repair symbols of every group;
- rebuild: every group loses --lost of its k sources at random places (a different
  pattern per group, so most recovery plans are new), and the sources are rebuilt from
  the k - lost sources and --lost repair symbols that remain.

Each is timed two ways: one call per group (`repair_symbols`, `recover` with a dict of
the symbols that arrived: what a reader holding one group at a time does), and one call
for all groups (`repair_symbols_groups`, `recover_groups`). MB/s counts source bytes
(k * S per group, 10^6 bytes per MB); frames/s counts source symbols (data frames). Each
figure is the best of --repeat runs, by wall clock and by the process's CPU time (the
second is the one-core speed when other work shares the machine). The process is pinned to one CPU and numba to one
thread. This is a benchmark, not a test: it asserts only that the rebuilt bytes are right.
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("NUMBA_NUM_THREADS", "1")

import numpy as np  # noqa: E402


def _best(fn, repeat: int) -> tuple[float, float]:
    """(best wall-clock seconds, best CPU seconds of this process) over repeat runs."""
    wall = cpu = float("inf")
    for _ in range(repeat):
        w0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall = min(wall, time.perf_counter() - w0)
        cpu = min(cpu, time.process_time() - c0)
    return wall, cpu


def run_size(k: int, r: int, lost: int, size: int, mib: float, repeat: int, rng) -> list[tuple]:
    from bitmend.codes.erasure import erasure_code

    code = erasure_code(k, r)
    groups = max(1, int(mib * (1 << 20)) // (k * size))
    sources = rng.integers(0, 256, (groups, k, size), dtype=np.uint8)
    repair = code.repair_symbols_groups(sources)
    everything = np.concatenate([sources, repair], axis=1)
    # per group: lose `lost` random sources, keep the other sources and the first `lost` repairs
    arrived = np.empty((groups, k), dtype=np.int64)
    for g in range(groups):
        gone = set(rng.choice(k, lost, replace=False).tolist())
        arrived[g] = [i for i in range(k) if i not in gone] + list(range(k, k + lost))
    received = np.take_along_axis(everything, arrived[:, :, None], axis=1)
    dicts = [{int(i): received[g, p] for p, i in enumerate(arrived[g])} for g in range(groups)]

    code.repair_symbols_groups(sources[:1])  # load the compiled kernels outside the timing
    code.recover_groups(received[:1], arrived[:1])
    assert np.array_equal(code.recover_groups(received, arrived), sources)
    for g in range(min(groups, 50)):
        assert np.array_equal(code.recover(dicts[g]), sources[g])

    mb = groups * k * size / 1e6
    frames = groups * k
    times = {
        "encode, one call per group": _best(lambda: [code.repair_symbols(sources[g]) for g in range(groups)], repeat),
        "encode, all groups in one call": _best(lambda: code.repair_symbols_groups(sources), repeat),
        f"rebuild {lost} lost, one call per group": _best(lambda: [code.recover(d) for d in dicts], repeat),
        f"rebuild {lost} lost, all groups in one call": _best(lambda: code.recover_groups(received, arrived), repeat),
    }
    return [(f"S={size:>6}  {name}", mb / wall, mb / cpu, frames / cpu, groups)
            for name, (wall, cpu) in times.items()]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--k", type=int, default=32, help="source symbols (data frames) per group")
    ap.add_argument("--r", type=int, default=4, help="repair symbols per group")
    ap.add_argument("--lost", type=int, default=4, help="sources lost per group in the rebuild runs")
    ap.add_argument("--sizes", default="16384,200", help="symbol sizes S in bytes, comma-separated")
    ap.add_argument("--mib", type=float, default=16, help="source data per size and run")
    ap.add_argument("--repeat", type=int, default=3, help="runs per case; the best is reported")
    ap.add_argument("--cpu", type=int, default=None, help="CPU to pin to (default: the first allowed)")
    args = ap.parse_args()
    if not 0 < args.lost <= min(args.k, args.r):
        ap.error("--lost must be 1..min(k, r)")
    if hasattr(os, "sched_setaffinity"):
        cpu = args.cpu if args.cpu is not None else min(os.sched_getaffinity(0))
        os.sched_setaffinity(0, {cpu})
    rng = np.random.default_rng(2026)
    print(f"erasure code k={args.k}, r={args.r}; {args.mib:g} MiB of sources per size; best of {args.repeat}")
    print(f"{'case':<52} {'MB/s wall':>9} {'MB/s CPU':>9} {'frames/s CPU':>12} {'groups':>7}")
    for size in (int(s) for s in args.sizes.split(",")):
        for name, wall, cpu, frame_rate, groups in run_size(args.k, args.r, args.lost, size, args.mib,
                                                            args.repeat, rng):
            print(f"{name:<52} {wall:9.0f} {cpu:9.0f} {frame_rate:12.0f} {groups:7d}")


if __name__ == "__main__":
    main()
