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
  split into detected (flagged uncorrectable) and undetected (message wrong, not flagged: a
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

Theory beside them where a closed form exists (`bitmend.code_theory`): bounded-distance decoding on
a binary symmetric channel (block error exact; detected/undetected split from the weight
distribution; bit error and frame error as approximations), the exact block error on a
Gilbert-Elliott chain at the given depth, and on byte substitutions at depth >= 8. The
uncoded line is the same channel without coding: bit error = the channel's flip rate, a
k-bit block or a frame of raw data hit at least once.

Only models that damage bits in place (bsc, burst, bytes) can run here; drop and slip act
on frames and bit timing, which a codeword-level trial does not model: test those with
`bitmend inject` and `bitmend decode`.

Modules: `results` (Measured, SimulationResult, SweepResult, CSV), `trials` (the runs),
`batches` (the batches behind the clustered intervals), `text` (the human reports).
"""

from __future__ import annotations

from bitmend.channel.spec import parse_sweep
from bitmend.code_theory import Expected, combined_flip_rate, theory_for
from bitmend.simulate.batches import MEMORY_SPANS, Batches
from bitmend.simulate.results import (CONFIDENCE, CSV_COLUMNS, RATES, Measured, SimulationResult, SweepResult,
                                      to_csv)
from bitmend.simulate.text import ROW_LABELS, format_result, format_sweep
from bitmend.simulate.trials import (DATA_STREAM, MAX_BITS, check_arguments, check_channels, planned_coded_bytes,
                                     simulate, sweep)

__all__ = ["CONFIDENCE", "CSV_COLUMNS", "DATA_STREAM", "MAX_BITS", "MEMORY_SPANS", "RATES", "ROW_LABELS", "Batches",
           "Expected", "Measured", "SimulationResult", "SweepResult", "check_arguments", "check_channels",
           "combined_flip_rate", "format_result", "format_sweep", "parse_sweep", "planned_coded_bytes", "simulate",
           "sweep", "theory_for", "to_csv"]
