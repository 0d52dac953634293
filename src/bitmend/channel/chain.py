"""A chain of fault models applied in order to one stream, with its ledger.

    chain = ChannelChain(["bsc:p=1e-3", "slip:p=1e-6"], seed=7)
    ledger = chain.run(chunks, write)          # a whole stream, in bounded memory
    damaged = chain.apply(array)               # bit-level models only: one more piece

Stage i of a chain seeded with S draws from generators seeded by (S, i, ...), so adding a
model at the end of a chain does not change what the earlier ones do.
"""

from __future__ import annotations

import secrets
from typing import Callable, Iterable, Iterator, Sequence

import numpy as np

from bitmend.channel.drop import DropStage, FrameFinder
from bitmend.channel.ledger import Ledger, StageRecord
from bitmend.channel.models import ChannelModel, FrameDrop
from bitmend.channel.spec import ChannelSpecError, parse_channels
from bitmend.channel.stages import Stage, make_stage


def fresh_seed() -> int:
    """A random seed for a run that was given none (recorded in its ledger)."""
    return secrets.randbits(63)


def _as_array(chunk: bytes | bytearray | memoryview | np.ndarray) -> np.ndarray:
    """A writable uint8 array over chunk (no copy for a bytearray or a writable array)."""
    if isinstance(chunk, np.ndarray):
        return chunk if chunk.flags.writeable and chunk.dtype == np.uint8 else np.array(chunk, np.uint8)
    if isinstance(chunk, bytearray):
        return np.frombuffer(chunk, np.uint8)
    return np.frombuffer(bytes(chunk), np.uint8).copy()


class ChannelChain:
    """Fault models applied in order. `finder` locates container frames for a drop model."""

    def __init__(self, channels: str | ChannelModel | Sequence[str | ChannelModel], seed: int | None = None,
                 finder: FrameFinder | None = None) -> None:
        self.models = parse_channels(channels)
        if seed is not None and (not isinstance(seed, (int, np.integer)) or seed < 0):
            raise ChannelSpecError(f"the seed must be a whole number >= 0, got {seed!r}")
        self.seed = fresh_seed() if seed is None else int(seed)
        drops = [i for i, m in enumerate(self.models) if isinstance(m, FrameDrop)]
        if len(drops) > 1:
            raise ChannelSpecError("give at most one drop channel per chain")
        self.records = [StageRecord(m.spec) for m in self.models]
        self._drop_at = drops[0] if drops else None
        self.stages: list[Stage | DropStage] = []
        for i, m in enumerate(self.models):
            if isinstance(m, FrameDrop):
                if finder is None:
                    raise ChannelSpecError("drop removes container frames and needs the container reader: "
                                           "use it through bitmend inject")
                self.stages.append(DropStage(m, self.records[i], self.seed, i, finder))
            else:
                self.stages.append(make_stage(m, self.seed, i, self.records[i]))
        self.bytes_in = 0
        self.bytes_out = 0

    @property
    def acts_on_bits_only(self) -> bool:
        """True if every model damages bits in place (bsc, burst, bytes)."""
        return all(m.acts_on_bits for m in self.models)

    def apply(self, chunk: bytes | bytearray | np.ndarray) -> np.ndarray:
        """The next piece of the stream, damaged (in place when chunk is a writable array).
        Only for chains of bit-level models, whose output has the input's length."""
        if not self.acts_on_bits_only:
            kinds = ", ".join(m.kind for m in self.models if not m.acts_on_bits)
            raise ChannelSpecError(f"{kinds} change the stream's length or framing; only bsc, burst and "
                                   "bytes act on bits in place")
        data = _as_array(chunk)
        self.bytes_in += data.size
        for stage in self.stages:
            data = stage.feed(data)
        self.bytes_out += data.size
        return data

    def run(self, chunks: Iterable[bytes | bytearray | np.ndarray], write: Callable[[np.ndarray], None]) -> Ledger:
        """Damage a whole stream given as chunks; write receives the output pieces in order."""

        def counted_in() -> Iterator[np.ndarray]:
            for chunk in chunks:
                data = _as_array(chunk)
                self.bytes_in += data.size
                yield data

        def out(data: np.ndarray) -> None:
            self.bytes_out += data.size
            write(data)

        def pull(stages, source: Iterator[np.ndarray]) -> Iterator[np.ndarray]:
            for stage in stages:
                source = stage.run(source)
            return source

        if self._drop_at is None:
            for data in pull(self.stages, counted_in()):
                out(data)
        else:
            after = self.stages[self._drop_at + 1:]

            def push(data: np.ndarray) -> None:
                for stage in after:
                    data = stage.feed(data)
                    if not data.size:
                        return
                out(data)

            self.stages[self._drop_at].run(pull(self.stages[: self._drop_at], counted_in()), push)
            for i, stage in enumerate(after):  # what the later stages still hold
                tail = stage.finish()
                for later in after[i + 1:]:
                    if tail.size:
                        tail = later.feed(tail)
                if tail.size:
                    out(tail)
        return self.ledger()

    def ledger(self) -> Ledger:
        return Ledger(self.seed, tuple(m.spec for m in self.models), self.bytes_in, self.bytes_out,
                      tuple(r.to_dict() for r in self.records))
