"""Monte Carlo trials of a code on a channel, through the real coding path, beside theory.

    result = simulate("hamming-7-4", depth=1, channels="bsc:p=1e-3", bits=10**7, seed=1)
    result.block_error.rate, result.block_error.high, result.theory.block_error

What one trial is. A *frame* here is the coded payload segment of one container frame of
`frame_bytes` data bytes (default: the container's 16384): random data, its CRC-32C
appended, coded and interleaved by `bitmend.interleave.encode_segment` exactly as
`bitmend encode` does it, sent through the channel, then de-interleaved and corrected by
`decode_segment` exactly as `bitmend decode` does it. Frames follow each other on one
continuous channel (a Gilbert-Elliott chain keeps its state from frame to frame). The
marker and the headers are not sent: they are coded more strongly than any payload and
their losses are the container's business, not the code's.

What is counted, each with an exact (Clopper-Pearson) 95% interval:

- residual bit error: payload bits wrong after decoding, per payload bit. (The interval
  treats bits as independent trials; errors left by a decoder come in clusters, so it is
  narrower than the truth when few blocks failed. The block counts below do not have this
  problem.)
- block error: codewords not restored (decoded message wrong, or flagged uncorrectable),
  split into detected (status 255: flagged) and undetected (message wrong, not flagged: a
  miscorrection that only the frame CRC can catch).
- frame error: frames whose CRC-32C fails after decoding, i.e. the frames `decode` would
  report as damaged.

Theory beside them where a closed form exists (`theory_for`): bounded-distance decoding on
a binary symmetric channel (block error exact; detected/undetected split from the weight
distribution; bit error and frame error as approximations), the exact block error on a
Gilbert-Elliott chain at the given depth, and on byte substitutions at depth >= 8. The
uncoded line is the same channel without coding: bit error = the channel's flip rate, a
k-bit block or a frame of raw data hit at least once.

Only models that damage bits in place (bsc, burst, bytes) can run here; drop and slip act
on frames and bit timing, which a codeword-level trial does not model: test those with
`bitmend inject` and `bitmend decode`.
"""

from __future__ import annotations

import csv
import io
import json
import math
import struct
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from bitmend.analysis import residual, theory
from bitmend.channel.chain import ChannelChain, fresh_seed
from bitmend.channel.models import BSC, ByteSubstitution, ChannelModel, GilbertElliott
from bitmend.channel.spec import ChannelSpecError, parse_channels, parse_sweep, sweep_channels
from bitmend.codes.catalog import get_code
from bitmend.codes.linear import BinaryLinearCode
from bitmend.container.format import CRC_BYTES, DEFAULT_FRAME_BYTES, MAX_PAYLOAD_BYTES, crc32c
from bitmend.interleave import decode_segment, encode_segment, layout

CONFIDENCE = 0.95
FAILED = 255
DATA_STREAM = 0xDA7A  # spawn key of the payload generator, apart from the channel's (stage index)
MAX_BITS = 1 << 44  # payload bits per run: a guard against typing an exponent too many


# ---- results ---------------------------------------------------------------------------------

@dataclass(frozen=True)
class Measured:
    """A rate seen as `events` in `trials`, with its exact binomial interval."""

    events: int
    trials: int
    low: float
    high: float

    @classmethod
    def of(cls, events: int, trials: int, confidence: float = CONFIDENCE) -> "Measured":
        low, high = theory.binomial_interval(int(events), int(trials), confidence)
        return cls(int(events), int(trials), low, high)

    @property
    def rate(self) -> float:
        return self.events / self.trials if self.trials else 0.0

    def contains(self, value: float) -> bool:
        return self.low <= value <= self.high

    def to_dict(self) -> dict:
        return {"events": self.events, "trials": self.trials, "rate": self.rate, "low": self.low, "high": self.high}


@dataclass(frozen=True)
class Expected:
    """Rates from a formula (theory or the uncoded channel); None where none applies."""

    bit_error: float | None = None
    block_error: float | None = None
    detected: float | None = None
    undetected: float | None = None
    frame_error: float | None = None
    basis: str = ""  # what the numbers rest on, in words

    def to_dict(self) -> dict:
        return {"bit_error": self.bit_error, "block_error": self.block_error, "detected": self.detected,
                "undetected": self.undetected, "frame_error": self.frame_error, "basis": self.basis}


RATES = ("bit_error", "block_error", "detected", "undetected", "frame_error")


@dataclass(frozen=True)
class SimulationResult:
    """Everything one simulation measured and what theory expects beside it."""

    code: str
    n: int
    k: int
    d: int
    t: int
    depth: int
    channels: tuple[str, ...]
    seed: int
    frame_bytes: int
    frames: int
    blocks: int  # codewords sent
    payload_bits: int
    coded_bits: int  # bits of coded segments sent through the channel
    channel: Measured  # bits the channel changed, per coded bit
    bit_error: Measured
    block_error: Measured
    detected: Measured
    undetected: Measured
    frame_error: Measured
    theory: Expected
    uncoded: Expected
    confidence: float = CONFIDENCE
    notes: tuple[str, ...] = field(default_factory=tuple)

    def measured(self, name: str) -> Measured:
        return getattr(self, name)

    def theory_inside(self, name: str) -> bool | None:
        """Whether theory's value for `name` lies in the measured interval (None: no theory)."""
        value = getattr(self.theory, name)
        return None if value is None else self.measured(name).contains(value)

    def to_dict(self) -> dict:
        return {"type": "simulation", "code": self.code, "n": self.n, "k": self.k, "d": self.d, "t": self.t,
                "depth": self.depth, "channels": list(self.channels), "seed": self.seed,
                "frame_bytes": self.frame_bytes, "frames": self.frames, "blocks": self.blocks,
                "payload_bits": self.payload_bits, "coded_bits": self.coded_bits, "confidence": self.confidence,
                "channel": self.channel.to_dict(),
                "measured": {name: self.measured(name).to_dict() for name in RATES},
                "theory": self.theory.to_dict(), "uncoded": self.uncoded.to_dict(), "notes": list(self.notes)}

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent)


@dataclass(frozen=True)
class SweepResult:
    """Simulations at the points of a sweep over one channel parameter (same seed at each)."""

    parameter: str
    values: tuple[float, ...]
    points: tuple[SimulationResult, ...]

    @property
    def channels_text(self) -> str:
        """The chain with the swept parameter shown as a range, e.g. 'bsc:p=1e-04..0.1'."""
        span = f"{self.values[0]:.3g}..{self.values[-1]:.3g}"
        texts = []
        for spec in self.points[0].channels:
            kind, _, params = spec.partition(":")
            texts.append(kind + ":" + ",".join(f"{name}={span}" if name == self.parameter else f"{name}={value}"
                                               for name, _, value in (p.partition("=") for p in params.split(","))))
        return " then ".join(texts)

    def to_dict(self) -> dict:
        return {"type": "sweep", "parameter": self.parameter, "values": list(self.values),
                "points": [p.to_dict() for p in self.points]}

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent)


CSV_COLUMNS = (["code", "depth", "channels", "seed", "frame_bytes", "frames", "blocks", "payload_bits", "coded_bits",
                "channel_rate"]
               + [f"{name}_{part}" for name in RATES for part in ("events", "rate", "low", "high", "theory")]
               + [f"uncoded_{name}" for name in ("bit_error", "block_error", "frame_error")])


def to_csv(results: Sequence[SimulationResult]) -> str:
    """One CSV row per result (per sweep point), theory and uncoded columns empty where none."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    blank = lambda v: "" if v is None else repr(v)  # noqa: E731
    for r in results:
        row = [r.code, r.depth, " ".join(r.channels), r.seed, r.frame_bytes, r.frames, r.blocks, r.payload_bits,
               r.coded_bits, repr(r.channel.rate)]
        for name in RATES:
            m = r.measured(name)
            row += [m.events, repr(m.rate), repr(m.low), repr(m.high), blank(getattr(r.theory, name))]
        row += [blank(getattr(r.uncoded, name)) for name in ("bit_error", "block_error", "frame_error")]
        writer.writerow(row)
    return out.getvalue()


# ---- theory ------------------------------------------------------------------------------------

def combined_flip_rate(models: Sequence[ChannelModel]) -> float | None:
    """Per-bit flip probability of independent flip channels in a chain: a bit ends flipped
    when an odd number of them flip it, (1 - prod(1 - 2 r_i)) / 2."""
    rates = [m.flip_rate for m in models]
    if any(r is None for r in rates):
        return None
    return (1.0 - math.prod(1.0 - 2.0 * r for r in rates)) / 2.0


def _weights(code) -> tuple[int, ...] | None:
    """The code's weight distribution, or None where it is not known (e.g. a long BCH code)."""
    try:
        wd = code.weight_distribution
    except (AttributeError, ValueError, MemoryError):
        return None
    return None if wd is None else tuple(wd.counts)


def theory_for(code, depth: int, models: Sequence[ChannelModel],
               frame_bytes: int = DEFAULT_FRAME_BYTES) -> tuple[Expected, Expected]:
    """(theory, uncoded) for code at depth on the channel models, where closed forms exist.

    Binary codes on a BSC chain: bounded-distance block error (exact), its detected and
    undetected parts (from the weight distribution, when known) and a residual bit error
    estimate (`residual.codeword_outcome`). Codes over bytes (Reed-Solomon): a symbol is
    wrong with q = 1 - (1-p)^8 on a BSC, or p under byte substitutions (symbols are whole
    stream bytes), independently, so the block error is the same binomial tail in symbols.
    Binary codes on one Gilbert-Elliott chain: exact block error at the given depth; on byte
    substitutions at depth >= 8: exact. Frame error: any of the frame's codewords failing,
    for independent codewords."""
    n, k, t = code.n, code.k, code.t
    symbol_bits = getattr(code, "symbol_bits", 1)
    blocks = layout(code, depth, frame_bytes + CRC_BYTES).blocks
    frame_bits = 8 * frame_bytes
    block_bits = k * symbol_bits
    rate = combined_flip_rate(models)
    all_bsc = all(isinstance(m, BSC) for m in models)
    if all_bsc:
        uncoded = Expected(bit_error=rate, block_error=theory.uncoded_block_error(block_bits, rate),
                           frame_error=theory.uncoded_block_error(frame_bits, rate),
                           basis=f"raw bits on the same BSC: {block_bits}-bit blocks, {frame_bits}-bit frames")
    elif len(models) == 1 and isinstance(models[0], GilbertElliott):
        m = models[0]
        raw = residual.gilbert_elliott_error_counts(block_bits, 1, m.enter, m.leave, m.bad, m.good)
        uncoded = Expected(bit_error=m.flip_rate, block_error=float(min(1.0, raw[1:].sum())),
                           frame_error=theory.gilbert_elliott_hit(frame_bits, m.enter, m.leave, m.bad, m.good),
                           basis=f"raw bits on the same chain: {block_bits} consecutive bits, {frame_bits}-bit frames")
    elif len(models) == 1 and isinstance(models[0], ByteSubstitution):
        m = models[0]
        uncoded = Expected(bit_error=m.flip_rate, basis="raw bits: average flip rate of the substitutions")
    else:
        uncoded = (Expected(bit_error=rate, basis="raw bits: combined flip rate of the chain") if rate is not None
                   else Expected())

    if symbol_bits == 8:
        if all_bsc or (len(models) == 1 and isinstance(models[0], ByteSubstitution)):
            q = -math.expm1(8 * math.log1p(-rate)) if all_bsc and rate < 1 else (1.0 if all_bsc else models[0].p)
            block = theory.bsc_block_error(n, t, q)
            return Expected(block_error=block, frame_error=theory.frame_error(block, blocks),
                            basis=f"bounded-distance decoding of byte symbols, each wrong independently with "
                                  f"probability {q:.4g} (block error exact; frame error counts any failed "
                                  "codeword)"), uncoded
        return Expected(basis="no closed form for symbol codes on this channel"), uncoded

    if all_bsc:
        p = rate
        weights = _weights(code)
        block = theory.bsc_block_error(n, t, p)
        if weights is None:
            return Expected(block_error=block, frame_error=theory.frame_error(block, blocks),
                            basis=f"bounded-distance decoding on a BSC with p = {p:.4g} (block error exact; "
                                  "no weight distribution for the detected/undetected split)"), uncoded
        split = theory.block_outcomes(n, t, weights, p)
        outcome = residual.codeword_outcome(residual.bsc_error_counts(n, p), t, weights)
        return Expected(
            bit_error=outcome.bit_error, block_error=split.block_error, detected=split.detected,
            undetected=split.undetected, frame_error=theory.frame_error(split.block_error, blocks),
            basis=f"bounded-distance decoding on a BSC with p = {p:.4g} (block error exact; detected/undetected "
                  "from the weight distribution; bit error approximate; frame error counts any failed "
                  "codeword)"), uncoded
    if len(models) == 1 and isinstance(models[0], GilbertElliott):
        m = models[0]
        counts = residual.gilbert_elliott_error_counts(n, depth, m.enter, m.leave, m.bad, m.good)
        return Expected(block_error=float(min(1.0, counts[t + 1:].sum())),
                        basis=f"more than t = {t} of a codeword's {n} bits, taken {depth} apart, flipped by the "
                              "stationary Gilbert-Elliott chain (exact)"), uncoded
    if len(models) == 1 and isinstance(models[0], ByteSubstitution):
        if depth >= 8:  # every codeword bit in its own byte: independent flips at the mean rate
            counts = residual.byte_substitution_error_counts(n, depth, models[0].p)
            return Expected(block_error=float(min(1.0, counts[t + 1:].sum())),
                            basis="depth >= 8 puts each codeword bit in its own byte: independent flips "
                                  "(exact)"), uncoded
        return Expected(basis="no closed form: at depth < 8 a substituted byte can hit a codeword more than "
                              "once"), uncoded
    return Expected(basis="no closed form for this chain of channels"), uncoded


# ---- the trials ----------------------------------------------------------------------------------

def _resolve_code(code: str | BinaryLinearCode) -> tuple[str, BinaryLinearCode]:
    """(name, code object) from a catalog name or a code object (binary linear, BCH, RS)."""
    if isinstance(code, str):
        return code, get_code(code)
    return getattr(code, "name", None) or f"custom ({code.n},{code.k})", code


def check_channels(models: Sequence[ChannelModel]) -> None:
    """Refuse models that a codeword-level trial cannot apply (drop, slip)."""
    bad = [m for m in models if not m.acts_on_bits]
    if bad:
        kinds = " and ".join(sorted({m.kind for m in bad}))
        raise ChannelSpecError(f"simulate takes channels that flip bits in place (bsc, burst, bytes); {kinds} "
                               "change framing or bit timing: test those with bitmend inject and bitmend decode")


def _popcount(values: np.ndarray) -> int:
    return int(np.bitwise_count(values).sum(dtype=np.int64)) if values.size else 0


def simulate(code: str | BinaryLinearCode, depth: int = 1,
             channels: str | ChannelModel | Sequence[str | ChannelModel] = "bsc:p=1e-3",
             bits: int = 10 ** 7, seed: int | None = None, *, frame_bytes: int = DEFAULT_FRAME_BYTES,
             progress: Callable[[int], None] | None = None) -> SimulationResult:
    """Send at least `bits` random payload bits (whole frames) through code, depth and the
    channel chain; measure what decoding left. `progress(coded_bytes_done)` is called after
    every frame. The same seed gives the same result."""
    name, the_code = _resolve_code(code)
    models = parse_channels(channels)
    check_channels(models)
    if not 1 <= depth <= 255:
        raise ValueError(f"depth must be 1..255, got {depth}")
    if not 1 <= frame_bytes <= MAX_PAYLOAD_BYTES:
        raise ValueError(f"frame_bytes must be 1..{MAX_PAYLOAD_BYTES}, got {frame_bytes}")
    if not 1 <= bits <= MAX_BITS:
        raise ValueError(f"bits must be 1..{MAX_BITS}, got {bits}")
    seed = fresh_seed() if seed is None else int(seed)
    chain = ChannelChain(models, seed)
    data_rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(DATA_STREAM,)))
    frames = -(-int(bits) // (8 * frame_bytes))
    lay = layout(the_code, depth, frame_bytes + CRC_BYTES)
    k = the_code.k
    message_bits = getattr(lay, "block_message_bits", k)  # message bits per codeword (k, or 8k for bytes)

    bit_errors = detected = undetected = frame_errors = 0
    done = 0
    for _ in range(frames):
        payload = data_rng.bytes(frame_bytes)
        message = payload + struct.pack(">I", crc32c(payload))
        coded = np.frombuffer(encode_segment(the_code, depth, message), np.uint8).copy()
        chain.apply(coded)
        decoded, status = decode_segment(the_code, depth, coded, len(message))
        # the container's check: the CRC-32C carried in the message against the decoded payload
        if struct.unpack(">I", decoded[frame_bytes:])[0] != crc32c(decoded[:frame_bytes]):
            frame_errors += 1
        failed = status == FAILED
        detected += int(np.count_nonzero(failed))
        diff = np.bitwise_xor(np.frombuffer(decoded, np.uint8), np.frombuffer(message, np.uint8))
        wrong_bytes = np.flatnonzero(diff)
        if wrong_bytes.size:
            bit_errors += _popcount(diff[:frame_bytes])
            # message bit j of the segment belongs to codeword j // (message bits per codeword)
            bit_pos = (wrong_bytes[:, None] * 8 + np.arange(8)[None, :])[np.unpackbits(diff[wrong_bytes][:, None],
                                                                                       axis=1).astype(bool)]
            wrong_blocks = np.unique(bit_pos // message_bits)
            undetected += int(np.count_nonzero(~failed[wrong_blocks]))
        done += coded.size
        if progress is not None:
            progress(done)

    ledger = chain.ledger()
    changed = ledger.bits_flipped + ledger.total("bits_changed_by_substitution")
    blocks = frames * lay.blocks
    expected, uncoded = theory_for(the_code, depth, models, frame_bytes)
    notes = []
    if not all(isinstance(m, BSC) for m in models):
        notes.append("bursts and byte hits make codeword failures cluster; the binomial intervals assume "
                     "independent trials and are narrower than the true uncertainty (repeat with other seeds)")
    return SimulationResult(
        code=name, n=the_code.n, k=k, d=the_code.d, t=the_code.t, depth=depth,
        channels=tuple(m.spec for m in models), seed=seed, frame_bytes=frame_bytes, frames=frames, blocks=blocks,
        payload_bits=frames * frame_bytes * 8, coded_bits=frames * lay.coded_bits,
        channel=Measured.of(changed, 8 * chain.bytes_in),
        bit_error=Measured.of(bit_errors, frames * frame_bytes * 8),
        block_error=Measured.of(detected + undetected, blocks),
        detected=Measured.of(detected, blocks), undetected=Measured.of(undetected, blocks),
        frame_error=Measured.of(frame_errors, frames), theory=expected, uncoded=uncoded, notes=tuple(notes))


def sweep(code: str | BinaryLinearCode, depth: int, channels: str | ChannelModel | Sequence[str | ChannelModel],
          grid: str | tuple[str, Sequence[float]], bits: int = 10 ** 7, seed: int | None = None, *,
          frame_bytes: int = DEFAULT_FRAME_BYTES,
          progress: Callable[[int], None] | None = None) -> SweepResult:
    """simulate() at each value of one channel parameter. grid is 'p=1e-4..1e-1:12' or
    (name, values); every model of the chain that takes the parameter gets the value. Every
    point uses the same seed (common random numbers: the curve is smoother, and any point
    can be re-run alone with that seed)."""
    name, values = parse_sweep(grid) if isinstance(grid, str) else (grid[0], tuple(float(v) for v in grid[1]))
    models = parse_channels(channels)
    check_channels(models)
    sweep_channels(models, name, values[0])  # an unknown parameter fails before any work
    seed = fresh_seed() if seed is None else int(seed)
    points = []
    reached = [0, 0]  # coded bytes of the points finished, and of the point running
    for value in values:
        def tick(done: int) -> None:
            reached[1] = done
            if progress is not None:
                progress(reached[0] + done)
        points.append(simulate(code, depth, sweep_channels(models, name, value), bits, seed,
                               frame_bytes=frame_bytes, progress=tick))
        reached[0] += reached[1]
    return SweepResult(name, tuple(values), tuple(points))


def planned_coded_bytes(code: str | BinaryLinearCode, depth: int, bits: int, points: int = 1,
                        frame_bytes: int = DEFAULT_FRAME_BYTES) -> int:
    """About how many coded bytes a run will push through the channel (for a progress bar)."""
    _, the_code = _resolve_code(code)
    frames = -(-int(bits) // (8 * frame_bytes))
    return points * frames * layout(the_code, depth, frame_bytes + CRC_BYTES).coded_bytes


# ---- text ------------------------------------------------------------------------------------------

ROW_LABELS = {"bit_error": "residual bit error", "block_error": "block error",
              "detected": "  detected (flagged, status 255)", "undetected": "  undetected (miscorrected)",
              "frame_error": "frame error (CRC-32C fails)"}


def _g(value: float | None) -> str:
    return "-" if value is None else f"{value:.3e}"


def format_result(r: SimulationResult) -> list[str]:
    """The human report of one simulation, as lines."""
    pct = f"{r.confidence:.0%}"
    lines = [f"code       {r.code} (n={r.n}, k={r.k}, d={r.d}, t={r.t}) at depth {r.depth}",
             f"channel    {' then '.join(r.channels)}, seed {r.seed}",
             f"sent       {r.payload_bits:,} payload bits in {r.frames:,} frames of {r.frame_bytes:,} bytes: "
             f"{r.blocks:,} codewords, {r.coded_bits:,} coded bits; the channel changed {r.channel.events:,} bits "
             f"({r.channel.rate:.3e})",
             "",
             f"{'':34}{'measured':>10}  {pct + ' interval':<24}{'theory':>10}{'uncoded':>11}"]
    for name in RATES:
        m = r.measured(name)
        interval = f"[{m.low:.2e}, {m.high:.2e}]"
        lines.append(f"{ROW_LABELS[name]:<34}{m.rate:>10.3e}  {interval:<24}{_g(getattr(r.theory, name)):>10}"
                     f"{_g(getattr(r.uncoded, name, None)):>11}")
    lines.append("")
    if r.theory.basis:
        lines.append(f"theory:    {r.theory.basis}")
    if r.uncoded.basis:
        lines.append(f"uncoded:   {r.uncoded.basis}")
    lines.append(f"events:    {r.bit_error.events:,} wrong payload bits, {r.block_error.events:,} failed codewords "
                 f"({r.detected.events:,} flagged, {r.undetected.events:,} miscorrected), "
                 f"{r.frame_error.events:,} failed frames")
    lines.extend(f"note:      {n}" for n in r.notes)
    return lines


def format_sweep(s: SweepResult) -> list[str]:
    """The human report of a sweep: one line per point."""
    first = s.points[0]
    lines = [f"code       {first.code} (n={first.n}, k={first.k}, d={first.d}, t={first.t}) at depth {first.depth}",
             f"channel    {s.channels_text} ({len(s.values)} points), seed {first.seed}, "
             f"{first.payload_bits:,} payload bits per point",
             "",
             f"{s.parameter:>10}{'channel':>11}  {'bit error':>9} {'(interval)':<21}{'theory':>10}  "
             f"{'block error':>11} {'(interval)':<21}{'theory':>10}  {'frame error':>11}{'theory':>10}"]
    for value, r in zip(s.values, s.points):
        b, k, f = r.bit_error, r.block_error, r.frame_error
        lines.append(f"{value:>10.3g}{r.channel.rate:>11.3e}  {b.rate:>9.2e} [{b.low:.2e}, {b.high:.2e}] "
                     f"{_g(r.theory.bit_error):>10}  {k.rate:>11.3e} [{k.low:.2e}, {k.high:.2e}] "
                     f"{_g(r.theory.block_error):>10}  {f.rate:>11.3e}{_g(r.theory.frame_error):>10}")
    lines.append("")
    lines.append(f"theory:    {first.theory.basis}")
    lines.extend(f"note:      {n}" for n in first.notes)
    return lines
