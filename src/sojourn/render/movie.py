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
from ..engine.propagate import TimeDependence
from .facts import RunFacts, open_run, run_facts, time_format, window
from .frames import frame_times, propagated_states
from .options import DEFAULT_CURVES, MOVIE_FORMATS, check_output, parse_curves, unit_label
from .overlays import action_window, direction, mirror_reference
from .channels import thin_span, transmission_ruler, untrusted_channels
from .panels import ChannelZoom, TrueWidth
from .scan import Scan, channel_gain, reflection_ruler, scan_run
from .spin import SpinArrows, SpinSummed, shade_clock, spin_summed
from .styles import apply_look, fit_inside, look as get_look


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
    seconds: Optional[float] = None   # movie length; None: one frame per snapshot
    ruler: bool = True     # the delay rulers and their zoom panels (scattering runs)
    density_power: float = 1.0   # draw (|ψ|²)^p on the density's scale: 1 is the true density;
    #                             0.3–0.5 lifts a weak scattered wave into view


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


def encode(output: Path, options, frames, total: int,
           progress: Optional[Callable[[int, int], None]] = None) -> Path:
    """Send every RGBA buffer of `frames` into a movie at `output` (options: size,
    fps, quality, preset); a failure part-way removes the unfinished file."""
    writer = open_encoder(output, options.size, options.fps, options.quality, options.preset)
    try:
        for done, image in enumerate(frames, 1):
            writer.send(image)
            if progress:
                progress(done, total)
    except BaseException:
        writer.close()
        output.unlink(missing_ok=True)
        raise
    writer.close()
    return output



class MovieFrame:
    """One figure whose artists are updated for every frame. The static parts
    (axes, potential, E₀, legend, title) are drawn once and cached; each frame
    restores them and draws only the moving artists (blitting).

    Beside the wave, a scattering run gets a zoom panel that follows the ideal
    mirror's packet (x − x_mirror(t)): the real reflected packet, the mirror's,
    their centroids and the ruler between them, labelled with the delay."""

    def __init__(self, facts: RunFacts, options: MovieOptions, scan: Scan):
        self.facts, self.options = facts, options
        if not facts.scattering:   # a trapped or resting packet has no mirror to compare with
            options = replace(options, curves=tuple(c for c in options.curves if c != "reference"))
        look = self.look = get_look(options.style)
        width, height = options.size
        scale = min(height / 1080, width / 1440)
        font, lw = look.font * scale, look.line * scale
        curves = self.curves = set(options.curves)
        x = facts.x
        lo, hi = window(facts, options.xlim, action_window(
            x, np.maximum(scan.peak, scan.reference_peak), facts.V if facts.scattering else None,
            facts.inner, facts.packet.width))
        keep = np.nonzero((x >= lo) & (x <= hi))[0]
        stride = max(1, int(math.ceil(len(keep) / (2 * width))))
        self.index = keep[::stride]
        self.xs = x[self.index]
        u = {k: unit_label(v) for k, v in facts.units.items() if isinstance(v, str)}
        self.time_unit = u["time"]
        driven = facts.potential is not None and facts.potential.driven
        scatters = facts.scattering and options.ruler and not driven   # no phase delay to rule
        self.ruler = reflection_ruler(scan, facts) if scatters else None
        self.ruler_t = transmission_ruler(scan, facts) if scatters else None
        self.untrusted = untrusted_channels(facts.analysis)
        thin = thin_span(x, facts.V, (lo, hi)) if facts.scattering and "potential" in curves \
            else None
        side = [kind for kind, on in (("reflection", self.ruler), ("transmission", self.ruler_t),
                                      ("thin", thin)) if on]
        fig = self.fig = Figure(figsize=(width / 100, height / 100), dpi=100,
                                layout="constrained")
        fig.get_layout_engine().set(w_pad=0.02 * height / 100, h_pad=0.02 * height / 100)
        self.canvas = FigureCanvasAgg(fig)
        grid = fig.add_gridspec(max(len(side), 1), 2 if side else 1,
                                width_ratios=[2.6, 1][:1 + bool(side)])
        ax = self.ax = fig.add_subplot(grid[:, 0])
        axes = [ax]
        wave = {"real", "imag"} & curves
        inside = (x >= lo) & (x <= hi)
        top = 1.08 * max(float(np.max(np.maximum(scan.peak, scan.reference_peak)[inside])),
                         1e-300)
        self.top = top
        # beyond the potential, the transmitted part in its own colour, scaled up by a
        # labelled power of ten when it carries little of the probability
        far = direction(facts.packet) * (self.xs - facts.far_edge) > 0
        self.far = far if facts.scattering else np.zeros_like(far)
        self.gain = channel_gain(scan) if facts.scattering else 1.0
        self.power = float(options.density_power)
        if not (math.isfinite(self.power) and 0.05 <= self.power <= 1):
            raise RenderError(f"--density-power {self.power:g}: choose 0.05 to 1 (1: the true "
                              "density)")
        e_lo = e_hi = 0.0
        self.drive = None
        if "potential" in curves:
            V = facts.V[keep]
            e0 = facts.packet.energy
            e_lo, e_hi = min(float(V.min()), e0, 0.0), max(float(V.max()), e0, 0.0)
            if facts.potential is not None and facts.potential.driven:   # V moves: V(x, t)
                self.drive = TimeDependence.of_potential(facts.potential, x, float(x[1] - x[0]))
                self.keep, self.V_static = keep, V
                swing = sum(abs(d.amplitude) for d, _ in facts.potential.drives())
                e_lo, e_hi = min(e_lo, float(V.min()) - swing), max(e_hi, float(V.max()) + swing)
            span = (e_hi - e_lo) or abs(e0) or 1.0
            e_hi += 0.25 * span
        # the potential's zero on the density's zero
        zero = max(-e_lo / (e_hi - e_lo) if e_hi > e_lo else 0.0, 0.5 if wave else 0.0)
        bottom = -zero * top / (1 - zero)
        ax.set_xlim(lo, hi)
        ax.set_ylim(bottom, top)
        ax.set_xlabel(f"x ({u['length']})")
        ax.set_ylabel(f"|ψ|² (1/{u['length']})" if self.power == 1 else
                      f"|ψ|² on a power-{self.power:g} scale (1/{u['length']})")
        ax.grid(True, color=look.grid, linewidth=max(lw / 4, 0.5), alpha=0.6)
        self.moving = []
        ax2 = None
        if "potential" in curves:
            ax2 = ax.twinx()
            axes.append(ax2)
            ax2.set_ylim(-zero * e_hi / (1 - zero), e_hi)
            ax2.set_ylabel(f"energy ({u['energy']})")
            ax2.fill_between(x[keep], 0, V, color=look.potential, alpha=0.22, linewidth=0)
            if self.drive is None:
                ax2.plot(x[keep], V, color=look.potential, linewidth=lw, label="V(x)")
            else:      # the static part filled, V(x, t) a line drawn with each frame
                self.potential_line, = ax2.plot(x[keep], V, color=look.potential,
                                                linewidth=lw, label="V(x, t)", animated=True)
            ax2.axhline(e0, color=look.energy, linewidth=0.7 * lw, linestyle=(0, (4, 2)))
            ax2.text(lo + 0.01 * (hi - lo), e0, f" E₀ = {e0:.4g} {u['energy']}",
                     color=look.energy, fontsize=0.8 * font, va="bottom")
            ax.set_zorder(ax2.get_zorder() + 1)   # the wave on top of the potential
            ax.patch.set_visible(False)
            ax2.patch.set_visible(True)
            ax2.patch.set_facecolor(look.background)
        handles = []
        zeros = np.zeros_like(self.xs)
        self.spin = None
        if facts.clock is not None:     # a spinor run: the field region and the spin arrows
            handles.append(shade_clock(ax, facts, look))
            self.spin = SpinArrows(ax, facts, look, font, lw)
            self.moving += self.spin.artists
        if "phase" in curves:
            self.phase_rows = max(64, int(0.70 * height / 2))
            self.phase_heights = (np.arange(self.phase_rows) + 0.5) / self.phase_rows * top
            self.phase_lut = (colormaps["twilight_shifted"](np.linspace(0, 1, 256)) * 255
                              ).astype(np.uint8)
            self.phase_image = ax.imshow(np.zeros((self.phase_rows, len(self.xs), 4), np.uint8),
                                         extent=(self.xs[0], self.xs[-1], 0, top), origin="lower",
                                         aspect="auto", interpolation="nearest", animated=True)
            self.moving.append(self.phase_image)
            key = ax.inset_axes((0.80, 0.90, 0.18, 0.035))     # the phase key: arg ψ
            key.imshow(self.phase_lut[None, :, :3], aspect="auto", extent=(-math.pi, math.pi,
                                                                           0, 1))
            key.set_yticks([])
            key.set_xticks([-math.pi, 0, math.pi], ["−π", "arg ψ = 0", "π"])
            key.tick_params(colors=look.text, labelsize=0.6 * font, length=0)
            for spine in key.spines.values():
                spine.set_visible(False)
        if "reference" in curves:
            self.reference_line, = ax.plot(self.xs, zeros, color=look.reference,
                                           linewidth=0.8 * lw, linestyle=(0, (3, 1.5)),
                                           animated=True,
                                           label=f"ideal mirror at x = {facts.reference:g}")
            self.moving.append(self.reference_line)
            handles.append(self.reference_line)
        for part, colour, name in (("real", look.real, "Re ψ"), ("imag", look.imag, "Im ψ")):
            if part in curves:
                line, = ax.plot(self.xs, zeros, color=colour, linewidth=0.6 * lw, alpha=0.8,
                                animated=True, label=f"{name} (scaled)")
                setattr(self, f"{part}_line", line)
                self.moving.append(line)
                handles.append(line)
        if "density" in curves or "phase" in curves:
            self.fills, self.density_lines = [], []
            for mask, colour, label, channel in (
                    (~self.far, look.reflected, "|ψ|² incident side" if facts.scattering
                     else "|ψ|²", "reflection"),
                    (self.far, look.transmitted, "|ψ|² far side" + (
                        f" ×{self.gain:.0e}".replace("e+0", "e") if self.gain > 1 else ""),
                     "transmission")):
                xs = np.where(mask, self.xs, np.nan)
                verts = np.zeros((len(xs) + 2, 2))
                verts[1:-1, 0] = self.xs
                verts[0, 0], verts[-1, 0] = self.xs[0], self.xs[-1]
                doubt = channel in self.untrusted     # untrusted: hollow, hatched, dashed
                fill = Polygon(verts, closed=True, facecolor="none" if doubt else colour,
                               edgecolor=colour, hatch="//" if doubt else None,
                               alpha=0.5 if doubt else 0.3, linewidth=0, animated=True,
                               visible="phase" not in curves, gid=f"fill-{channel}")
                ax.add_patch(fill)
                line, = ax.plot(xs, zeros, color=colour, linewidth=lw, animated=True,
                                linestyle=(0, (2, 1)) if doubt else "-",
                                label=label + (" (untrusted)" if doubt else ""))
                self.fills.append((fill, verts, mask))
                self.density_lines.append(line)
                if mask.any() and (colour == look.reflected or scan.has_transmission):
                    handles.insert(len(self.density_lines) - 1, line)
            self.moving[:0] = [f for f, _, _ in self.fills]
            self.moving += self.density_lines
        self.amplitude = math.sqrt(max(top, 1e-300))
        if ax2 is not None:
            handles += ax2.get_lines()[:1]
        legend = ax.legend(handles=handles, loc="lower left", bbox_to_anchor=(0.0, 1.0),
                           ncol=min(len(handles), 3), fontsize=0.7 * font, frameon=False,
                           labelcolor=look.text, handlelength=1.6, columnspacing=1.2)
        legend.set_animated(False)
        self.time_text = ax.text(0.015, 0.95, "", transform=ax.transAxes, color=look.text,
                                 fontsize=0.9 * font, va="top", ha="left", animated=True,
                                 family="DejaVu Sans Mono")
        self.moving.append(self.time_text)
        if self.drive is not None:
            self.moving.insert(0, self.potential_line)
        self.time_format = time_format(facts.times)
        fig.suptitle(facts.title, color=look.text, fontsize=1.1 * font, family=look.family)
        self.panels = []
        for row, kind in enumerate(side):
            panel_ax = fig.add_subplot(grid[row, 1])
            if kind == "thin":
                panel = TrueWidth(panel_ax, facts, look, thin, top, font, lw, u)
                axes += [panel_ax, panel.twin]
            else:
                panel = ChannelZoom(panel_ax, facts, look, self.ruler if kind == "reflection"
                                    else self.ruler_t, kind, font, lw, u,
                                    untrusted=kind in self.untrusted)
                axes.append(panel_ax)
            self.panels.append(panel)
            if kind == "thin" and facts.clock is not None:   # the field region at true width
                shade_clock(panel_ax, facts, look, label=False)
        apply_look(fig, axes, look, font)
        for panel in self.panels:   # side panels: smaller labels than the main one
            panel.ax.xaxis.label.set_fontsize(0.7 * font)
            panel.ax.yaxis.label.set_fontsize(0.6 * font)
            panel.ax.tick_params(labelsize=0.6 * font)
        fit_inside(fig)              # lays the panels out once (drawn), then they stay put
        fig.set_layout_engine("none")
        self.background = self.canvas.copy_from_bbox(fig.bbox)

    @property
    def ruler_line(self):
        """The reflected channel's ruler (a Line2D in the first zoom panel)."""
        return next(p.ruler_line for p in self.panels if getattr(p, "channel", "") ==
                    "reflection")

    def draw(self, t: float, psi: np.ndarray) -> np.ndarray:
        """Update the moving artists for (t, ψ) and return the frame, H×W×4 RGBA
        uint8 (the canvas buffer itself; valid until the next call)."""
        f = self.facts
        if self.spin is not None:   # a spinor's arrows
            self.spin.update(psi)
        psi = spin_summed(psi)      # a spinor drawn spin-summed (a scalar ψ passes unchanged)
        full = psi
        psi = psi[self.index]
        density = psi.real ** 2 + psi.imag ** 2
        if hasattr(self, "density_lines"):
            shown = np.where(self.far, density * self.gain, density)
            if self.power != 1:
                shown = self.top * (np.maximum(shown, 0) / self.top) ** self.power
            for line in self.density_lines:
                line.set_ydata(shown)
            for fill, verts, mask in self.fills:
                if fill.get_visible():
                    verts[1:-1, 1] = np.where(mask, shown, 0.0)
                    fill.set_xy(verts)
        if "phase" in self.curves:
            hue = ((np.angle(psi) + math.pi) / (2 * math.pi) * 255).astype(np.intp) % 256
            rgba = self.phase_lut[hue][None, :, :].repeat(self.phase_rows, axis=0)
            rgba[..., 3] = np.where(self.phase_heights[:, None] < shown[None, :], 230, 0)
            self.phase_image.set_data(rgba)
        if "reference" in self.curves:
            ref = mirror_reference(self.xs, t, f.packet, f.reference, f.hbar, f.mass)
            ref = ref.real ** 2 + ref.imag ** 2
            if self.power != 1:
                ref = self.top * (ref / self.top) ** self.power
            self.reference_line.set_ydata(ref)
        if "real" in self.curves:
            self.real_line.set_ydata(psi.real * self.amplitude)
        if "imag" in self.curves:
            self.imag_line.set_ydata(psi.imag * self.amplitude)
        if self.drive is not None:
            added = self.drive(t, f.x.shape)[self.keep]
            self.potential_line.set_ydata(self.V_static + added)
        self.time_text.set_text(f"t = {self.time_format.format(t)} {self.time_unit}")
        self.canvas.restore_region(self.background)
        for artist in self.moving:
            if artist.get_visible():
                self.ax.draw_artist(artist)
        for panel in self.panels:
            panel.update(t, full)
        return np.asarray(self.canvas.buffer_rgba())

def render_movie(path, output, options: MovieOptions = MovieOptions(),
                 progress: Optional[Callable[[int, int], None]] = None) -> Path:
    """Write a movie (.mp4: H.264/yuv420p, .gif) of a run file: one frame per
    snapshot, or, with options.seconds, round(seconds·fps) frames with the
    states between snapshots propagated by the run's own scheme
    (`frames.propagated_states`). `progress(done, total)` is called after each
    frame. Every option is checked, and the figure built, before the encoder starts."""
    output = check_output(Path(output), MOVIE_FORMATS, "movie")
    if not math.isfinite(options.fps) or not 0 < options.fps <= 240:
        raise RenderError(f"--fps {options.fps:g}: choose a rate above 0 and up to 240")
    if output.suffix.lower() == ".mp4" and (options.size[0] % 2 or options.size[1] % 2):
        raise RenderError(f"--size {options.size[0]}x{options.size[1]}: H.264 in yuv420p "
                          "needs an even width and height")
    get_look(options.style)
    parse_curves(",".join(options.curves))
    if not (math.isfinite(options.density_power) and 0.05 <= options.density_power <= 1):
        raise RenderError(f"--density-power {options.density_power:g}: choose 0.05 to 1 (1: the "
                          "true density)")
    with open_run(path) as run:
        facts = run_facts(run)
        if options.seconds is not None:
            wanted = frame_times(facts.times, facts.dt, options.seconds, options.fps)
            states, total = propagated_states(run, facts, wanted), len(wanted)
        else:
            states, total = run.snapshots(), len(run)
        scanned = SpinSummed(run) if facts.components is not None else run
        frame = MovieFrame(facts, options, scan_run(scanned, facts))
        return encode(output, options, (frame.draw(t, psi) for t, psi in states), total,
                      progress)
