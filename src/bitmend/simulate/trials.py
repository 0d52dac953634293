"""The trials: frames of random data through the real coding path and the channel, and
what decoding left, counted (see the package docstring for what one trial is)."""

from __future__ import annotations

import struct
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from bitmend.channel.chain import ChannelChain, fresh_seed
from bitmend.channel.models import BSC, ChannelModel
from bitmend.channel.spec import ChannelSpecError, parse_channels, parse_sweep, sweep_channels
from bitmend.code_theory import theory_for
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import as_code
from bitmend.container.format import CRC_BYTES, DEFAULT_FRAME_BYTES, check_depth, check_frame_bytes, crc32c
from bitmend.errors import SettingError
from bitmend.interleave import SegmentLayout, decode_segment, encode_segment, layout
from bitmend.kernels.status import FAILED
from bitmend.simulate.batches import Batches, memory_bits_of
from bitmend.simulate.results import Measured, SimulationResult, SweepResult

DATA_STREAM = 0xDA7A  # spawn key of the payload generator, apart from the channel's (stage index)
MAX_BITS = 1 << 44  # payload bits per run: a guard against typing an exponent too many

ChannelsArg = str | ChannelModel | Sequence[str | ChannelModel]


def check_channels(models: Sequence[ChannelModel]) -> None:
    """Refuse models that a codeword-level trial cannot apply (drop, slip)."""
    bad = [m for m in models if not m.acts_on_bits]
    if bad:
        kinds = " and ".join(sorted({m.kind for m in bad}))
        raise ChannelSpecError(f"simulate takes channels that flip bits in place (bsc, burst, bytes); {kinds} "
                               "change framing or bit timing: test those with bitmend inject and bitmend decode")


def check_arguments(models: Sequence[ChannelModel], depth: int, frame_bytes: int, bits: int) -> None:
    """Refuse channels simulate cannot run and sizes outside their limits (SettingError,
    a ValueError)."""
    check_channels(models)
    check_depth(depth)
    check_frame_bytes(frame_bytes)
    if not 1 <= bits <= MAX_BITS:
        raise SettingError(f"bits must be 1..{MAX_BITS}, got {bits}")


def _popcount(values: np.ndarray) -> int:
    return int(np.bitwise_count(values).sum(dtype=np.int64)) if values.size else 0


@dataclass
class _Counts:
    """Running totals of one run's events."""

    bit_errors: int = 0
    detected: int = 0
    undetected: int = 0
    frame_errors: int = 0


def _frame_trial(code: BlockCode, depth: int, lay: SegmentLayout, payload: bytes, chain: ChannelChain,
                 counts: _Counts, batches: Batches) -> int:
    """One frame: payload and its CRC-32C coded, sent through the channel, decoded, and
    what decoding left added to counts and batches. Returns the coded bytes sent."""
    frame_bytes = len(payload)
    message = payload + struct.pack(">I", crc32c(payload))
    coded = np.frombuffer(encode_segment(code, depth, message), np.uint8).copy()
    chain.apply(coded)
    decoded, status = decode_segment(code, depth, coded, len(message))
    # the container's check: the CRC-32C carried in the message against the decoded payload
    frame_failed = struct.unpack(">I", decoded[frame_bytes:])[0] != crc32c(decoded[:frame_bytes])
    counts.frame_errors += frame_failed
    failed = status == FAILED
    counts.detected += int(np.count_nonzero(failed))
    diff = np.bitwise_xor(np.frombuffer(decoded, np.uint8), np.frombuffer(message, np.uint8))
    wrong_bytes = np.flatnonzero(diff)
    if not wrong_bytes.size:
        batches.add_frame(failed, None, None, frame_failed)
        return coded.size
    counts.bit_errors += _popcount(diff[:frame_bytes])
    # message bit j of the segment belongs to codeword j // (message bits per codeword)
    bit_pos = (wrong_bytes[:, None] * 8 + np.arange(8)[None, :])[np.unpackbits(diff[wrong_bytes][:, None],
                                                                               axis=1).astype(bool)]
    wrong_blocks = np.unique(bit_pos // lay.block_message_bits)
    counts.undetected += int(np.count_nonzero(~failed[wrong_blocks]))
    batches.add_frame(failed, bit_pos[bit_pos < 8 * frame_bytes], wrong_blocks[~failed[wrong_blocks]], frame_failed)
    return coded.size


def simulate(code: str | BlockCode, depth: int = 1, channels: ChannelsArg = "bsc:p=1e-3",
             bits: int = 10 ** 7, seed: int | None = None, *, frame_bytes: int = DEFAULT_FRAME_BYTES,
             progress: Callable[[int], None] | None = None) -> SimulationResult:
    """Send at least `bits` random payload bits (whole frames) through code, depth and the
    channel chain; measure what decoding left. `progress(coded_bytes_done)` is called after
    every frame. The same seed gives the same result."""
    the_code = as_code(code)
    models = parse_channels(channels)
    check_arguments(models, depth, frame_bytes, bits)
    seed = fresh_seed() if seed is None else int(seed)
    chain = ChannelChain(models, seed)
    data_rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(DATA_STREAM,)))
    frames = -(-int(bits) // (8 * frame_bytes))
    lay = layout(the_code, depth, frame_bytes + CRC_BYTES)
    counts = _Counts()
    batches = Batches(lay, frame_bytes, memory_bits_of(models))
    done = 0
    for _ in range(frames):
        done += _frame_trial(the_code, depth, lay, data_rng.bytes(frame_bytes), chain, counts, batches)
        if progress is not None:
            progress(done)
    batches.finish()
    return _result(the_code, depth, models, seed, frame_bytes, frames, lay, chain, counts, batches)


def _result(code: BlockCode, depth: int, models: Sequence[ChannelModel], seed: int, frame_bytes: int, frames: int,
            lay: SegmentLayout, chain: ChannelChain, counts: _Counts, batches: Batches) -> SimulationResult:
    """The run's counts as rates with intervals, beside theory and the uncoded channel."""
    ledger = chain.ledger()
    changed = ledger.bits_flipped + ledger.total("bits_changed_by_substitution")
    blocks = frames * lay.blocks
    payload_bits = frames * frame_bytes * 8
    expected, uncoded = theory_for(code, depth, models, frame_bytes)
    memoryless = all(isinstance(m, BSC) for m in models)

    def rate(name: str, events: int, trials: int) -> Measured:
        if memoryless and name != "bits":  # independent codewords, independent frames: exact binomial
            return Measured.of(events, trials)
        return Measured.from_tally(batches.tallies[name])

    block_error = rate("blocks", counts.detected + counts.undetected, blocks)
    notes = []
    if not memoryless:
        notes.append(f"bursts and byte hits make failures cluster: intervals by batch means ({batches.describe()}; "
                     "Clopper-Pearson on the effective sample, Korn and Graubard 1998); design effect "
                     f"{block_error.design_effect:.2g} for the block error")
    notes.append(f"bit error interval: batch means ({batches.describe()}): the wrong bits of one codeword come "
                 "together")
    return SimulationResult(
        code=code.name or f"custom ({code.n},{code.k})", n=code.n, k=code.k, d=code.d, t=code.t, depth=depth,
        channels=tuple(m.spec for m in models), seed=seed, frame_bytes=frame_bytes, frames=frames, blocks=blocks,
        payload_bits=payload_bits, coded_bits=frames * lay.coded_bits,
        channel=Measured.of(changed, 8 * chain.bytes_in),
        bit_error=rate("bits", counts.bit_errors, payload_bits), block_error=block_error,
        detected=rate("detected", counts.detected, blocks), undetected=rate("undetected", counts.undetected, blocks),
        frame_error=rate("frames", counts.frame_errors, frames), theory=expected, uncoded=uncoded, notes=tuple(notes),
        tallies=batches.tallies)


def sweep(code: str | BlockCode, depth: int, channels: ChannelsArg, grid: str | tuple[str, Sequence[float]],
          bits: int = 10 ** 7, seed: int | None = None, *, frame_bytes: int = DEFAULT_FRAME_BYTES,
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


def planned_coded_bytes(code: str | BlockCode, depth: int, bits: int, points: int = 1,
                        frame_bytes: int = DEFAULT_FRAME_BYTES) -> int:
    """About how many coded bytes a run will push through the channel (for a progress bar)."""
    frames = -(-int(bits) // (8 * frame_bytes))
    return points * frames * layout(as_code(code), depth, frame_bytes + CRC_BYTES).coded_bytes
