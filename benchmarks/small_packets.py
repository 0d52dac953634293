"""Small packets through the Python API: frames per second each way (issue 12, item 2).

    taskset -c 1 python benchmarks/small_packets.py [--records 20000] [--size 200] [--repeat 3]
                                                    [--code golay-24-12] [--depth 8]

Random records of --size bytes, one frame each, through `bitmend.encode_records` and
`bitmend.decode_records`, two ways:

- at once: the records (and then the blobs) given as a list, which bitmend codes and checks
  in batches (format.encode_record_frames, reader.single_frames);
- one by one: the same given as an iterator, each record coded and each blob decoded as it
  comes, as on a live link (`bitmend encode --records`, datagrams).

Best of --repeat rounds after one warm-up round (the compiled kernels loaded); frames/s
counts records. Both ways are then measured again after `bitmend.warm_up()`, which a
program on a live link calls at start: it also freezes the objects numba left (gc.freeze),
so that the garbage collector's full collections stop walking them. A benchmark, not a
test: it asserts only that the records come back.
"""

from __future__ import annotations

import argparse
import gc
import os
import time

import bitmend


def best_rate(fn, count: int, repeat: int):
    best, result = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - start)
    return count / best, result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--records", type=int, default=20_000)
    parser.add_argument("--size", type=int, default=200)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--code", default="golay-24-12")
    parser.add_argument("--depth", type=int, default=8)
    args = parser.parse_args()
    records = [os.urandom(args.size) for _ in range(args.records)]
    options = {"code": args.code, "depth": args.depth}
    list(bitmend.decode_records(list(bitmend.encode_records(records[:3000], **options))))  # warm-up
    print(f"{args.records} records of {args.size} bytes, {args.code} depth {args.depth}, best of {args.repeat}, "
          f"cpus {sorted(os.sched_getaffinity(0))}")
    print(f"{'given':<24}{'encode frames/s':>18}{'decode frames/s':>18}")
    for label, wrap, warmed in (("at once", list, False), ("one by one", iter, False),
                                ("at once, warm_up()", list, True), ("one by one, warm_up()", iter, True)):
        if warmed and not gc.get_freeze_count():
            bitmend.warm_up([args.code], [args.depth])  # loads nothing new here: freezes what exists

        def encode(wrap=wrap):
            return list(bitmend.encode_records(wrap(records), **options))

        encode_rate, blobs = best_rate(encode, args.records, args.repeat)

        def decode(wrap=wrap, blobs=blobs):
            return list(bitmend.decode_records(wrap(blobs)))

        decode_rate, back = best_rate(decode, args.records, args.repeat)
        assert back == records
        print(f"{label:<24}{encode_rate:>18,.0f}{decode_rate:>18,.0f}", flush=True)

if __name__ == "__main__":
    main()
