"""Binary symmetric channel: every bit flips independently with probability p."""

from __future__ import annotations

import numpy as np


def flip_bits(data: bytes, p: float, rng: np.random.Generator) -> tuple[bytes, int]:
    """data with each bit flipped with probability p; returns (damaged bytes, flips).

    Flip positions are drawn as geometric gaps between successive flips, so the cost
    follows the number of flips, not the number of bits."""
    if not 0.0 <= p <= 1.0:
        raise ValueError(f"flip probability must be in [0, 1], got {p}")
    nbits = 8 * len(data)
    if nbits == 0 or p == 0.0:
        return bytes(data), 0
    expected = nbits * p
    draws = int(expected + 6 * np.sqrt(expected) + 16)
    positions = np.cumsum(rng.geometric(p, size=draws)) - 1
    while positions[-1] < nbits:  # rare: draw more gaps until past the end
        more = np.cumsum(rng.geometric(p, size=draws)) + positions[-1]
        positions = np.concatenate([positions, more])
    positions = positions[positions < nbits]
    out = np.frombuffer(data, dtype=np.uint8).copy()
    np.bitwise_xor.at(out, positions >> 3, (0x80 >> (positions & 7)).astype(np.uint8))
    return out.tobytes(), int(positions.size)
