"""Speed of fault injection and of Monte Carlo trials (one core).

    python benchmarks/channel_speed.py [--mib 256] [--bits 2e8] [--repeat 3] [--no-cli]

inject: MB/s of input streamed through `bitmend.inject.inject` from a file to /dev/null
(1 MiB reads), per channel model; and the same for `bitmend inject` run as a process with
the file on stdin and stdout on /dev/null (includes start-up). simulate: coded bits per
second through `bitmend.simulate.simulate` (random data, CRC-32C, encode_segment, channel,
decode_segment, counting), per code and depth, at bsc p = 1e-3. Each figure is the best of
--repeat runs (the machine is shared). A warm-up loads the numba kernels first. This is a
benchmark, not a test: it asserts only that the runs did what they should.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

from bitmend.inject import inject
from bitmend.simulate import simulate

INJECT_CHANNELS = ("bsc:p=1e-3", "bsc:p=1e-2", "burst:enter=1e-4,leave=0.1,bad=0.5", "bytes:p=1e-3", "slip:p=1e-5")
SIMULATE_CASES = (("hamming-7-4", 1), ("hamming-7-4", 8), ("secded-72-64", 1), ("secded-72-64", 8),
                  ("golay-24-12", 8))


def best_of(repeat: int, run) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mib", type=int, default=256, help="size of the stream for inject")
    ap.add_argument("--bits", type=float, default=2e8, help="payload bits per simulate case")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--no-cli", action="store_true", help="skip the `bitmend inject` process runs")
    args = ap.parse_args()
    size = args.mib << 20
    simulate("hamming-7-4", 8, "bsc:p=1e-3", 10 ** 6, seed=1)  # warm-up: load the compiled kernels

    with tempfile.NamedTemporaryFile(prefix="bitmend-bench-", suffix=".bin") as f:
        rng = np.random.default_rng(1)
        for _ in range(args.mib):
            f.write(rng.integers(0, 256, 1 << 20, dtype=np.uint8).tobytes())
        f.flush()
        print(f"inject: {args.mib} MiB random input, pid {os.getpid()}")
        print(f"{'channel':<40}{'library MB/s':>14}{'process MB/s':>14}")
        for spec in INJECT_CHANNELS:
            ledgers = []

            def run_library() -> None:
                with open(f.name, "rb") as src, open(os.devnull, "wb") as dst:
                    ledgers.append(inject(src, dst, spec, seed=7))

            lib = size / best_of(args.repeat, run_library) / 1e6
            assert ledgers[-1].bytes_in == size
            proc = float("nan")
            if not args.no_cli:
                def run_process() -> None:
                    with open(f.name, "rb") as src, open(os.devnull, "wb") as dst:
                        subprocess.run([sys.executable, "-m", "bitmend", "inject", "--channel", spec, "--seed", "7",
                                        "-q"], stdin=src, stdout=dst, check=True)

                proc = size / best_of(args.repeat, run_process) / 1e6
            print(f"{spec:<40}{lib:>14.0f}{proc:>14.0f}")

    print(f"\nsimulate: {args.bits:.3g} payload bits per case, bsc p = 1e-3")
    print(f"{'code':<14}{'depth':>6}{'coded Mbit/s':>14}{'block errors':>14}")
    for code, depth in SIMULATE_CASES:
        results = []
        elapsed = best_of(args.repeat, lambda: results.append(simulate(code, depth, "bsc:p=1e-3", int(args.bits),
                                                                      seed=11)))
        r = results[-1]
        print(f"{code:<14}{depth:>6}{r.coded_bits / elapsed / 1e6:>14.0f}{r.block_error.events:>14,}")


if __name__ == "__main__":
    main()
