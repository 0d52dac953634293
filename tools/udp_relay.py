"""A seeded, lossy datagram relay on this machine, for proving a link end to end.

    python tools/udp_relay.py --listen 9100 --forward 9200 --drop 0.1 --dup 0.1 --hold 0.2 --seed 1

It forwards datagrams from 127.0.0.1:LISTEN to 127.0.0.1:FORWARD, dropping each with
probability --drop, sending it twice with probability --dup, and holding it back until
after the next one (reordering) with probability --hold; the same seed makes the same
choices. It stops --idle seconds after the last datagram (the clock starts with the first
one) or after --limit seconds in all, and prints what it did as JSON. Loopback only.
"""

from __future__ import annotations

import argparse
import json
import random
import select
import socket
import time

LOOPBACK = "127.0.0.1"


class Relay:
    """Drops, duplicates and reorders datagrams by a seeded draw, then forwards them."""

    def __init__(self, listen: int, forward: int, seed: int, drop: float, dup: float, hold: float) -> None:
        self.rng = random.Random(seed)
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        self.sock.bind((LOOPBACK, listen))
        self.forward = (LOOPBACK, forward)
        self.drop, self.dup, self.hold = drop, dup, hold
        self.counts = {"in": 0, "dropped": 0, "duplicated": 0, "reordered": 0, "out": 0}

    def run(self, idle: float = 3.0, limit: float = 60.0) -> dict:
        """Relay until `idle` seconds pass after the last datagram, or `limit` in all."""
        held: list[bytes] = []
        start = time.monotonic()
        last = None
        try:
            while (last is None or time.monotonic() - last < idle) and time.monotonic() - start < limit:
                ready, _, _ = select.select([self.sock], [], [], 0.2)
                if not ready:
                    continue
                data = self.sock.recv(70000)
                last = time.monotonic()
                self.counts["in"] += 1
                if self.rng.random() < self.drop:
                    self.counts["dropped"] += 1
                    continue
                copies = [data, data] if self.rng.random() < self.dup else [data]
                self.counts["duplicated"] += len(copies) - 1
                if self.rng.random() < self.hold:
                    held += copies  # sent after the next datagram: out of order
                    self.counts["reordered"] += 1
                    continue
                for d in copies + held:
                    self.sock.sendto(d, self.forward)
                    self.counts["out"] += 1
                held = []
            for d in held:
                self.sock.sendto(d, self.forward)
                self.counts["out"] += 1
        finally:
            self.sock.close()
        return self.counts


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--listen", type=int, required=True)
    ap.add_argument("--forward", type=int, required=True)
    ap.add_argument("--drop", type=float, default=0.0)
    ap.add_argument("--dup", type=float, default=0.0)
    ap.add_argument("--hold", type=float, default=0.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--idle", type=float, default=3.0)
    ap.add_argument("--limit", type=float, default=600.0)
    args = ap.parse_args()
    counts = Relay(args.listen, args.forward, args.seed, args.drop, args.dup, args.hold).run(args.idle, args.limit)
    print(json.dumps(counts))


if __name__ == "__main__":
    main()
