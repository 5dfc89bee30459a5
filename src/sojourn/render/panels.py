"""The movie's side panels, each drawn once and then updated per frame:

1. a zoom that follows a channel's reference packet (x − x_ref(t)): the real
   outgoing packet, the reference's, their centroids and the ruler between
   them labelled with the delay — for the reflected channel (the ideal
   mirror's packet) and for the transmitted one (the filtered free packet of
   `channels`);
2. the potential at true width where its features are too thin to see in the
   main panel, with |ψ|² over it.

Every panel provides `artists` (the moving ones) and `update(t, psi)`.
"""
from __future__ import annotations

import math

import numpy as np

from .channels import transmitted_packet, transmitted_reference
from .overlays import (incident_bounds, mirror_reference, reference_trajectory,
                       side_centroid, transmitted_bounds, turning_time)


class ChannelZoom:
    """The zoom on one channel's packet against its reference, with the ruler."""

    def __init__(self, ax, facts, look, ruler, channel: str, font: float, lw: float, u: dict,
                 untrusted: bool = False):
        self.ax, self.facts, self.channel = ax, facts, channel
        info = facts.packet
        reflected = channel == "reflection"
        colour = look.reflected if reflected else look.transmitted
        if untrusted:
            colour = look.untrusted
        speed = abs(info.group_velocity) if reflected else abs(
            _speed_near(facts, info))
        gap = (info.group_velocity if reflected else -np.sign(info.group_velocity) * speed) \
            * ruler.delay
        half = max(3 * abs(gap), 0.05 * info.width)
        zx = self.zoom_x = np.linspace(gap / 2 - half, gap / 2 + half, 400)
        ax.set_xlim(zx[0], zx[-1])
        ax.set_ylim(0, 1.35)
        ax.set_xlabel(f"x − x_ref(t) ({u['length']})", fontsize=0.75 * font)
        what = "the mirror's packet" if reflected else "the free transmitted packet"
        ax.set_title(f"zoom: following {what}" + ("  (untrusted)" if untrusted else ""),
                     fontsize=0.7 * font, loc="left", color=look.text, family=look.family)
        ax.set_ylabel("|ψ|² / ref. peak", fontsize=0.6 * font)
        ax.grid(True, color=look.grid, linewidth=max(lw / 4, 0.5), alpha=0.6)
        zeros = np.zeros_like(zx)
        self.ref_line, = ax.plot(zx, zeros, color=look.reference, linewidth=0.8 * lw,
                                 linestyle=(0, (3, 1.5)), animated=True)
        self.real_line, = ax.plot(zx, zeros, color=colour, linewidth=lw, animated=True,
                                  linestyle=(0, (2, 1)) if untrusted else "-")
        self.marks = [ax.axvline(0, color=c, linewidth=0.6 * lw, animated=True)
                      for c in (look.reference, look.measurement)]
        self.ruler_line, = ax.plot([0, gap], [0.15, 0.15], color=look.measurement,
                                   linewidth=1.2 * lw, marker="|", markersize=3 * lw + 8,
                                   markeredgewidth=lw, animated=True,
                                   gid="delay-ruler" if reflected else
                                   "delay-ruler-transmitted")
        ax.text(0.5, 0.19, ruler.label(u["time"], "\n"), transform=ax.transAxes, ha="center",
                va="bottom", color=look.measurement, fontsize=0.75 * font)
        self.artists = [self.ref_line, self.real_line, *self.marks, self.ruler_line]
        travel = 2 * info.width / abs(info.group_velocity)
        self.clear_time = turning_time(info, facts.reference) + travel
        self.bounds = (incident_bounds if reflected else transmitted_bounds)(
            facts.inner, facts.reference, info)

    def _reference(self, t: float, xs: np.ndarray) -> tuple[float, np.ndarray]:
        f = self.facts
        if self.channel == "reflection":
            ref = mirror_reference(xs, t, f.packet, f.reference, f.hbar, f.mass)
            return float(reference_trajectory(t, f.packet, f.reference)), ref
        return float(transmitted_reference(t, f)), transmitted_packet(xs, t, f)

    def update(self, t: float, psi: np.ndarray) -> None:
        f = self.facts
        x_ref, _ = self._reference(t, np.zeros(1))
        if not math.isfinite(x_ref):
            return
        xs = x_ref + self.zoom_x
        _, ref = self._reference(t, xs)
        ref = ref.real ** 2 + ref.imag ** 2
        scale = 1 / max(float(ref.max()), 1e-300)
        density = psi.real ** 2 + psi.imag ** 2
        self.real_line.set_ydata(np.interp(xs, f.x, density) * scale)
        self.ref_line.set_ydata(ref * scale)
        _, centre = side_centroid(f.x, density, float(f.x[1] - f.x[0]), self.bounds)
        offset = centre - x_ref
        self.marks[1].set_xdata([offset, offset])
        self.ruler_line.set_xdata([0.0, offset])
        shown = t >= self.clear_time and math.isfinite(offset) and float(ref.max()) > 0
        for artist in (self.marks[1], self.ruler_line):
            artist.set_visible(shown)
        for artist in self.artists:
            if artist.get_visible():
                self.ax.draw_artist(artist)


def _speed_near(facts, info) -> float:
    """ħq₀/m on the far side (the transmitted packet's speed)."""
    from_ref = transmitted_reference(np.array([0.0, 1.0]), facts)
    return float(abs(from_ref[1] - from_ref[0])) if np.all(np.isfinite(from_ref)) else \
        abs(info.group_velocity)


class TrueWidth:
    """The potential where it is too thin for the main panel, at true width,
    with |ψ|² over it (on the density's own scale, shared zero)."""

    def __init__(self, ax, facts, look, span, top: float, font: float, lw: float, u: dict):
        self.ax, self.facts = ax, facts
        x = facts.x
        keep = (x >= span[0]) & (x <= span[1])
        self.xs = np.linspace(span[0], span[1], 400)
        V = np.asarray(facts.V, float)[keep]
        e0 = facts.packet.energy
        v_hi = max(float(V.max()), e0) * 1.25 or 1.0
        ax.set_xlim(*span)
        ax.set_ylim(min(float(V.min()), 0.0), v_hi)
        ax.fill_between(x[keep], 0, V, color=look.potential, alpha=0.3, linewidth=0,
                        step="mid")
        ax.step(x[keep], V, where="mid", color=look.potential, linewidth=lw, gid="true-width-V")
        ax.axhline(e0, color=look.energy, linewidth=0.6 * lw, linestyle=(0, (4, 2)))
        ax.set_title("the potential at true width (as the grid holds it)", fontsize=0.7 * font, loc="left",
                     color=look.text, family=look.family)
        ax.set_xlabel(f"x ({u['length']})", fontsize=0.75 * font)
        ax.set_ylabel(f"V ({u['energy']})", fontsize=0.7 * font)
        self.twin = ax.twinx()
        self.twin.set_ylim(0, 1.1 * top)
        self.twin.set_yticks([])
        self.line, = self.twin.plot(self.xs, np.zeros_like(self.xs), color=look.reflected,
                                    linewidth=0.8 * lw, animated=True)
        self.artists = [self.line]

    def update(self, t: float, psi: np.ndarray) -> None:
        density = psi.real ** 2 + psi.imag ** 2
        self.line.set_ydata(np.interp(self.xs, self.facts.x, density))
        self.twin.draw_artist(self.line)
