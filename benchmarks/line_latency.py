"""Line latency through a live pipeline: a 40-byte line every 0.2 s through
`bitmend encode --max-delay 0.1 | bitmend inject --channel bsc:p=1e-4 | bitmend decode`,
real pipes, real processes. Prints the median and worst time from writing a line to reading
it back, and checks that every line came back intact and in order.

    python benchmarks/line_latency.py [--lines 50] [--interval 0.2] [--max-delay 0.1]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import threading
import time

BITMEND = [sys.executable, "-m", "bitmend"]


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--lines", type=int, default=50)
    ap.add_argument("--interval", type=float, default=0.2)
    ap.add_argument("--max-delay", type=float, default=0.1)
    ap.add_argument("--channel", default="bsc:p=1e-4")
    ap.add_argument("--warmup", type=float, default=3.0)
    args = ap.parse_args()

    encode = subprocess.Popen([*BITMEND, "encode", "--max-delay", str(args.max_delay)],
                              stdin=subprocess.PIPE, stdout=subprocess.PIPE)
    inject = subprocess.Popen([*BITMEND, "inject", "--channel", args.channel, "--seed", "7", "-q"],
                              stdin=encode.stdout, stdout=subprocess.PIPE)
    decode = subprocess.Popen([*BITMEND, "decode", "-q"], stdin=inject.stdout, stdout=subprocess.PIPE)
    encode.stdout.close()
    inject.stdout.close()
    sent: dict[int, float] = {}
    got: list[tuple[int, float]] = []

    def read_back() -> None:
        buffer = b""
        fd = decode.stdout.fileno()
        while True:
            block = os.read(fd, 65536)
            if not block:
                return
            now = time.monotonic()
            buffer += block
            while b"\n" in buffer:
                line, buffer = buffer.split(b"\n", 1)
                got.append((int(line.split()[1]), now))

    reader = threading.Thread(target=read_back, daemon=True)
    reader.start()
    time.sleep(args.warmup)  # let the three processes start (imports take a moment on a busy machine)
    for i in range(args.lines):
        line = f"G07 {i:05d} stage=1.{i % 100:02d}m flow=12.4 batt=3.71".ljust(39).encode() + b"\n"
        sent[i] = time.monotonic()
        encode.stdin.write(line)
        encode.stdin.flush()
        time.sleep(args.interval)
    encode.stdin.close()
    for proc in (encode, inject, decode):
        proc.wait(timeout=60)
    reader.join(timeout=10)
    order = [i for i, _ in got]
    delays = [t - sent[i] for i, t in got]
    print(f"lines sent {args.lines}, received {len(got)}, in order and complete: {order == list(range(args.lines))}")
    print(f"latency per line: median {statistics.median(delays) * 1000:.0f} ms, "
          f"worst {max(delays) * 1000:.0f} ms (max-delay {args.max_delay * 1000:.0f} ms)")


if __name__ == "__main__":
    main()
