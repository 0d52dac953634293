"""bitmend beside the plain table-driven C programs, one core, in one run (issue 12, items 1 and 5).

    taskset -c 1 python benchmarks/versus_c.py [--mib 64] [--repeat 5] [--all | --codes A,B] [--markdown]

Builds ../shared/bench/*.c with `cc -O2` into a temporary directory (nothing is written to
the repository), then for each code and depth, best of --repeat rounds, each round running
the C program and bitmend back to back on the same core:

- api: bitmend.encode_bytes / decode_bytes of --mib MiB of random data (default frames),
  clean decode, and decode after a binary symmetric channel at p = --flip-rate (damage made
  outside the timed region);
- engine: interleave.encode_segment / decode_segment over the same data cut into the
  payload + CRC of default frames (16388 bytes), i.e. the coding without the container;
- C: the MB/s the reference program prints for the same code (64 MiB, its own timer).

Ratios are bitmend / C from the same run; "p/clean" is decode at p over clean decode;
"outside" is the share of the api time spent outside the segment coding (framing, headers,
CRC, the reader, the API's buffers): 1 - engine time / api time, for encode and decode. MB/s
counts payload bytes (10^6 per MB). Codes without a C counterpart (--all) show no ratio.
The machine is shared: pin to one core (taskset or --cpu) and read the ratios, which
move far less than the absolute figures. One decode of 64 MiB moves by 10-25% from round
to round here (its output is fresh memory, mapped page by page), hence five rounds. A benchmark, not a test: it asserts only that
every round trip gives the data back.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import tempfile
import time
from pathlib import Path

import numpy as np

import bitmend
from bitmend.channel.bsc import flip_bits
from bitmend.codes.linear import BinaryLinearCode
from bitmend.interleave import decode_segment, encode_segment

C_SOURCES = {"hamming-secded": "hamming-secded.c", "golay": "golay.c"}
C_COUNTERPART = {  # code -> (program, name it prints)
    "hamming-7-4": ("hamming-secded", "hamming-7-4"),
    "secded-72-64": ("hamming-secded", "secded-72-64"),
    "golay-24-12": ("golay", "golay-24-12"),
}
SEGMENT_BYTES = 16384 + 4  # payload and CRC-32C of a default frame


def build_c(source_dir: Path, into: Path) -> dict[str, Path]:
    programs = {}
    for name, source in C_SOURCES.items():
        exe = into / name
        subprocess.run(["cc", "-O2", "-o", str(exe), str(source_dir / source)], check=True)
        programs[name] = exe
    return programs


def run_c(exe: Path, mib: int) -> dict[tuple[str, str], float]:
    """{(code, 'encode'|'decode'): MB/s} as the program prints them."""
    text = subprocess.run([str(exe), str(mib)], capture_output=True, text=True, check=True).stdout
    return {(code, op): float(v) for code, op, v in re.findall(r"(\S+) (encode|decode) MB/s ([\d.]+)", text)}


def timed(fn, *args):
    t0 = time.perf_counter()
    result = fn(*args)
    return time.perf_counter() - t0, result


def engine_round(code, depth: int, segments: list[bytes]) -> tuple[float, float]:
    t0 = time.perf_counter()
    coded = [encode_segment(code, depth, s) for s in segments]
    t1 = time.perf_counter()
    decoded = [decode_segment(code, depth, c, len(s))[0] for c, s in zip(coded, segments)]
    t2 = time.perf_counter()
    assert decoded == segments
    return t1 - t0, t2 - t1


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mib", type=int, default=64)
    ap.add_argument("--repeat", type=int, default=5, help="rounds per case; the best is reported")
    ap.add_argument("--depths", default="1,8")
    ap.add_argument("--all", action="store_true", help="every code of the binary engine, not only those with C")
    ap.add_argument("--codes", default=None, help="these codes (comma-separated) instead")
    ap.add_argument("--flip-rate", type=float, default=1e-3)
    ap.add_argument("--cpu", type=int, default=None, help="pin this process and the C programs to one core")
    ap.add_argument("--c-dir", type=Path, default=Path(__file__).resolve().parents[2] / "shared" / "bench")
    ap.add_argument("--markdown", action="store_true", help="also print the README table")
    args = ap.parse_args()
    if args.cpu is not None:
        os.sched_setaffinity(0, {args.cpu})  # children (the C programs) inherit it
    names = list(C_COUNTERPART)
    if args.all:
        names = [n for n in bitmend.code_names() if isinstance(bitmend.get_code(n), BinaryLinearCode)]
    if args.codes:
        names = args.codes.split(",")
    depths = [int(d) for d in args.depths.split(",")]
    data = np.random.default_rng(1).integers(0, 256, args.mib << 20, dtype=np.uint8).tobytes()
    segments = [data[i: i + SEGMENT_BYTES] for i in range(0, len(data), SEGMENT_BYTES)]
    mb = len(data) / 1e6
    bitmend.decode_bytes(bitmend.encode_bytes(data[:200_000], "hamming-7-4", 8))  # load the compiled kernels
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        programs = build_c(args.c_dir, Path(tmp))
        print(f"{args.mib} MiB random payload, best of {args.repeat}, pid {os.getpid()}, "
              f"cpus {sorted(os.sched_getaffinity(0))}")
        head = (f"{'code':<14}{'depth':>5} | {'encode':>7}{'C':>6}{'ratio':>6} | {'decode':>7}{'C':>6}{'ratio':>6}"
                f" | {'p=' + format(args.flip_rate, 'g'):>8}{'p/clean':>8} | {'engine enc':>10}{'ratio':>6}"
                f"{'dec':>6}{'ratio':>6} | {'outside':>9}")
        print(head)
        print("-" * len(head))
        for name in names:
            code = bitmend.get_code(name)
            program, c_name = C_COUNTERPART.get(name, (None, None))
            for depth in depths:
                best = dict.fromkeys(("enc", "dec", "noisy", "seg_enc", "seg_dec"), float("inf"))
                c_best = {"encode": 0.0, "decode": 0.0}
                blob = bitmend.encode_bytes(data, code, depth)
                noisy, _ = flip_bits(blob, args.flip_rate, np.random.default_rng(7))
                for _ in range(args.repeat):
                    if program:
                        figures = run_c(programs[program], 64)
                        for op in c_best:
                            c_best[op] = max(c_best[op], figures.get((c_name, op), 0.0))
                    t_enc, blob = timed(bitmend.encode_bytes, data, code, depth)
                    t_dec, out = timed(bitmend.decode_bytes, blob)
                    assert out.data == data
                    del out  # no round decodes while another's 64 MiB output is still held
                    t_noisy, _ = timed(bitmend.decode_bytes, noisy)
                    del _
                    t_seg_enc, t_seg_dec = engine_round(code, depth, segments)
                    for key, value in zip(best, (t_enc, t_dec, t_noisy, t_seg_enc, t_seg_dec)):
                        best[key] = min(best[key], value)
                rate = {key: mb / value for key, value in best.items()}
                row = (name, depth, rate, c_best)
                rows.append(row)
                print(_line(row, args.flip_rate), flush=True)
    if args.markdown:
        print()
        print(_markdown(rows, args.flip_rate))


def _ratio(value: float, reference: float) -> str:
    return f"{value / reference:.2f}" if reference else "-"


def _line(row, flip_rate: float) -> str:
    name, depth, rate, c = row
    return (f"{name:<14}{depth:>5} | {rate['enc']:>7.0f}{c['encode'] or 0:>6.0f}{_ratio(rate['enc'], c['encode']):>6}"
            f" | {rate['dec']:>7.0f}{c['decode'] or 0:>6.0f}{_ratio(rate['dec'], c['decode']):>6}"
            f" | {rate['noisy']:>8.0f}{rate['noisy'] / rate['dec']:>8.2f}"
            f" | {rate['seg_enc']:>10.0f}{_ratio(rate['seg_enc'], c['encode']):>6}"
            f"{rate['seg_dec']:>6.0f}{_ratio(rate['seg_dec'], c['decode']):>6}"
            f" | {1 - rate['enc'] / rate['seg_enc']:>4.0%} {1 - rate['dec'] / rate['seg_dec']:>4.0%}")


def _markdown(rows, flip_rate: float) -> str:
    lines = ["| code | depth | encode MB/s (C, ratio) | clean decode MB/s (C, ratio) | "
             f"decode at p = {flip_rate:g} (/ clean) | engine only: encode / decode MB/s (ratio to C) |",
             "| --- | --- | --- | --- | --- | --- |"]
    for name, depth, rate, c in rows:
        def with_c(value: float, reference: float) -> str:
            return f"{value:.0f} ({reference:.0f}, {value / reference:.2f})" if reference else f"{value:.0f}"
        lines.append(f"| {name} | {depth} | {with_c(rate['enc'], c['encode'])} | {with_c(rate['dec'], c['decode'])} | "
                     f"{rate['noisy']:.0f} ({rate['noisy'] / rate['dec']:.2f}) | "
                     f"{rate['seg_enc']:.0f} ({_ratio(rate['seg_enc'], c['encode'])}) / "
                     f"{rate['seg_dec']:.0f} ({_ratio(rate['seg_dec'], c['decode'])}) |")
    return "\n".join(lines)


if __name__ == "__main__":
    main()
