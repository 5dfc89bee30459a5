"""The spin of a spinor run in pictures (PHYSICS §Larmor): the density every
other picture draws is spin-summed (`SpinSummed`), the clock's field region is
shaded, each outgoing packet carries its Bloch vector (`SpinArrows`, movies),
and the clocks are set side by side against energy (`clock_panels`, figures).

The field is weak by design (the linear regime), so the spin turns by only
ω_L·τ: the arrows are drawn with their turn from +x magnified by a stated
factor, which the key says, and the times they read are printed beside them.
"""
from __future__ import annotations

import math
from typing import Optional

import numpy as np
from matplotlib.patches import Circle

from ..errors import SojournError
from ..theory.larmor import larmor_times
from ..theory.scattering import scatter
from .facts import RunFacts
from .options import unit_label
from .overlays import energy_width
from .styles import CLOCK_COLOURS, Look

CHANNELS = ("reflection", "transmission")
TURN_SHOWN = 0.6     # radians: the largest turn the magnified arrows are drawn with


def spin_summed(psi: np.ndarray) -> np.ndarray:
    """A scalar stand-in for a spinor ψ (2, N): |ψ₊|² + |ψ₋|² as its density and
    the phase of ψ₊ + ψ₋ (the +x spin the packet starts with) as its phase."""
    psi = np.asarray(psi)
    if psi.ndim == 1:
        return psi
    density = np.sum(psi.real ** 2 + psi.imag ** 2, axis=0)
    return np.sqrt(density) * np.exp(1j * np.angle(psi.sum(axis=0)))


class SpinSummed:
    """A spinor run read by pictures written for scalar runs: `snapshots()` and
    `psi(i)` give `spin_summed` states; everything else is the run's own."""

    def __init__(self, run):
        self.run = run

    def __getattr__(self, name):
        return getattr(self.run, name)

    def __len__(self) -> int:
        return len(self.run)

    def psi(self, index: int) -> np.ndarray:
        return spin_summed(self.run.psi(index))

    def snapshots(self):
        for t, psi in self.run.snapshots():
            yield t, spin_summed(psi)


def side_spins(x, psi, edges: tuple[float, float]) -> dict:
    """{channel: (probability, (⟨σ_x⟩, ⟨σ_y⟩, ⟨σ_z⟩))} of a spinor ψ (2, N) left of
    edges[0] (reflection, for incidence from the left) and right of edges[1];
    a side with no probability is left out."""
    x, psi = np.asarray(x), np.asarray(psi)
    dx = float(x[1] - x[0])
    out = {}
    for channel, side in (("reflection", x < edges[0]), ("transmission", x > edges[1])):
        up, down = psi[0, side], psi[1, side]
        norm = float(np.sum(np.abs(up) ** 2 + np.abs(down) ** 2))
        if not norm > 0:
            continue
        cross = complex(np.sum(np.conj(up) * down))
        out[channel] = (norm * dx, (2 * cross.real / norm, 2 * cross.imag / norm,
                                    float(np.sum(np.abs(up) ** 2 - np.abs(down) ** 2)) / norm))
    return out


def shade_clock(ax, facts: RunFacts, look: Look, label: bool = True):
    """Shade the clock's field region on an x axis."""
    (a, b), omega = facts.clock
    return ax.axvspan(a, b, color=look.theory, alpha=0.16, linewidth=0, zorder=0,
                      label=f"field region, ω_L = {omega:g}" if label else None,
                      gid="clock-region")


def magnification(facts: RunFacts) -> float:
    """The factor the arrows' turn is drawn with: the largest turn ω_L·τ the
    packet's predicted times give is shown as TURN_SHOWN (at least 1)."""
    (a, b), omega = facts.clock
    try:
        lt = larmor_times(facts.potential, [facts.packet.energy], hbar=facts.hbar,
                          region=(a, b), direction="right" if facts.packet.k0 >= 0 else "left")
        turn = omega * float(np.nanmax(np.abs([lt.tau_y_transmission, lt.tau_y_reflection,
                                               lt.tau_z_transmission, lt.tau_z_reflection])))
    except (SojournError, ValueError, FloatingPointError):   # no theory: no gain known
        turn = 0.0
    if not (math.isfinite(turn) and turn > 0):
        return 1.0
    return max(1.0, 10 ** math.floor(math.log10(TURN_SHOWN / turn)))


class SpinArrows:
    """For a movie: one Bloch circle per outgoing side, in the upper corners of
    the main axes, with the side's spin as an arrow (its turn from +x in the
    x–y plane magnified `gain` times; σ_z as its colour's length along the
    vertical) and the Larmor times it reads so far. `update(psi)` sets them
    from a spinor state in the run's frame; artists are animated (blitted)."""

    def __init__(self, ax, facts: RunFacts, look: Look, font: float, lw: float):
        self.facts, self.look = facts, look
        self.gain = magnification(facts)
        (a, b), self.omega = facts.clock
        support = facts.potential.support() if facts.potential is not None else None
        lo, hi = (min(a, support[0]), max(b, support[1])) if support else (a, b)
        self.edges = (lo, hi)
        self.sign = 1 if facts.packet.k0 >= 0 else -1
        self.artists, self.parts = [], {}
        u = unit_label(facts.units.get("time", ""))
        self.unit = u
        for channel, corner in (("reflection", 0.06), ("transmission", 0.78)):
            left = corner if self.sign > 0 else 0.84 - corner
            inset = ax.inset_axes((left, 0.50, 0.16, 0.30))
            inset.set_xlim(-1.25, 1.25)
            inset.set_ylim(-1.25, 1.25)
            inset.set_aspect("equal")
            inset.axis("off")
            colour = look.reflected if channel == "reflection" else look.transmitted
            inset.add_patch(Circle((0, 0), 1.0, fill=False, edgecolor=look.grid, linewidth=lw))
            inset.plot([-1.1, 1.1], [0, 0], color=look.grid, linewidth=0.5 * lw)
            inset.plot([0, 0], [-1.1, 1.1], color=look.grid, linewidth=0.5 * lw)
            inset.text(1.2, -0.02, "x", color=look.text, fontsize=0.55 * font, va="top")
            inset.text(0.04, 1.2, "y", color=look.text, fontsize=0.55 * font, va="top")
            arrow = inset.annotate("", xy=(1, 0), xytext=(0, 0), animated=True,
                                   arrowprops=dict(arrowstyle="-|>", color=colour,
                                                   linewidth=1.2 * lw))
            text = inset.text(0.0, -1.3, "", color=colour, fontsize=0.5 * font, ha="center",
                              va="top", animated=True, family="DejaVu Sans Mono")
            inset.set_title(f"spin, {'reflected' if channel == 'reflection' else 'transmitted'}"
                            f" (turn ×{self.gain:g})", fontsize=0.5 * font, color=colour)
            arrow.set_visible(False)
            text.set_visible(False)
            self.parts[channel] = (arrow, text)
            self.artists += [arrow, text]

    def update(self, psi: np.ndarray) -> None:
        x = self.facts.x
        if self.sign < 0:   # the forward frame: incidence from the left
            x, psi = -x[::-1], np.asarray(psi)[..., ::-1]
            edges = (-self.edges[1], -self.edges[0])
        else:
            edges = self.edges
        spins = side_spins(x, psi, edges)
        for channel, (arrow, text) in self.parts.items():
            prob, spin = spins.get(channel, (0.0, None))
            if spin is None or prob < 1e-4:
                arrow.set_visible(False)
                text.set_visible(False)
                continue
            angle = self.gain * math.atan2(spin[1], spin[0])
            arrow.xy = (math.cos(angle), math.sin(angle))
            arrow.set_visible(True)
            text.set_text(f"τ_y {spin[1] / self.omega:.3g}  τ_z {-spin[2] / self.omega:.3g}")
            text.set_visible(True)


def clock_curves(facts: RunFacts, energies: np.ndarray) -> dict:
    """{channel: {clock: τ(E)}} over `energies`: phase time, dwell (the region's),
    τ_y, τ_z and τ of each channel, from the layered solver."""
    (a, b), _ = facts.clock
    direction = "right" if facts.packet.k0 >= 0 else "left"
    lt = larmor_times(facts.potential, energies, hbar=facts.hbar, region=(a, b),
                      direction=direction)
    sc = scatter(facts.potential, energies, hbar=facts.hbar, x_r=facts.reference,
                 direction=direction, dwell=True, dwell_region=(a, b))
    out = {}
    for channel, phase, ty, tz, tau in (
            ("transmission", sc.delay_transmission, lt.tau_y_transmission,
             lt.tau_z_transmission, lt.tau_transmission),
            ("reflection", sc.delay_reflection, lt.tau_y_reflection, lt.tau_z_reflection,
             lt.tau_reflection)):
        out[channel] = {"phase": np.asarray(phase, float), "dwell": np.asarray(sc.dwell, float),
                        "tau_y": ty, "tau_z": tz, "tau": tau}
    return out


CLOCK_LABELS = {"phase": "phase time", "dwell": "dwell", "tau_y": "τ_y", "tau_z": "τ_z",
                "tau": "τ = √(τ_y² + τ_z²)"}


def _measured(part: Optional[dict], clock: str):
    """(measured, error, predicted) of one clock from a channel's saved analysis."""
    if not isinstance(part, dict):
        return None
    if clock == "phase":
        entry = (part.get("measured") or {}).get("spectral") or {}
        return entry.get("delay"), entry.get("error"), entry.get("predicted")
    if clock == "dwell":
        entry = part.get("dwell") or {}
        return entry.get("measured"), entry.get("error"), entry.get("predicted")
    entry = (part.get("larmor") or {}).get(clock) or {}
    return entry.get("measured"), entry.get("error"), entry.get("predicted")


def clock_panels(axes, facts: RunFacts, look: Look, font: float, lw: float) -> None:
    """Every tunnelling time against energy, one axes per channel (`axes` =
    (transmission, reflection)): theory curves over the packet's band, E₀
    marked, and the saved analysis's measured points (with their error bars)
    beside the packet-averaged predictions (hollow)."""
    info = facts.packet
    u = {k: unit_label(v) for k, v in facts.units.items() if isinstance(v, str)}
    sigma_e = energy_width(info, facts.hbar, facts.mass)
    lo = max(info.energy - 3 * sigma_e, info.level + 1e-3 * sigma_e)
    energies = np.linspace(lo, info.energy + 3 * sigma_e, 200)
    try:
        curves = clock_curves(facts, energies)
    except (SojournError, ValueError, FloatingPointError) as exc:   # the points alone
        curves = None
        axes[0].text(0.5, 0.5, f"no theory curves: {exc}"[:80], transform=axes[0].transAxes,
                     ha="center", va="center", color=look.text, fontsize=0.5 * font, wrap=True)
    analysis = facts.analysis or {}
    for ax, channel in zip(axes, ("transmission", "reflection")):
        for i, (clock, label) in enumerate(CLOCK_LABELS.items()):
            colour = CLOCK_COLOURS[clock]
            ax.plot(energies, curves[channel][clock] if curves else np.full_like(energies, np.nan),
                    color=colour, linewidth=lw, label=label, gid=f"clock-{channel}-{clock}",
                    linestyle="-" if clock.startswith("tau") else (0, (4, 2)))
            got = _measured(analysis.get(channel), clock)
            e = info.energy + (i - 2) * 0.08 * sigma_e     # the points side by side about E₀
            if got and got[0] is not None:
                err = got[1] if isinstance(got[1], (int, float)) else None
                ax.errorbar([e], [got[0]], yerr=None if err is None else [err], fmt="o",
                            color=colour, markersize=2.2 * lw + 1, capsize=1.5 * lw,
                            gid=f"measured-{channel}-{clock}")
            if got and got[2] is not None:
                ax.plot([e], [got[2]], marker="o", markerfacecolor="none", color=colour,
                        markersize=3.2 * lw + 2, linestyle="none")
        ax.axvline(info.energy, color=look.energy, linewidth=0.5 * lw, linestyle=":")
        ax.set_title(f"{'transmitted' if channel == 'transmission' else 'reflected'}: "
                     "tunnelling times", fontsize=0.75 * font, loc="left")
        ax.set_ylabel(f"τ ({u.get('time', '')})")
    axes[-1].set_xlabel(f"E ({u.get('energy', '')})")
    legend = axes[0].legend(fontsize=0.55 * font, loc="best", frameon=False, labelcolor=look.text,
                            ncol=2)
    legend.set_gid("clock-legend")
