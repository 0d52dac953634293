"""How the container's 64-bit sync marker was chosen (re-run to check; prints the winner).

    python tools/choose_marker.py [--trials 30000] [--seed 20261201]

Candidates are drawn from a seeded generator. A candidate must have 32 ones and no run of
five equal bits (no long runs to mistake for idle or erased media). Its score is the
worst case, over shifts s = 1..63, of how far the marker is from itself shifted by s bits:
the mismatches in the overlapping 64 - s bits plus s/2 for the s bits that come from
unknown neighbouring data. A high score keeps a search from locking one to 63 bits off.
The container uses the best of 30,000 trials with seed 20261201: 0xA4C95BDD8544AE53,
score 28.5.
"""

from __future__ import annotations

import argparse

import numpy as np


def bits(value: int) -> list[int]:
    return [(value >> (63 - i)) & 1 for i in range(64)]


def score(value: int) -> float:
    b = bits(value)
    return min(sum(b[i] != b[i + s] for i in range(64 - s)) + s / 2 for s in range(1, 64))


def acceptable(value: int) -> bool:
    text = "".join(map(str, bits(value)))
    return text.count("1") == 32 and "00000" not in text and "11111" not in text


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=30000)
    ap.add_argument("--seed", type=int, default=20261201)
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    best = (-1.0, 0)
    for _ in range(args.trials):
        value = int(rng.integers(0, 2**63)) * 2 + int(rng.integers(0, 2))
        if acceptable(value) and score(value) > best[0]:  # ties keep the earliest draw
            best = (score(value), value)
    print(f"0x{best[1]:016X} score {best[0]}")


if __name__ == "__main__":
    main()
