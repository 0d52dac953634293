"""The main job end to end on the bundled sample: encode, inject faults, decode, verify.

The channel is applied by the same machinery as `bitmend inject`, and its ledger is shown
beside the decoder's report, so the reader can check one against the other: every bit the
channel flipped inside a coded payload should come back as a corrected bit (when no
codeword got more than t of them), and flips in sync markers and headers are absorbed by
the header code and the marker tolerance without being counted as payload corrections.
"""

from __future__ import annotations

import hashlib
import io
import time
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from bitmend.api import Decoder, Encoder
from bitmend.channel.ledger import Ledger
from bitmend.channel.models import ChannelModel, FrameDrop
from bitmend.channel.spec import parse_channels
from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH, get_code
from bitmend.container import format as fmt
from bitmend.container.reader import FrameScanner
from bitmend.inject import inject_bytes
from bitmend.report import FrameReport, Summary
from bitmend.wording import counted_with_commas

SAMPLE_NAME = "gauge-telemetry.log"


def find_sample() -> Path | None:
    """samples/gauge-telemetry.log in the working directory or beside the source tree."""
    here = Path(__file__).resolve()
    for base in (Path.cwd(), *here.parents):
        candidate = base / "samples" / SAMPLE_NAME
        if candidate.is_file():
            return candidate
    return None


def payload_spans(container: bytes) -> np.ndarray:
    """(start bit, end bit) of every coded payload in a clean container, as an (F, 2) array."""
    spans = []
    for frame in FrameScanner(io.BytesIO(container), decode_payloads=False).frames():
        start = frame.bit_offset + 8 * (len(fmt.MARKER_BYTES) + fmt.HEADER_BYTES)
        spans.append((start, start + 8 * frame.header.coded_bytes))
    return np.array(spans, dtype=np.int64).reshape(-1, 2)


def flips_in_payload(ledger: Ledger, spans: np.ndarray) -> tuple[int, int] | None:
    """(flips inside coded payloads, flips elsewhere), from the ledger's positions; None when
    the positions are not comparable (a model that moves data, or too many to keep)."""
    positions = []
    for stage in ledger.stages:
        if any(stage.get(name) for name in ("bits_inserted", "bits_deleted", "frames_dropped")):
            return None
        if stage.get("bits_changed"):  # byte substitutions: their positions are bytes
            return None
        if "flip_positions" in stage:
            if stage["flip_positions"] is None:
                return None
            positions.extend(stage["flip_positions"])
    pos = np.array(sorted(positions), dtype=np.int64)
    i = np.searchsorted(spans[:, 0], pos, side="right") - 1
    inside = (i >= 0) & (pos < spans[np.maximum(i, 0), 1])
    return int(inside.sum()), int((~inside).sum())


DEMO_REPAIR = "4/16"  # used when the demo's channel drops frames
DEMO_REPAIR_FRAME_BYTES = 1024



def _seqs(values: list[int]) -> str:
    if not values:
        return "none"
    shown = ", ".join(map(str, values[:12]))
    return shown + (f" and {len(values) - 12} more" if len(values) > 12 else "")


def run_demo(sample: str | None, flip_rate: float, seed: int, say: Callable[[str], None],
             channels: Sequence[str | ChannelModel] | None = None) -> bool:
    """Run the demo, printing with say; True if the output equals the input. The channel is
    a BSC with flip_rate unless channels (SPECs or models, as for inject) are given."""
    models = parse_channels(channels if channels else f"bsc:p={flip_rate!r}")
    path = Path(sample) if sample else find_sample()
    if path is None:
        raise FileNotFoundError(2, "bundled sample not found; pass --sample FILE", f"samples/{SAMPLE_NAME}")
    data = path.read_bytes()
    say(f"sample     {path} ({len(data):,} bytes of river-gauge telemetry)")
    started = time.perf_counter()
    # a channel that drops whole frames: smaller frames and repair frames across them
    repair = DEMO_REPAIR if any(isinstance(m, FrameDrop) for m in models) else None
    container = _encode(data, repair, say)
    damaged, ledger = inject_bytes(container, models, seed)
    split = _say_injected(container, models, ledger, say)
    frames: list[FrameReport] = []
    with Decoder(io.BytesIO(damaged), "keep", on_frame=frames.append) as dec:
        recovered = dec.read()
        summary = dec.summary
    elapsed = time.perf_counter() - started
    _say_decoded(summary, frames, say)
    if split is not None:
        failed = sum(f.failed_count or len(f.failed_blocks) for f in frames)
        agree = "equal" if split[0] == summary.corrected_symbols and not failed else "differ"
        say(f"compare    payload flips in the ledger ({split[0]:,}) and bits corrected in the report "
            f"({summary.corrected_symbols:,}) {agree}")
    elif ledger.frames_dropped:
        _compare_drops(container, ledger, frames, summary, repair, say)
    _say_worst_frame(frames, say)
    same = recovered == data
    digest = hashlib.sha256(recovered).hexdigest()[:16]
    say(f"verify     sha256 {digest}… {'identical to the input' if same else 'DIFFERS from the input'} "
        f"({elapsed:.2f} s)")
    return same and summary.complete


def _encode(data: bytes, repair: str | None, say: Callable[[str], None]) -> bytes:
    """The demo's container: the default code and depth; smaller frames with repair when the
    channel drops frames."""
    frame_bytes = DEMO_REPAIR_FRAME_BYTES if repair else fmt.DEFAULT_FRAME_BYTES
    sink = io.BytesIO()
    with Encoder(sink, DEFAULT_CODE, DEFAULT_DEPTH, frame_bytes, repair=repair) as enc:
        enc.write(data)
    container = sink.getvalue()
    code = get_code(DEFAULT_CODE)
    say(f"encode     {DEFAULT_CODE} (n={code.n}, k={code.k}, d={code.d}, corrects {code.t}/codeword), "
        f"depth {DEFAULT_DEPTH}: {len(container):,} bytes, overhead {len(container) / len(data) - 1:.1%}")
    if repair:
        repairs, group = repair.split("/")
        say(f"           frames of {frame_bytes:,} bytes with repair {repair}: {repairs} repair frames "
            f"after every {group} data frames rebuild any {repairs} lost of the group")
    return container


def _say_injected(container: bytes, models: Sequence[ChannelModel], ledger: Ledger,
                  say: Callable[[str], None]) -> tuple[int, int] | None:
    """The inject lines; returns (flips in payloads, flips in markers and headers) when the
    channel only flipped bits, else None."""
    say(f"inject     {' then '.join(m.spec for m in models)}, seed {ledger.seed}")
    say(f"  ledger   {ledger.one_line()}")
    split = flips_in_payload(ledger, payload_spans(container))
    if split is not None:
        say(f"           {split[0]:,} in coded payloads, {split[1]:,} in sync markers and headers")
    return split


def _say_decoded(summary: Summary, frames: Sequence[FrameReport], say: Callable[[str], None]) -> None:
    failed = sum(f.failed_count or len(f.failed_blocks) for f in frames)
    say(f"decode     {summary.one_line().split(': ', 1)[1]}")
    say(f"  report   {counted_with_commas(summary.corrected_symbols, 'bit')} corrected in "
        f"{counted_with_commas(sum(f.corrected_blocks for f in frames), 'codeword')}, "
        f"{counted_with_commas(failed, 'codeword')} uncorrectable, {counted_with_commas(summary.lost, 'frame')} lost")


def _compare_drops(container: bytes, ledger: Ledger, frames: Sequence[FrameReport], summary: Summary,
                   repair: str | None, say: Callable[[str], None]) -> None:
    """The frames the channel dropped beside the frames the decoder reports lost or rebuilt."""
    kinds = {f.offset: f.header.repair for f in FrameScanner(io.BytesIO(container), decode_payloads=False).frames()}
    drops_made = [f for stage in ledger.stages for f in (stage.get("dropped_frames") or [])]
    dropped = [f["seq"] for f in drops_made if not kinds.get(f["offset"])]
    lost = [f.seq for f in frames if f.status == "lost"]
    rebuilt = [f.seq for f in frames if f.status == "rebuilt"]
    if repair:
        say(f"  repair   {counted_with_commas(len(drops_made) - len(dropped), 'repair frame')} dropped; data frames "
            f"rebuilt from repair frames: {_seqs(rebuilt)}")
    received = [f.seq for f in frames if f.status != "lost"]
    tail = "" if summary.end_seen else "; the end of the stream is missing" + (
        " (its last frame was dropped)" if dropped and (not received or max(dropped) > max(received)) else "")
    say(f"compare    data frames dropped in the ledger: {_seqs(dropped)}; lost in the report: "
        f"{_seqs(lost)}{tail}")


def _say_worst_frame(frames: Sequence[FrameReport], say: Callable[[str], None]) -> None:
    fixed = [f for f in frames if f.status == "corrected"]
    if fixed:
        worst = max(fixed, key=lambda f: f.corrected_symbols)
        say(f"           e.g. frame {worst.seq} at byte {worst.offset}: "
            f"{counted_with_commas(worst.corrected_symbols, 'bit')} corrected in {worst.corrected_blocks} of "
            f"{counted_with_commas(worst.blocks, 'codeword')}")
