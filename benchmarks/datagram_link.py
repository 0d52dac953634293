"""A seeded datagram link on 127.0.0.1: `bitmend encode --records line --repair 4/16 -o udp:`
through the lossy relay of tools/udp_relay.py (drops, duplicates, reorders) into
`bitmend decode udp:`; prints datagrams sent, what the relay did, and what the decoder
rebuilt and delivered.

    python benchmarks/datagram_link.py [--lines 400] [--repair 4/16] [--drop 0.05] [--seed 11]
"""

from __future__ import annotations

import argparse
import json
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tools"))
from udp_relay import Relay  # noqa: E402

BITMEND = [sys.executable, "-m", "bitmend"]


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--lines", type=int, default=400)
    ap.add_argument("--repair", default="4/16")
    ap.add_argument("--drop", type=float, default=0.05)
    ap.add_argument("--dup", type=float, default=0.05)
    ap.add_argument("--hold", type=float, default=0.1)
    ap.add_argument("--seed", type=int, default=11)
    args = ap.parse_args()
    lines = b"".join(f"2031-03-01T06:{i % 60:02d}Z gauge='Alder Ford' n={i:05d} stage_m=1.{i % 97:02d}\n".encode()
                     for i in range(args.lines))
    relay_port, decode_port = free_port(), free_port()
    with tempfile.TemporaryDirectory() as tmp:
        report, out = Path(tmp) / "r.jsonl", Path(tmp) / "out.txt"
        decoder = subprocess.Popen([*BITMEND, "decode", f"udp:127.0.0.1:{decode_port}", "--idle", "10", "--records",
                                    "line", "-o", str(out), "--report", str(report), "-q"], stderr=subprocess.PIPE)
        while b"listening" not in decoder.stderr.readline():
            pass
        relay = Relay(relay_port, decode_port, args.seed, args.drop, args.dup, args.hold)
        encoder = subprocess.Popen([*BITMEND, "encode", "--records", "line", "--frame-bytes", "256", "--repair",
                                    args.repair, "--max-delay", "inf", "-o", f"udp:127.0.0.1:{relay_port}"],
                                   stdin=subprocess.PIPE)
        encoder.stdin.write(lines)
        encoder.stdin.close()
        counts = relay.run(idle=3.0)
        encoder.wait(timeout=60)
        decoder.wait(timeout=60)
        summary = json.loads(report.read_text().splitlines()[-1])
        intact = out.read_bytes() == lines
    print(f"records {args.lines}, repair {args.repair}, relay seed {args.seed}: datagrams sent {counts['in']}, "
          f"dropped {counts['dropped']}, duplicated {counts['duplicated']}, held back {counts['reordered']}")
    print(f"decoder: frames {summary['frames']}, rebuilt {summary['rebuilt']}, lost {summary['lost']}, "
          f"duplicates dropped {summary['duplicates']}, reordered {summary['reordered']}, "
          f"repair frames used {summary['repair_frames']}; output equals input: {intact}")


if __name__ == "__main__":
    main()
