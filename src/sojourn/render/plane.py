"""Movies and figures of a run in the plane.

A frame shows the density on (x, y) — coloured by the phase arg ψ (hue, with
its key) or alone — on a power-law or logarithmic scale so that a weak
scattered wave shows, the potential as contours, and, for a potential of x
alone, the ideal mirror image's trajectory (dashed) beside the measured
trajectory of the reflected packet's centroid, with the lateral shift D
between them drawn as a ruler in a zoomed panel. Figures put chosen
snapshots side by side with the same look.

The geometry drawn is computed here from the snapshots (`trajectories`:
pure functions of arrays); the measured lateral shift with its prediction is
`sojourn delay`'s.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Optional

import numpy as np
from matplotlib import colormaps
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import hsv_to_rgb, to_rgb
from matplotlib.figure import Figure

from ..errors import RenderError
from ..model import packets
from ..store import RunFile
from .movie import encode
from .options import MOVIE_FORMATS, check_output
from .styles import apply_look, look as get_look

FIGURE_FORMATS = (".png", ".pdf", ".svg")
SCALES = ("power", "log")
COLOURS = ("phase", "density")


@dataclass(frozen=True)
class PlaneOptions:
    """How a movie (or figure) of a run in the plane looks."""

    size: tuple[int, int] = (1920, 1080)   # pixels (a figure: inches × dpi)
    fps: float = 24.0
    style: str = "talk-dark"
    colour: str = "phase"        # "phase": hue = arg ψ, brightness = scaled density; "density"
    scale: str = "power"         # "power": (|ψ|²/max)^power; "log": `decades` below the max
    power: float = 0.5
    decades: float = 4.0
    contours: bool = True        # the potential's outline
    trajectories: bool = True    # the mirror image and the measured centroid (a potential of x alone)
    ruler: bool = True           # the lateral shift, zoomed
    quality: int = 18
    preset: str = "veryfast"


def check(options: PlaneOptions) -> None:
    """Refuse options that cannot be drawn, before any work."""
    get_look(options.style)
    if options.colour not in COLOURS:
        raise RenderError(f"colour {options.colour!r}: choose {' or '.join(COLOURS)}")
    if options.scale not in SCALES:
        raise RenderError(f"scale {options.scale!r}: choose {' or '.join(SCALES)}")
    if not (math.isfinite(options.power) and 0.05 <= options.power <= 1):
        raise RenderError(f"power {options.power:g}: choose 0.05 to 1")
    if not (math.isfinite(options.decades) and 1 <= options.decades <= 12):
        raise RenderError(f"decades {options.decades:g}: choose 1 to 12")
    if not (math.isfinite(options.fps) and 0 < options.fps <= 240):
        raise RenderError(f"fps {options.fps:g}: choose a rate above 0 and up to 240")


def scaled(density: np.ndarray, peak: float, options: PlaneOptions) -> np.ndarray:
    """The density mapped to [0, 1] for drawing (power law or log decades)."""
    d = np.clip(density / peak, 0.0, None)
    if options.scale == "log":
        with np.errstate(divide="ignore"):
            return np.clip(1 + np.log10(np.maximum(d, 1e-300)) / options.decades, 0.0, 1.0)
    return np.clip(d, 0.0, 1.0) ** options.power


def image(psi: np.ndarray, peak: float, options: PlaneOptions, look) -> np.ndarray:
    """RGB (Ny, Nx, 3): hue = arg ψ, value = the scaled density (or the look's
    colour map of the scaled density alone)."""
    value = scaled(np.abs(psi) ** 2, peak, options)
    if options.colour == "density":
        return colormaps[look.cmap](value)[..., :3]
    hue = (np.angle(psi) / (2 * math.pi)) % 1.0
    rgb = hsv_to_rgb(np.stack([hue, np.full_like(hue, 0.85), value], axis=-1))
    if not _dark(look):   # on a light page, density rises from white
        rgb = 1 - value[..., None] * (1 - rgb / np.maximum(value[..., None], 1e-12))
    return rgb


def _dark(look) -> bool:
    return sum(to_rgb(look.background)) < 1.5


@dataclass
class Trajectories:
    """The reflected packet's centroid (measured, per snapshot; NaN where the
    reflected side holds too little) and the ideal mirror image's, and the
    lateral shift D(t) = (y_c − y_m) + tanθ (x_c − x_m) between them."""

    times: np.ndarray
    measured: np.ndarray    # (S, 2) x, y
    mirror: np.ndarray      # (S, 2)
    shift: np.ndarray       # (S,)
    tan: float
    ideal: np.ndarray       # (S, 2): the free incident centroid until x_r, then the mirror image


def trajectories(x, y, times, states, normal: packets.PacketInfo,
                 transverse: packets.PacketInfo, reference: float, share: float = 0.999):
    """`Trajectories` of a run of a potential of x alone: the centroid of the
    incidence side (x < x_r for a packet moving right) once it holds `share`
    of the probability there is, and the mirror image of the incident packet's
    free centroid at x_r."""
    sign = 1 if normal.k0 >= 0 else -1
    side = sign * x < sign * reference
    cell = float(x[1] - x[0]) * float(y[1] - y[0])
    measured = []
    for _, psi in states:
        density = np.abs(psi) ** 2
        total = float(density.sum() * cell)
        part = density[:, side]
        p = float(part.sum() * cell)
        if p > 0 and p >= share * total:
            measured.append(((part.sum(axis=0) @ x[side]) * cell / p,
                             (part.sum(axis=1) @ y) * cell / p))
        else:
            measured.append((math.nan, math.nan))
    times = np.asarray(times, float)
    measured = np.array(measured, float).reshape(-1, 2)
    mirror = np.stack([2 * reference - (normal.center + normal.group_velocity * times),
                       transverse.center + transverse.group_velocity * times], axis=1)
    tan = transverse.group_velocity / normal.group_velocity
    shift = (measured[:, 1] - mirror[:, 1]) + sign * tan * (measured[:, 0] - mirror[:, 0])
    # only after the turn: the mirror image has left the reference point
    shift[sign * (mirror[:, 0] - reference) > -2 * normal.width] = math.nan
    ideal = mirror.copy()
    incoming = sign * (normal.center + normal.group_velocity * times) < sign * reference
    ideal[incoming, 0] = normal.center + normal.group_velocity * times[incoming]
    return Trajectories(times, measured, mirror, shift, tan, ideal)


class PlaneFrame:
    """One figure whose artists are updated per snapshot (see the module note)."""

    def __init__(self, run, options: PlaneOptions, dpi: float = 100.0):
        self.options, self.look = options, get_look(options.style)
        look = self.look
        self.x, self.y = np.asarray(run.x, float), np.asarray(run.coordinate("y"), float)
        self.times = run.times
        scenario = run.scenario()
        self.normal = packets.PacketInfo(**run.packet)
        self.transverse = packets.in_plane(scenario.packet, scenario.hbar,
                                           scenario.particle_mass, self.normal.level)[1]
        self.peak = float(np.max(np.abs(run.psi(0)) ** 2))
        along_x = scenario.build_potential().along_x
        self.paths = trajectories(self.x, self.y, self.times, run.snapshots(), self.normal,
                                  self.transverse, run.reference) \
            if along_x and options.trajectories and abs(self.normal.k0) > 0 else None
        w, h = options.size
        self.fig = Figure(figsize=(w / dpi, h / dpi), dpi=dpi, facecolor=look.background)
        self.canvas = FigureCanvasAgg(self.fig)
        side = self.paths is not None and options.ruler
        self.ax = self.fig.add_axes([0.06, 0.09, 0.62 if side else 0.86, 0.84])
        extent = (self.x[0], self.x[-1] + (self.x[1] - self.x[0]),
                  self.y[0], self.y[-1] + (self.y[1] - self.y[0]))
        self.im = self.ax.imshow(np.zeros((len(self.y), len(self.x), 3)), origin="lower",
                                 extent=extent, interpolation="bilinear", aspect="equal")
        V = np.asarray(run.V, float)
        if options.contours and np.ptp(V) > 0:
            self.ax.contour(self.x, self.y, V, levels=[V.min() + 0.5 * np.ptp(V)],
                            colors=[look.potential], linewidths=look.line * 0.6)
        apply_look(self.fig, [self.ax], look, look.font * w / 1920)
        unit = run.units.get("length", "")
        self.ax.set_xlabel(f"x ({unit})")
        self.ax.set_ylabel(f"y ({unit})")
        self.clock = self.ax.text(0.02, 0.97, "", transform=self.ax.transAxes, va="top",
                                  color=look.text, fontsize=0.8 * look.font * w / 1920)
        self.fig.text(0.06, 0.955, scenario.title, color=look.text,
                      fontsize=0.9 * look.font * w / 1920)
        self.key = self.fig.add_axes([0.74 if side else 0.925, 0.70, 0.12 if side else 0.06,
                                      0.2], projection="polar") \
            if options.colour == "phase" else None
        if self.key is not None:
            self._phase_key()
        self.zoom = None
        if self.paths is not None:
            self.mirror_line, = self.ax.plot([], [], "--", color=look.reference,
                                             lw=look.line * 0.5)
            self.measured_line, = self.ax.plot([], [], "-", color=look.trajectory,
                                               lw=look.line * 0.6)
            if side:
                self._zoom_panel(w)

    def _phase_key(self) -> None:
        """A colour wheel: hue against arg ψ (the key to the phase colours)."""
        theta = np.linspace(0, 2 * math.pi, 181)
        radius = np.linspace(0.3, 1.0, 12)
        hue = (theta[None, :] / (2 * math.pi)) % 1.0
        rgb = hsv_to_rgb(np.stack(np.broadcast_arrays(hue, 0.85, radius[:, None] ** 0.5),
                                  axis=-1))
        self.key.pcolormesh(theta, radius, rgb[:-1, :-1], shading="flat")
        self.key.set_yticks([])
        self.key.set_xticks([0, math.pi / 2, math.pi, 3 * math.pi / 2])
        self.key.set_xticklabels(["0", "π/2", "π", "3π/2"], color=self.look.text,
                                 fontsize=0.6 * self.look.font)
        self.key.set_facecolor(self.look.background)
        self.key.set_title("arg ψ", color=self.look.text, fontsize=0.7 * self.look.font)

    def _zoom_panel(self, width: float) -> None:
        """The two trajectories near where the ruler sits, magnified so D shows."""
        p = self.paths
        good = np.isfinite(p.shift)
        self.zoom = self.fig.add_axes([0.74, 0.12, 0.22, 0.45])
        apply_look(self.fig, [self.zoom], self.look, 0.7 * self.look.font * width / 1920)
        if not good.any():
            self.zoom.set_visible(False)
            return
        D = float(np.nanmean(p.shift))
        i = int(np.nonzero(good)[0][len(np.nonzero(good)[0]) // 2])
        cx, cy = p.mirror[i]
        half = max(4 * abs(D), 1e-6)
        s = np.linspace(-3 * half, 3 * half, 50)
        direction = np.array([-np.sign(self.normal.k0), p.tan * np.sign(self.normal.k0)])
        direction = direction / np.hypot(*direction)
        self.zoom.plot(cx + s * direction[0], cy + s * direction[1], "--",
                       color=self.look.reference, lw=self.look.line * 0.5, label="mirror image")
        self.zoom.plot(cx + s * direction[0], cy + D + s * direction[1], "-",
                       color=self.look.trajectory, lw=self.look.line * 0.6, label="measured")
        self.zoom.annotate("", xy=(cx, cy + D), xytext=(cx, cy),
                           arrowprops=dict(arrowstyle="<->", color=self.look.text,
                                           lw=self.look.line * 0.4))
        self.zoom.text(cx + 0.15 * half, cy + 0.5 * D, f"D = {D:.3g}", color=self.look.text,
                       va="center", fontsize=0.7 * self.look.font * width / 1920)
        self.zoom.set_xlim(cx - half, cx + half)
        self.zoom.set_ylim(cy - half, cy + half)
        self.zoom.set_aspect("equal")
        self.zoom.set_title("lateral shift", color=self.look.text,
                            fontsize=0.7 * self.look.font * width / 1920)
        self.zoom.legend(loc="lower left", fontsize=0.55 * self.look.font * width / 1920,
                         frameon=False, labelcolor=self.look.text)

    def draw(self, index: int, t: float, psi: np.ndarray) -> np.ndarray:
        self.im.set_data(image(psi, self.peak, self.options, self.look))
        self.clock.set_text(f"t = {t:.4g}")
        if self.paths is not None:
            p = self.paths
            upto = p.times <= t + 1e-12
            self.mirror_line.set_data(*p.ideal[upto].T)
            self.measured_line.set_data(*p.measured[upto & np.isfinite(p.shift)].T)
        self.canvas.draw()
        return np.asarray(self.canvas.buffer_rgba())


def is_plane_run(path) -> bool:
    """True for a run file whose ψ lies on (y, x)."""
    with RunFile(path) as run:
        return "y" in run.axes


def render_plane_movie(path, output, options: PlaneOptions = PlaneOptions(),
                       progress: Optional[Callable[[int, int], None]] = None) -> Path:
    """Write a movie (.mp4 or .gif) of a run in the plane, one frame per snapshot."""
    output = check_output(Path(output), MOVIE_FORMATS, "movie")
    check(options)
    if output.suffix.lower() == ".mp4" and (options.size[0] % 2 or options.size[1] % 2):
        raise RenderError(f"--size {options.size[0]}x{options.size[1]}: H.264 in yuv420p "
                          "needs an even width and height")
    with RunFile(path) as run:
        if len(run) == 0:
            raise RenderError(f"{path}: the run file holds no snapshots yet")
        frame = PlaneFrame(run, options)
        return encode(output, options, (frame.draw(i, t, psi)
                                        for i, (t, psi) in enumerate(run.snapshots())),
                      len(run), progress)


def render_plane_figure(path, output, times=None, options: Optional[PlaneOptions] = None,
                        dpi: float = 200.0) -> Path:
    """A figure of chosen snapshots (the nearest to each of `times`; default:
    the first, the middle and the last) side by side."""
    output = check_output(Path(output), FIGURE_FORMATS, "figure")
    options = options or PlaneOptions(style="paper", size=(2400, 900))
    check(options)
    with RunFile(path) as run:
        if len(run) == 0:
            raise RenderError(f"{path}: the run file holds no snapshots yet")
        chosen = [0, len(run) // 2, len(run) - 1] if times is None else sorted(
            {int(np.argmin(np.abs(run.times - float(t)))) for t in times})
        look = get_look(options.style)
        x, y = np.asarray(run.x, float), np.asarray(run.coordinate("y"), float)
        peak = float(np.max(np.abs(run.psi(0)) ** 2))
        w, h = options.size
        fig = Figure(figsize=(w / dpi, h / dpi), dpi=dpi, facecolor=look.background)
        FigureCanvasAgg(fig)
        axes = fig.subplots(1, len(chosen), sharey=True, squeeze=False)[0]
        V = np.asarray(run.V, float)
        extent = (x[0], x[-1], y[0], y[-1])
        for ax, i in zip(axes, chosen):
            ax.imshow(image(run.psi(i), peak, options, look), origin="lower", extent=extent,
                      interpolation="bilinear", aspect="equal")
            if options.contours and np.ptp(V) > 0:
                ax.contour(x, y, V, levels=[V.min() + 0.5 * np.ptp(V)],
                           colors=[look.potential], linewidths=0.8)
            ax.set_title(f"t = {float(run.times[i]):.4g}", fontsize=9, color=look.text)
            ax.set_xlabel(f"x ({run.units.get('length', '')})")
        axes[0].set_ylabel(f"y ({run.units.get('length', '')})")
        apply_look(fig, list(axes), look, 9)
        fig.savefig(output, facecolor=look.background)
    return output
