"""Loading the compiled kernels before the first frame, for programs on live links.

A process loads numba and its kernels' cached machine code on its first sizeable piece of
work (kernels/loader.py): about a second here, once. A sender or receiver of telemetry
would pay it on its first packet, late; `warm_up()` pays it at start instead, for the
codes and depths the program will use, through both the byte-stream and the record paths
(each compiled kernel is loaded on its first call with its own argument types).

numba leaves some 110,000 objects behind (counted here with gc.get_objects), and every
full garbage collection walks them all: about 45 ms each on this machine. Decoding
200-byte records set off one or two per 20,000 frames here, from the short-lived objects
each batch of frames makes. So warm_up() then freezes what exists (gc.freeze: the
collector's permanent generation, which no collection walks), and 200-byte records
decode 9-13% faster, measured with benchmarks/small_packets.py.
"""

from __future__ import annotations

import gc
from collections.abc import Iterable

from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH

# 64 KiB: work well past the size that loads the compiled kernels (loader.SMALL_WORK_BITS)
SAMPLE = bytes(range(256)) * 256
SAMPLE_RECORDS = [SAMPLE[i: i + 200] for i in range(0, 200 * 64, 200)]  # 64 records of 200 bytes


def warm_up(codes: Iterable[str | BlockCode] = (DEFAULT_CODE,), depths: Iterable[int] = (DEFAULT_DEPTH,),
            freeze: bool = True) -> None:
    """Load the compiled kernels now for every pair of `codes` and `depths`: a 64 KiB
    sample and 64 records of 200 bytes go through encode and decode with each, and must
    come back. Call it at a program's start so that its first frame does not wait for
    them.

    freeze: then collect garbage once and move every object that exists to the garbage
    collector's permanent generation (gc.freeze), numba's among them, so that no later
    full collection walks them (see the module docstring for what that saves). Objects
    of the program's own that exist now are frozen too: they are still freed when nothing
    refers to them, but a reference cycle among them is never collected (gc.unfreeze()
    undoes the freeze). freeze=False leaves the collector as it is."""
    from bitmend.api import decode_bytes, encode_bytes
    from bitmend.records import decode_records, encode_records

    depths = list(depths)
    for code in codes:
        for depth in depths:
            blobs = list(encode_records(SAMPLE_RECORDS, code=code, depth=depth))
            if decode_bytes(encode_bytes(SAMPLE, code, depth)).data != SAMPLE or list(decode_records(blobs)) \
                    != SAMPLE_RECORDS:  # a clean round trip: only a bug in bitmend gets here
                raise RuntimeError(f"bitmend: a clean round trip through {code} at depth {depth} changed the data")
    if freeze:
        gc.collect()  # garbage frozen now would never be freed
        gc.freeze()


__all__ = ["warm_up"]
