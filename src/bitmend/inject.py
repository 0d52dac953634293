"""Fault injection on byte streams: read, damage through a channel chain, write, keep a ledger.

    with open("log.bmd", "rb") as src, open("hit.bmd", "wb") as dst:
        ledger = inject(src, dst, ["bsc:p=1e-3", "drop:p=0.01"], seed=7)
    data, ledger = inject_bytes(blob, "burst:enter=1e-4,leave=0.1,bad=0.5", seed=7)

Memory stays bounded whatever the stream's size; the same seed gives the same output
whatever the read size. The models are in `bitmend.channel`; this module adds what they
cannot have at their layer: the container reader that finds frames for `drop`.
"""

from __future__ import annotations

import io
from typing import BinaryIO, Callable, Iterator, Sequence

from bitmend.channel.chain import ChannelChain
from bitmend.channel.ledger import Ledger
from bitmend.channel.models import ChannelModel
from bitmend.container import format as fmt
from bitmend.container.reader import LOOKBACK_BITS, READ_CHUNK, SEARCH_PIECE, FrameScanner

CHUNK_BYTES = 1 << 20  # read size


class ContainerFrames:
    """Frame finder for `drop`: the container reader's header decoding (payloads are not
    decoded), frames named as (bit offset, bit length, sequence number)."""

    #: how far behind its read position the reader may still find a frame start: its
    #: look-back window plus a largest frame and the read-ahead of a search
    margin_bytes = LOOKBACK_BITS // 8 + fmt.MAX_FRAME_WIRE_BYTES + 2 * READ_CHUNK + SEARCH_PIECE

    def frames(self, source: BinaryIO) -> Iterator[tuple[int, int, int]]:
        for frame in FrameScanner(source, decode_payloads=False).frames():
            yield frame.bit_offset, 8 * frame.header.frame_bytes, frame.header.seq


def make_chain(channels: str | ChannelModel | Sequence[str | ChannelModel], seed: int | None = None) -> ChannelChain:
    """A channel chain that can drop container frames."""
    return ChannelChain(channels, seed, finder=ContainerFrames())


def inject(source: BinaryIO, sink: BinaryIO, channels: str | ChannelModel | Sequence[str | ChannelModel],
           seed: int | None = None, *, chunk_bytes: int = CHUNK_BYTES,
           progress: Callable[[int], None] | None = None) -> Ledger:
    """Copy source to sink through the channel chain; the ledger of what was done.
    progress(bytes read so far) is called after every read."""
    return run_chain(make_chain(channels, seed), source, sink, chunk_bytes=chunk_bytes, progress=progress)


def run_chain(chain: ChannelChain, source: BinaryIO, sink: BinaryIO, *, chunk_bytes: int = CHUNK_BYTES,
              progress: Callable[[int], None] | None = None) -> Ledger:
    """`inject` through a chain the caller made (`make_chain`), so that `chain.ledger()` still
    says what was done if the run stops early (a closed pipe, a signal)."""

    def chunks() -> Iterator[bytearray]:
        done = 0
        while True:
            block = bytearray(chunk_bytes)
            # readinto1: what the source holds now (a live pipe's bytes pass on at once)
            reader = getattr(source, "readinto1", None) or getattr(source, "readinto", None)
            got = reader(block) if reader is not None else None
            if got is None:
                data = source.read(chunk_bytes)
                block, got = bytearray(data), len(data)
            if not got:
                return
            del block[got:]
            done += got
            yield block
            if progress is not None:
                progress(done)

    def emit(data) -> None:
        sink.write(data.data)
        flush = getattr(sink, "flush", None)
        if flush is not None:
            flush()  # damage passes on as it comes: a reader downstream sees it without waiting

    return chain.run(chunks(), emit)


def inject_bytes(data: bytes, channels: str | ChannelModel | Sequence[str | ChannelModel],
                 seed: int | None = None, *, chunk_bytes: int = CHUNK_BYTES) -> tuple[bytes, Ledger]:
    """(damaged copy of data, ledger)."""
    out = io.BytesIO()
    ledger = inject(io.BytesIO(data), out, channels, seed, chunk_bytes=chunk_bytes)
    return out.getvalue(), ledger
