"""What a simulation measured: each rate with its interval (`Measured`), one run's result
beside theory (`SimulationResult`), a sweep's points (`SweepResult`), and their JSON and CSV
forms."""

from __future__ import annotations

import csv
import io
import json
from dataclasses import dataclass, field
from typing import Sequence

from bitmend.analysis import intervals, theory
from bitmend.code_theory import Expected

CONFIDENCE = 0.95


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
