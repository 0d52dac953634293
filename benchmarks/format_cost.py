"""What format version 2 costs against version 1: bytes per frame and decode speed.

Both containers hold the same 64 MiB of random data in the same frames (golay-24-12, depth
8, 16 KiB frames); the version 1 container is built frame by frame with version 1 headers,
and both are decoded by the same (current) reader, so the difference is the format's alone.

    python benchmarks/format_cost.py [--mib 64] [--runs 3]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import bitmend
from bitmend.codes.catalog import code_id
from bitmend.container import format as fmt


def version_1_container(data: bytes, code: str, depth: int, frame_bytes: int) -> bytes:
    pieces = []
    starts = range(0, len(data), frame_bytes)
    for seq, start in enumerate(starts):
        payload = data[start: start + frame_bytes]
        header = fmt.FrameHeader(code_id(code), depth, seq, len(payload), last=start + frame_bytes >= len(data),
                                 version=1)
        pieces.append(fmt.encode_frame(header, payload))
    return b"".join(pieces)


def best_decode_seconds(blob: bytes, runs: int) -> float:
    best = float("inf")
    for _ in range(runs):
        started = time.perf_counter()
        result = bitmend.decode_bytes(blob)
        best = min(best, time.perf_counter() - started)
        assert result.report.complete
    return best


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--mib", type=int, default=64)
    ap.add_argument("--runs", type=int, default=3)
    args = ap.parse_args()
    code, depth, frame_bytes = "golay-24-12", 8, fmt.DEFAULT_FRAME_BYTES
    data = np.random.default_rng(1).integers(0, 256, args.mib << 20, dtype=np.uint8).tobytes()
    v2 = bitmend.encode_bytes(data, code=code, depth=depth, frame_bytes=frame_bytes)
    v1 = version_1_container(data, code, depth, frame_bytes)
    frames = -(-len(data) // frame_bytes)
    print(f"{args.mib} MiB, {code} depth {depth}, {frame_bytes}-byte frames, {frames} frames")
    print(f"container bytes: v1 {len(v1):,}  v2 {len(v2):,}  (+{(len(v2) - len(v1)) / frames:.0f} bytes per frame, "
          f"+{len(v2) / len(v1) - 1:.2%})")
    bitmend.decode_bytes(v2[: 4 * (len(v2) // frames)])  # load the compiled kernels first
    t1, t2 = best_decode_seconds(v1, args.runs), best_decode_seconds(v2, args.runs)
    mb = len(data) / 1e6
    print(f"decode, best of {args.runs}: v1 {mb / t1:.0f} MB/s  v2 {mb / t2:.0f} MB/s  (v2/v1 {t1 / t2:.2f})")


if __name__ == "__main__":
    main()
