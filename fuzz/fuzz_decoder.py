"""Coverage-guided fuzz target (atheris) for the frame parser and decoder.

    python fuzz/fuzz_decoder.py -max_total_time=60 [-runs=N] [corpus_dir]

Each input is read as a recipe: it picks a payload, a code, a depth and a frame size,
builds a real container, then damages it (bit flips, bursts, inserted, deleted or
overwritten bytes, truncation, raw fuzz bytes spliced in) and decodes it under a random
on-error policy. Invariants, checked on every input:
  - decoding ends with data and a report, or with NotAContainerError; nothing else escapes;
  - every frame reported clean or corrected holds exactly the bytes written to it;
  - an undamaged container decodes completely.
A broken invariant raises, which atheris reports as a crash with the input that caused it.
"""

from __future__ import annotations

import sys

import atheris

with atheris.instrument_imports():
    import bitmend
    from bitmend.codes.catalog import code_names

CODES = code_names()
POLICIES = ("keep", "zero", "drop")


def check(result: bitmend.Decoded, data: bytes, frame_bytes: int) -> None:
    for report in result.report.frames:
        if report.status in ("clean", "corrected"):
            start = report.seq * frame_bytes
            got = result.data[report.out_offset: report.out_offset + report.bytes]
            if got != data[start: start + report.bytes]:
                raise AssertionError(f"frame {report.seq} reported {report.status} but its bytes are wrong")
    if result.report.complete and result.data != data:
        raise AssertionError("report says complete but the output differs from the input")


def damage(fdp: atheris.FuzzedDataProvider, container: bytearray) -> bool:
    """Apply up to six damage steps; True if anything changed."""
    changed = False
    for _ in range(fdp.ConsumeIntInRange(0, 6)):
        if not container:
            break
        kind = fdp.ConsumeIntInRange(0, 5)
        at = fdp.ConsumeIntInRange(0, len(container) - 1)
        size = fdp.ConsumeIntInRange(1, 64)
        if kind == 0:  # one bit
            container[at] ^= 1 << fdp.ConsumeIntInRange(0, 7)
        elif kind == 1:  # a burst of bits
            for b in range(8 * at, min(8 * len(container), 8 * at + size)):
                container[b >> 3] ^= 0x80 >> (b & 7)
        elif kind == 2:
            container[at:at] = fdp.ConsumeBytes(size) or b"\x00"
        elif kind == 3:
            del container[at: at + size]
        elif kind == 4:
            container[at: at + size] = fdp.ConsumeBytes(size).ljust(len(container[at: at + size]), b"\xff")
        else:
            del container[at:]
        changed = True
    return changed


def test_one_input(raw: bytes) -> None:
    fdp = atheris.FuzzedDataProvider(raw)
    code = CODES[fdp.ConsumeIntInRange(0, len(CODES) - 1)]
    depth = fdp.ConsumeIntInRange(1, 20)
    frame_bytes = fdp.ConsumeIntInRange(1, 600)
    data = fdp.ConsumeBytes(fdp.ConsumeIntInRange(0, 2000))
    policy = POLICIES[fdp.ConsumeIntInRange(0, len(POLICIES) - 1)]
    container = bytearray(bitmend.encode_bytes(data, code=code, depth=depth, frame_bytes=frame_bytes))
    changed = damage(fdp, container)
    try:
        result = bitmend.decode_bytes(bytes(container), on_error=policy)
    except bitmend.NotAContainerError:
        if not changed:
            raise AssertionError("an undamaged container was not recognised")
        return
    check(result, data, frame_bytes)
    if not changed and not (result.report.complete and result.data == data):
        raise AssertionError("an undamaged container did not decode completely")


def main() -> None:
    atheris.Setup(sys.argv, test_one_input)
    atheris.Fuzz()


if __name__ == "__main__":
    main()
