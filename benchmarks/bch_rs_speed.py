"""BCH and Reed-Solomon speed, bitmend side by side with the galois library, on one core.

    python benchmarks/bch_rs_speed.py [--mib 16] [--repeat 3] [--galois-codewords 300] [--cpu 0]

Two levels are measured:

- codec: arrays of codewords in, arrays out (bitmend's `encode_rows` / `decode_rows`,
  galois' `encode` / `decode`), the level at which the two libraries do the same job;
- stream: bitmend.Encoder / bitmend.Decoder over the framed container (CRC-32C, headers,
  interleaving at depth 1 and 8), what a user of bitmend gets.

MB/s counts payload (message) bytes, 10^6 bytes per MB; each figure is the best of
--repeat runs. galois is much slower, so it gets fewer codewords (--galois-codewords);
the rates are comparable because both are per byte. Errors are placed outside the timed
region with a fixed seed: "8 errors" means 8 symbol errors (random positions, random
non-zero values) in every rs-255-223 codeword, "2 errors" 2 bit errors in every
bch-255-223 codeword. The process is pinned to one CPU and numba to one thread.
This is a benchmark, not a test: it asserts only correctness.
"""

from __future__ import annotations

import argparse
import io
import os
import time

os.environ.setdefault("NUMBA_NUM_THREADS", "1")

import numpy as np  # noqa: E402


def _best(fn, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def _symbol_errors(rows: np.ndarray, count: int, rng) -> np.ndarray:
    out = rows.copy()
    for i in range(out.shape[0]):
        pos = rng.choice(out.shape[1], count, replace=False)
        out[i, pos] ^= rng.integers(1, 256, count).astype(np.uint8)
    return out


def _bit_errors(bits: np.ndarray, count: int, rng) -> np.ndarray:
    out = bits.copy()
    for i in range(out.shape[0]):
        out[i, rng.choice(out.shape[1], count, replace=False)] ^= 1
    return out


def codec_rs(code, galois, blocks: int, galois_blocks: int, repeat: int, rng) -> list[tuple]:
    k = code.k
    messages = rng.integers(0, 256, (blocks, k), dtype=np.uint8)
    message_rows = np.zeros((blocks, code.n), dtype=np.uint8)  # rows hold the message, parity filled in place
    message_rows[:, :k] = messages
    rows = code.encode_rows(message_rows.copy())
    noisy = _symbol_errors(rows, 8, rng)
    mb = blocks * k / 1e6
    copies = [message_rows.copy() for _ in range(repeat)]
    enc = _best(lambda: code.encode_rows(copies.pop()), repeat)
    copies = [rows.copy() for _ in range(repeat)]
    clean = _best(lambda: code.decode_rows(copies.pop()), repeat)
    copies = [noisy.copy() for _ in range(repeat)]
    status = []
    err = _best(lambda: status.append(code.decode_rows(copies.pop())), repeat)
    assert (status[-1] == 8).all()
    fixed = noisy.copy()
    code.decode_rows(fixed)
    assert np.array_equal(fixed[:, :k], messages)

    rs = galois.ReedSolomon(255, k)
    GF = rs.field
    gm = GF(messages[:galois_blocks])
    gc = rs.encode(gm)
    assert np.array_equal(np.asarray(gc), rows[:galois_blocks])  # same field, generator and order
    gnoisy = GF(noisy[:galois_blocks])
    gmb = galois_blocks * k / 1e6
    rs.decode(gc[:2])
    rs.decode(gnoisy[:2])  # compile galois' kernels outside the timed region
    genc = _best(lambda: rs.encode(gm), repeat)
    gclean = _best(lambda: rs.decode(gc), repeat)
    gerr = _best(lambda: rs.decode(gnoisy), 1)
    assert np.array_equal(np.asarray(rs.decode(gnoisy)), messages[:galois_blocks])
    return [(f"{code.name} encode", mb / enc, gmb / genc),
            (f"{code.name} decode, clean", mb / clean, gmb / gclean),
            (f"{code.name} decode, 8 symbol errors per codeword", mb / err, gmb / gerr)]


def codec_bch(code, galois, blocks: int, galois_blocks: int, repeat: int, rng) -> list[tuple]:
    k, n = code.k, code.n
    bits = rng.integers(0, 2, (blocks, k), dtype=np.uint8)
    words = code.encode(bits)
    noisy = _bit_errors(words, 2, rng)

    def packed(a: np.ndarray) -> np.ndarray:
        wide = np.zeros((a.shape[0], 8 * code.row_bytes), dtype=np.uint8)
        wide[:, : a.shape[1]] = a
        return np.packbits(wide, axis=1)

    message_rows, clean_rows, noisy_rows = packed(bits), packed(words), packed(noisy)
    mb = blocks * k / 8e6
    copies = [message_rows.copy() for _ in range(repeat)]
    enc = _best(lambda: code.encode_rows(copies.pop()), repeat)
    copies = [clean_rows.copy() for _ in range(repeat)]
    clean = _best(lambda: code.decode_rows(copies.pop()), repeat)
    copies = [noisy_rows.copy() for _ in range(repeat)]
    status = []
    err = _best(lambda: status.append(code.decode_rows(copies.pop())), repeat)
    assert (status[-1] == 2).all()

    bch = galois.BCH(n, k)
    gm = galois.GF2(bits[:galois_blocks])
    gc = bch.encode(gm)
    assert np.array_equal(np.asarray(gc), words[:galois_blocks])
    gnoisy = galois.GF2(noisy[:galois_blocks])
    gmb = galois_blocks * k / 8e6
    bch.decode(gc[:2])
    bch.decode(gnoisy[:2])
    genc = _best(lambda: bch.encode(gm), repeat)
    gclean = _best(lambda: bch.decode(gc), repeat)
    gerr = _best(lambda: bch.decode(gnoisy), 1)
    return [(f"{code.name} encode", mb / enc, gmb / genc),
            (f"{code.name} decode, clean", mb / clean, gmb / gclean),
            (f"{code.name} decode, 2 bit errors per codeword", mb / err, gmb / gerr)]


def _encode_stream(data: bytes, code: str, depth: int) -> bytes:
    import bitmend

    sink = io.BytesIO()
    with bitmend.Encoder(sink, code, depth) as enc:
        for i in range(0, len(data), 1 << 20):
            enc.write(data[i: i + (1 << 20)])
    return sink.getvalue()


def _decode_stream(blob: bytes) -> tuple[bytes, bool]:
    import bitmend

    with bitmend.Decoder(io.BytesIO(blob), keep_frame_reports=False) as dec:
        parts = []
        while chunk := dec.read1(1 << 20):
            parts.append(chunk)
        return b"".join(parts), dec.summary.complete


def _damage_rs_frames(blob: bytes, per_codeword: int, rng) -> bytes:
    """per_codeword symbol errors in every codeword of every frame (depth 1 streams)."""
    from bitmend.container import format as fmt

    out = bytearray(blob)
    pos = 0
    while pos < len(blob):
        header = fmt.decode_header(blob[pos + 8: pos + 8 + fmt.MAX_HEADER_BYTES])
        n = header.code.n
        start = pos + 8 + header.header_bytes
        for first in range(start, start + header.coded_bytes - n + 1, n):
            for p in rng.choice(n, per_codeword, replace=False):
                out[first + int(p)] ^= int(rng.integers(1, 256))
        pos += header.frame_bytes
    return bytes(out)


def stream(data: bytes, repeat: int, rng) -> list[tuple]:
    rows = []
    mb = len(data) / 1e6
    for code in ("rs-255-223", "bch-255-223"):
        for depth in (1, 8):
            blob = _encode_stream(data, code, depth)
            out, ok = _decode_stream(blob)
            assert out == data and ok
            enc = _best(lambda: _encode_stream(data, code, depth), repeat)
            dec = _best(lambda: _decode_stream(blob), repeat)
            rows.append((f"{code} depth {depth} encode", mb / enc, None))
            rows.append((f"{code} depth {depth} decode, clean", mb / dec, None))
            if code.startswith("rs") and depth == 1:
                noisy = _damage_rs_frames(blob, 8, rng)
                out, ok = _decode_stream(noisy)
                assert out == data and ok
                err = _best(lambda: _decode_stream(noisy), repeat)
                rows.append((f"{code} depth {depth} decode, 8 symbol errors per codeword", mb / err, None))
    return rows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mib", type=int, default=16, help="payload for bitmend's runs")
    ap.add_argument("--repeat", type=int, default=3, help="runs per case; the best is reported")
    ap.add_argument("--galois-codewords", type=int, default=300, help="codewords for galois' runs")
    ap.add_argument("--cpu", type=int, default=None, help="CPU to pin to (default: the first allowed)")
    args = ap.parse_args()
    if hasattr(os, "sched_setaffinity"):
        cpu = args.cpu if args.cpu is not None else min(os.sched_getaffinity(0))
        os.sched_setaffinity(0, {cpu})
    import galois

    from bitmend.codes.catalog import get_code
    from bitmend.kernels.loader import compiled_cyclic

    compiled_cyclic(1 << 30)  # load the compiled kernels now: every size below uses them

    rng = np.random.default_rng(7)
    payload = args.mib << 20
    rs, bch = get_code("rs-255-223"), get_code("bch-255-223")
    print(f"one core (pid {os.getpid()}, cpus {sorted(os.sched_getaffinity(0))}), galois {galois.__version__}, "
          f"best of {args.repeat}; MB/s of payload")
    results = codec_rs(rs, galois, payload // rs.k, args.galois_codewords, args.repeat, rng)
    results += codec_bch(bch, galois, 8 * payload // bch.k, args.galois_codewords, args.repeat, rng)
    print(f"\ncodec level (arrays of codewords)\n{'case':<52}{'bitmend':>10}{'galois':>10}{'ratio':>9}")
    for name, ours, theirs in results:
        print(f"{name:<52}{ours:>10.1f}{theirs:>10.3f}{ours / theirs:>8.0f}x")
    data = rng.integers(0, 256, payload, dtype=np.uint8).tobytes()
    print(f"\nstream level (bitmend.Encoder / Decoder, {args.mib} MiB, 16 KiB frames)\n{'case':<52}{'bitmend':>10}")
    for name, ours, _ in stream(data, args.repeat, rng):
        print(f"{name:<52}{ours:>10.1f}")


if __name__ == "__main__":
    main()
