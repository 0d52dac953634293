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

What is counted, each with a 95% interval:

- residual bit error: payload bits wrong after decoding, per payload bit. Wrong bits come
  in clusters (the bits of one failed codeword), on every channel, so its interval is the
  batch-means one below.
- block error: codewords not restored (decoded message wrong, or flagged uncorrectable),
  split into detected (status 255: flagged) and undetected (message wrong, not flagged: a
  miscorrection that only the frame CRC can catch).
- frame error: frames whose CRC-32C fails after decoding, i.e. the frames `decode` would
  report as damaged.

Intervals. On a BSC codewords fail independently, and the block, detected, undetected and
frame counts get the exact Clopper-Pearson interval. On a channel with memory (burst,
bytes) failures cluster inside interleaved groups and bursts, 2-3x beyond a binomial count,
and a binomial interval covers the truth about half the time; there every rate (and the
bit error everywhere) gets the batch-means interval of `analysis.intervals`: the run is cut
into batches of consecutive frames, each spanning more bits than the channel remembers,
the rate's variance is taken from the batch totals, and Clopper-Pearson is applied to the
effective sample it implies (Korn and Graubard 1998). `Measured.method` names the method
and `design_effect` how much the clustering widened the interval.

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

from bitmend.analysis import intervals, residual, theory
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
MEMORY_SPANS = 20  # a batch spans at least this many of the chain's correlation lengths 1/(enter+leave)


# ---- results ---------------------------------------------------------------------------------

@dataclass(frozen=True)
class Measured:
    """A rate seen as `events` in `trials`, with its interval: exact binomial
    (Clopper-Pearson) for independent trials, batch means over frames where events cluster."""

    events: int
    trials: int
    low: float
    high: float
    method: str = "clopper-pearson"
    design_effect: float = 1.0  # variance of the batch totals over a binomial's (1: none seen)

    @classmethod
    def of(cls, events: int, trials: int, confidence: float = CONFIDENCE) -> "Measured":
        low, high = theory.binomial_interval(int(events), int(trials), confidence)
        return cls(int(events), int(trials), low, high)

    @classmethod
    def from_tally(cls, tally: "intervals.BatchTally", confidence: float = CONFIDENCE) -> "Measured":
        """From per-batch totals of events and trials (`intervals.BatchTally.interval`)."""
        got = tally.interval(confidence)
        return cls(tally.events, tally.trials, got.low, got.high, got.method, got.design_effect)

    @property
    def rate(self) -> float:
        return self.events / self.trials if self.trials else 0.0

    def contains(self, value: float) -> bool:
        return self.low <= value <= self.high

    def to_dict(self) -> dict:
        return {"events": self.events, "trials": self.trials, "rate": self.rate, "low": self.low, "high": self.high,
                "method": self.method, "design_effect": self.design_effect}


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
    # the batch sums behind each interval, by rate ("bits", "blocks", "detected", "undetected",
    # "frames"): runs of one campaign merge exactly by adding them (bitmend.campaign); not in the JSON
    tallies: dict = field(default_factory=dict, compare=False, repr=False)

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


def check_arguments(models: Sequence[ChannelModel], depth: int, frame_bytes: int, bits: int) -> None:
    """Refuse channels simulate cannot run and sizes outside their limits (ValueError)."""
    check_channels(models)
    if not 1 <= depth <= 255:
        raise ValueError(f"depth must be 1..255, got {depth}")
    if not 1 <= frame_bytes <= MAX_PAYLOAD_BYTES:
        raise ValueError(f"frame_bytes must be 1..{MAX_PAYLOAD_BYTES}, got {frame_bytes}")
    if not 1 <= bits <= MAX_BITS:
        raise ValueError(f"bits must be 1..{MAX_BITS}, got {bits}")


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
    check_arguments(models, depth, frame_bytes, bits)
    seed = fresh_seed() if seed is None else int(seed)
    chain = ChannelChain(models, seed)
    data_rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(DATA_STREAM,)))
    frames = -(-int(bits) // (8 * frame_bytes))
    lay = layout(the_code, depth, frame_bytes + CRC_BYTES)
    k = the_code.k
    message_bits = getattr(lay, "block_message_bits", k)  # message bits per codeword (k, or 8k for bytes)

    bit_errors = detected = undetected = frame_errors = 0
    done = 0
    batches = _Batches(lay, frame_bytes, _memory_bits(models))
    for _ in range(frames):
        payload = data_rng.bytes(frame_bytes)
        message = payload + struct.pack(">I", crc32c(payload))
        coded = np.frombuffer(encode_segment(the_code, depth, message), np.uint8).copy()
        chain.apply(coded)
        decoded, status = decode_segment(the_code, depth, coded, len(message))
        # the container's check: the CRC-32C carried in the message against the decoded payload
        frame_failed = struct.unpack(">I", decoded[frame_bytes:])[0] != crc32c(decoded[:frame_bytes])
        frame_errors += frame_failed
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
            batches.add_frame(failed, bit_pos[bit_pos < 8 * frame_bytes], wrong_blocks[~failed[wrong_blocks]],
                              frame_failed)
        else:
            batches.add_frame(failed, None, None, frame_failed)
        done += coded.size
        if progress is not None:
            progress(done)

    ledger = chain.ledger()
    changed = ledger.bits_flipped + ledger.total("bits_changed_by_substitution")
    blocks = frames * lay.blocks
    expected, uncoded = theory_for(the_code, depth, models, frame_bytes)
    notes = []
    batches.finish()
    memoryless = all(isinstance(m, BSC) for m in models)

    def rate(name: str, events: int, trials: int) -> Measured:
        if memoryless and name != "bits":  # independent codewords, independent frames: exact binomial
            return Measured.of(events, trials)
        return Measured.from_tally(batches.tallies[name])

    block_error = rate("blocks", detected + undetected, blocks)
    if not memoryless:
        notes.append(f"bursts and byte hits make failures cluster: intervals by batch means ({batches.describe()}; "
                     "Clopper-Pearson on the effective sample, Korn and Graubard 1998); design effect "
                     f"{block_error.design_effect:.2g} for the block error")
    notes.append(f"bit error interval: batch means ({batches.describe()}): the wrong bits of one codeword come "
                 "together")
    return SimulationResult(
        code=name, n=the_code.n, k=k, d=the_code.d, t=the_code.t, depth=depth,
        channels=tuple(m.spec for m in models), seed=seed, frame_bytes=frame_bytes, frames=frames, blocks=blocks,
        payload_bits=frames * frame_bytes * 8, coded_bits=frames * lay.coded_bits,
        channel=Measured.of(changed, 8 * chain.bytes_in),
        bit_error=rate("bits", bit_errors, frames * frame_bytes * 8), block_error=block_error,
        detected=rate("detected", detected, blocks), undetected=rate("undetected", undetected, blocks),
        frame_error=rate("frames", frame_errors, frames), theory=expected, uncoded=uncoded, notes=tuple(notes),
        tallies=batches.tallies)


class _Batches:
    """Per-batch totals for the clustered intervals (`analysis.intervals.BatchTally`).

    Inside a frame a batch is a run of whole interleaved groups (codeword c of a segment is
    in group c // D) spanning at least the channel's memory in coded bits; frames are
    batched in runs spanning the same. Failures inside a batch may cluster; batches are
    close to independent. Memory is constant: only sums are kept."""

    def __init__(self, lay, frame_bytes: int, memory_bits: float) -> None:
        self.depth = lay.depth
        self.message_bits = lay.block_message_bits
        groups = 1 if memory_bits <= 0 else max(1, math.ceil(min(memory_bits, 1e18) / lay.group_bits))
        self.groups = min(groups, lay.groups)
        self.batch_of = (np.arange(lay.blocks) // lay.depth) // self.groups
        count = int(self.batch_of[-1]) + 1
        self.count = count
        self.blocks_in = np.bincount(self.batch_of, minlength=count).astype(np.int64)
        payload = 8 * frame_bytes  # payload bits a codeword carries (the CRC and padding do not count)
        carried = np.clip(payload - np.arange(lay.blocks) * self.message_bits, 0, self.message_bits)
        self.bits_in = np.bincount(self.batch_of, weights=carried, minlength=count).astype(np.int64)
        self.frames_per_batch = 1 if memory_bits <= 0 else max(1, math.ceil(min(memory_bits, 1e18) / lay.coded_bits))
        self.frames_open = self.frame_fails_open = 0
        # per frame: sum of trials, of their squares, and the batches that hold any trial
        self.bits_sums = (int(self.bits_in.sum()), int(np.dot(self.bits_in, self.bits_in)),
                          int(np.count_nonzero(self.bits_in)))
        self.block_sums = (int(self.blocks_in.sum()), int(np.dot(self.blocks_in, self.blocks_in)),
                           int(np.count_nonzero(self.blocks_in)))
        self.tallies = {name: intervals.BatchTally() for name in ("bits", "blocks", "detected", "undetected", "frames")}

    def add_frame(self, failed: np.ndarray, wrong_payload_bits: np.ndarray | None,
                  undetected_blocks: np.ndarray | None, frame_failed: bool) -> None:
        """One decoded frame: the flagged codewords, the positions of wrong payload bits, the
        codewords decoded wrong without a flag, whether its CRC failed. The cost follows the
        events, not the number of batches."""
        t, of = self.tallies, self.batch_of
        flagged = of[np.flatnonzero(failed)]
        bits = of[wrong_payload_bits // self.message_bits] if wrong_payload_bits is not None else None
        und = of[undetected_blocks] if undetected_blocks is not None else None
        t["bits"].add_sparse(bits, self.bits_in, *self.bits_sums)
        t["detected"].add_sparse(flagged, self.blocks_in, *self.block_sums)
        t["undetected"].add_sparse(und, self.blocks_in, *self.block_sums)
        both = flagged if und is None or not und.size else np.concatenate([flagged, und])
        t["blocks"].add_sparse(both, self.blocks_in, *self.block_sums)
        self.frames_open += 1
        self.frame_fails_open += int(frame_failed)
        if self.frames_open == self.frames_per_batch:
            self.finish()

    def finish(self) -> None:
        """Close the open batch of frames (the last one may be short)."""
        if self.frames_open:
            self.tallies["frames"].add(self.frame_fails_open, self.frames_open)
            self.frames_open = self.frame_fails_open = 0

    def describe(self) -> str:
        return (f"batches of {self.groups} interleaved group{'s' * (self.groups != 1)} of {self.depth} codewords, "
                f"and of {self.frames_per_batch} frame{'s' * (self.frames_per_batch != 1)} for the frame error")


def _memory_bits(models: Sequence[ChannelModel]) -> float:
    """Channel bits over which the state is remembered: MEMORY_SPANS correlation lengths
    1/(enter+leave) of each Gilbert-Elliott chain (its state's correlation falls as
    (1-enter-leave)^k); 0 for memoryless models (byte substitutions are independent per byte,
    and frames hold whole bytes)."""
    spans = [MEMORY_SPANS / (m.enter + m.leave) if m.enter + m.leave > 0 else math.inf
             for m in models if isinstance(m, GilbertElliott)]
    return max(spans, default=0.0)


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
