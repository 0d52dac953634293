"""Fault models at work on a byte stream: one stateful stage per model.

A stage is fed the stream in chunks (writable uint8 arrays) and returns the damaged
chunk; `finish()` returns what it still holds at the end of the stream. Bit-level stages
(bsc, burst, bytes) damage the chunk in place and keep its length; `slip` changes the
length and carries the odd bits to the next chunk. Every random choice comes from
generators seeded by (seed, stage index, purpose) and is made through `Events` (fixed
batches), and the Gilbert-Elliott state carries from chunk to chunk, so for one seed the
output does not depend on how the input was cut into chunks.

Frame drops need container framing and live in `bitmend.channel.drop`.
"""

from __future__ import annotations

from typing import Iterable, Iterator

import numpy as np
from bitarray import bitarray

from bitmend.channel.events import NEVER, Events
from bitmend.channel.ledger import StageRecord
from bitmend.channel.models import BSC, BitSlip, ByteSubstitution, ChannelModel, GilbertElliott

RUNS_BATCH = 1024  # fewest Gilbert-Elliott sojourns drawn at a time
_POPCOUNT8 = np.unpackbits(np.arange(256, dtype=np.uint8)[:, None], axis=1).sum(axis=1).astype(np.int64)


def generator(seed: int, *key: int) -> np.random.Generator:
    """The generator for one purpose of one stage: PCG64 seeded by (seed, *key)."""
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=key))


def xor_bits(buf: np.ndarray, positions: np.ndarray) -> None:
    """Invert the bits of buf (uint8, writable) at sorted, distinct bit positions
    (bit 0 = MSB of buf[0]). Positions sharing a byte are merged first, so each byte is
    written once."""
    if positions.size == 0:
        return
    byte = positions >> 3
    mask = (0x80 >> (positions & 7)).astype(np.uint8)
    if byte.size > 1:
        starts = np.flatnonzero(np.concatenate(([True], byte[1:] != byte[:-1])))
        if starts.size != byte.size:
            mask = np.bitwise_or.reduceat(mask, starts)
            byte = byte[starts]
    buf[byte] ^= mask


class Stage:
    """One model applied to a stream; subclasses implement feed()."""

    def __init__(self, model: ChannelModel, record: StageRecord) -> None:
        self.model = model
        self.record = record
        self.bits_in = 0  # bits fed so far (the clock of bit-level events)

    def feed(self, chunk: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def finish(self) -> np.ndarray:
        return np.empty(0, np.uint8)

    def run(self, chunks: Iterable[np.ndarray]) -> Iterator[np.ndarray]:
        for chunk in chunks:
            out = self.feed(chunk)
            if out.size:
                yield out
        tail = self.finish()
        if tail.size:
            yield tail


class FlipStage(Stage):
    """Binary symmetric channel: flip positions from one Bernoulli(p) process over bits."""

    def __init__(self, model: BSC, record: StageRecord, seed: int, index: int) -> None:
        super().__init__(model, record)
        self.events = Events(model.p, generator(seed, index, 0))
        record.add("bits_in", 0)
        record.add("bits_flipped", 0)

    def feed(self, chunk: np.ndarray) -> np.ndarray:
        start = self.bits_in
        self.bits_in += 8 * chunk.size
        flips = self.events.take(self.bits_in)
        xor_bits(chunk, flips - start)
        self.record.add("bits_in", 8 * chunk.size)
        self.record.add("bits_flipped", flips.size)
        self.record.place("flip_positions", flips)
        return chunk


class BurstStage(Stage):
    """Gilbert-Elliott channel.

    The chain is a sequence of sojourns (runs) that alternate between the states; a run in
    the good state lasts Geometric(enter) bits, one in the bad state Geometric(leave) bits.
    The first state is drawn from the stationary distribution (bad with probability
    enter/(enter+leave)), whose residual sojourn is again geometric. Flips are two
    Bernoulli processes, one on a clock that ticks only on bad-state bits (probability
    `bad`) and one on a clock that ticks only on good-state bits (`good`), mapped back to
    stream positions through the runs. Runs and both clocks carry over from chunk to chunk."""

    def __init__(self, model: GilbertElliott, record: StageRecord, seed: int, index: int) -> None:
        super().__init__(model, record)
        self._chain = generator(seed, index, 0)
        self.flips_bad = Events(model.bad, generator(seed, index, 1))
        self.flips_good = Events(model.good, generator(seed, index, 2))
        first_bad = bool(self._chain.random() < model.bad_fraction)
        # pending runs (not wholly before the current chunk): start bit, length, state, and the
        # run's start on its own state's clock
        self._start = np.empty(0, np.int64)
        self._len = np.empty(0, np.int64)
        self._bad = np.empty(0, bool)
        self._clock = np.empty(0, np.int64)
        # where the next drawn run begins, its state, and both clocks there
        self._next_start, self._next_bad = 0.0, first_bad
        self._bad_clock, self._good_clock = 0.0, 0.0
        self._chain_done = False
        self._drawn: list[tuple[np.ndarray, ...]] = []  # runs drawn during this chunk, joined in feed
        # runs per draw: fixed by the model alone (about the runs in 2^23 bits), never by the chunking
        runs_per_bit = 2 * model.enter * model.leave / (model.enter + model.leave) if model.enter + model.leave else 0
        self._batch = int(min(1 << 16, max(RUNS_BATCH, runs_per_bit * (1 << 23))))
        for name in ("bits_in", "bits_flipped", "flips_in_bad_state", "flips_in_good_state",
                     "bits_in_bad_state", "bad_spells"):
            record.add(name, 0)

    def _draw_runs(self) -> None:
        m = self.model
        size = self._batch
        bad = np.zeros(size, bool)
        bad[(0 if self._next_bad else 1)::2] = True
        q = np.where(bad, m.leave, m.enter)  # chance per bit to leave the run's state
        u = self._chain.random(size)
        with np.errstate(divide="ignore", invalid="ignore"):
            length = np.floor(np.log1p(-u) / np.log1p(-q)) + 1.0
        length = np.where(q >= 1.0, 1.0, np.where(q <= 0.0, NEVER, np.minimum(length, NEVER)))
        ends = self._next_start + np.cumsum(length)
        starts = ends - length
        keep = int(np.searchsorted(starts, NEVER))  # runs that begin before "never"
        if keep < size:
            self._chain_done = True
            bad, length, starts = bad[:keep], length[:keep], starts[:keep]
        bad_len = np.where(bad, length, 0.0)
        good_len = length - bad_len
        bad_clock = self._bad_clock + np.cumsum(bad_len) - bad_len
        good_clock = self._good_clock + np.cumsum(good_len) - good_len
        if keep:
            self._next_start = float(starts[-1] + length[-1])
            self._next_bad = not bool(bad[-1])
            self._bad_clock = float(bad_clock[-1] + bad_len[-1])
            self._good_clock = float(good_clock[-1] + good_len[-1])
        self._drawn.append((starts.astype(np.int64), length.astype(np.int64), bad,
                            np.where(bad, bad_clock, good_clock).astype(np.int64)))

    def _flips_in(self, state_bad: bool, stop: int, hi: int) -> np.ndarray:
        """Stream positions of the flips that fall, before bit hi, in the pending runs
        [0, stop) of one state (flips before the chunk were taken by earlier chunks)."""
        sel = np.flatnonzero(self._bad[:stop] == state_bad)
        if sel.size == 0:
            return np.empty(0, np.int64)
        events = self.flips_bad if state_bad else self.flips_good
        if events.p == 0.0:
            return np.empty(0, np.int64)
        start, clock, length = self._start[sel], self._clock[sel], self._len[sel]
        clock_hi = clock[-1] + min(int(length[-1]), hi - int(start[-1]))
        ticks = events.take(clock_hi)
        j = np.searchsorted(clock, ticks, side="right") - 1
        return start[j] + (ticks - clock[j])

    def feed(self, chunk: np.ndarray) -> np.ndarray:
        lo = self.bits_in
        hi = lo + 8 * chunk.size
        self.bits_in = hi
        while not self._chain_done and self._next_start < hi:
            self._draw_runs()
        if self._drawn:
            parts = list(zip((self._start, self._len, self._bad, self._clock), *self._drawn))
            self._start, self._len, self._bad, self._clock = (np.concatenate(p) for p in parts)
            self._drawn = []
        # runs overlapping [lo, hi): those left from earlier chunks start at or before lo
        stop = int(np.searchsorted(self._start, hi))
        in_bad = self._flips_in(True, stop, hi)
        in_good = self._flips_in(False, stop, hi)
        flips = np.concatenate([in_bad, in_good])
        flips.sort()
        xor_bits(chunk, flips - lo)
        # bookkeeping: bits spent in the bad state, bad spells that began in this chunk
        ends = self._start[:stop] + self._len[:stop]
        overlap = np.minimum(ends, hi) - np.maximum(self._start[:stop], lo)
        bad = self._bad[:stop]
        rec = self.record
        rec.add("bits_in", hi - lo)
        rec.add("bits_flipped", flips.size)
        rec.add("flips_in_bad_state", in_bad.size)
        rec.add("flips_in_good_state", in_good.size)
        rec.add("bits_in_bad_state", int(overlap[bad].sum()))
        rec.add("bad_spells", int(np.count_nonzero(bad & (self._start[:stop] >= lo))))
        rec.place("flip_positions", flips)
        # forget runs that end inside this chunk; keep the one that reaches past it
        done = int(np.searchsorted(ends, hi, side="right"))
        if done:
            self._start, self._len = self._start[done:], self._len[done:]
            self._bad, self._clock = self._bad[done:], self._clock[done:]
        return chunk


class ByteStage(Stage):
    """Byte substitutions: each event byte is XORed with a random non-zero mask, so it takes
    one of the 255 other values, uniformly."""

    def __init__(self, model: ByteSubstitution, record: StageRecord, seed: int, index: int) -> None:
        super().__init__(model, record)
        self.events = Events(model.p, generator(seed, index, 0), marks=255, mark_low=1)
        self.bytes_in = 0
        for name in ("bytes_in", "bytes_substituted", "bits_changed"):
            record.add(name, 0)

    def feed(self, chunk: np.ndarray) -> np.ndarray:
        start = self.bytes_in
        self.bytes_in += chunk.size
        self.bits_in += 8 * chunk.size
        where, masks = self.events.take(self.bytes_in)
        chunk[where - start] ^= masks.astype(np.uint8)
        rec = self.record
        rec.add("bytes_in", chunk.size)
        rec.add("bytes_substituted", where.size)
        rec.add("bits_changed", int(_POPCOUNT8[masks].sum()) if masks.size else 0)
        rec.place("substituted_bytes", where)
        return chunk


class SlipStage(Stage):
    """Bit slips. Each event at input bit i is, with equal chance, the loss of bit i or the
    insertion of a random bit just before it. The output is re-packed into bytes; its last
    byte is padded with zero bits if the insertions and losses leave a partial byte.

    Between events the stream is copied as whole bit runs (bitarray slices, at C speed);
    only when events are dense does the chunk go through a numpy array of single bits. Both
    give the same bits."""

    DENSE = 1 / 4096  # events per bit above which the whole chunk is handled bit by bit in numpy

    def __init__(self, model: BitSlip, record: StageRecord, seed: int, index: int) -> None:
        super().__init__(model, record)
        # mark bit 0: 1 = insert, 0 = delete; mark bit 1: the value of an inserted bit
        self.events = Events(model.p, generator(seed, index, 0), marks=4)
        self._carry = bitarray(endian="big")  # output bits not yet making a whole byte
        for name in ("bits_in", "bits_out", "bits_inserted", "bits_deleted", "padding_bits"):
            record.add(name, 0)

    def _runs(self, chunk: np.ndarray, rel: np.ndarray, insert: np.ndarray, value: np.ndarray) -> bitarray:
        """carry + the chunk's bits with the events applied, copied run by run."""
        bits = bitarray(endian="big")
        bits.frombytes(chunk.tobytes())
        out = self._carry
        prev = 0
        for at, ins, val in zip(rel.tolist(), insert.tolist(), value.tolist()):
            out += bits[prev:at]
            if ins:
                out.append(val)
                prev = at
            else:
                prev = at + 1
        out += bits[prev:]
        return out

    def _dense(self, chunk: np.ndarray, rel: np.ndarray, insert: np.ndarray, value: np.ndarray) -> bitarray:
        """The same as _runs, with numpy insert/delete on an array of single bits."""
        bits = np.unpackbits(chunk)
        ins, dels = rel[insert], rel[~insert]
        if ins.size:
            bits = np.insert(bits, ins, value[insert].astype(np.uint8))
        if dels.size:
            # after the insertions, original bit i sits at i + (insertions at or before i)
            bits = np.delete(bits, dels + np.searchsorted(ins, dels, side="right"))
        out = self._carry
        tail = bitarray(endian="big")
        tail.frombytes(np.packbits(bits).tobytes())
        out += tail[: bits.size]
        return out

    def feed(self, chunk: np.ndarray) -> np.ndarray:
        start = self.bits_in
        self.bits_in += 8 * chunk.size
        where, marks = self.events.take(self.bits_in)
        rec = self.record
        rec.add("bits_in", 8 * chunk.size)
        if where.size == 0 and not self._carry:
            rec.add("bits_out", 8 * chunk.size)
            return chunk
        rel = where - start
        insert = (marks & 1) == 1
        value = (marks >> 1) & 1
        dense = where.size > self.DENSE * 8 * chunk.size
        out = (self._dense if dense else self._runs)(chunk, rel, insert, value)
        whole = len(out) - len(out) % 8
        self._carry = out[whole:]
        rec.add("bits_inserted", int(insert.sum()))
        rec.add("bits_deleted", int(where.size - insert.sum()))
        rec.place("inserted_before", where[insert])
        rec.place("deleted", where[~insert])
        rec.add("bits_out", whole)
        return np.frombuffer(out[:whole].tobytes(), np.uint8).copy()

    def finish(self) -> np.ndarray:
        if not self._carry:
            return np.empty(0, np.uint8)
        self.record.add("padding_bits", 8 - len(self._carry))
        self.record.add("bits_out", len(self._carry))
        out = np.frombuffer(self._carry.tobytes(), np.uint8).copy()  # tobytes pads with zero bits
        self._carry = bitarray(endian="big")
        return out


BIT_STAGES: dict[type, type[Stage]] = {BSC: FlipStage, GilbertElliott: BurstStage, ByteSubstitution: ByteStage,
                                       BitSlip: SlipStage}


def make_stage(model: ChannelModel, seed: int, index: int, record: StageRecord | None = None) -> Stage:
    """The stage that applies model as the index-th model of a chain seeded with seed
    (frame drops excepted: see bitmend.channel.drop)."""
    kind = BIT_STAGES.get(type(model))
    if kind is None:
        raise ValueError(f"{model.kind}: no stream stage for this model here")
    return kind(model, record or StageRecord(model.spec), seed, index)
