"""Movies of a run file (`sojourn render -o movie.mp4`).

A movie shows |ψ(x,t)|² (optionally Re ψ, Im ψ, or the density coloured by the
local phase), the potential to scale on its own energy axis with the packet's
energy E₀ marked, the time, and, drawn faintly, the packet an ideal mirror at
the run's reference point would return, so the delay is visible.

It streams: snapshots are read one at a time (`RunFile.snapshots()`), and a
frame is drawn by updating the artists of one figure (blitting over a cached
background) and handing the canvas buffer straight to the encoder.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable, Optional

import imageio_ffmpeg
import numpy as np
from matplotlib import colormaps
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import Polygon

from ..errors import RenderError
from ..store.runfile import RunFile
from .facts import RunFacts, open_run, run_facts, time_format, window
from .options import DEFAULT_CURVES, MOVIE_FORMATS, check_output, parse_curves, unit_label
from .overlays import mirror_reference
from .styles import apply_look, look as get_look


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


def open_encoder(path: Path, size: tuple[int, int], fps: float, quality: int = 18,
                 preset: str = "veryfast"):
    """A started imageio-ffmpeg frame sink: `.send(rgba)` with an H×W×4 uint8
    buffer (the canvas buffer itself, no copy), `.close()`.
    MP4: H.264 in yuv420p (plays in presentation and browser players; needs even
    sides). GIF: one palette per frame, so it streams and keeps colours true."""
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



class MovieFrame:
    """One figure whose artists are updated for every snapshot. The static parts
    (axes, potential, E₀, legend, title) are drawn once and cached; each frame
    restores them and draws only the moving artists (blitting)."""

    def __init__(self, facts: RunFacts, options: MovieOptions, peak: float):
        self.facts, self.options = facts, options
        if not facts.scattering:   # a trapped or resting packet has no mirror to compare with
            options = replace(options, curves=tuple(c for c in options.curves if c != "reference"))
        look = get_look(options.style)
        width, height = options.size
        scale = height / 1080
        font, lw = look.font * scale, look.line * scale
        self.look = look
        curves = set(options.curves)
        lo, hi = window(facts, options.xlim)
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
        self.time_format = time_format(facts.times)
        fig.suptitle(facts.title, color=look.text, fontsize=1.15 * font, y=0.965)
        apply_look(fig, axes, look, font)
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
    lo, hi = window(facts, options.xlim)
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
    output = check_output(Path(output), MOVIE_FORMATS, "movie")
    if not math.isfinite(options.fps) or not 0 < options.fps <= 240:
        raise RenderError(f"--fps {options.fps:g}: choose a rate above 0 and up to 240")
    if output.suffix.lower() == ".mp4" and (options.size[0] % 2 or options.size[1] % 2):
        raise RenderError(f"--size {options.size[0]}x{options.size[1]}: H.264 in yuv420p "
                          "needs an even width and height")
    get_look(options.style)
    parse_curves(",".join(options.curves))
    with open_run(path) as run:
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


