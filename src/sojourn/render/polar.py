"""Polar figures of angle-resolved scattering: τ(θ) and dσ/dθ side by side,
partial-wave theory as curves and measured points with error bars on them.

θ is measured from +x, the incidence direction (to the right in both panels),
counter-clockwise. The delay panel's radius starts below the smallest delay
shown, so negative delays draw too; the circle τ = 0 (a wave leaving the
centre) is dashed. The cross section is drawn on a logarithmic radius when it
spans more than `LOG_SPAN`. Theory in the theory colour (further energies in
the channel colours), measurements in the measurement colour (styles.py).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Optional, Sequence

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..errors import RenderError
from .options import FIGURE_FORMATS, PRINT_DPI, check_output, figure_size
from .styles import apply_look, fit_inside, look as get_look

LOG_SPAN = 30.0             # a cross section spanning more than this is drawn on a log radius
DEFAULT_SIZE = (8.0, 4.3)   # inches: two polar panels


@dataclass(frozen=True)
class PolarCurve:
    """One theory curve: angles (radians from +x), τ(θ) and dσ/dθ at them."""

    label: str
    theta: np.ndarray
    delay: np.ndarray
    cross_section: np.ndarray


@dataclass(frozen=True)
class PolarPoints:
    """Measured points per angle bin; an error or a quantity may be None."""

    theta: np.ndarray
    delay: Optional[np.ndarray] = None
    delay_error: Optional[np.ndarray] = None
    cross_section: Optional[np.ndarray] = None
    cross_section_error: Optional[np.ndarray] = None


def curves_from_table(table: dict, energy_unit: str = "") -> list[PolarCurve]:
    """One PolarCurve per energy of a `partial_wave_table` (None → NaN)."""
    try:
        theta = np.asarray(table["theta"], dtype=float)
        rows = zip(table["energy"], table["delay"], table["cross_section"])
        return [PolarCurve(f"E = {e:.4g}{' ' + energy_unit if energy_unit else ''}", theta,
                           np.array([np.nan if v is None else v for v in d], dtype=float),
                           np.array([np.nan if v is None else v for v in s], dtype=float))
                for e, d, s in rows]
    except (KeyError, TypeError, ValueError) as exc:
        raise RenderError(f"not a partial-wave table ({exc})") from None


def _array(values, n, what) -> Optional[np.ndarray]:
    if values is None:
        return None
    try:
        a = np.asarray(values, dtype=float).ravel()
    except (TypeError, ValueError):
        raise RenderError(f"{what}: not numbers") from None
    if a.size != n:
        raise RenderError(f"{what}: {a.size} values for {n} angles")
    return a


def _check(curves, measured):
    if not curves:
        raise RenderError("a polar figure needs at least one theory curve")
    for c in curves:
        if not isinstance(c, PolarCurve):
            raise RenderError("curves must be PolarCurve values")
        theta = _array(c.theta, np.size(c.theta), f"curve {c.label!r} angles")
        n = theta.size
        if n < 2 or not np.all(np.isfinite(theta)):
            raise RenderError(f"curve {c.label!r}: at least two finite angles are needed")
        _array(c.delay, n, f"curve {c.label!r} delay")
        _array(c.cross_section, n, f"curve {c.label!r} cross section")
    if measured is not None:
        if not isinstance(measured, PolarPoints):
            raise RenderError("measured points must be a PolarPoints value")
        n = np.asarray(measured.theta).size
        for name in ("delay", "delay_error", "cross_section", "cross_section_error"):
            _array(getattr(measured, name), n, f"measured {name.replace('_', ' ')}")


def _mirrored(theta, *values):
    """A circularly symmetric potential gives f(−θ) = f(θ): angles given on
    [0, π] are drawn on the whole circle."""
    theta = np.asarray(theta, dtype=float)
    if theta.min() >= 0 and theta.max() <= math.pi + 1e-12:
        order = np.argsort(theta)
        t = theta[order]
        out = [np.concatenate([-t[::-1], t])]
        out += [np.concatenate([np.asarray(v, float)[order][::-1], np.asarray(v, float)[order]])
                for v in values]
        return out
    return [theta, *(np.asarray(v, float) for v in values)]


def polar_figure(curves: Sequence[PolarCurve], *, measured: Optional[PolarPoints] = None,
                 time_unit: str = "", length_unit: str = "", style: str = "paper",
                 size: Optional[tuple[float, float]] = None, dpi: float = PRINT_DPI,
                 title: Optional[str] = None) -> Figure:
    """τ(θ) (left) and dσ/dθ (right) as polar plots on an Agg canvas: each
    theory curve, and the measured points with their error bars. `size` in
    inches (negative numbers: pixels, as `parse_size` gives)."""
    curves = list(curves)
    _check(curves, measured)
    if not (0 < dpi <= 2400):
        raise RenderError(f"--dpi {dpi:g}: choose 1 to 2400")
    look = get_look(style)
    size = figure_size(size, dpi) if size else DEFAULT_SIZE
    if not all(math.isfinite(s) and s > 0 for s in size):
        raise RenderError(f"figure size {size}: give two positive numbers")
    scale = min(max(min(size[0] / DEFAULT_SIZE[0], size[1] / DEFAULT_SIZE[1]), 0.45), 1.6)
    font = look.font * (0.7 if style == "paper" else 0.55) * scale
    lw = look.line * (0.7 if style == "paper" else 0.5) * scale
    fig = Figure(figsize=size, dpi=dpi, layout="constrained")
    FigureCanvasAgg(fig)
    ax_t = fig.add_subplot(1, 2, 1, projection="polar")
    ax_s = fig.add_subplot(1, 2, 2, projection="polar")
    colours = [look.theory, look.reflected, look.transmitted, look.reference, look.potential]
    t_unit = f" ({time_unit})" if time_unit else ""
    l_unit = f" ({length_unit})" if length_unit else ""
    delays, sections = [], []
    for i, c in enumerate(curves):
        colour = colours[i % len(colours)]
        th, d, s = _mirrored(c.theta, c.delay, c.cross_section)
        ax_t.plot(th, d, color=colour, linewidth=lw, label=c.label, gid=f"theory-delay-{i}")
        ax_s.plot(th, s, color=colour, linewidth=lw, label=c.label,
                  gid=f"theory-cross-section-{i}")
        delays.append(d)
        sections.append(s)
    style_pts = dict(marker="o", markersize=1.4 * lw + 2.5, linestyle="none",
                     color=look.measurement, capsize=1.2 * lw, elinewidth=0.6 * lw,
                     markeredgewidth=0.5 * lw)
    if measured is not None:
        mt = np.asarray(measured.theta, dtype=float)
        if measured.delay is not None:
            ax_t.errorbar(mt, measured.delay, yerr=measured.delay_error, label="measured",
                          gid="measured-delay", **style_pts)
            delays.append(np.asarray(measured.delay, float) +
                          np.nan_to_num(np.asarray(measured.delay_error
                                                   if measured.delay_error is not None
                                                   else 0.0, float)) * np.array([[1], [-1]]))
        if measured.cross_section is not None:
            ax_s.errorbar(mt, measured.cross_section, yerr=measured.cross_section_error,
                          label="measured", gid="measured-cross-section", **style_pts)
            sections.append(np.asarray(measured.cross_section, float))
    _delay_radius(ax_t, np.concatenate([np.ravel(d) for d in delays]), look, lw, font)
    _section_radius(ax_s, np.concatenate([np.ravel(s) for s in sections]))
    ax_t.set_title(f"delay τ(θ){t_unit}", fontsize=0.85 * font, color=look.text, pad=font)
    ax_s.set_title(f"dσ/dθ{l_unit}", fontsize=0.85 * font, color=look.text, pad=font)
    for ax in (ax_t, ax_s):
        ax.set_thetagrids(range(0, 360, 45), fontsize=0.7 * font)
        ax.tick_params(labelsize=0.65 * font)
        ax.grid(color=look.grid, linewidth=0.5 * lw)
        ax.set_rlabel_position(100)
    if len(curves) > 1 or measured is not None:
        ax_s.legend(fontsize=0.65 * font, frameon=False, labelcolor=look.text,
                    loc="upper left", bbox_to_anchor=(0.85, 1.12))
    if title:
        fig.suptitle(title, fontsize=0.9 * font, color=look.text)
    fig.supxlabel("θ from the incidence direction (+x); τ relative to a wave leaving the centre",
                  fontsize=0.6 * font, color=look.text)
    apply_look(fig, [ax_t, ax_s], look, font)
    ax_s.set_facecolor(look.background)
    fit_inside(fig)
    return fig


def _delay_radius(ax, values, look, lw, font) -> None:
    """Radius from a little below the smallest delay to a little above the
    largest; the τ = 0 circle dashed when it lies inside."""
    v = values[np.isfinite(values)]
    lo, hi = (float(v.min()), float(v.max())) if v.size else (0.0, 1.0)
    pad = 0.08 * (hi - lo) if hi > lo else max(abs(hi), 1.0) * 0.1
    ax.set_rorigin(lo - 2 * pad)
    ax.set_rlim(lo - pad, hi + pad)
    if lo - pad < 0 < hi + pad:
        circle = np.linspace(0, 2 * np.pi, 361)
        ax.plot(circle, np.zeros_like(circle), color=look.reference, linewidth=0.6 * lw,
                linestyle=(0, (4, 2)), gid="zero-delay")


def _section_radius(ax, values) -> None:
    v = values[np.isfinite(values) & (values > 0)]
    if not v.size:
        return
    lo, hi = float(v.min()), float(v.max())
    if hi / lo > LOG_SPAN:
        ax.set_rscale("log")
        ax.set_rlim(lo / 1.5, hi * 1.5)
    else:
        ax.set_rlim(0, hi * 1.08)


def save_polar(fig: Figure, path, dpi: float = PRINT_DPI) -> Path:
    """Write a polar figure (png, pdf or svg as FIGURE_FORMATS allow); the path."""
    out = check_output(Path(path), FIGURE_FORMATS, "figure")
    fig.savefig(out, dpi=dpi, facecolor=fig.get_facecolor())
    return out
