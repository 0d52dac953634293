"""Coverage-guided fuzz target (atheris) for the frame parser and decoder.

    python fuzz/fuzz_decoder.py -max_total_time=60 [-runs=N] [corpus_dir]

Each input is read as a recipe: it picks a payload, a code, a depth and a frame size,
builds a real container, and a second encode of the same size and settings (another
stream), keyed or not (the other stream under another key) and with or without repair
frames; it rearranges whole frames (replays, swaps, moves, frames spliced in from the other
stream, the other stream appended), then damages bytes (bit flips, bursts, inserted, deleted
or overwritten bytes, truncation, raw fuzz bytes spliced in) and decodes it under a random
on-error policy. Invariants, checked on every input:
  - decoding ends with data and a report, or with NotAContainerError; nothing else escapes;
  - every frame reported clean or corrected holds exactly the bytes written to it, in its
    own stream, and no frame is delivered twice;
  - a report that says complete has output equal to the stream(s) written;
  - an undamaged, unrearranged container decodes completely.
A broken invariant raises, which atheris reports as a crash with the input that caused it.
"""

from __future__ import annotations

import sys

import atheris

with atheris.instrument_imports():
    import io

    import bitmend
    from bitmend.codes.catalog import code_names
    from bitmend.container.reader import FrameScanner

CODES = code_names()
POLICIES = ("keep", "zero", "drop")
STREAM_A, STREAM_B = 0xA, 0xB
KEY, OTHER_KEY = bytes(range(16, 48)), bytes(range(48, 80))
REPAIRS = (None, None, "1/4", "3/8")


def check(result: bitmend.Decoded, streams: dict[str, bytes], frame_bytes: int) -> None:
    seen = set()
    for report in result.report.frames:
        if report.status in ("lost", "unauthenticated"):
            continue
        if (report.stream, report.seq) in seen:
            raise AssertionError(f"frame {report.seq} of stream {report.stream} delivered twice")
        seen.add((report.stream, report.seq))
        if report.status in ("clean", "corrected", "rebuilt"):
            data = streams[report.stream]
            start = report.seq * frame_bytes
            got = result.data[report.out_offset: report.out_offset + report.bytes]
            if got != data[start: start + report.bytes]:
                raise AssertionError(f"frame {report.seq} reported {report.status} but its bytes are wrong")
    if result.report.complete:
        # complete: the output is whole streams, one after another, each exactly as written
        order: list[str] = []
        for report in result.report.frames:
            if report.stream not in order:
                order.append(report.stream)
        if result.data != b"".join(streams[name] for name in order):
            raise AssertionError("report says complete but the output is not the streams as written")


def frames_of(container: bytes) -> list[bytes]:
    """An undamaged container cut into its frames."""
    spans = [(f.offset, f.header.frame_bytes) for f in FrameScanner(io.BytesIO(container), decode_payloads=False).frames()]
    return [container[start: start + size] for start, size in spans]


def rearrange(fdp: atheris.FuzzedDataProvider, a: list[bytes], b: list[bytes]) -> tuple[list[bytes], bool]:
    """Up to four whole-frame steps on stream a's frames; (frames, True if b was appended whole)."""
    frames = list(a)
    for _ in range(fdp.ConsumeIntInRange(0, 4)):
        if not frames:
            break
        kind = fdp.ConsumeIntInRange(0, 3)
        i = fdp.ConsumeIntInRange(0, len(frames) - 1)
        j = fdp.ConsumeIntInRange(0, len(frames) - 1)
        if kind == 0:  # replay
            frames.insert(j, frames[i])
        elif kind == 1:  # swap
            frames[i], frames[j] = frames[j], frames[i]
        elif kind == 2:  # move far
            frames.insert(j, frames.pop(i))
        elif b:  # splice a frame of the other stream in
            frames[i] = b[min(i, len(b) - 1)]
    appended = fdp.ConsumeBool()
    return frames + (b if appended else []), appended


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
    other = bytes(reversed(data))
    keyed = fdp.ConsumeBool()  # keyed frames: the reader has the key; the other stream another key
    repair = REPAIRS[fdp.ConsumeIntInRange(0, len(REPAIRS) - 1)]
    first = bitmend.encode_bytes(data, code=code, depth=depth, frame_bytes=frame_bytes, stream_id=STREAM_A,
                                 repair=repair, key=KEY if keyed else None)
    second = bitmend.encode_bytes(other, code=code, depth=depth, frame_bytes=frame_bytes, stream_id=STREAM_B,
                                  repair=repair, key=OTHER_KEY if keyed else None)
    a_frames = frames_of(first)
    frames, _ = rearrange(fdp, a_frames, frames_of(second))
    container = bytearray(b"".join(frames))
    changed = damage(fdp, container)
    try:
        result = bitmend.decode_bytes(bytes(container), on_error=policy, key=KEY if keyed else None)
    except bitmend.NotAContainerError:
        if not changed and frames:
            raise AssertionError("an undamaged container was not recognised")
        return
    streams = {f"{STREAM_A:016x}": data, f"{STREAM_B:016x}": other}
    check(result, streams, frame_bytes)
    if keyed and any(r.stream == f"{STREAM_B:016x}" and r.status in ("clean", "corrected", "rebuilt")
                     for r in result.report.frames):
        raise AssertionError("a frame under another key was delivered")
    if not changed and frames == a_frames and not (result.report.complete and result.data == data):
        raise AssertionError("an undamaged container did not decode completely")


def main() -> None:
    atheris.Setup(sys.argv, test_one_input)
    atheris.Fuzz()


if __name__ == "__main__":
    main()
