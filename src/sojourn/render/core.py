"""Movies and figures from run files, for talks and papers (`sojourn render`).

A movie shows |ψ(x,t)|² (optionally Re ψ, Im ψ, or the density coloured by the
local phase), the potential to scale on its own energy axis with the packet's
energy E₀ marked, the time, and, drawn faintly, the packet an ideal mirror at
the run's reference point would return, so the delay is visible. A figure is a
space–time map of |ψ|² with the mirror's and the measured outgoing trajectory,
and, when a saved delay analysis exists, a panel of τ(E) with the measured
points and the packet's spectrum.

Both stream: snapshots are read one at a time (`RunFile.snapshots()`), and a
movie frame is drawn by updating the artists of one figure (blitting over a
cached background) and handing the canvas buffer straight to the encoder.
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable, Optional

import numpy as np

from ..model.packets import PacketInfo, free_evolution
from ..store import RunFile
from ..errors import SojournError, RenderError
from ..theory.scattering import scatter

CURVES = ("density", "real", "imag", "phase", "reference", "potential")
DEFAULT_CURVES = ("density", "reference", "potential")
STYLES = ("talk-dark", "talk-light", "paper")
MOVIE_FORMATS = (".mp4", ".gif")
FIGURE_FORMATS = (".png", ".pdf", ".svg")
MAX_PIXELS = 7680          # longest movie side accepted (8K UHD)
MAX_FIGURE_INCHES = 60.0
MAP_COLUMNS = 1200         # space–time map resolution caps (bins, not pixels of output)
MAP_ROWS = 1500




# ---------------------------------------------------------------------------------------
# options


@dataclass(frozen=True)
class MovieOptions:
    """How a movie looks: size in pixels, frames per second, style, x-range, curves."""

    size: tuple[int, int] = (1920, 1080)
    fps: float = 30.0
    style: str = "talk-dark"
    xlim: Optional[tuple[float, float]] = None
    curves: tuple[str, ...] = DEFAULT_CURVES
    quality: int = 18      # H.264 constant rate factor (lower is better; 18 looks lossless)
    preset: str = "veryfast"   # x264 speed preset: the encoder, not drawing, sets the pace


@dataclass(frozen=True)
class FigureOptions:
    """How a figure looks: size in inches (None: chosen by the panels), dpi for
    raster output, style, x-range, and a linear or logarithmic map."""

    size: Optional[tuple[float, float]] = None
    dpi: float = 300.0
    style: str = "paper"
    xlim: Optional[tuple[float, float]] = None
    log: bool = False


def parse_size(text: str, unit: str = "px") -> tuple[float, float]:
    """'WxH' → (W, H). unit 'px' (movies: whole pixels) or 'in' (figures:
    inches, or pixels when the text ends in 'px', returned as negative numbers
    for `figure_size` to convert)."""
    raw = str(text).strip().lower()
    pixels = unit == "px" or raw.endswith("px")
    body = raw[:-2] if raw.endswith("px") else raw
    parts = body.replace("×", "x").split("x")
    try:
        w, h = (float(p) for p in parts)
    except ValueError:
        raise RenderError(f"--size {text!r}: expected WIDTHxHEIGHT, e.g. "
                          f"{'1920x1080' if unit == 'px' else '7x4.5 (inches) or 2100x1350px'}")\
            from None
    if not (math.isfinite(w) and math.isfinite(h)) or w <= 0 or h <= 0:
        raise RenderError(f"--size {text!r}: width and height must be positive")
    if pixels:
        if w != int(w) or h != int(h):
            raise RenderError(f"--size {text!r}: pixel sizes are whole numbers")
        if w < 64 or h < 64 or max(w, h) > MAX_PIXELS:
            raise RenderError(f"--size {text!r}: each side must be 64 to {MAX_PIXELS} pixels")
        return (int(w), int(h)) if unit == "px" else (-w, -h)
    if max(w, h) > MAX_FIGURE_INCHES or min(w, h) < 1:
        raise RenderError(f"--size {text!r}: figure sides must be 1 to {MAX_FIGURE_INCHES:g} "
                          "inches (or give pixels, e.g. 2100x1350px)")
    return (w, h)


def figure_size(size: tuple[float, float], dpi: float) -> tuple[float, float]:
    """Inches from `parse_size(..., 'in')` (negative numbers are pixels)."""
    w, h = size
    return (-w / dpi if w < 0 else w, -h / dpi if h < 0 else h)


def parse_xlim(text: str) -> tuple[float, float]:
    """'A:B' → (A, B) with A < B."""
    try:
        a, b = (float(p) for p in str(text).split(":"))
    except ValueError:
        raise RenderError(f"--xlim {text!r}: expected LEFT:RIGHT, e.g. -300:100") from None
    if not (math.isfinite(a) and math.isfinite(b)) or b <= a:
        raise RenderError(f"--xlim {text!r}: the right end must exceed the left end")
    return (a, b)


def parse_curves(text: str) -> tuple[str, ...]:
    """'density,reference' → ('density', 'reference'), checked against CURVES."""
    names = tuple(n.strip() for n in str(text).split(",") if n.strip())
    unknown = [n for n in names if n not in CURVES]
    if unknown or not names:
        raise RenderError(f"--curves: unknown curve {unknown[0]!r}; choose from "
                          f"{', '.join(CURVES)}" if unknown else
                          f"--curves: name at least one of {', '.join(CURVES)}")
    if not set(names) & {"density", "real", "imag", "phase"}:
        raise RenderError("--curves: name at least one of density, real, imag, phase "
                          "(the wave itself)")
    return names


# ---------------------------------------------------------------------------------------
# physics for the overlays (pure functions on arrays)


def incident_side(info: PacketInfo) -> int:
    """-1 when the packet comes from the left (moves right), +1 from the right."""
    return -1 if info.k0 >= 0 else 1


def turning_time(info: PacketInfo, reference: float) -> float:
    """When the free centroid x₀ + v₀t reaches the mirror at `reference`."""
    return (reference - info.center) / info.group_velocity


def mirror_reference(x: np.ndarray, t: float, info: PacketInfo, reference: float,
                     hbar: float, mass: float) -> np.ndarray:
    """What an ideal mirror (a hard wall) at x_r returns: by the method of images,
    ψ_ref(x,t) = ψ_free(x,t) − ψ_free(2x_r − x, t) on the incident side, 0 beyond.
    Before the reflection this is the free incident packet, after it the mirror
    image −ψ_free(2x_r − x, t); in between it is the exact standing wave."""
    direct = free_evolution(x, t, info, hbar, mass)
    image = free_evolution(2 * reference - x, t, info, hbar, mass)
    psi = direct - image
    beyond = (x > reference) if info.k0 >= 0 else (x < reference)
    psi[beyond] = 0
    return psi


def reference_trajectory(t: np.ndarray, info: PacketInfo, reference: float) -> np.ndarray:
    """Centroid of the mirror's packet: x₀ + v₀t until it reaches x_r, then
    2x_r − (x₀ + v₀t)."""
    free = info.center + info.group_velocity * np.asarray(t, dtype=float)
    past = (free > reference) if info.k0 >= 0 else (free < reference)
    return np.where(past, 2 * reference - free, free)


def side_centroid(x: np.ndarray, density: np.ndarray, dx: float, bounds: tuple[float, float]
                  ) -> tuple[float, float]:
    """Probability and centroid of |ψ|² between bounds (NaN centroid if empty)."""
    inside = (x >= bounds[0]) & (x <= bounds[1])
    weight = density[inside]
    p = float(weight.sum() * dx)
    return p, float(np.dot(x[inside], weight) / weight.sum()) if p > 0 else float("nan")


def energy_spectrum(energy: np.ndarray, info: PacketInfo, hbar: float, mass: float
                    ) -> np.ndarray:
    """The packet's probability per unit energy, |φ̃(k)|²·dk/dE with
    |φ̃(k)|² a Gaussian of rms σ_k about k₀ (PHYSICS §2), k = √(2m(E−V))/ħ."""
    kinetic = np.clip(np.asarray(energy, dtype=float) - info.level, 0, None)
    k = np.sqrt(2 * mass * kinetic) / hbar
    weight = np.exp(-((k - abs(info.k0)) ** 2) / (2 * info.sigma_k ** 2)) / (
        math.sqrt(2 * math.pi) * info.sigma_k)
    with np.errstate(divide="ignore", invalid="ignore"):
        dk_de = np.where(k > 0, mass / (hbar ** 2 * k), 0.0)
    return weight * dk_de


# ---------------------------------------------------------------------------------------
# looks


@dataclass(frozen=True)
class Look:
    """Colours, type and line sizes of one style (sizes at 1080 pixels high for
    movies, in points for figures)."""

    background: str
    text: str
    grid: str
    density: str
    real: str
    imag: str
    reference: str
    potential: str
    energy: str
    font: float
    line: float
    cmap: str = "magma"
    trajectory: str = "#7fdbff"


LOOKS = {
    "talk-dark": Look(background="#0e1117", text="#e8e8e8", grid="#3a3f4b", density="#4fc3f7",
                      real="#81c784", imag="#ce93d8", reference="#bbbbbb", potential="#ffb74d",
                      energy="#ef5350", font=26, line=4.0),
    "talk-light": Look(background="#ffffff", text="#1a1a1a", grid="#d0d0d0", density="#1565c0",
                       real="#2e7d32", imag="#8e24aa", reference="#777777", potential="#e65100",
                       energy="#c62828", font=26, line=4.0, trajectory="#00bcd4"),
    "paper": Look(background="#ffffff", text="#000000", grid="#e0e0e0", density="#1f4e9a",
                  real="#3b7d3b", imag="#8a3b8a", reference="#808080", potential="#a0522d",
                  energy="#b22222", font=14, line=1.6, cmap="viridis", trajectory="#00e5ff"),
}


def _look(style: str) -> Look:
    if style not in LOOKS:
        raise RenderError(f"--style {style!r}: choose from {', '.join(STYLES)}")
    return LOOKS[style]


def _apply_look(fig, axes, look: Look, font: float) -> None:
    fig.set_facecolor(look.background)
    for ax in axes:
        ax.set_facecolor("none" if ax is not axes[0] else look.background)
        ax.tick_params(colors=look.text, labelsize=0.8 * font, width=max(font / 20, 0.6),
                       length=font / 3)
        for spine in ax.spines.values():
            spine.set_color(look.text)
            spine.set_linewidth(max(font / 20, 0.6))
        ax.xaxis.label.set_color(look.text)
        ax.yaxis.label.set_color(look.text)
        ax.xaxis.label.set_fontsize(font)
        ax.yaxis.label.set_fontsize(font)
        ax.title.set_color(look.text)


# ---------------------------------------------------------------------------------------
# run-file facts


@dataclass
class RunFacts:
    """What the overlays need from a run file, in the scenario's units."""

    title: str
    units: dict
    hbar: float
    mass: float
    packet: PacketInfo
    reference: float
    x: np.ndarray
    V: np.ndarray
    inner: tuple[float, float]      # the box without its absorbing layers
    times: np.ndarray
    analysis: Optional[dict] = None
    levels: Optional[tuple[float, float]] = None
    scenario: object = field(default=None, repr=False)
    scattering: bool = True     # a moving packet and an open potential: a mirror applies


def run_facts(run: RunFile) -> RunFacts:
    """Gather the run's numbers (no snapshots are read)."""
    attrs = run.attrs
    x = run.x
    W = run.absorber
    free = x if W is None or not np.any(W == 0) else x[W == 0]
    info = PacketInfo(**run.packet)
    try:
        scenario = run.scenario()
        title = scenario.title
        confining = scenario.build_potential().confining
    except SojournError:
        scenario, title, confining = None, str(attrs.get("title", "")), False
    return RunFacts(title=str(title or attrs.get("title", "")), units=run.units,
                    hbar=float(attrs["hbar"]), mass=float(attrs["mass"]),
                    packet=info, reference=run.reference, x=x, V=run.V,
                    inner=(float(free[0]), float(free[-1])), times=run.times,
                    analysis=run.analysis(), scenario=scenario,
                    scattering=not confining and info.k0 != 0)


def _open_run(path) -> RunFile:
    run = RunFile(path)
    if len(run) == 0:
        run.close()
        raise RenderError(f"{path}: the run file holds no snapshots yet")
    return run


def _window(facts: RunFacts, xlim) -> tuple[float, float]:
    lo, hi = xlim if xlim is not None else facts.inner
    if hi <= facts.x[0] or lo >= facts.x[-1]:
        raise RenderError(f"--xlim {lo:g}:{hi:g} lies outside the box "
                          f"[{facts.x[0]:g}, {facts.x[-1]:g}]")
    return float(lo), float(hi)


def _time_format(times: np.ndarray) -> str:
    step = float(np.min(np.diff(times))) if len(times) > 1 else 1.0
    digits = max(0, min(6, int(math.ceil(-math.log10(step))) + 1)) if step > 0 else 2
    return f"{{:.{digits}f}}"


# ---------------------------------------------------------------------------------------
# encoders


def _check_output(path: Path, formats: tuple[str, ...], what: str) -> Path:
    path = Path(path)
    if path.suffix.lower() not in formats:
        raise RenderError(f"{path}: {what} format {path.suffix or '(none)'!r} is not supported; "
                          f"use {' or '.join(formats)}")
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.is_dir():
        raise RenderError(f"{path}: folder {parent} does not exist; create it first")
    if not os.access(parent, os.W_OK) or (path.exists() and not os.access(path, os.W_OK)):
        raise RenderError(f"{path}: cannot write there (permission denied); choose another path")
    return path


def open_encoder(path: Path, size: tuple[int, int], fps: float, quality: int = 18,
                 preset: str = "veryfast"):
    """A started imageio-ffmpeg frame sink: `.send(rgba)` with an H×W×4 uint8
    buffer (the canvas buffer itself, no copy), `.close()`.
    MP4: H.264 in yuv420p (plays in presentation and browser players; needs even
    sides). GIF: one palette per frame, so it streams and keeps colours true."""
    import imageio_ffmpeg
    path = Path(path)
    if path.suffix.lower() == ".mp4":
        if size[0] % 2 or size[1] % 2:
            raise RenderError(f"--size {size[0]}x{size[1]}: H.264 in yuv420p needs an even width "
                              "and height")
        writer = imageio_ffmpeg.write_frames(
            str(path), size, fps=fps, codec="libx264", pix_fmt_in="rgba", pix_fmt_out="yuv420p",
            quality=None, macro_block_size=1, ffmpeg_log_level="error",
            output_params=["-crf", str(int(quality)), "-preset", preset, "-movflags", "+faststart"])
    else:
        palette = "split[a][b];[a]palettegen=stats_mode=single[p];[b][p]paletteuse=new=1"
        writer = imageio_ffmpeg.write_frames(
            str(path), size, fps=fps, codec="gif", pix_fmt_in="rgba", pix_fmt_out="pal8",
            quality=None, macro_block_size=1, ffmpeg_log_level="error",
            output_params=["-filter_complex", palette, "-loop", "0"])
    writer.send(None)  # start ffmpeg
    return writer


# ---------------------------------------------------------------------------------------
# movies


class MovieFrame:
    """One figure whose artists are updated for every snapshot. The static parts
    (axes, potential, E₀, legend, title) are drawn once and cached; each frame
    restores them and draws only the moving artists (blitting)."""

    def __init__(self, facts: RunFacts, options: MovieOptions, peak: float):
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
        from matplotlib.patches import Polygon

        self.facts, self.options = facts, options
        if not facts.scattering:   # a trapped or resting packet has no mirror to compare with
            options = replace(options, curves=tuple(c for c in options.curves if c != "reference"))
        look = _look(options.style)
        width, height = options.size
        scale = height / 1080
        font, lw = look.font * scale, look.line * scale
        self.look = look
        curves = set(options.curves)
        lo, hi = _window(facts, options.xlim)
        x = facts.x
        keep = np.nonzero((x >= lo) & (x <= hi))[0]
        stride = max(1, int(math.ceil(len(keep) / (2 * width))))
        self.index = keep[::stride]
        self.xs = x[self.index]
        self.curves = curves
        u = facts.units

        fig = Figure(figsize=(width / 100, height / 100), dpi=100)
        self.canvas = FigureCanvasAgg(fig)
        self.fig = fig
        ax = fig.add_axes((0.09, 0.11, 0.83 if "potential" in curves else 0.89, 0.73))
        axes = [ax]
        wave = {"real", "imag"} & curves
        top = 1.08 * max(peak, 1e-300)
        ax.set_xlim(lo, hi)
        ax.set_ylim(-top if wave else 0.0, top)
        ax.set_xlabel(f"x ({u['length']})")
        ax.set_ylabel(f"|ψ|² (1/{u['length']})")
        ax.grid(True, color=look.grid, linewidth=max(lw / 4, 0.5), alpha=0.6)
        self.moving = []

        if "potential" in curves:
            ax2 = ax.twinx()
            axes.append(ax2)
            V = facts.V[keep]
            e0 = facts.packet.energy
            e_lo, e_hi = min(float(V.min()), e0, 0.0), max(float(V.max()), e0)
            span = (e_hi - e_lo) or abs(e0) or 1.0
            ax2.set_ylim(e_lo - 0.02 * span, e_hi + 0.25 * span)
            ax2.set_ylabel(f"energy ({u['energy']})")
            ax2.fill_between(x[keep], e_lo - 0.02 * span, V, color=look.potential, alpha=0.18,
                             linewidth=0)
            ax2.plot(x[keep], V, color=look.potential, linewidth=lw, label="V(x)")
            ax2.axhline(e0, color=look.energy, linewidth=0.7 * lw, linestyle=(0, (4, 2)))
            ax2.text(lo + 0.01 * (hi - lo), e0, f" E₀ = {e0:.4g} {u['energy']}",
                     color=look.energy, fontsize=0.8 * font, va="bottom")
            ax.set_zorder(ax2.get_zorder() + 1)   # the wave on top of the potential
            ax.patch.set_visible(False)
            ax2.patch.set_visible(True)
            ax2.patch.set_facecolor(look.background)
        else:
            ax2 = None

        handles = []
        if "phase" in curves:
            self.phase_rows = max(64, int(0.76 * height / 2))
            cols = len(self.xs)
            self.phase_heights = (np.arange(self.phase_rows) + 0.5) / self.phase_rows * top
            from matplotlib import colormaps
            self.phase_lut = (colormaps["twilight_shifted"](np.linspace(0, 1, 256)) * 255
                              ).astype(np.uint8)
            self.phase_image = ax.imshow(np.zeros((self.phase_rows, cols, 4), np.uint8),
                                         extent=(self.xs[0], self.xs[-1], 0, top), origin="lower",
                                         aspect="auto", interpolation="nearest", animated=True)
            self.moving.append(self.phase_image)
        if "reference" in curves:
            self.reference_line, = ax.plot(self.xs, np.zeros_like(self.xs), color=look.reference,
                                           linewidth=0.8 * lw, alpha=0.55, linestyle=(0, (3, 1.5)),
                                           animated=True, label=f"ideal mirror at x = "
                                                                f"{facts.reference:g}")
            self.moving.append(self.reference_line)
            handles.append(self.reference_line)
        if "real" in curves:
            self.real_line, = ax.plot(self.xs, np.zeros_like(self.xs), color=look.real,
                                      linewidth=0.6 * lw, animated=True, label="Re ψ (scaled)")
            self.moving.append(self.real_line)
            handles.append(self.real_line)
        if "imag" in curves:
            self.imag_line, = ax.plot(self.xs, np.zeros_like(self.xs), color=look.imag,
                                      linewidth=0.6 * lw, animated=True, label="Im ψ (scaled)")
            self.moving.append(self.imag_line)
            handles.append(self.imag_line)
        if "density" in curves or "phase" in curves:
            verts = np.zeros((len(self.xs) + 2, 2))
            verts[1:-1, 0] = self.xs
            verts[0, 0], verts[-1, 0] = self.xs[0], self.xs[-1]
            self.fill_verts = verts
            self.fill = Polygon(verts, closed=True, facecolor=look.density, alpha=0.3,
                                linewidth=0, animated=True)
            ax.add_patch(self.fill)
            self.density_line, = ax.plot(self.xs, np.zeros_like(self.xs), color=look.density,
                                         linewidth=lw, animated=True, label="|ψ|²")
            if "phase" in curves:
                self.fill.set_visible(False)
            self.moving[:0] = [self.fill]
            self.moving.append(self.density_line)
            handles.insert(0, self.density_line)
        self.amplitude = math.sqrt(max(peak, 1e-300))
        if ax2 is not None:
            handles += ax2.get_lines()[:1]
        legend = ax.legend(handles=handles, loc="lower center", bbox_to_anchor=(0.5, 1.0),
                           ncol=len(handles), fontsize=0.75 * font, frameon=False,
                           labelcolor=look.text, handlelength=1.6, columnspacing=1.5)
        legend.set_animated(False)
        self.time_text = ax.text(0.015, 0.95, "", transform=ax.transAxes, color=look.text,
                                 fontsize=font, va="top", ha="left", animated=True,
                                 family="monospace")
        self.moving.append(self.time_text)
        self.time_format = _time_format(facts.times)
        fig.suptitle(facts.title, color=look.text, fontsize=1.15 * font, y=0.965)
        _apply_look(fig, axes, look, font)
        self.ax = ax
        self.canvas.draw()
        self.background = self.canvas.copy_from_bbox(fig.bbox)

    def draw(self, t: float, psi: np.ndarray) -> np.ndarray:
        """Update the moving artists for (t, ψ) and return the frame, H×W×4 RGBA
        uint8 (the canvas buffer itself; valid until the next call)."""
        f = self.facts
        psi = psi[self.index]
        density = psi.real ** 2 + psi.imag ** 2
        if hasattr(self, "density_line"):
            self.density_line.set_ydata(density)
            if self.fill.get_visible():
                self.fill_verts[1:-1, 1] = density
                self.fill.set_xy(self.fill_verts)
        if "phase" in self.curves:
            hue = ((np.angle(psi) + math.pi) / (2 * math.pi) * 255).astype(np.intp) % 256
            rgba = self.phase_lut[hue][None, :, :].repeat(self.phase_rows, axis=0)
            rgba[..., 3] = np.where(self.phase_heights[:, None] < density[None, :], 230, 0)
            self.phase_image.set_data(rgba)
        if "reference" in self.curves:
            ref = mirror_reference(self.xs, t, f.packet, f.reference, f.hbar, f.mass)
            self.reference_line.set_ydata(ref.real ** 2 + ref.imag ** 2)
        if "real" in self.curves:
            self.real_line.set_ydata(psi.real * self.amplitude)
        if "imag" in self.curves:
            self.imag_line.set_ydata(psi.imag * self.amplitude)
        self.time_text.set_text(f"t = {self.time_format.format(t)} {f.units['time']}")
        self.canvas.restore_region(self.background)
        for artist in self.moving:
            if artist.get_visible():
                self.ax.draw_artist(artist)
        return np.asarray(self.canvas.buffer_rgba())


def peak_density(run: RunFile, facts: RunFacts, options: MovieOptions) -> float:
    """Largest |ψ|² (and the reference's) inside the window over all snapshots,
    read one at a time, so that the axes stay fixed through the movie."""
    lo, hi = _window(facts, options.xlim)
    inside = (facts.x >= lo) & (facts.x <= hi)
    xs = facts.x[inside]
    top = 0.0
    for t, psi in run.snapshots():
        p = psi[inside]
        top = max(top, float(np.max(p.real ** 2 + p.imag ** 2)))
        if "reference" in options.curves and facts.scattering:
            ref = mirror_reference(xs, t, facts.packet, facts.reference, facts.hbar, facts.mass)
            top = max(top, float(np.max(ref.real ** 2 + ref.imag ** 2)))
    return top


def render_movie(path, output, options: MovieOptions = MovieOptions(),
                 progress: Optional[Callable[[int, int], None]] = None) -> Path:
    """Write a movie (.mp4: H.264/yuv420p, .gif) of a run file, one frame per
    snapshot; `progress(done, total)` is called after each frame. Every option
    is checked, and the figure built, before the encoder starts."""
    output = _check_output(Path(output), MOVIE_FORMATS, "movie")
    if not math.isfinite(options.fps) or not 0 < options.fps <= 240:
        raise RenderError(f"--fps {options.fps:g}: choose a rate above 0 and up to 240")
    if output.suffix.lower() == ".mp4" and (options.size[0] % 2 or options.size[1] % 2):
        raise RenderError(f"--size {options.size[0]}x{options.size[1]}: H.264 in yuv420p "
                          "needs an even width and height")
    _look(options.style)
    parse_curves(",".join(options.curves))
    with _open_run(path) as run:
        facts = run_facts(run)
        frame = MovieFrame(facts, options, peak_density(run, facts, options))
        total = len(run)
        writer = open_encoder(output, options.size, options.fps, options.quality, options.preset)
        done = 0
        try:
            for t, psi in run.snapshots():
                writer.send(frame.draw(t, psi))
                done += 1
                if progress:
                    progress(done, total)
        except BaseException:
            writer.close()
            output.unlink(missing_ok=True)
            raise
        writer.close()
    return output


# ---------------------------------------------------------------------------------------
# figures


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
    side = incident_side(facts.packet)
    bounds = facts.inner if not facts.scattering else (
        (facts.inner[0], facts.reference) if side < 0 else (facts.reference, facts.inner[1]))
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


def _channels(analysis: dict) -> list[tuple[str, dict]]:
    out = []
    for name in ("reflection", "transmission"):
        part = analysis.get(name) if isinstance(analysis, dict) else None
        if isinstance(part, dict) and isinstance(part.get("measured"), dict) and part["measured"]:
            out.append((name, part))
    return out


def theory_delays(facts: RunFacts, energies: np.ndarray) -> dict:
    """τ_R(E), τ_T(E) of stationary scattering (`theory.scatter`, r
    referenced at the run's mirror point) for the run's scenario; {} when the
    theory cannot say (the potential outside its reach)."""
    if facts.scenario is None:
        return {}
    try:
        result = scatter(facts.scenario.build_potential(), energies, hbar=facts.hbar,
                         x_r=facts.reference, dwell=False,
                         direction="right" if facts.packet.k0 >= 0 else "left")
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
    channels = _channels(facts.analysis or {})
    for c, (name, part) in enumerate(channels):
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
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.colors import LogNorm, Normalize
    from matplotlib.figure import Figure

    if not (0 < options.dpi <= 2400):
        raise RenderError(f"--dpi {options.dpi:g}: choose 1 to 2400")
    look = _look(options.style)
    with _open_run(path) as run:
        facts = run_facts(run)
        window = _window(facts, options.xlim)
        st = space_time(run, facts, window)
    panels = 2 if _channels(facts.analysis or {}) else 1
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
    _apply_look(fig, axes, look, font)
    return fig


def render_figure(path, output, options: FigureOptions = FigureOptions()) -> Path:
    """Write the space–time figure of a run file: PNG at options.dpi, PDF or SVG
    (the page size is options.size in inches)."""
    output = _check_output(Path(output), FIGURE_FORMATS, "figure")
    fig = figure(path, options)
    try:
        fig.savefig(output, dpi=options.dpi, facecolor=fig.get_facecolor())
    except OSError as exc:
        raise RenderError(f"{output}: cannot write the figure ({exc})") from None
    return output


__all__ = ["CURVES", "DEFAULT_CURVES", "STYLES", "MovieOptions", "FigureOptions", "RenderError",
           "parse_size", "parse_xlim", "parse_curves", "figure_size", "mirror_reference",
           "reference_trajectory", "turning_time", "side_centroid", "energy_spectrum",
           "render_movie", "render_figure", "figure", "space_time", "outgoing_trajectory",
           "MovieFrame", "peak_density", "run_facts", "open_encoder"]
