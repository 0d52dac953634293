"""Charts of simulation results: measured points with their intervals, theory, the uncoded line,
and, for a sweep of p on a BSC, the limits of any code of the same length and size
(`analysis.limits`: the normal approximation, the binomial converse and the RCU bound of
Polyanskiy, Poor and Verdu 2010) with the p at which capacity falls to the code's rate.

matplotlib is an optional dependency (`pip install 'bitmend[plot]'`) and is imported only
inside `plot_results`, so nothing else pays for it.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from bitmend.analysis import limits
from bitmend.channel.models import BSC
from bitmend.channel.spec import parse_channels, sweep_channels
from bitmend.code_theory import bits_of, bsc_crossover, theory_for
from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import code_names, get_code
from bitmend.errors import BitmendError, SettingError
from bitmend.simulate.results import SimulationResult, SweepResult

FORMATS = (".png", ".svg")
PANELS = (("bit_error", "residual bit error rate"), ("block_error", "block (codeword) error rate"))


class PlotUnavailableError(BitmendError, RuntimeError):
    """matplotlib is not installed."""


def plotting_available() -> bool:
    import importlib.util

    return importlib.util.find_spec("matplotlib") is not None


def check_plot_path(path: str) -> None:
    """Refuse a file type we do not draw, before any work is done."""
    if Path(path).suffix.lower() not in FORMATS:
        raise SettingError(f"plot file must end in {' or '.join(FORMATS)}, got {path!r}")
    if not plotting_available():
        raise PlotUnavailableError("plotting needs matplotlib: pip install 'bitmend[plot]'")


def _curves(result: SimulationResult, code: BlockCode, parameter: str,
            xs: np.ndarray) -> dict[str, list[float | None]]:
    """Theory and uncoded values at xs for each panel (None where no closed form)."""
    out: dict[str, list[float | None]] = {f"{kind}_{name}": [] for kind in ("theory", "uncoded") for name, _ in PANELS}
    models = parse_channels(result.channels)
    for x in xs:
        expected, uncoded = theory_for(code, result.depth, sweep_channels(models, parameter, float(x)),
                                       result.frame_bytes)
        for name, _ in PANELS:
            out[f"theory_{name}"].append(getattr(expected, name))
            out[f"uncoded_{name}"].append(getattr(uncoded, name))
    return out


def limit_curves(code: BlockCode | None, channels: tuple[str, ...], parameter: str,
                 xs: np.ndarray) -> dict[str, np.ndarray] | None:
    """Block error of the best code of the code's length and size (in bits) at each swept p of
    a BSC: 'normal' (normal approximation), 'converse' (no code does better) and 'rcu' (some
    code does at least as well), plus 'capacity_p', the p where 1 - h2(p) = k/n (a single BSC
    only). None when the sweep is not of p on BSCs alone."""
    models = parse_channels(channels)
    if code is None or parameter != "p" or not models or not all(isinstance(m, BSC) for m in models):
        return None
    n, k = bits_of(code)
    exact = n <= limits.EXACT_MAX_N
    out = {name: np.full(len(xs), np.nan) for name in ("normal", "converse", "rcu")}
    for i, x in enumerate(xs):
        p = bsc_crossover(sweep_channels(models, parameter, float(x)))
        if p is None:
            continue
        out["normal"][i] = limits.normal_approximation_block_error(n, k, p)
        if exact:
            out["converse"][i] = limits.converse_block_error(n, k, p)
            out["rcu"][i] = limits.rcu_block_error(n, k, p)
    out["capacity_p"] = np.array([limits.crossover_at_capacity(k / n) if len(models) == 1 else np.nan])
    return out


def _swept(results: SimulationResult | SweepResult) -> tuple[str, np.ndarray, tuple[SimulationResult, ...]]:
    """(parameter, its values, the points): a sweep's own, or for a single run the first of
    p, bad, enter that its chain takes, at its one value."""
    if isinstance(results, SweepResult):
        return results.parameter, np.array(results.values), results.points
    models = parse_channels(results.channels)
    parameter = next((name for m in models for name in ("p", "bad", "enter") if name in m.parameter_names()), "p")
    xs = np.array([next(m.params[parameter] for m in models if parameter in m.parameter_names())])
    return parameter, xs, (results,)


def _draw_measured(ax, points: tuple[SimulationResult, ...], xs: np.ndarray, name: str) -> None:
    """Measured rates with their intervals as bars; a point with no event as its upper bound."""
    measured = [p.measured(name) for p in points]
    rate = np.array([m.rate for m in measured])
    low = np.array([m.low for m in measured])
    high = np.array([m.high for m in measured])
    seen = rate > 0
    if seen.any():
        ax.errorbar(xs[seen], rate[seen], yerr=[rate[seen] - low[seen], high[seen] - rate[seen]], fmt="o",
                    color="C0", capsize=3, label=f"measured ({points[0].confidence:.0%} interval)")
    if (~seen).any():
        ax.plot(xs[~seen], high[~seen], "v", color="C0", mfc="none", label="no event: upper bound")


def _draw_curves(ax, dense: np.ndarray, curves: dict[str, list[float | None]], name: str) -> None:
    """Theory and the uncoded channel, where they have values."""
    for kind, style, color, text in (("theory", "-", "C1", "theory"), ("uncoded", "--", "C7", "uncoded")):
        ys = np.array([np.nan if v is None else v for v in curves[f"{kind}_{name}"]], dtype=float)
        if np.isfinite(ys).any():
            ax.plot(dense, ys, style, color=color, label=text)


def _draw_limits(ax, dense: np.ndarray, bounds: dict[str, np.ndarray], code: BlockCode, name: str) -> None:
    """The best code of the same size (block error panel) and the p where capacity = rate."""
    n, k = bits_of(code)
    size = f"({n}, {k})"
    if name == "block_error":
        tiny = 1e-300  # log axes: keep underflowed values off the chart
        for key, style, color, text in (
                ("normal", "-.", "C2", f"best {size} code, normal approximation"),
                ("converse", ":", "C3", f"converse: no {size} code below"),
                ("rcu", ":", "C4", f"RCU: some {size} code at or below")):
            ys = np.where(bounds[key] > tiny, bounds[key], np.nan)
            if np.isfinite(ys).any():
                ax.plot(dense, ys, style, color=color, label=text)
    capacity_p = float(bounds["capacity_p"][0])
    if np.isfinite(capacity_p) and dense.min() <= capacity_p <= dense.max():
        ax.axvline(capacity_p, color="C5", linestyle="--", linewidth=1,
                   label=f"capacity = rate {code.k / code.n:.3g} (p = {capacity_p:.3g})")


def plot_results(results: SimulationResult | SweepResult, path: str, code: BlockCode | None = None) -> None:
    """Draw residual bit error and block error against the swept parameter (or the single
    point) into path (.png or .svg): measured rates with their exact intervals as bars
    (a run with no error event shows its upper bound as a downward triangle), the theory
    curve where a closed form exists, and the uncoded channel for comparison. Without
    `code`, a catalog code is found by the result's name; a custom one gets no curves."""
    check_plot_path(path)
    import matplotlib

    matplotlib.use("Agg")  # files only, never a window
    import matplotlib.pyplot as plt

    parameter, xs, points = _swept(results)
    first = points[0]
    if code is None and first.code in code_names():
        code = get_code(first.code)
    dense = np.logspace(np.log10(xs.min()), np.log10(xs.max()), 120) if xs.min() > 0 and len(xs) > 1 else xs
    curves = _curves(first, code, parameter, dense) if code is not None else None
    bounds = limit_curves(code, first.channels, parameter, dense) if len(xs) > 1 else None

    fig, axes = plt.subplots(1, 2, figsize=(11, 4.4), constrained_layout=True)
    for ax, (name, label) in zip(axes, PANELS):
        _draw_measured(ax, points, xs, name)
        if curves is not None:
            _draw_curves(ax, dense, curves, name)
        if bounds is not None:
            _draw_limits(ax, dense, bounds, code, name)
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel(f"channel {parameter}")
        ax.set_ylabel(label)
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize="small")
    channels = results.channels_text if isinstance(results, SweepResult) else " then ".join(first.channels)
    fig.suptitle(f"{first.code} at depth {first.depth} on {channels} "
                 f"({first.payload_bits:,} payload bits per point, seed {first.seed})", fontsize="medium")
    fig.savefig(path)
    plt.close(fig)
