"""Shared helpers for the bitmend test suite: bit flips, frame boundaries, CLI runs."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from bitmend.codes.catalog import code_names, get_code
from bitmend.codes.linear import BinaryLinearCode
from bitmend.container import format as fmt

CATALOG_CODES = tuple(code_names())
# ALL_CODES: every catalog code of the generic binary linear engine (ids 1-11), the set the
# engine-wide tests run over; BCH and Reed-Solomon codes have test_bch.py and test_rs.py
ALL_CODES = tuple(name for name in CATALOG_CODES if isinstance(get_code(name), BinaryLinearCode))
BCH_CODES = tuple(name for name in CATALOG_CODES if name.startswith("bch-"))
RS_CODES = tuple(name for name in CATALOG_CODES if name.startswith("rs-"))
SECDED_CODES = ("secded-8-4", "secded-16-11", "secded-39-32", "secded-72-64")
HAMMING_CODES = ("hamming-7-4", "hamming-15-11", "hamming-31-26", "hamming-63-57")
REPO_ROOT = Path(__file__).resolve().parents[1]


# ---- bit surgery ------------------------------------------------------------------------

def flip_bits(data: bytes, positions) -> bytes:
    """data with the bits at the given stream positions inverted (bit 0 = MSB of byte 0)."""
    out = bytearray(data)
    for p in positions:
        out[p >> 3] ^= 0x80 >> (p & 7)
    return bytes(out)


def codeword_error_bits(code, depth: int, blocks: int, errors_of, rng, start_bit: int = 0) -> list[int]:
    """Stream positions of errors_of(b) distinct bit errors in each block (codeword) b of an
    interleaved segment starting at start_bit: bit j of codeword i of group g is stream bit
    g D n + j D + i (the interleave rule, docs/FORMAT.md). Draws rng.choice per block in
    order, so a seed gives the same pattern wherever it is used."""
    positions: list[int] = []
    for block in range(blocks):
        group, i = divmod(block, depth)
        bits = rng.choice(code.n, size=errors_of(block), replace=False)
        positions += (start_bit + group * depth * code.n + bits * depth + i).tolist()
    return positions


def flip_run(data: bytes, start_bit: int, length: int) -> bytes:
    """data with `length` consecutive bits inverted from start_bit on (a solid burst)."""
    return flip_bits(data, range(start_bit, start_bit + length))


def delete_bit(data: bytes, position: int) -> bytes:
    """data with one bit removed (a bit slip); the stream is padded with a zero bit at the end."""
    value = int.from_bytes(data, "big")
    total = 8 * len(data)
    high = value >> (total - position)  # bits before position
    low = value & ((1 << (total - position - 1)) - 1)  # bits after it
    joined = (high << (total - position - 1)) | low
    return (joined << 1).to_bytes(len(data), "big")


def insert_bit(data: bytes, position: int, bit: int = 1) -> bytes:
    """data with one extra bit inserted before position; the stream grows by one byte
    (seven zero bits of padding at the very end)."""
    value = int.from_bytes(data, "big")
    total = 8 * len(data)
    high = value >> (total - position)
    low = value & ((1 << (total - position)) - 1)
    joined = (((high << 1) | bit) << (total - position)) | low
    return (joined << 7).to_bytes(len(data) + 1, "big")


def hamming_distance(a: bytes, b: bytes) -> int:
    x = np.frombuffer(a, np.uint8) ^ np.frombuffer(b, np.uint8)
    return int(np.unpackbits(x).sum())


# ---- frames ---------------------------------------------------------------------------------

@dataclass(frozen=True)
class FrameSpan:
    """Where one frame of a clean container lies, and its parts."""

    seq: int
    start: int  # byte offset of the marker
    size: int  # whole frame in bytes
    length: int  # payload bytes carried

    @property
    def end(self) -> int:
        return self.start + self.size

    @property
    def header_start(self) -> int:
        return self.start + len(fmt.MARKER_BYTES)

    @property
    def payload_start(self) -> int:
        return self.header_start + fmt.HEADER_BYTES

    @property
    def payload_end(self) -> int:
        return self.end - fmt.HEADER_BYTES

    @property
    def copy_start(self) -> int:
        return self.end - fmt.HEADER_BYTES


def frame_spans(container: bytes) -> list[FrameSpan]:
    """Walk an undamaged container frame by frame using the decoded headers."""
    spans = []
    offset = 0
    while offset < len(container):
        header = fmt.decode_header(container[offset + 8: offset + 8 + fmt.HEADER_BYTES])
        assert header is not None, f"no readable header at byte {offset}"
        spans.append(FrameSpan(header.seq, offset, header.frame_bytes, header.length))
        offset += header.frame_bytes
    assert offset == len(container), "frames do not tile the container exactly"
    return spans


def payload_slices(spans: list[FrameSpan]) -> list[slice]:
    """The slice of the original data that each frame carries."""
    out, pos = [], 0
    for s in spans:
        out.append(slice(pos, pos + s.length))
        pos += s.length
    return out


def random_bytes(size: int, seed: int) -> bytes:
    return np.random.default_rng(seed).integers(0, 256, size, dtype=np.uint8).tobytes()


# ---- decode reports ------------------------------------------------------------------------

FRAME_KEYS = {"type", "seq", "offset", "status", "blocks", "corrected_blocks", "corrected_symbols",
              "failed_blocks", "crc_ok"}
SUMMARY_KEYS = {"type", "frames", "clean", "corrected", "damaged", "lost", "bytes_out", "corrected_symbols",
                "failed_blocks", "complete"}


def check_report_lines(text: str, data_out: bytes) -> list[dict]:
    """Assert the JSON Lines report contract and return the parsed objects."""
    lines = text.splitlines()
    objects = [json.loads(line) for line in lines]
    frames, summary = objects[:-1], objects[-1]
    assert summary["type"] == "summary" and SUMMARY_KEYS <= set(summary)
    for f in frames:
        assert f["type"] == "frame" and FRAME_KEYS <= set(f)
        assert f["status"] in ("clean", "corrected", "damaged", "lost", "rebuilt")
        assert isinstance(f["failed_blocks"], list)
        assert (f["offset"] is None) == (f["status"] in ("lost", "rebuilt"))  # (rebuilt: never arrived whole)
        assert f["crc_ok"] == (f["status"] in ("clean", "corrected", "rebuilt"))
    assert summary["frames"] == len(frames)
    for status in ("clean", "corrected", "damaged", "lost", "rebuilt"):
        assert summary.get(status, 0) == sum(f["status"] == status for f in frames)
    assert (summary["clean"] + summary["corrected"] + summary["damaged"] + summary["lost"] + summary.get("rebuilt", 0)
            == summary["frames"])
    assert summary["corrected_symbols"] == sum(f["corrected_symbols"] for f in frames)
    assert summary["failed_blocks"] == sum(len(f["failed_blocks"]) for f in frames)
    assert summary["bytes_out"] == len(data_out)
    if summary["damaged"] or summary["lost"]:
        assert summary["complete"] is False
    if "end_seen" in summary and not summary["end_seen"]:
        assert summary["complete"] is False
    return objects


# ---- command line -----------------------------------------------------------------------------

def bitmend_command() -> list[str]:
    return [sys.executable, "-m", "bitmend"]


@dataclass
class Run:
    code: int
    out: bytes
    err: str

    @property
    def err_lines(self) -> list[str]:
        return [line for line in self.err.splitlines() if line.strip()]


def run_cli(*args: str, stdin: bytes = b"", cwd: Path | None = None) -> Run:
    """Run `python -m bitmend args...` with real pipes; stdin bytes in, stdout bytes out."""
    env = dict(os.environ)
    env.pop("COLUMNS", None)
    proc = subprocess.run([*bitmend_command(), *args], input=stdin, stdout=subprocess.PIPE,
                          stderr=subprocess.PIPE, cwd=cwd, env=env, timeout=120)
    return Run(proc.returncode, proc.stdout, proc.stderr.decode("utf-8", "replace"))


@pytest.fixture(scope="session")
def gauge_log() -> bytes:
    """Invented river-gauge telemetry, a few kilobytes of text lines."""
    rng = np.random.default_rng(7)
    stations = ["Alder Ford", "Brackwater Weir", "Cinder Bend", "Dunmoss Bridge", "Eelpool Sluice"]
    lines = []
    for i in range(160):
        station = stations[i % len(stations)]
        stage = 0.4 + rng.random() * 3.1
        flow = stage ** 1.6 * 11.7
        lines.append(f"2031-03-{1 + i // 48:02d}T{(i % 48) // 2:02d}:{30 * (i % 2):02d}Z "
                     f"gauge={station!r} stage_m={stage:.3f} flow_m3s={flow:.2f} batt_v={3.3 + rng.random() / 2:.2f}")
    return ("\n".join(lines) + "\n").encode()
