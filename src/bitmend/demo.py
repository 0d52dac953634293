"""The main job end to end on the bundled sample: encode, damage, decode, verify."""

from __future__ import annotations

import hashlib
import io
import time
from pathlib import Path
from typing import Callable

import numpy as np

from bitmend.api import Decoder, Encoder
from bitmend.channel.bsc import flip_bits
from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH, get_code

SAMPLE_NAME = "gauge-telemetry.log"


def find_sample() -> Path | None:
    """samples/gauge-telemetry.log in the working directory or beside the source tree."""
    here = Path(__file__).resolve()
    for base in (Path.cwd(), *here.parents):
        candidate = base / "samples" / SAMPLE_NAME
        if candidate.is_file():
            return candidate
    return None


def run_demo(sample: str | None, flip_rate: float, seed: int, say: Callable[[str], None]) -> bool:
    """Run the demo, printing with say; True if the output equals the input."""
    path = Path(sample) if sample else find_sample()
    if path is None:
        raise FileNotFoundError(2, "bundled sample not found; pass --sample FILE", f"samples/{SAMPLE_NAME}")
    data = path.read_bytes()
    code = get_code(DEFAULT_CODE)
    say(f"sample     {path} ({len(data):,} bytes of river-gauge telemetry)")

    started = time.perf_counter()
    sink = io.BytesIO()
    with Encoder(sink, DEFAULT_CODE, DEFAULT_DEPTH) as enc:
        enc.write(data)
    container = sink.getvalue()
    say(f"encode     {DEFAULT_CODE} (n={code.n}, k={code.k}, d={code.d}, corrects {code.t}/codeword), "
        f"depth {DEFAULT_DEPTH}: {len(container):,} bytes, overhead {len(container) / len(data) - 1:.1%}")

    damaged, flips = flip_bits(container, flip_rate, np.random.default_rng(seed))
    say(f"channel    bsc p={flip_rate:g}, seed {seed}: {flips:,} bits flipped")

    frames = []
    with Decoder(io.BytesIO(damaged), "keep", on_frame=frames.append) as dec:
        recovered = dec.read()
        summary = dec.summary
    elapsed = time.perf_counter() - started
    say(f"decode     {summary.one_line().split(': ', 1)[1]}")
    fixed = [f for f in frames if f.status == "corrected"]
    if fixed:
        worst = max(fixed, key=lambda f: f.corrected_symbols)
        say(f"           e.g. frame {worst.seq} at byte {worst.offset}: {worst.corrected_symbols} bits corrected "
            f"in {worst.corrected_blocks} of {worst.blocks} codewords")
    same = recovered == data
    digest = hashlib.sha256(recovered).hexdigest()[:16]
    say(f"verify     sha256 {digest}… {'identical to the input' if same else 'DIFFERS from the input'} "
        f"({elapsed:.2f} s)")
    return same and summary.complete
