"""Throughput of `bitmend encode` and `bitmend decode` through the command line with 1 and
more jobs (worker processes), file to file.

    python benchmarks/jobs_scaling.py [--mib 256] [--jobs 1,2] [--repeat 3] [--code golay-24-12]
                                      [--depth 8] [--output file|null] [--dir DIR]

MB/s counts plain-data bytes (10^6 bytes per MB) over the whole command, start-up included;
each figure is the best of --repeat runs (the other core may be busy: check `uptime`).
--output file writes the container and the decoded data to files (through a temp file, a
rename and an fsync, as any `-o FILE`); --output null writes them to /dev/null, which leaves
the coding and start-up alone. Each decode of a file must give the input back (the CLI
draws a new stream id per run, so containers of two runs differ in those 8 bytes per frame).
A benchmark, not a test.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def _run(args: list[str]) -> float:
    """Seconds one `python -m bitmend ...` takes; fails loudly on a non-zero exit."""
    start = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "bitmend", *args], stderr=subprocess.PIPE)
    elapsed = time.perf_counter() - start
    if proc.returncode != 0:
        raise SystemExit(f"bitmend {' '.join(args)} exited {proc.returncode}: {proc.stderr.decode()}")
    return elapsed


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--mib", type=int, default=256)
    parser.add_argument("--jobs", default="1,2")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--code", default="golay-24-12")
    parser.add_argument("--depth", type=int, default=8)
    parser.add_argument("--output", choices=("file", "null"), default="file")
    parser.add_argument("--dir", default=None, help="where the files go (default: a temporary directory)")
    options = parser.parse_args()
    counts = [int(j) for j in options.jobs.split(",")]
    with tempfile.TemporaryDirectory(dir=options.dir) as scratch:
        folder = Path(scratch)
        source = folder / "plain.bin"
        size = options.mib << 20
        source.write_bytes(np.random.default_rng(1).integers(0, 256, size, dtype=np.uint8).tobytes())
        _run(["encode", str(source), "-o", str(folder / "warm.bmd"), "--code", options.code])  # kernels cached
        best: dict[tuple[str, int], float] = {}
        for _ in range(options.repeat):
            for jobs in counts:  # interleaved, so a busy spell hits every count alike
                container, output = folder / f"c{jobs}.bmd", folder / f"out{jobs}.bin"
                if options.output == "null" and not container.exists():
                    _run(["encode", str(source), "-o", str(container), "--code", options.code,
                          "--depth", str(options.depth)])  # the container decoded below
                encoded = str(container) if options.output == "file" else os.devnull
                seconds = _run(["encode", str(source), "-o", encoded, "--code", options.code,
                                "--depth", str(options.depth), "--jobs", str(jobs)])
                best["encode", jobs] = min(best.get(("encode", jobs), seconds), seconds)
                decoded = str(output) if options.output == "file" else os.devnull
                seconds = _run(["decode", str(container), "-o", decoded, "--jobs", str(jobs), "-q"])
                best["decode", jobs] = min(best.get(("decode", jobs), seconds), seconds)
                if options.output == "file":
                    if output.read_bytes() != source.read_bytes():
                        raise SystemExit(f"decode with --jobs {jobs} did not give the input back")
                    output.unlink()
        print(f"{options.mib} MiB to {options.output}, {options.code} depth {options.depth}, best of {options.repeat}, "
              f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}")
        for step in ("encode", "decode"):
            base = best[step, counts[0]]
            for jobs in counts:
                seconds = best[step, jobs]
                print(f"  {step} --jobs {jobs}: {size / seconds / 1e6:7.1f} MB/s  ({seconds:.2f} s)"
                      f"  x{base / seconds:.2f}")


if __name__ == "__main__":
    main()
