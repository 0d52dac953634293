"""Start-up of the command line: whole commands on a small file, median wall time of N runs.

    python benchmarks/startup.py                  # 200-byte file, 5 runs after a warm-up
    python benchmarks/startup.py --size 4096 --runs 9 --imports

Each command runs as its own process (start-up included), the way a shell runs it; the
yardsticks beside them (an empty interpreter, `import numpy`, `import typer`) show what the
floor is. --imports adds the import-time breakdown of one encode and one decode
(`python -X importtime`), summed by top-level package. Run it with the venv active and
without PYTHONDONTWRITEBYTECODE, so that bitmend's modules load from cached bytecode as an
installed bitmend's do. Figures are this machine's; read them against the yardsticks.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path


def bitmend_command() -> list[str]:
    """The installed console script beside this interpreter, else `python -m bitmend`."""
    script = Path(sys.executable).with_name("bitmend")
    return [str(script)] if script.exists() else [sys.executable, "-m", "bitmend"]


def median_wall(command: list[str], runs: int, env: dict) -> float:
    """Median wall seconds of `runs` runs after one warm-up run (output thrown away)."""
    times = []
    for i in range(runs + 1):
        start = time.perf_counter()
        subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env, check=True)
        if i:
            times.append(time.perf_counter() - start)
    return statistics.median(times)


def import_breakdown(command: list[str], env: dict) -> list[tuple[str, float]]:
    """(top-level package, milliseconds) of what a run imports, largest first."""
    done = subprocess.run([sys.executable, "-X", "importtime", *command], capture_output=True, text=True, env=env,
                          check=True)
    totals: dict[str, float] = defaultdict(float)
    for line in done.stderr.splitlines():
        if not line.startswith("import time:") or "imported package" in line:
            continue
        self_us, _cumulative, name = line[len("import time:"):].split("|")
        totals[name.strip().split(".")[0]] += float(self_us) / 1000
    return sorted(totals.items(), key=lambda item: -item[1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--size", type=int, default=200, help="bytes in the input file (default 200)")
    parser.add_argument("--runs", type=int, default=5, help="counted runs of each command (default 5)")
    parser.add_argument("--imports", action="store_true", help="also the import-time breakdown")
    args = parser.parse_args()
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    work = Path(tempfile.mkdtemp(prefix="bitmend-startup-"))
    try:
        sample, coded, back = work / "gauge.bin", work / "gauge.bmd", work / "gauge.out"
        sample.write_bytes(os.urandom(args.size))
        bm = bitmend_command()
        subprocess.run([*bm, "encode", str(sample), "-o", str(coded)], check=True, env=env)  # also caches bytecode
        commands = {
            "python -c pass": [sys.executable, "-c", "pass"],
            "python -c 'import numpy'": [sys.executable, "-c", "import numpy"],
            "python -c 'import typer'": [sys.executable, "-c", "import typer"],
            f"bitmend encode ({args.size} B) -o": [*bm, "encode", str(sample), "-o", str(coded)],
            f"bitmend decode ({args.size} B) -o": [*bm, "decode", str(coded), "-o", str(back)],
            "bitmend --help": [*bm, "--help"],
        }
        print(f"median wall of {args.runs} runs (after one warm-up), whole processes")
        for label, command in commands.items():
            print(f"  {label:<36} {median_wall(command, args.runs, env):7.3f} s")
        if args.imports:
            for verb, command in (("encode", ["-m", "bitmend", "encode", str(sample), "-o", str(coded)]),
                                  ("decode", ["-m", "bitmend", "decode", str(coded), "-o", str(back)])):
                rows = import_breakdown(command, env)
                total = sum(ms for _, ms in rows)
                print(f"\nimports of one {verb} (python -X importtime, self times by package): {total:.0f} ms")
                for name, ms in rows[:12]:
                    print(f"  {name:<24} {ms:6.1f} ms")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
