"""Figures of a run file (`sojourn render --figure fig.png`).

A space–time map of |ψ|² with the mirror's and the measured outgoing
trajectory, and, when a saved delay analysis exists, a panel of τ(E) with the
measured points, the prediction each method should give, and the packet's
spectrum. Drawn on a matplotlib Figure with its own Agg canvas (no global
backend is chosen).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import LogNorm, Normalize
from matplotlib.figure import Figure

from ..errors import RenderError, SojournError
from ..store.runfile import RunFile
from ..theory import solver as theory
from .facts import RunFacts, channels, open_run, run_facts, window
from .options import FIGURE_FORMATS, PRINT_DPI, check_output, figure_size, unit_label
from .overlays import (direction, energy_spectrum, energy_width, incident_bounds,
                       reference_trajectory, side_centroid, turning_time)
from .styles import Look, apply_look, look as get_look

MAP_COLUMNS = 1200         # space–time map resolution caps (bins, not pixels of output)
MAP_ROWS = 1500


@dataclass(frozen=True)
class FigureOptions:
    """How a figure looks: size in inches (None: chosen by the panels), dpi for
    raster output, style, x-range, and a linear or logarithmic map."""

    size: Optional[tuple[float, float]] = None
    dpi: float = PRINT_DPI
    style: str = "paper"
    xlim: Optional[tuple[float, float]] = None
    log: bool = False


@dataclass
class SpaceTime:
    """|ψ(x,t)|² binned onto a map, with the outgoing side's probability and centroid."""

    image: np.ndarray           # rows (time) × columns (x)
    x_edges: tuple[float, float]
    t_edges: tuple[float, float]
    times: np.ndarray
    side_probability: np.ndarray
    side_centroid: np.ndarray


def space_time(run: RunFile, facts: RunFacts, window: tuple[float, float],
               columns: int = MAP_COLUMNS, rows: int = MAP_ROWS) -> SpaceTime:
    """Bin |ψ|² in x (block means) and t (snapshots per row averaged), reading
    snapshots one at a time; also the probability and centroid of the incident
    side of the mirror (inside the absorbers; the whole box when no mirror
    applies) per snapshot."""
    x, times = facts.x, facts.times
    dx = float(x[1] - x[0])
    keep = np.nonzero((x >= window[0]) & (x <= window[1]))[0]
    block = max(1, int(math.ceil(len(keep) / columns)))
    keep = keep[: len(keep) // block * block] if len(keep) >= block else keep
    ncol = max(1, len(keep) // block)
    nrow = min(len(times), rows)
    t0, t1 = float(times[0]), float(times[-1])
    row_of = (np.zeros(len(times), int) if t1 == t0 else
              np.rint((times - t0) / (t1 - t0) * (nrow - 1)).astype(int))
    image = np.zeros((nrow, ncol))
    counts = np.zeros(nrow)
    bounds = (incident_bounds(facts.inner, facts.reference, facts.packet) if facts.scattering
              else facts.inner)
    prob = np.empty(len(times))
    cent = np.empty(len(times))
    for i, (_, psi) in enumerate(run.snapshots()):
        density = psi.real ** 2 + psi.imag ** 2
        image[row_of[i]] += density[keep].reshape(ncol, block).mean(axis=1)
        counts[row_of[i]] += 1
        prob[i], cent[i] = side_centroid(x, density, dx, bounds)
    filled = counts > 0
    image[filled] /= counts[filled, None]
    for r in np.nonzero(~filled)[0]:       # rows no snapshot fell in: the one below
        image[r] = image[r - 1]
    half = 0.5 * (t1 - t0) / max(nrow - 1, 1)
    return SpaceTime(image, (float(x[keep[0]] - dx / 2), float(x[keep[-1]] + dx / 2)),
                     (t0 - half, t1 + half), times, prob, cent)


def outgoing_trajectory(st: SpaceTime, facts: RunFacts) -> np.ndarray:
    """The measured outgoing centroid, NaN where it does not mean that: before
    the mirror's turning time, and where less than half the outgoing probability
    is left inside the absorbers (or almost none came back)."""
    after = st.times >= turning_time(facts.packet, facts.reference)
    centroid = np.where(after, st.side_centroid, np.nan)
    if not np.any(after):
        return centroid
    peak = float(np.max(st.side_probability[after]))
    enough = st.side_probability >= max(0.5 * peak, 1e-3)
    return np.where(enough, centroid, np.nan)


def channels(analysis: dict) -> list[tuple[str, dict]]:
    out = []
    for name in ("reflection", "transmission"):
        part = analysis.get(name) if isinstance(analysis, dict) else None
        if isinstance(part, dict) and isinstance(part.get("measured"), dict) and part["measured"]:
            out.append((name, part))
    return out


def theory_delays(facts: RunFacts, energies: np.ndarray) -> dict:
    """τ_R(E), τ_T(E) of stationary scattering for the run's potential, r
    referenced at the run's mirror point; {} when the theory cannot say."""
    if facts.potential is None:
        return {}
    try:
        result = theory.scatter(facts.potential, energies, hbar=facts.hbar, x_r=facts.reference,
                                direction="right" if direction(facts.packet) > 0 else "left")
    except (SojournError, ValueError, ArithmeticError):
        return {}
    out = {}
    for channel in ("reflection", "transmission"):
        values = np.asarray(getattr(result, f"delay_{channel}"), dtype=float)
        if values.shape == energies.shape and np.any(np.isfinite(values)):
            out[channel] = values
    return out


def _delay_panel(ax, facts: RunFacts, look: Look, font: float, lw: float) -> None:
    """τ(E) from theory, the measured delays with error bars at E₀, the spectrum."""
    info, u = facts.packet, facts.units
    sigma_e = facts.hbar ** 2 * abs(info.k0) * info.sigma_k / facts.mass
    e_lo = max(info.energy - 3 * sigma_e, info.level + 1e-3 * sigma_e)
    energies = np.linspace(e_lo, info.energy + 3 * sigma_e, 400)
    spectrum = energy_spectrum(energies, info, facts.hbar, facts.mass)
    shade = ax.twinx()
    shade.fill_between(energies, 0, spectrum, color=look.density, alpha=0.15, linewidth=0)
    shade.set_ylim(0, 1.15 * spectrum.max())
    shade.set_yticks([])
    shade.set_zorder(ax.get_zorder() - 1)
    ax.patch.set_visible(False)
    curves = theory_delays(facts, energies)
    markers = {"reflection": "o", "transmission": "s"}
    measured = channels(facts.analysis or {})
    for c, (name, part) in enumerate(measured):
        colour = look.density if name == "reflection" else look.real
        if name in curves:
            ax.plot(energies, curves[name], color=colour, linewidth=lw, gid=f"theory-{name}",
                    label=f"theory τ_{name[0].upper()}(E)")
        wigner = (part.get("theory") or {}).get("wigner")
        if isinstance(wigner, (int, float)) and math.isfinite(wigner):
            ax.plot([info.energy], [wigner], marker="*", color=look.energy, markersize=2.5 * lw + 6,
                    linestyle="none", label="phase delay at E₀" if c == 0 else None)
        methods = list(part["measured"].items())
        offsets = (np.arange(len(methods)) - (len(methods) - 1) / 2) * 0.08 * sigma_e
        for i, (method, m) in enumerate(methods):
            if not isinstance(m, dict) or not isinstance(m.get("delay"), (int, float)):
                continue
            err = m.get("error")
            err = abs(err) if isinstance(err, (int, float)) and math.isfinite(err) else None
            ax.errorbar([info.energy + offsets[i]], [m["delay"]], yerr=err,
                        marker=markers[name], markersize=1.8 * lw + 3, capsize=2 * lw,
                        linewidth=lw * 0.8, linestyle="none", color=f"C{i}",
                        label=f"{name} {method}")
            if isinstance(m.get("predicted"), (int, float)):
                ax.plot([info.energy + offsets[i]], [m["predicted"]], marker="_", color=f"C{i}",
                        markersize=4 * lw + 6, markeredgewidth=lw)
    ax.set_xlim(energies[0], energies[-1])
    ax.set_xlabel(f"E ({u['energy']})")
    ax.set_ylabel(f"delay ({u['time']})")
    ax.axvline(info.energy, color=look.grid, linewidth=0.6 * lw, zorder=0)
    ax.legend(fontsize=0.7 * font, frameon=False, labelcolor=look.text, loc="best")
    ax.set_title("delays: theory, measured (–: prediction)", fontsize=0.9 * font)


def figure(path, options: FigureOptions = FigureOptions()):
    """The space–time figure of a run file (a matplotlib Figure on an Agg
    canvas), with a delay panel when the file holds a saved delay analysis."""
    if not (0 < options.dpi <= 2400):
        raise RenderError(f"--dpi {options.dpi:g}: choose 1 to 2400")
    look = get_look(options.style)
    with open_run(path) as run:
        facts = run_facts(run)
        span = window(facts, options.xlim)
        st = space_time(run, facts, span)
    panels = 2 if channels(facts.analysis or {}) else 1
    size = figure_size(options.size, options.dpi) if options.size else \
        ((6.5, 4.5) if panels == 1 else (11.0, 4.5))
    font = look.font * (0.7 if options.style == "paper" else 0.55)
    lw = look.line * (0.7 if options.style == "paper" else 0.5)

    fig = Figure(figsize=size, dpi=options.dpi, layout="constrained")
    FigureCanvasAgg(fig)
    grid = fig.add_gridspec(1, panels, width_ratios=[1.4, 1][:panels])
    ax = fig.add_subplot(grid[0, 0])
    u = facts.units
    top = float(st.image.max()) or 1.0
    norm = LogNorm(vmin=top * 1e-6, vmax=top, clip=True) if options.log else \
        Normalize(vmin=0, vmax=top)
    image = np.maximum(st.image, top * 1e-6) if options.log else st.image
    mesh = ax.imshow(image, origin="lower", aspect="auto", cmap=look.cmap, norm=norm,
                     extent=(*st.x_edges, *st.t_edges), interpolation="nearest")
    bar = fig.colorbar(mesh, ax=ax, pad=0.01)
    bar.set_label(f"|ψ|² (1/{u['length']})", color=look.text, fontsize=font)
    bar.ax.tick_params(colors=look.text, labelsize=0.8 * font)
    if facts.scattering:
        t_fine = np.linspace(st.times[0], st.times[-1], 800)
        ax.plot(reference_trajectory(t_fine, facts.packet, facts.reference), t_fine,
                color="white", linewidth=lw, linestyle=(0, (4, 2)), label="ideal mirror",
                gid="mirror-trajectory")
        ax.plot(outgoing_trajectory(st, facts), st.times, color=look.trajectory, linewidth=lw,
                label="measured outgoing centroid", gid="outgoing-centroid")
        ax.axvline(facts.reference, color="white", linewidth=0.5 * lw, alpha=0.6, linestyle=":")
    else:       # trapped or at rest: the packet's centroid is the trajectory to show
        ax.plot(st.side_centroid, st.times, color=look.trajectory, linewidth=lw,
                label="centroid ⟨x⟩", gid="centroid")
    ax.set_xlim(*st.x_edges)
    ax.set_ylim(*st.t_edges)
    ax.set_xlabel(f"x ({u['length']})")
    ax.set_ylabel(f"t ({u['time']})")
    ax.set_title(facts.title, fontsize=font)
    legend = ax.legend(fontsize=0.7 * font, loc="upper right", frameon=True, framealpha=0.6,
                       facecolor="black", edgecolor="none", labelcolor="white")
    legend.get_frame().set_linewidth(0)
    axes = [ax]
    if panels == 2:
        ax2 = fig.add_subplot(grid[0, 1])
        _delay_panel(ax2, facts, look, font, lw)
        axes.append(ax2)
    apply_look(fig, axes, look, font)
    return fig


def render_figure(path, output, options: FigureOptions = FigureOptions()) -> Path:
    """Write the space–time figure of a run file: PNG at options.dpi, PDF or SVG
    (the page size is options.size in inches)."""
    output = check_output(Path(output), FIGURE_FORMATS, "figure")
    fig = figure(path, options)
    try:
        fig.savefig(output, dpi=options.dpi, facecolor=fig.get_facecolor())
    except OSError as exc:
        raise RenderError(f"{output}: cannot write the figure ({exc})") from None
    return output


