"""Binary symmetric channel: every bit flips independently with probability p."""

from __future__ import annotations

import numpy as np


def flip_bits(data: bytes, p: float, rng: np.random.Generator) -> tuple[bytes, int]:
    """data with each bit flipped independently with probability p; (damaged bytes, flips).

    Exact BSC sampling at a cost that follows the number of flips: the count is drawn
    from Binomial(8 * len(data), p) and that many distinct positions uniformly."""
    if not 0.0 <= p <= 1.0:
        raise ValueError(f"flip probability must be in [0, 1], got {p}")
    nbits = 8 * len(data)
    count = int(rng.binomial(nbits, p)) if nbits else 0
    if count == 0:
        return bytes(data), 0
    positions = rng.choice(nbits, size=count, replace=False, shuffle=False)
    out = np.frombuffer(data, dtype=np.uint8).copy()
    np.bitwise_xor.at(out, positions >> 3, (0x80 >> (positions & 7)).astype(np.uint8))
    return out.tobytes(), count
