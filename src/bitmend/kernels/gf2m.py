"""Arithmetic in GF(2^m) (3 <= m <= 8) and the set-up algebra of BCH and Reed-Solomon codes.

A field element is an integer 0 .. 2^m - 1 whose bit i is the coefficient of x^i in the
polynomial basis modulo a primitive polynomial p(x) of degree m; alpha = x (the element 2)
is a primitive element, so every non-zero element is alpha^e for one e in 0 .. 2^m - 2.
The field is built from p(x) alone: exponent and logarithm tables by repeated
multiplication by x (which also proves p(x) primitive), and a full 2^m x 2^m product
table (64 KiB for m = 8) that the kernels use for every multiplication.

Set-up algebra (done once per code, not on a hot path):

- cyclotomic cosets C_s = {s 2^i mod 2^m - 1} and the minimal polynomial of alpha^s,
  M_s(x) = prod_{j in C_s} (x - alpha^j), multiplied out in GF(2^m); its coefficients
  come out in {0, 1};
- the generator of the binary narrow-sense BCH code of designed distance 2t + 1:
  g(x) = lcm(M_1, M_2, ..., M_2t) = the product of the distinct M_s for odd s < 2t;
- the generator of a Reed-Solomon code, g(x) = prod_{j=c}^{c+r-1} (x - alpha^j);
- the tables of the shift-register remainder used by the encoders and the syndrome
  check (see `register_table`).

Binary polynomials are Python integers with bit i the coefficient of x^i. Polynomials
over GF(2^m) are lists or arrays of field elements, highest degree first (the order in
which codeword symbols are sent).
"""

from __future__ import annotations

from functools import cached_property, lru_cache

import numpy as np

# Primitive polynomials p(x) (bit i = coefficient of x^i): x^3+x+1, x^4+x+1, x^5+x^2+1,
# x^6+x+1, x^7+x^3+1, x^8+x^4+x^3+x^2+1. These are the polynomials of the BCH tables in
# Lin & Costello, Error Control Coding (2nd ed.), appendices B and C; galois uses the same
# ones by default for its BCH codes, and 0x11D is its default GF(2^8) as well.
PRIMITIVE_POLYNOMIALS = {3: 0b1011, 4: 0x13, 5: 0x25, 6: 0x43, 7: 0x89, 8: 0x11D}
MIN_M, MAX_M = 3, 8


def poly_string(value: int) -> str:
    """A binary polynomial as text, e.g. 0x11D -> 'x^8 + x^4 + x^3 + x^2 + 1'."""
    terms = []
    for i in range(value.bit_length() - 1, -1, -1):
        if value >> i & 1:
            terms.append("1" if i == 0 else "x" if i == 1 else f"x^{i}")
    return " + ".join(terms) or "0"


class GF2m:
    """GF(2^m) defined by the primitive polynomial `polynomial` (default from the table)."""

    def __init__(self, m: int, polynomial: int | None = None) -> None:
        if not MIN_M <= m <= MAX_M:
            raise ValueError(f"GF(2^m) is supported for m = {MIN_M}..{MAX_M}, got m = {m}")
        poly = PRIMITIVE_POLYNOMIALS[m] if polynomial is None else polynomial
        if poly.bit_length() != m + 1:
            raise ValueError(f"a field polynomial for m = {m} has degree {m}, got {poly_string(poly)}")
        self.m = m
        self.polynomial = poly
        self.size = 1 << m  # q
        self.order = self.size - 1  # multiplicative group order q - 1
        q1 = self.order
        exp = np.zeros(2 * q1, dtype=np.int64)
        log = np.full(self.size, -1, dtype=np.int64)
        value = 1
        for e in range(q1):
            if log[value] >= 0:  # alpha^e came back early: x has order e < q - 1
                raise ValueError(f"{poly_string(poly)} is not primitive: x has order {e}")
            exp[e] = value
            log[value] = e
            value <<= 1
            if value & self.size:
                value ^= poly
        if value != 1:
            raise ValueError(f"{poly_string(poly)} is not primitive (x^{q1} != 1)")
        exp[q1:] = exp[:q1]
        self.exp = exp  # exp[e] = alpha^e for 0 <= e < 2(q - 1)
        self.log = log  # log[a] = e with alpha^e = a; log[0] = -1

    @cached_property
    def mul_table(self) -> np.ndarray:
        """mul_table[a, b] = a * b (uint8, q x q)."""
        q = self.size
        la = self.log[:, None]
        lb = self.log[None, :]
        table = self.exp[(la + lb) % self.order].astype(np.uint8)
        table[0, :] = 0
        table[:, 0] = 0
        return np.ascontiguousarray(table.reshape(q, q))

    @cached_property
    def inv_table(self) -> np.ndarray:
        """inv_table[a] = a^-1 (inv_table[0] = 0, never used)."""
        inv = np.zeros(self.size, dtype=np.uint8)
        for a in range(1, self.size):
            inv[a] = self.exp[(self.order - self.log[a]) % self.order]
        return inv

    def alpha(self, e: int) -> int:
        """alpha^e for any integer e."""
        return int(self.exp[e % self.order])

    def mul(self, a: int, b: int) -> int:
        if a == 0 or b == 0:
            return 0
        return int(self.exp[(self.log[a] + self.log[b]) % self.order])

    def inv(self, a: int) -> int:
        if a == 0:
            raise ZeroDivisionError("0 has no inverse in GF(2^m)")
        return int(self.exp[(self.order - self.log[a]) % self.order])

    def poly_eval(self, coeffs, x: int) -> int:
        """Value at x of a polynomial over the field, highest degree first (Horner)."""
        acc = 0
        for c in coeffs:
            acc = self.mul(acc, x) ^ int(c)
        return acc

    def poly_mul(self, a, b) -> list[int]:
        """Product of two polynomials over the field, highest degree first."""
        out = [0] * (len(a) + len(b) - 1)
        for i, x in enumerate(a):
            if x:
                for j, y in enumerate(b):
                    out[i + j] ^= self.mul(int(x), int(y))
        return out

    def __repr__(self) -> str:
        return f"GF(2^{self.m}) mod {poly_string(self.polynomial)}"


@lru_cache(maxsize=None)
def field(m: int, polynomial: int | None = None) -> GF2m:
    """The (cached) field GF(2^m) with the default or given primitive polynomial."""
    return GF2m(m, polynomial)


# ---- binary polynomials as integers ----------------------------------------------------------

def gf2_poly_mul(a: int, b: int) -> int:
    """Product of two binary polynomials (carry-less multiplication)."""
    out = 0
    while b:
        if b & 1:
            out ^= a
        a <<= 1
        b >>= 1
    return out


def gf2_poly_mod(a: int, b: int) -> int:
    """Remainder of a divided by b, binary polynomials."""
    db = b.bit_length() - 1
    while a and a.bit_length() - 1 >= db:
        a ^= b << (a.bit_length() - 1 - db)
    return a


# ---- cyclotomic cosets, minimal polynomials, generators ----------------------------------------

def cyclotomic_coset(s: int, m: int) -> list[int]:
    """C_s = {s 2^i mod (2^m - 1)}: the exponents of the conjugates of alpha^s, sorted."""
    order = (1 << m) - 1
    coset, j = [], s % order
    while j not in coset:
        coset.append(j)
        j = 2 * j % order
    return sorted(coset)


def minimal_polynomial(gf: GF2m, s: int) -> int:
    """M_s(x), the binary minimal polynomial of alpha^s: prod over C_s of (x - alpha^j),
    multiplied out in GF(2^m). Returned as a binary polynomial (bit i = coeff of x^i)."""
    coeffs = [1]  # highest degree first
    for j in cyclotomic_coset(s, gf.m):
        coeffs = gf.poly_mul(coeffs, [1, gf.alpha(j)])
    if any(c not in (0, 1) for c in coeffs):  # conjugates always give a binary product
        raise ArithmeticError(f"minimal polynomial of alpha^{s} came out non-binary: {coeffs}")
    value = 0
    for c in coeffs:
        value = value << 1 | c
    return value


def bch_generator(gf: GF2m, t: int) -> int:
    """Generator of the primitive narrow-sense binary BCH code of designed distance 2t + 1:
    lcm(M_1, ..., M_2t), the product of the distinct minimal polynomials (each even power
    alpha^2j is a conjugate of alpha^j, so the odd s < 2t give them all)."""
    g, seen = 1, set()
    for s in range(1, 2 * t + 1):
        leader = cyclotomic_coset(s, gf.m)[0]
        if leader not in seen:
            seen.add(leader)
            g = gf2_poly_mul(g, minimal_polynomial(gf, s))
    return g


@lru_cache(maxsize=None)
def bch_designed_range(m: int) -> tuple[tuple[int, int], ...]:
    """(t, deg g) for every designed t of the length-(2^m - 1) code with k >= 1; t values
    that give the same code are merged into the largest."""
    gf = field(m)
    n = gf.order
    out: list[tuple[int, int]] = []
    g, seen = 1, set()
    for t in range(1, n // 2 + 1):
        for s in (2 * t - 1, 2 * t):  # the generator of t is that of t - 1 times any new M_s
            leader = cyclotomic_coset(s, m)[0]
            if leader not in seen:
                seen.add(leader)
                g = gf2_poly_mul(g, minimal_polynomial(gf, s))
        r = g.bit_length() - 1
        if r >= n:
            break
        if out and out[-1][1] == r:
            out[-1] = (t, r)
        else:
            out.append((t, r))
    return tuple(out)


def rs_generator(gf: GF2m, r: int, first_root: int = 1) -> list[int]:
    """g(x) = prod_{j=c}^{c+r-1} (x - alpha^j), monic, highest degree first (r + 1 values)."""
    g = [1]
    for j in range(first_root, first_root + r):
        g = gf.poly_mul(g, [1, gf.alpha(j)])
    return g


# ---- shift-register tables ---------------------------------------------------------------------

def register_words(register_bits: int) -> int:
    """uint64 words of a register table: at least 4 (the kernels keep registers of up to
    four words in scalars; unused words stay zero), more for wider registers."""
    return max(4, -(-register_bits // 64))


def binary_register_table(generator: int) -> np.ndarray:
    """Table of the binary shift register that divides by g(x) (degree R), 8 bits a step.

    The register holds the running remainder left-aligned in W = register_words(R) words
    (coefficient of x^(R-1) in the top bit of word 0). Feeding v bits u (1 <= v <= 8) is
        index = (top v register bits) XOR u,  register = (register << v) XOR table[index],
    with table[u] = u(x) x^R mod g(x) for every byte u (u's top bit the x^7 coefficient;
    for v < 8 the index is below 2^v and means u(x) of degree < v, which is the same
    entry). After the bits b_0 .. b_{L-1} the register holds (sum b_i x^(L-1-i)) x^R mod g."""
    R = generator.bit_length() - 1
    W = register_words(R)
    table = np.zeros((256, W), dtype=np.uint64)
    for u in range(256):
        rem = gf2_poly_mod(u << R, generator)
        aligned = rem << (64 * W - R)  # left-align the R bits in W words
        for w in range(W):
            table[u, w] = (aligned >> (64 * (W - 1 - w))) & 0xFFFFFFFFFFFFFFFF
    return table


def symbol_register_table(gf: GF2m, generator: list[int]) -> np.ndarray:
    """Table of the 8-bit-symbol shift register that divides by a monic g(x) of degree r
    over GF(2^8): the register holds r symbols (8r bits) left-aligned in words, symbol 0
    (the coefficient of x^(r-1)) in the top byte. Feeding symbol u is
        f = (top symbol) XOR u,  register = (register << 8) XOR table[f],
    table[f] = f * (g_(r-1), ..., g_0), since x^r = g_(r-1) x^(r-1) + ... + g_0 mod g."""
    if gf.m != 8:
        raise ValueError("symbol registers are built for GF(2^8)")
    r = len(generator) - 1
    W = register_words(8 * r)
    table = np.zeros((256, W), dtype=np.uint64)
    low = [int(c) for c in generator[1:]]
    for f in range(256):
        value = 0
        for c in low:
            value = value << 8 | gf.mul(f, c)
        aligned = value << (64 * W - 8 * r)
        for w in range(W):
            table[f, w] = (aligned >> (64 * (W - 1 - w))) & 0xFFFFFFFFFFFFFFFF
    return table
