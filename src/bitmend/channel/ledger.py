"""The ledger: what a chain of fault models did to a stream, counted and (for small inputs) placed.

Each stage keeps a `StageRecord`: counters, and the positions of its events while they
number at most POSITION_LIMIT (beyond that only the counts are kept, so memory stays
bounded on any stream). Positions are in the stream *that stage saw*: after an earlier
stage inserted, deleted or dropped data they no longer match the original input.
Bit positions count from the first bit sent (bit 0 = most significant bit of byte 0).

`Ledger` gathers the stages and the totals that `inject --ledger` writes as JSON:
bits seen, bits flipped, bytes substituted, frames seen and dropped, bits inserted and
deleted (slips).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np

from bitmend.wording import counted_with_commas

POSITION_LIMIT = 10_000  # events per list whose positions are kept; the counts are always exact

#: (ledger total, stage counter) pairs summed over the stages
TOTALS = (
    ("bits_flipped", "bits_flipped"),
    ("bytes_substituted", "bytes_substituted"),
    ("bits_changed_by_substitution", "bits_changed"),
    ("frames_seen", "frames_seen"),
    ("frames_dropped", "frames_dropped"),
    ("bytes_dropped", "bytes_dropped"),
    ("bits_inserted", "bits_inserted"),
    ("bits_deleted", "bits_deleted"),
)


class StageRecord:
    """Counters and capped position lists of one stage."""

    def __init__(self, channel: str, limit: int = POSITION_LIMIT) -> None:
        self.channel = channel
        self.limit = limit
        self.counts: dict[str, int] = {}
        self.positions: dict[str, list | None] = {}

    def add(self, name: str, amount: int) -> None:
        self.counts[name] = self.counts.get(name, 0) + int(amount)

    def place(self, name: str, items) -> None:
        """Append event positions (a numpy array or a list of small objects) to list `name`;
        once the list would pass the limit it is given up (None) for good."""
        kept = self.positions.setdefault(name, [])
        if kept is None or len(items) == 0:
            return
        if len(kept) + len(items) > self.limit:
            self.positions[name] = None
            return
        kept.extend(items.tolist() if isinstance(items, np.ndarray) else items)

    def to_dict(self) -> dict:
        out: dict = {"channel": self.channel, **self.counts}
        for name, kept in self.positions.items():
            out[name] = kept
        given_up = [name for name, kept in self.positions.items() if kept is None]
        if given_up:
            out["positions_note"] = (f"more than {self.limit} events: positions not kept for "
                                     f"{', '.join(given_up)}; the counts are exact")
        return out


@dataclass(frozen=True)
class Ledger:
    """What a channel did to one stream. `to_json()` is what `inject --ledger` writes."""

    seed: int
    channels: tuple[str, ...]
    bytes_in: int
    bytes_out: int
    stages: tuple[dict, ...] = field(default_factory=tuple)

    @property
    def bits_seen(self) -> int:
        return 8 * self.bytes_in

    def total(self, name: str) -> int:
        """A counter summed over the stages (0 where no stage counts it)."""
        stage_name = dict(TOTALS).get(name, name)
        return sum(int(s.get(stage_name, 0)) for s in self.stages)

    @property
    def bits_flipped(self) -> int:
        return self.total("bits_flipped")

    @property
    def bytes_substituted(self) -> int:
        return self.total("bytes_substituted")

    @property
    def frames_dropped(self) -> int:
        return self.total("frames_dropped")

    @property
    def slips(self) -> int:
        return self.total("bits_inserted") + self.total("bits_deleted")

    def to_dict(self) -> dict:
        totals = {name: self.total(name) for name, _ in TOTALS}
        return {"type": "ledger", "seed": self.seed, "channels": list(self.channels),
                "bytes_in": self.bytes_in, "bytes_out": self.bytes_out, "bits_seen": self.bits_seen,
                **totals, "slips": self.slips, "stages": list(self.stages)}

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent)

    def one_line(self) -> str:
        """A short human summary: only what happened."""
        parts = [counted_with_commas(self.bits_seen, "bit") + " seen"]
        for noun, verb, value in (("bit", "flipped", self.bits_flipped), ("byte", "substituted", self.bytes_substituted),
                                  ("frame", "dropped", self.frames_dropped),
                                  ("bit", "inserted", self.total("bits_inserted")),
                                  ("bit", "deleted", self.total("bits_deleted"))):
            if value:
                parts.append(f"{counted_with_commas(value, noun)} {verb}")
        if self.total("frames_seen") and not self.frames_dropped:
            parts.append("no frame dropped")
        if len(parts) == 1:
            parts.append("nothing changed")
        return ", ".join(parts)
