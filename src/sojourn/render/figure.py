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

from ..errors import RenderError
from ..store import RunFile
from .facts import RunFacts, channels, open_run, run_facts, window
from .options import FIGURE_FORMATS, PRINT_DPI, check_output, figure_size, unit_label
from .delays import delay_panels
from .sidebands import outgoing_spectra, sideband_panels
from .overlays import (action_window, direction, incident_bounds, reference_trajectory,
                       side_centroid, turning_time)
from .channels import transmission_ruler, transmitted_reference, untrusted_channels
from .scan import Ruler, Scan, channel_gain, reflection_ruler, scan_run
from .spin import SpinSummed, clock_panels, shade_clock
from .styles import Look, apply_look, fit_inside, look as get_look

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


def _zoom_panel(ax, times, measured: np.ndarray, reference, t_c: float, facts: RunFacts,
                ruler: Ruler, colour: str, look: Look, font: float, lw: float, unit: str,
                what: str) -> None:
    """The trajectories magnified where the outgoing packet has left: the
    reference's (`reference(t)`) and the measured centroid, five delays tall,
    with the ruler — the time the real packet reaches a place after the
    reference packet did."""
    x0 = float(reference(t_c))
    tau = ruler.delay
    half = max(2.5 * abs(tau), 1e-3 * float(np.ptp(times)) or 1.0)
    t_lo, t_hi = t_c + tau / 2 - half, t_c + tau / 2 + half
    ends = reference(np.array([t_c - half, t_c + half]))
    speed = abs(float(ends[1] - ends[0])) / (2 * half) or abs(facts.packet.group_velocity)
    t_fine = np.linspace(t_lo - half, t_hi + half, 200)
    ax.plot(reference(t_fine), t_fine, color=look.reference, linewidth=lw,
            linestyle=(0, (4, 2)))
    ax.plot(measured, times, color=colour, linewidth=lw, marker="o", markersize=lw + 2)
    ax.plot([x0, x0], [t_c, t_c + tau], color=look.measurement, linewidth=1.6 * lw,
            marker="_", markersize=4 * lw + 6, markeredgewidth=lw, gid="delay-ruler" if what == "reflected" else
            "delay-ruler-transmitted")
    ax.text(0.96, 0.04, ruler.label(unit, "\n"), transform=ax.transAxes, ha="right",
            va="bottom", color=look.measurement, fontsize=0.7 * font)
    ax.set_xlim(x0 - speed * half * 1.2, x0 + speed * half * 1.2)
    ax.set_ylim(t_lo, t_hi)
    ax.set_xlabel(f"x ({unit_label(facts.units['length'])})")
    ax.set_title(f"zoom on the {what} delay", fontsize=0.75 * font, loc="left")


def _far_gain(st: SpaceTime, scan: Scan, facts: RunFacts) -> tuple[float, np.ndarray]:
    """The transmitted part's scale factor (`channel_gain`) and the map's
    columns beyond the potential where it applies."""
    cols = np.linspace(*st.x_edges, st.image.shape[1] + 1)
    centres = 0.5 * (cols[1:] + cols[:-1])
    if not facts.scattering:
        return 1.0, np.zeros(len(centres), bool)
    return channel_gain(scan), direction(facts.packet) * (centres - facts.far_edge) > 0


def figure(path, options: FigureOptions = FigureOptions()):
    """The space–time figure of a run file (a matplotlib Figure on an Agg
    canvas): the map with the trajectories, a zoom with the delay ruler, and a
    delay panel with residuals when the file holds a saved delay analysis."""
    if not (0 < options.dpi <= 2400):
        raise RenderError(f"--dpi {options.dpi:g}: choose 1 to 2400")
    look = get_look(options.style)
    with open_run(path) as run:
        facts = run_facts(run)
        reader = SpinSummed(run) if facts.components is not None else run   # spinor: Σ|ψ±|²
        scan = scan_run(reader, facts)
        span = window(facts, options.xlim, action_window(
            facts.x, np.maximum(scan.peak, scan.reference_peak),
            facts.V if facts.scattering else None, facts.inner, facts.packet.width))
        st = space_time(reader, facts, span)
        driven = facts.potential is not None and facts.potential.driven \
            and facts.potential.drives() and facts.scattering
        spectra = outgoing_spectra(facts, run.psi(len(run) - 1)) if driven else None
    # a driven run has no phase delay to rule: its sidebands take the side panel
    ruler = reflection_ruler(scan, facts) if facts.scattering and not driven else None
    ruler_t = transmission_ruler(scan, facts) if facts.scattering and not driven else None
    doubt = untrusted_channels(facts.analysis)
    analysed = bool(channels(facts.analysis)) or bool(driven)
    clocks = facts.clock is not None and facts.scattering   # a spinor run: the clocks panel
    ratios = [1.5] + [0.75] * (bool(ruler) + bool(ruler_t)) + ([1.25] if analysed else []) \
        + ([1.25] if clocks else [])
    size = figure_size(options.size, options.dpi) if options.size else \
        (2.9 * sum(ratios) + 0.6, 4.6)
    # type and lines scale with the page (a 7-inch-wide page of panels is the norm)
    scale = min(max(min(size[0] / (2.9 * sum(ratios) + 0.6), size[1] / 4.6), 0.55), 1.6)
    font = look.font * (0.7 if options.style == "paper" else 0.55) * scale
    lw = look.line * (0.7 if options.style == "paper" else 0.5) * scale
    u = {k: unit_label(v) for k, v in facts.units.items() if isinstance(v, str)}

    fig = Figure(figsize=size, dpi=options.dpi, layout="constrained")
    FigureCanvasAgg(fig)
    stacked = len(ratios) > 1 and size[0] < 2.4 * len(ratios)   # narrow: panels in rows
    if stacked:
        grid = fig.add_gridspec(2, len(ratios) - 1, height_ratios=[1.3, 1])
        ax = fig.add_subplot(grid[0, :])
        cells = [grid[1, i] for i in range(len(ratios) - 1)]
    else:
        grid = fig.add_gridspec(1, len(ratios), width_ratios=ratios)
        ax = fig.add_subplot(grid[0, 0])
        cells = [grid[0, i] for i in range(1, len(ratios))]
    gain, far = _far_gain(st, scan, facts)
    image = st.image.copy()
    image[:, far] *= gain
    top = float(image.max()) or 1.0
    norm = LogNorm(vmin=top * 1e-6, vmax=top, clip=True) if options.log else \
        Normalize(vmin=0, vmax=top)
    image = np.maximum(image, top * 1e-6) if options.log else image
    mesh = ax.imshow(image, origin="lower", aspect="auto", cmap=look.cmap, norm=norm,
                     extent=(*st.x_edges, *st.t_edges), interpolation="nearest")
    bar = fig.colorbar(mesh, ax=ax, pad=0.01)
    bar.set_label(f"|ψ|² (1/{u['length']})", color=look.text, fontsize=0.85 * font)
    bar.ax.tick_params(colors=look.text, labelsize=0.7 * font)
    if facts.scattering:
        t_fine = np.linspace(st.times[0], st.times[-1], 800)
        ax.plot(reference_trajectory(t_fine, facts.packet, facts.reference), t_fine,
                color=look.reference, linewidth=lw, linestyle=(0, (4, 2)), label="ideal mirror",
                gid="mirror-trajectory")
        bad = "reflection" in doubt
        ax.plot(outgoing_trajectory(st, facts), st.times, color=look.untrusted if bad else
                look.measurement, linewidth=lw, gid="outgoing-centroid",
                label="measured reflected centroid" + (" (untrusted)" if bad else ""))
        if scan.has_transmission:
            ax.plot(transmitted_reference(t_fine, facts), t_fine, color=look.reference,
                    linewidth=0.7 * lw, linestyle=(0, (1.5, 1.5)),
                    label="free transmitted packet", gid="transmitted-reference")
            ax.plot(transmitted_trajectory(scan, facts), scan.times, color=look.untrusted if
                    "transmission" in doubt else look.transmitted, linewidth=lw,
                    label="measured transmitted centroid" + (
                        " (untrusted)" if "transmission" in doubt else ""),
                    gid="transmitted-centroid")
        ax.axvline(facts.reference, color=look.reference, linewidth=0.5 * lw, linestyle=":")
        if clocks:
            shade_clock(ax, facts, look)
        if gain > 1:
            ax.text(0.98, 0.02, f"far side ×{gain:.0e}".replace("e+0", "e"),
                    transform=ax.transAxes, ha="right", va="bottom", color=look.transmitted,
                    fontsize=0.7 * font)
    else:       # trapped or at rest: the packet's centroid is the trajectory to show
        ax.plot(st.side_centroid, st.times, color=look.measurement, linewidth=lw,
                label="centroid ⟨x⟩", gid="centroid")
    ax.set_xlim(*st.x_edges)
    ax.set_ylim(*st.t_edges)
    ax.set_xlabel(f"x ({u['length']})")
    ax.set_ylabel(f"t ({u['time']})")
    ax.set_title(facts.title, fontsize=0.85 * font, loc="left")
    legend = ax.legend(fontsize=0.65 * font, loc="upper right", frameon=True, framealpha=0.8,
                       facecolor=look.background, edgecolor="none", labelcolor=look.text)
    legend.get_frame().set_linewidth(0)
    axes = [ax]
    column = 0
    used = np.nonzero(scan.usable)[0]
    t_c = float(st.times[used[len(used) // 2]] if len(used) else st.times[-1])
    info = facts.packet
    for rule, what in ((ruler, "reflected"), (ruler_t, "transmitted")):
        if not rule:
            continue
        zoom = fig.add_subplot(cells[column])
        if what == "reflected":
            measured = outgoing_trajectory(st, facts)
            reference = lambda t: reference_trajectory(t, info, facts.reference)  # noqa: E731
        else:
            measured = transmitted_trajectory(scan, facts)
            reference = lambda t: transmitted_reference(t, facts)  # noqa: E731
        colour = look.untrusted if ("reflection" if what == "reflected" else "transmission") \
            in doubt else (look.measurement if what == "reflected" else look.transmitted)
        _zoom_panel(zoom, st.times, measured, reference, t_c, facts, rule, colour, look, font,
                    lw, u["time"], what)
        axes.append(zoom)
        column += 1
    if analysed:
        cell = cells[column].subgridspec(2, 1, height_ratios=[2.2, 1])
        upper = fig.add_subplot(cell[0])
        lower = fig.add_subplot(cell[1], sharex=upper)
        if driven:
            sideband_panels(upper, lower, facts, spectra, look, font, lw, u)
        else:
            delay_panels(upper, lower, facts, look, font, lw)
        axes += [upper, lower]
        column += 1
    if clocks:
        cell = cells[column].subgridspec(2, 1)
        upper = fig.add_subplot(cell[0])
        lower = fig.add_subplot(cell[1], sharex=upper)
        clock_panels((upper, lower), facts, look, font, lw)
        axes += [upper, lower]
    apply_look(fig, axes, look, font)
    fit_inside(fig)
    return fig


def transmitted_trajectory(scan: Scan, facts: RunFacts) -> np.ndarray:
    """The far side's centroid where that side holds at least half its largest
    probability after the turning time (NaN elsewhere)."""
    after = scan.times >= turning_time(facts.packet, facts.reference)
    if not after.any():
        return np.full(len(scan.times), np.nan)
    enough = after & (scan.transmitted >= 0.5 * float(scan.transmitted[after].max()))
    return np.where(enough, scan.transmitted_centroid, np.nan)


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
