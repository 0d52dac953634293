"""How the command line's options are declared and checked: choices, value checks, help text.

typer checks every option before a command runs: integer ranges by `min=`/`max=`, choices
by the enums here, and the checks an integer range cannot state (an open interval, a float
that must be whole) by the callbacks here, which raise `typer.BadParameter`. A bad value is
then a usage error: one line and exit 2, before any input is read or output made.
"""

from __future__ import annotations

import enum
import inspect
import math
from typing import Callable, Optional

import typer
import typer.main
import typer.models

_JOBS_HELP = ("Worker processes that {verb} frames: 0 (the default) is one per core for a file input of "
              "16 MiB or more, else 1; the {what} is the same for any N. Byte streams only (not --records "
              "or udp:).")
ENCODE_JOBS_HELP = _JOBS_HELP.format(verb="code", what="container")
DECODE_JOBS_HELP = _JOBS_HELP.format(verb="decode", what="output, report and exit code")
KEY_FILE_HELP = ("Shared key (at least 16 bytes, raw or hex; not readable by others): every frame carries a tag "
                 "under it, and decode delivers only frames whose tag matches.")
CODE_FILE_HELP = ("Custom code: a text file ('generator' or 'parity-check', then rows of 0/1) or JSON "
                  "({\"generator\": [[...]]} or {\"parity_check\": [[...]]}).")


class OnError(str, enum.Enum):
    """decode --on-error: what becomes of a damaged frame's data (the library's on_error)."""

    keep = "keep"
    zero = "zero"
    drop = "drop"
    fail = "fail"


class Framing(str, enum.Enum):
    """--records: how records are cut from and put back into a byte stream."""

    line = "line"
    u16 = "u16"
    u32 = "u32"


class Per(str, enum.Enum):
    """plan --per: what a residual error target counts."""

    bit = "bit"
    frame = "frame"


# ---- value checks that a range cannot state ----------------------------------------------------

def positive_seconds(value: Optional[float]) -> Optional[float]:
    """A duration > 0 (None when the option was not given). nan is refused too."""
    if value is not None and not value > 0:
        raise typer.BadParameter(f"must be a positive number of seconds, got {value:g}")
    return value


def seconds_or_inf(value: float) -> float:
    """A duration > 0, or inf for "never"."""
    if not value > 0:
        raise typer.BadParameter(f"must be a positive number of seconds (or inf), got {value:g}")
    return value


def bit_flip_probability(value: Optional[float]) -> Optional[float]:
    """A BSC's flip probability strictly between 0 and 0.5 (at 0.5 the channel carries nothing)."""
    if value is not None and not 0.0 < value < 0.5:
        raise typer.BadParameter(f"must be a bit flip probability between 0 and 0.5, got {value:g}")
    return value


def whole_number(value: Optional[float]) -> Optional[float]:
    """A count written as a float (1e8): a whole number >= 1."""
    if value is not None and not (value >= 1 and math.isfinite(value) and value == int(value)):
        raise typer.BadParameter(f"must be a whole number >= 1, got {value:g}")
    return value


def simulated_bits(value: float) -> float:
    """simulate --bits: a whole number 1..simulate.MAX_BITS (a guard against an exponent too many)."""
    from bitmend.simulate import MAX_BITS

    whole_number(value)
    if value > MAX_BITS:
        raise typer.BadParameter(f"must be a whole number 1..{MAX_BITS:.3g}, got {value:g}")
    return value


# ---- help screens ---------------------------------------------------------------------------------

def _text_type_class() -> type:
    """The class of typer's own text parameter type (typer ships its own copy of click, so
    the class is asked of typer rather than imported from click)."""
    return type(typer.main.get_click_type(annotation=str, parameter_info=typer.models.ParameterInfo()))


class TextArgument(_text_type_class()):
    """A text argument whose help line shows its own name (IN, NAME) and no type beside it:
    typer's rich help would otherwise add the type's name ("<str>")."""

    name = "text"

    def get_metavar(self, param, ctx=None) -> str:
        return ""


def flowed(doc: str) -> str:
    """A docstring as help text: paragraphs kept, each paragraph's lines joined. typer's rich
    help keeps single newlines, which would break a sentence where the source line ends."""
    paragraphs = inspect.cleandoc(doc).split("\n\n")
    return "\n\n".join(" ".join(paragraph.split()) for paragraph in paragraphs)


def command(group: typer.Typer, name: Optional[str] = None) -> Callable:
    """@group.command(name) with the function's docstring as its help, flowed. The first
    paragraph, one sentence, is the command's line in its group's list of commands (given
    as short_help, so that no help formatter cuts it short)."""
    def register(function: Callable) -> Callable:
        text = flowed(function.__doc__ or "")
        return group.command(name, help=text, short_help=text.split("\n\n")[0])(function)

    return register


__all__ = ["KEY_FILE_HELP", "CODE_FILE_HELP", "OnError", "Framing", "Per", "positive_seconds", "seconds_or_inf",
           "bit_flip_probability", "whole_number", "simulated_bits", "TextArgument", "flowed", "command"]
