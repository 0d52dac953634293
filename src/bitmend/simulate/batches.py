"""Per-batch totals behind simulate's clustered intervals (`analysis.intervals.BatchTally`):
how a run is cut into batches that are close to independent, from the segment layout and
the channel's memory."""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from bitmend.analysis import intervals
from bitmend.channel.models import ChannelModel, GilbertElliott
from bitmend.interleave import SegmentLayout
from bitmend.wording import counted

MEMORY_SPANS = 20  # a batch spans at least this many of the chain's correlation lengths 1/(enter+leave)


class Batches:
    """Per-batch totals for the clustered intervals (`analysis.intervals.BatchTally`).

    Inside a frame a batch is a run of whole interleaved groups (codeword c of a segment is
    in group c // D) spanning at least the channel's memory in coded bits; frames are
    batched in runs spanning the same. Failures inside a batch may cluster; batches are
    close to independent. Memory is constant: only sums are kept."""

    def __init__(self, lay: SegmentLayout, frame_bytes: int, memory_bits: float) -> None:
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
        return (f"batches of {counted(self.groups, 'interleaved group')} of {counted(self.depth, 'codeword')}, "
                f"and of {counted(self.frames_per_batch, 'frame')} for the frame error")


def memory_bits_of(models: Sequence[ChannelModel]) -> float:
    """Channel bits over which the state is remembered: MEMORY_SPANS correlation lengths
    1/(enter+leave) of each Gilbert-Elliott chain (its state's correlation falls as
    (1-enter-leave)^k); 0 for memoryless models (byte substitutions are independent per byte,
    and frames hold whole bytes)."""
    spans = [MEMORY_SPANS / (m.enter + m.leave) if m.enter + m.leave > 0 else math.inf
             for m in models if isinstance(m, GilbertElliott)]
    return max(spans, default=0.0)
