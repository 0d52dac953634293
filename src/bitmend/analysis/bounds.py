"""Classical bounds on binary block codes, for setting a code beside what is possible.

- Singleton bound: any (n, k) code has d <= n - k + 1 (codes that meet it are MDS; the
  only binary ones are trivial: repetition, single parity check, the whole space).
- Hamming (sphere-packing) bound: the 2^k spheres of radius t = floor((d - 1) / 2) around
  the codewords are disjoint, so 2^k * V(n, t) <= 2^n, i.e. V(n, t) <= 2^(n-k), where
  V(n, t) = sum_{i<=t} C(n, i) counts the words within distance t. A code that meets it
  with equality is perfect: every received word lies within t of exactly one codeword.

For a code over an alphabet of q symbols (q = 256 for Reed-Solomon over GF(2^8)) the
sphere holds V_q(n, t) = sum_{i<=t} C(n, i) (q-1)^i words and the bound reads
V_q(n, t) <= q^(n-k); every function takes q, 2 by default.

(MacWilliams & Sloane, The Theory of Error-Correcting Codes, ch. 1 and 11.) Plain integers
in, plain integers out, like the rest of `analysis`.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from math import comb


def singleton_bound(n: int, k: int) -> int:
    """The largest minimum distance any (n, k) code can have: n - k + 1."""
    _check(n, k)
    return n - k + 1


def sphere_volume(n: int, t: int, q: int = 2) -> int:
    """V_q(n, t): the number of words of length n within Hamming distance t of a given word."""
    if t < 0:
        return 0
    return sum(comb(n, i) * (q - 1) ** i for i in range(min(t, n) + 1))


def hamming_bound_t(n: int, k: int, q: int = 2) -> int:
    """The largest t for which V_q(n, t) <= q^(n-k): no (n, k) code corrects more errors."""
    _check(n, k)
    cosets = q ** (n - k)
    t = 0
    while t < n and sphere_volume(n, t + 1, q) <= cosets:
        t += 1
    return t


def hamming_bound_d(n: int, k: int, q: int = 2) -> int:
    """The largest minimum distance the Hamming bound allows: t = floor((d-1)/2) <= t_max
    gives d <= 2 t_max + 2, and no d exceeds the Singleton bound."""
    return min(2 * hamming_bound_t(n, k, q) + 2, singleton_bound(n, k))


@dataclass(frozen=True)
class CodeBounds:
    """A code's (n, k, d) set beside the Singleton and Hamming bounds."""

    n: int
    k: int
    d: int
    t: int  # floor((d - 1) / 2)
    singleton_d: int  # d <= n - k + 1
    meets_singleton: bool  # MDS
    sphere_volume: int  # V_q(n, t)
    cosets: int  # q^(n-k), the number of syndromes
    hamming_t: int  # the largest t the Hamming bound allows for (n, k)
    hamming_d: int  # the largest d it allows
    perfect: bool  # V_q(n, t) == q^(n-k)
    q: int = 2  # alphabet size

    @property
    def sphere_fill(self) -> float:
        """V(n, t) / 2^(n-k): the share of syndromes that bounded-distance decoding uses
        (1 for a perfect code; the rest are detected, uncorrectable patterns)."""
        return self.sphere_volume / self.cosets

    def to_dict(self) -> dict:
        return {**asdict(self), "sphere_fill": self.sphere_fill}


def code_bounds(n: int, k: int, d: int, q: int = 2) -> CodeBounds:
    """Bounds for an (n, k) code of minimum distance d over q symbols."""
    _check(n, k)
    if not 1 <= d <= n:
        raise ValueError(f"minimum distance must be 1..n = {n}, got {d}")
    singleton = singleton_bound(n, k)
    if d > singleton:
        raise ValueError(f"no ({n}, {k}) code has d = {d}: the Singleton bound is {singleton}")
    t = (d - 1) // 2
    volume = sphere_volume(n, t, q)
    cosets = q ** (n - k)
    if volume > cosets:
        raise ValueError(f"no ({n}, {k}) code has d = {d}: V(n, t) = {volume} exceeds q^(n-k) = {cosets}")
    return CodeBounds(n, k, d, t, singleton, d == singleton, volume, cosets, hamming_bound_t(n, k, q),
                      hamming_bound_d(n, k, q), volume == cosets, q)


def _check(n: int, k: int) -> None:
    if not 1 <= k <= n:
        raise ValueError(f"need 1 <= k <= n, got n = {n}, k = {k}")
