"""Channel SPEC strings: `NAME:PARAM=VALUE[,PARAM=VALUE...]` -> fault model objects.

    bsc:p=1e-3                                independent bit flips
    burst:enter=1e-4,leave=0.1,bad=0.5[,good=0]   Gilbert-Elliott two-state chain
    bytes:p=1e-3                              random byte substitutions
    drop:p=0.01                               whole container frames vanish
    slip:p=1e-5                               bits lost or inserted

Parameters are named in words, never by position. Every error is a `ChannelSpecError`
(a `ValueError`) whose message is one line naming the SPEC and what is wrong with it.
A sweep, `p=1e-4..1e-1:12`, is parsed here too (`parse_sweep`).
"""

from __future__ import annotations

import math
from typing import Iterable

import numpy as np

from bitmend.channel.models import MODELS, REQUIRED, ChannelModel
from bitmend.errors import SettingError


class ChannelSpecError(SettingError):
    """A channel SPEC or sweep that cannot be understood; the message is one line."""


#: one working SPEC per model, shown in error messages
EXAMPLES = {"bsc": "bsc:p=1e-3", "burst": "burst:enter=1e-4,leave=0.1,bad=0.5,good=0", "bytes": "bytes:p=1e-3",
            "drop": "drop:p=0.01", "slip": "slip:p=1e-5"}


def _syntax() -> str:
    return ", ".join(EXAMPLES[kind] for kind in MODELS)


def _number(text: str, where: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise ChannelSpecError(f"{where}: {text!r} is not a number") from None
    if not math.isfinite(value):
        raise ChannelSpecError(f"{where}: {text!r} is not a finite number")
    return value


def parse_channel(spec: str | ChannelModel) -> ChannelModel:
    """The fault model a SPEC describes, e.g. parse_channel('bsc:p=1e-3') -> BSC(p=0.001).
    A model object passes through unchanged. Spaces around names and values are ignored;
    model names are not case sensitive."""
    if isinstance(spec, ChannelModel):
        return spec
    if not isinstance(spec, str):
        raise ChannelSpecError(f"a channel is a SPEC string or a model, got {type(spec).__name__}")
    text = spec.strip()
    kind, sep, rest = text.partition(":")
    kind = kind.strip().lower()
    where = f"channel {text!r}"
    if not kind:
        raise ChannelSpecError(f"empty channel SPEC; expected e.g. {_syntax()}")
    model = MODELS.get(kind)
    if model is None:
        raise ChannelSpecError(f"{where}: unknown model {kind!r}; known: {', '.join(MODELS)}")
    names = model.parameter_names()
    if not sep or not rest.strip():
        raise ChannelSpecError(f"{where}: parameters missing; write e.g. {EXAMPLES[kind]}")
    values: dict[str, float] = {}
    for item in rest.split(","):
        name, eq, value = item.partition("=")
        name = name.strip().lower()
        if not eq or not name or not value.strip():
            raise ChannelSpecError(f"{where}: {item.strip()!r} is not NAME=VALUE "
                                   f"({kind} takes {', '.join(names)})")
        if name not in names:
            raise ChannelSpecError(f"{where}: unknown parameter {name!r} ({kind} takes {', '.join(names)})")
        if name in values:
            raise ChannelSpecError(f"{where}: parameter {name!r} given twice")
        values[name] = _number(value.strip(), f"{where}, {name}")
    missing = [p for p in REQUIRED[kind] if p not in values]
    if missing:
        raise ChannelSpecError(f"{where}: missing {', '.join(missing)} ({kind} takes {', '.join(names)})")
    try:
        return model(**values)
    except ValueError as exc:
        raise ChannelSpecError(f"{where}: {str(exc).split(': ', 1)[-1]}") from None


def parse_channels(specs: str | ChannelModel | Iterable[str | ChannelModel]) -> tuple[ChannelModel, ...]:
    """One SPEC, one model, or several of either (applied in order) -> a tuple of models."""
    if isinstance(specs, (str, ChannelModel)):
        specs = [specs]
    models = tuple(parse_channel(s) for s in specs)
    if not models:
        raise ChannelSpecError("no channel given; name at least one, e.g. bsc:p=1e-3")
    return models


def parse_sweep(text: str) -> tuple[str, tuple[float, ...]]:
    """'p=1e-4..1e-1:12' -> ('p', 12 values on a logarithmic grid from 1e-4 to 1e-1).

    The parameter may be any that the chosen channel models take (p, bad, enter, ...);
    both ends are included; a single point (':1') is the lower end."""
    where = f"sweep {text.strip()!r}"
    name, eq, rest = text.strip().partition("=")
    name = name.strip().lower()
    span, colon, count_text = rest.partition(":")
    low_text, dots, high_text = span.partition("..")
    if not (eq and name and dots and colon):
        raise ChannelSpecError(f"{where}: expected NAME=LOW..HIGH:COUNT, e.g. p=1e-4..1e-1:12")
    low, high = _number(low_text.strip(), where), _number(high_text.strip(), where)
    try:
        count = int(count_text.strip())
    except ValueError:
        raise ChannelSpecError(f"{where}: the point count {count_text.strip()!r} is not a whole number") from None
    if not 1 <= count <= 1000:
        raise ChannelSpecError(f"{where}: the point count must be 1..1000, got {count}")
    if not 0 < low <= high <= 1:
        raise ChannelSpecError(f"{where}: a log grid needs 0 < LOW <= HIGH <= 1, got {low:g}..{high:g}")
    if count == 1:
        return name, (low,)
    grid = np.logspace(math.log10(low), math.log10(high), count)
    grid[0], grid[-1] = low, high  # exact ends, whatever the rounding of the logs
    return name, tuple(float(v) for v in grid)


def sweep_channels(models: tuple[ChannelModel, ...], name: str, value: float) -> tuple[ChannelModel, ...]:
    """models with parameter `name` set to value in every model that takes it."""
    if not any(name in m.parameter_names() for m in models):
        takes = sorted({p for m in models for p in m.parameter_names()})
        raise ChannelSpecError(f"sweep parameter {name!r} belongs to none of the channels "
                               f"({', '.join(m.spec for m in models)}); they take {', '.join(takes)}")
    try:
        return tuple(m.with_param(name, value) if name in m.parameter_names() else m for m in models)
    except ValueError as exc:
        raise ChannelSpecError(f"sweep: {exc}") from None
