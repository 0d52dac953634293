"""The human reports of `bitmend simulate`: one run as a table of measured rates beside
theory and the uncoded channel, a sweep as one line per point."""

from __future__ import annotations

from bitmend.simulate.results import RATES, SimulationResult, SweepResult
from bitmend.wording import counted

ROW_LABELS = {"bit_error": "residual bit error", "block_error": "block error",
              "detected": "  detected (uncorrectable)", "undetected": "  undetected (miscorrected)",
              "frame_error": "frame error (CRC-32C fails)"}


def _g(value: float | None) -> str:
    return "-" if value is None else f"{value:.3e}"


def _code_line(r: SimulationResult) -> str:
    return f"code       {r.code} (n={r.n}, k={r.k}, d={r.d}, t={r.t}) at depth {r.depth}"


def _rate_rows(r: SimulationResult) -> list[str]:
    """The table: a header and one row per rate."""
    pct = f"{r.confidence:.0%}"
    lines = [f"{'':34}{'measured':>10}  {pct + ' interval':<24}{'theory':>10}{'uncoded':>11}"]
    for name in RATES:
        m = r.measured(name)
        interval = f"[{m.low:.2e}, {m.high:.2e}]"
        lines.append(f"{ROW_LABELS[name]:<34}{m.rate:>10.3e}  {interval:<24}{_g(getattr(r.theory, name)):>10}"
                     f"{_g(getattr(r.uncoded, name)):>11}")
    return lines


def format_result(r: SimulationResult) -> list[str]:
    """The human report of one simulation, as lines."""
    lines = [_code_line(r),
             f"channel    {' then '.join(r.channels)}, seed {r.seed}",
             f"sent       {counted(r.payload_bits, 'payload bit', spec=',')} in {counted(r.frames, 'frame', spec=',')} "
             f"of {r.frame_bytes:,} bytes: {counted(r.blocks, 'codeword', spec=',')}, "
             f"{counted(r.coded_bits, 'coded bit', spec=',')}; the channel changed "
             f"{counted(r.channel.events, 'bit', spec=',')} ({r.channel.rate:.3e})",
             ""]
    lines += _rate_rows(r)
    lines.append("")
    if r.theory.basis:
        lines.append(f"theory:    {r.theory.basis}")
    if r.uncoded.basis:
        lines.append(f"uncoded:   {r.uncoded.basis}")
    lines.append(f"events:    {counted(r.bit_error.events, 'wrong payload bit', spec=',')}, "
                 f"{counted(r.block_error.events, 'failed codeword', spec=',')} "
                 f"({r.detected.events:,} flagged, {r.undetected.events:,} miscorrected), "
                 f"{counted(r.frame_error.events, 'failed frame', spec=',')}")
    lines.extend(f"note:      {n}" for n in r.notes)
    return lines


def format_sweep(s: SweepResult) -> list[str]:
    """The human report of a sweep: one line per point."""
    first = s.points[0]
    lines = [_code_line(first),
             f"channel    {s.channels_text} ({counted(len(s.values), 'point')}), seed {first.seed}, "
             f"{first.payload_bits:,} payload bits per point",
             "",
             f"{s.parameter:>10}{'channel':>11}  {'bit error':>9} {'(interval)':<21}{'theory':>10}  "
             f"{'block error':>11} {'(interval)':<21}{'theory':>10}  {'frame error':>11}{'theory':>10}"]
    for value, r in zip(s.values, s.points):
        b, k, f = r.bit_error, r.block_error, r.frame_error
        lines.append(f"{value:>10.3g}{r.channel.rate:>11.3e}  {b.rate:>9.2e} [{b.low:.2e}, {b.high:.2e}] "
                     f"{_g(r.theory.bit_error):>10}  {k.rate:>11.3e} [{k.low:.2e}, {k.high:.2e}] "
                     f"{_g(r.theory.block_error):>10}  {f.rate:>11.3e}{_g(r.theory.frame_error):>10}")
    lines.append("")
    lines.append(f"theory:    {first.theory.basis}")
    lines.extend(f"note:      {n}" for n in first.notes)
    return lines
