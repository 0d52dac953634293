"""Fault models: plain, frozen descriptions of a channel's parameters.

A model says *what* the channel does; it holds no state and draws no random numbers. The
streaming machinery that applies a model to bytes (with its random generators and, for the
Gilbert-Elliott chain, its state) lives in `bitmend.channel.stages`. Models are made from a
channel SPEC by `bitmend.channel.spec.parse_channel` and can print themselves back as a
SPEC (`model.spec`), so a ledger or a result always names the exact channel it used.

Every probability is a per-bit (or per-byte, per-frame) chance in [0, 1].
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from typing import ClassVar


def _fmt(value: float) -> str:
    """A parameter value as written in a SPEC: short, exact enough to reproduce the run."""
    return f"{value:.6g}"


def _check_probability(kind: str, name: str, value: float) -> None:
    if not (isinstance(value, (int, float)) and 0.0 <= float(value) <= 1.0) or math.isnan(value):
        raise ValueError(f"{kind}: {name} must be a probability in [0, 1], got {value!r}")


@dataclass(frozen=True)
class ChannelModel:
    """Base of the fault models. Subclasses set `kind`, `summary`, `acts_on_bits`."""

    kind: ClassVar[str] = ""
    summary: ClassVar[str] = ""
    #: True when the model damages bits in place, without changing the stream's length or
    #: needing container framing: only such models can run inside `simulate`.
    acts_on_bits: ClassVar[bool] = True

    def __post_init__(self) -> None:
        for f in fields(self):
            value = getattr(self, f.name)
            _check_probability(self.kind, f.name, value)
            object.__setattr__(self, f.name, float(value))

    @classmethod
    def parameter_names(cls) -> tuple[str, ...]:
        return tuple(f.name for f in fields(cls))

    @property
    def params(self) -> dict[str, float]:
        return {f.name: getattr(self, f.name) for f in fields(self)}

    @property
    def spec(self) -> str:
        """The SPEC that parses back to this model, e.g. 'bsc:p=0.001'."""
        return f"{self.kind}:" + ",".join(f"{k}={_fmt(v)}" for k, v in self.params.items())

    def with_param(self, name: str, value: float) -> "ChannelModel":
        """A copy with one parameter changed (used by sweeps); checks the new value."""
        if name not in self.parameter_names():
            raise ValueError(f"{self.kind} has no parameter {name!r} (it takes {', '.join(self.parameter_names())})")
        return replace(self, **{name: value})

    @property
    def flip_rate(self) -> float | None:
        """Long-run fraction of bits this model inverts, or None if it does not flip bits."""
        return None

    def describe(self) -> str:
        """One readable line, e.g. for a report or `plan`."""
        raise NotImplementedError

    def __str__(self) -> str:
        return self.spec


@dataclass(frozen=True)
class BSC(ChannelModel):
    """Binary symmetric channel: every bit flips independently with probability p."""

    kind: ClassVar[str] = "bsc"
    summary: ClassVar[str] = "independent bit flips with probability p"
    p: float = 0.0

    @property
    def flip_rate(self) -> float:
        return self.p

    def describe(self) -> str:
        return f"binary symmetric channel: each bit flips independently with probability {_fmt(self.p)}"


@dataclass(frozen=True)
class GilbertElliott(ChannelModel):
    """Two-state Markov chain (good, bad). Before each bit the chain moves good -> bad with
    probability `enter` and bad -> good with probability `leave`; a bit sent in the bad
    state flips with probability `bad`, in the good state with probability `good`.

    Sojourns are geometric: a bad spell lasts 1/leave bits on average, a good one
    1/enter bits; the long-run share of bits sent in the bad state is enter/(enter+leave)."""

    kind: ClassVar[str] = "burst"
    summary: ClassVar[str] = "Gilbert-Elliott bursts: enter/leave the bad state, flip probability in each"
    enter: float = 0.0
    leave: float = 1.0
    bad: float = 0.5
    good: float = 0.0

    @property
    def mean_burst_bits(self) -> float:
        """Mean length of a bad spell in bits (1/leave; infinite if leave = 0)."""
        return math.inf if self.leave == 0 else 1.0 / self.leave

    @property
    def mean_gap_bits(self) -> float:
        """Mean length of a good spell in bits (1/enter; infinite if enter = 0)."""
        return math.inf if self.enter == 0 else 1.0 / self.enter

    @property
    def bad_fraction(self) -> float:
        """Stationary probability of the bad state, enter/(enter+leave). A chain that can
        move neither way stays in the good state it starts in (0)."""
        total = self.enter + self.leave
        return 0.0 if total == 0 else self.enter / total

    @property
    def flip_rate(self) -> float:
        """Average flip probability per bit in the stationary chain."""
        pi = self.bad_fraction
        return pi * self.bad + (1.0 - pi) * self.good

    def describe(self) -> str:
        burst = "never ends" if self.leave == 0 else f"last {self.mean_burst_bits:.3g} bits on average"
        return (f"Gilbert-Elliott bursts: bad spells {burst}, start with probability {_fmt(self.enter)} per bit, "
                f"{self.bad_fraction:.3g} of the time bad; flip probability {_fmt(self.bad)} when bad, "
                f"{_fmt(self.good)} when good; average flip rate {self.flip_rate:.3g}")


@dataclass(frozen=True)
class ByteSubstitution(ChannelModel):
    """Each byte is replaced, with probability p, by one of the 255 other byte values
    (uniformly), so a substituted byte always changes."""

    kind: ClassVar[str] = "bytes"
    summary: ClassVar[str] = "each byte replaced by a different random value with probability p"
    p: float = 0.0

    #: mean number of bits that differ between a byte and a uniformly chosen different one:
    #: the 255 non-zero 8-bit XOR masks hold 8 * 128 one-bits in all
    MEAN_BITS_PER_SUBSTITUTION: ClassVar[float] = 8 * 128 / 255

    @property
    def flip_rate(self) -> float:
        return self.p * self.MEAN_BITS_PER_SUBSTITUTION / 8

    def describe(self) -> str:
        return (f"byte substitutions: each byte replaced by a different random value with probability "
                f"{_fmt(self.p)} (average bit flip rate {self.flip_rate:.3g})")


@dataclass(frozen=True)
class FrameDrop(ChannelModel):
    """Whole frames of a bitmend container vanish, each independently with probability p."""

    kind: ClassVar[str] = "drop"
    summary: ClassVar[str] = "whole container frames vanish with probability p"
    acts_on_bits: ClassVar[bool] = False
    p: float = 0.0

    def describe(self) -> str:
        return f"frame loss: each container frame vanishes with probability {_fmt(self.p)}"


@dataclass(frozen=True)
class BitSlip(ChannelModel):
    """Bit slips: at each bit, with probability p, the channel either loses that bit or
    inserts a random extra bit before it (each half the time)."""

    kind: ClassVar[str] = "slip"
    summary: ClassVar[str] = "bits lost or inserted with probability p per bit"
    acts_on_bits: ClassVar[bool] = False
    p: float = 0.0

    def describe(self) -> str:
        return f"bit slips: at each bit, with probability {_fmt(self.p)}, a bit is lost or an extra one inserted"


MODELS: dict[str, type[ChannelModel]] = {m.kind: m for m in (BSC, GilbertElliott, ByteSubstitution, FrameDrop, BitSlip)}
#: parameters that a SPEC must name; the others have the defaults above
REQUIRED: dict[str, tuple[str, ...]] = {"bsc": ("p",), "burst": ("enter", "leave", "bad"), "bytes": ("p",),
                                        "drop": ("p",), "slip": ("p",)}
