"""Everything `bitmend codes show` says about one code: matrices, distance, bounds, weight
distribution and error probabilities on a binary symmetric channel.

The numbers come from `bitmend.code_theory` and `analysis` (formulas on n, k, d and the
weight distribution); this module gathers them for one code, a catalog code or a custom
one, through the interface every code has (`codes.base.BlockCode`). What a code cannot
supply (a weight distribution too large to list, matrices over a bigger field) is left out
and said so.
"""

from __future__ import annotations

from dataclasses import dataclass

from bitmend.analysis import limits
from bitmend.analysis.bounds import CodeBounds, code_bounds
from bitmend.code_theory import BscPoint, block_error_on_bsc, bsc_point, code_weights, distance_to_limit
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import as_code, code_names, entry, get_code
from bitmend.wording import counted

#: bit flip probabilities of the table in `codes show`: a log grid, plus 1/2 (pure noise)
BSC_GRID = (1e-6, 1e-5, 1e-4, 1e-3, 1e-2, 1e-1, 0.5)

UNDETECTED_FORMULA = "P_ud(p) = sum_{w>0} A_w p^w (1-p)^(n-w)"
BLOCK_ERROR_FORMULA = "P_B(p) = sum_{i>t} C(n,i) p^i (1-p)^(n-i)"


def _is_catalog(code: BlockCode) -> bool:
    return code.name in code_names() and get_code(code.name) is code


@dataclass(frozen=True)
class CodeProfile:
    code: BlockCode
    catalog: bool
    use: str
    d: int  # the minimum distance (or, where it cannot be listed, the designed distance)
    d_exact: bool
    bounds: CodeBounds
    bsc: tuple[BscPoint, ...]
    weights: tuple[int, ...] | None
    limit: limits.DistanceToLimit | None = None  # at the p of `codes show --at`
    at: float | None = None

    @property
    def name(self) -> str:
        return self.code.name

    @property
    def symbol_bits(self) -> int:
        return self.code.symbol_bits

    @property
    def weight_method(self) -> str | None:
        return None if self.weights is None else self.code.weight_distribution.method

    @property
    def weight_method_text(self) -> str:
        code = self.code
        if self.weights is None:
            return code.weight_distribution_note or "not available"
        q = 2 ** self.symbol_bits
        if self.weight_method == "enumeration":
            return f"by enumeration of the {q}^{code.k} codewords"
        if self.weight_method == "closed form (MDS)":
            return "the closed form of an MDS code, in symbol weights"
        if self.weight_method == "macwilliams":
            return (f"from the {q}^{code.n - code.k} words of the dual code through the MacWilliams identity, "
                    f"fewer to list than the {q}^{code.k} codewords")
        return str(self.weight_method)

    @property
    def column_order(self) -> tuple[int, ...] | None:
        order = tuple(self.code.column_order)
        return None if order == tuple(range(self.code.n)) else order

    def _matrix_rows(self, which: str) -> list[str] | None:
        if self.symbol_bits != 1:  # a symbol code's matrices are over GF(2^s), not bits
            return None
        matrix = self.code.G if which == "G" else self.code.H
        return ["".join(map(str, row)) for row in matrix]

    def render(self) -> list[str]:
        """The profile as text lines for a terminal."""
        return _render(self)

    def to_dict(self) -> dict:
        code = self.code
        out = {"name": code.name, "n": code.n, "k": code.k, "rate": round(code.k / code.n, 6), "d": self.d,
               "d_exact": self.d_exact, "t": code.t, "detects": self.d - 1 - code.t, "perfect": self.bounds.perfect,
               "use": self.use, "source": "catalog" if self.catalog else "custom",
               "symbol_bits": self.symbol_bits,
               "weight_distribution": (None if self.weights is None else
                                       {str(w): a for w, a in enumerate(self.weights) if a}),
               "weight_distribution_method": self.weight_method,
               "G": self._matrix_rows("G"), "H": self._matrix_rows("H"),
               "bounds": self.bounds.to_dict(),
               "bsc": [point.to_dict() for point in self.bsc],
               "formulas": {"undetected": UNDETECTED_FORMULA, "block_error": BLOCK_ERROR_FORMULA}}
        if self.weights is None:
            out["weight_distribution_note"] = self.weight_method_text
        if self.column_order:
            out["column_order"] = list(self.column_order)
        if self.at is not None:
            out["limit"] = None if self.limit is None else {**self.limit.to_dict(), "formulas": LIMIT_FORMULAS}
        return out


LIMIT_FORMULAS = {
    "capacity": "C = 1 - h2(p)",
    "dispersion": "V = p (1-p) log2^2((1-p)/p)",
    "normal_approximation": "log2 M* ~ n C - sqrt(n V) Q^-1(eps) + (1/2) log2 n",
    "achievability": "RCU: eps <= sum_t C(n,t) p^t (1-p)^(n-t) min(1, (M-1) sum_{s<=t} C(n,s) 2^-n)",
    "converse": "M <= 1 / beta_{1-eps}: Neyman-Pearson test of the channel's output against the uniform one",
    "source": "Polyanskiy, Poor and Verdu, Channel coding rate in the finite blocklength regime, "
              "IEEE Trans. Inf. Theory 56(5), 2010",
}


def _distance(code: BlockCode, weights: tuple[int, ...] | None) -> tuple[int, bool]:
    """(d, exact): the least non-zero weight when the weights are listed, else the code's
    exact minimum distance, else its designed distance (a lower bound)."""
    if weights is not None:
        return next(w for w, a in enumerate(weights) if w and a), True
    if code.minimum_distance is not None:
        return code.minimum_distance, True
    return code.d, code.distance_kind != "designed"


def code_profile(code: str | BlockCode, grid: tuple[float, ...] = BSC_GRID, at: float | None = None) -> CodeProfile:
    """The profile of a catalog code (by name or object) or a custom code; with `at`, its
    distance to the limit on a BSC with that bit flip probability."""
    if at is not None and not 0.0 < at < 0.5:
        raise ValueError(f"--at must be a bit flip probability between 0 and 1/2, got {at:g}")
    code = as_code(code)
    catalog = _is_catalog(code)
    use = entry(code.name).use if catalog else (code.description or "custom code")
    weights = code_weights(code)
    d, d_exact = _distance(code, weights)
    bounds = code_bounds(code.n, code.k, d, 2 ** code.symbol_bits)
    # a BSC acts on bits; a symbol code's errors are counted in symbols
    points = tuple(bsc_point(code, p, weights) for p in grid) if code.symbol_bits == 1 else ()
    limit = distance_to_limit(code, at) if at is not None else None
    return CodeProfile(code, catalog, use, d, d_exact, bounds, points, weights, limit, at)


MATRIX_PRINT_LIMIT = 80 * 72  # entries; larger matrices go to --json only


def _big(value: int) -> str:
    """Exact below a quadrillion, else three significant figures (JSON stays exact)."""
    if value < 10 ** 15:
        return str(value)
    digits = str(value)
    return f"{digits[0]}.{digits[1:4]}e+{len(digits) - 1}"


def _num(value: float | None) -> str:
    return f"{'-':>12}" if value is None else f"{value:>12.3e}"


def _render(profile: CodeProfile) -> list[str]:
    lines = _render_summary(profile) + _render_bounds(profile) + _render_weights(profile) + _render_matrices(profile)
    if profile.bsc:
        lines += _render_bsc(profile)
    if profile.at is not None:
        lines += _render_limit(profile)
    return lines


def _render_summary(profile: CodeProfile) -> list[str]:
    """What the code is: sizes, rate, distance, what it corrects and detects, where it comes from."""
    code, d = profile.code, profile.d
    unit = "" if profile.symbol_bits == 1 else f" symbols of {profile.symbol_bits} bits"
    lines = [f"{code.name}: ({code.n},{code.k}){unit} rate {code.k / code.n:.4f}, "
             f"d {'=' if profile.d_exact else '>='} {d}, corrects t = {code.t}, "
             f"detects every pattern of up to {counted(d - 1 - code.t, 'error')} while correcting"
             f"{', perfect' if profile.bounds.perfect else ''}",
             f"  {'catalog' if profile.catalog else 'custom'}: {profile.use}"]
    if profile.column_order:
        lines.append("  columns reordered for the systematic form (an equivalent code): "
                     + " ".join(map(str, profile.column_order)))
    return lines


def _render_bounds(profile: CodeProfile) -> list[str]:
    """The Singleton and Hamming bounds, and how the code stands against them."""
    b, d = profile.bounds, profile.d
    q = "2" if b.q == 2 else str(b.q)
    volume = (f"sum_(i<={b.t}) C({b.n},i)" if b.q == 2 else f"sum_(i<={b.t}) C({b.n},i) {b.q - 1}^i")
    return ["bounds:",
            f"  Singleton: d <= n - k + 1 = {b.singleton_d}"
            f"{' (met: MDS)' if b.meets_singleton else f'; this code has d = {d}'}",
            f"  Hamming:   V(n,t) = {volume} = {_big(b.sphere_volume)} <= {q}^(n-k) = {_big(b.cosets)} -> "
            f"{'met with equality: perfect' if b.perfect else f'{b.sphere_fill:.1%} of the syndromes used'}; "
            f"no ({b.n},{b.k}) code corrects more than t = {b.hamming_t}"]


def _render_weights(profile: CodeProfile) -> list[str]:
    lines = [f"weight distribution ({profile.weight_method_text}):"]
    if profile.weights is not None:
        lines.append("  " + ", ".join(f"A{w}={_big(a)}" for w, a in enumerate(profile.weights) if a))
    return lines


def _render_matrices(profile: CodeProfile) -> list[str]:
    """G and H row by row, or their size where they are too large to print."""
    lines = []
    for label, which in (("G = [I | P]", "G"), ("H = [P^T | I]", "H")):
        rows = profile._matrix_rows(which)
        if rows is not None and len(rows) * len(rows[0]) > MATRIX_PRINT_LIMIT:
            lines.append(f"{label}: {len(rows)} x {len(rows[0])} (too large to print here; --json has it)")
        elif rows is not None:
            lines.append(f"{label}:")
            lines += [f"  {row}" for row in rows]
    return lines


def _render_bsc(profile: CodeProfile) -> list[str]:
    """The table of per-codeword probabilities on a BSC, with its formulas."""
    lines = ["on a binary symmetric channel with bit flip probability p, per codeword:",
             f"  {'p':>8}  {'undetected*':>12}  {'block error':>12}  {'miscorrected':>12}  {'detected':>12}"]
    for point in profile.bsc:
        lines.append(f"  {point.p:>8.0e}  {_num(point.undetected)}  {_num(point.block_error)}  "
                     f"{_num(point.miscorrected)}  {_num(point.detected)}")
    lines.append(f"  * the code used to detect only: {UNDETECTED_FORMULA}")
    lines.append(f"  correcting up to t = {profile.code.t}: {BLOCK_ERROR_FORMULA}, split into miscorrected "
                 "(a wrong codeword, left for the frame CRC) and detected (flagged)")
    return lines


def _p(value: float | None) -> str:
    return "-" if value is None else f"{value:.4g}"


def _render_limit(profile: CodeProfile) -> list[str]:
    """The distance-to-the-limit section of `codes show --at P`."""
    code, g, p = profile.code, profile.limit, profile.at
    unit = "" if profile.symbol_bits == 1 else f" ({code.n} x {profile.symbol_bits})"
    head = [f"distance to the limit on a BSC with p = {p:g} (Polyanskiy, Poor and Verdu, IEEE Trans. IT 56(5), "
            f"2010), counted in bits: n = {code.n * profile.symbol_bits}{unit}, k = {code.k * profile.symbol_bits}, "
            f"rate {code.k / code.n:.4f}"]
    own = block_error_on_bsc(code, p)
    if g is None:
        return head + [f"  this code's block error at p is {own:.3g}: nothing to compare (it never or always fails)"]
    lines = head + [
        f"  this code's block error at p (bounded-distance decoding, t = {code.t}): eps = {g.block_error:.3e}",
        f"  capacity C = 1 - h2(p) = {g.capacity:.4f} bits per channel bit; dispersion V = p(1-p) log2^2((1-p)/p) "
        f"= {g.dispersion:.4f}",
        f"  best rate of any code of length {g.n} at block error eps:",
        f"    normal approximation (nC - sqrt(nV) Q^-1(eps) + 1/2 log2 n) / n = {g.rate_normal:.4f}"]
    if g.exact:
        lines.append(f"    exact bounds: at least {g.rate_achievable:.4f} (RCU: some code does this well), at most "
                     f"{g.rate_converse:.4f} (binomial converse: no code does better)")
        most = 0.0 if abs(g.rate_gap_most) < 1e-9 else g.rate_gap_most
        lines.append(f"  gap in rate to the best code of length {g.n}: at most {most:+.4f} "
                     f"({most * g.n:.1f} of {g.n} bits, converse); {g.rate_gap:+.4f} by the normal "
                     "approximation")
    else:
        lines.append(f"    (exact bounds skipped: n > {limits.EXACT_MAX_N})")
        lines.append(f"  gap in rate to the best code of length {g.n}: {g.rate_gap:+.4f} by the normal approximation")
    ratio = "" if g.p_normal is None else f", {g.p_normal / p:.3g} x this p"
    line = f"  the best ({g.n}, {g.k}) code reaches eps at p = {_p(g.p_normal)} (normal approximation{ratio})"
    if g.exact:
        line += (f"; at most {_p(g.p_converse)} (converse), at least "
                 + (f"{_p(g.p_achievable)} (RCU)" if g.p_achievable is not None else
                    "- (random coding reaches eps at no p for this size)"))
    lines.append(line)
    if g.normal_within_bounds is False:
        lines.append("  the normal approximation disagrees here with the exact bounds or with this code itself "
                     "(short block, or a block error far in a tail: outside its regime): trust the bounds")
    if g.exact and abs(g.rate_gap_most) < 1e-9:
        lines.append("  this code meets the converse with equality: no code of its length and size has a lower "
                     "block error (a perfect code)")
    return lines
