"""The theory comparison panel: τ(E) over the packet's spectrum with each
method's measured point, and below it the residual (measured − predicted,
with error bars) so that a deviation of 1e-3 of the delay is visible.

Colours: a channel's colour (reflected, transmitted) for its theory curve and
points; the marker tells the method; untrusted points (the measurement warned
about their channel) are hollow and grey; the prediction each method should
give is a short bar in the theory colour.
"""
from __future__ import annotations

import math

import numpy as np
from matplotlib.lines import Line2D

from .facts import RunFacts, channels
from .options import unit_label
from .overlays import energy_spectrum, energy_width, phase_delay
from .styles import Look

MARKERS = {"centroid": "o", "arrival": "s", "spectral": "D"}
WORDS = {"reflection": "reflected", "transmission": "transmitted"}


def untrusted(analysis: dict, channel: str) -> bool:
    """Whether the saved analysis warned about this channel's packet or flux."""
    word = WORDS[channel]
    return any(isinstance(w, str) and f"the {word} " in w
               for w in (analysis or {}).get("warnings") or [])


def _number(value):
    return float(value) if isinstance(value, (int, float)) and math.isfinite(value) else None


def delay_panels(top, bottom, facts: RunFacts, look: Look, font: float, lw: float) -> None:
    """Draw τ(E) on `top` and the residuals on `bottom` (axes sharing x)."""
    info = facts.packet
    u = {k: unit_label(v) for k, v in facts.units.items() if isinstance(v, str)}
    sigma_e = energy_width(info, facts.hbar, facts.mass)
    e_lo = max(info.energy - 3 * sigma_e, info.level + 1e-3 * sigma_e)
    energies = np.linspace(e_lo, info.energy + 3 * sigma_e, 400)
    spectrum = energy_spectrum(energies, info, facts.hbar, facts.mass)
    shade = top.twinx()
    shade.fill_between(energies, 0, spectrum, color=look.density, alpha=0.12, linewidth=0)
    shade.set_ylim(0, 1.15 * spectrum.max())
    shade.set_yticks([])
    shade.set_zorder(top.get_zorder() - 1)
    shade.patch.set_visible(False)          # after the zorder, which shows it again
    for spine in shade.spines.values():
        spine.set_visible(False)
    top.patch.set_visible(False)
    curves = phase_delay(facts, energies)
    measured = channels(facts.analysis)
    handles, methods_seen = [], []
    for c, (name, part) in enumerate(measured):
        # each channel's points side by side about E₀, the methods spread within
        offsets = {m: ((c - (len(measured) - 1) / 2) * 0.35 + (i - 1) * 0.1) * sigma_e
                   for i, m in enumerate(MARKERS)}
        colour = look.reflected if name == "reflection" else look.transmitted
        doubt = untrusted(facts.analysis, name)
        if name in curves and np.any(np.isfinite(curves[name])):
            line, = top.plot(energies, curves[name], color=colour, linewidth=0.8 * lw,
                             gid=f"theory-{name}", label=f"theory τ({WORDS[name]})")
            handles.append(line)
        for method, m in part["measured"].items():
            delay = _number(m.get("delay")) if isinstance(m, dict) else None
            if delay is None:
                continue
            err = _number(m.get("error"))
            err = abs(err) if err is not None else None
            predicted = _number(m.get("predicted"))
            e = info.energy + offsets.get(method, 0.0)
            style = dict(marker=MARKERS.get(method, "^"), markersize=1.6 * lw + 3,
                         linestyle="none", color=look.untrusted if doubt else colour,
                         markerfacecolor="none" if doubt else (look.untrusted if doubt else colour),
                         markeredgewidth=0.6 * lw)
            top.errorbar([e], [delay], yerr=err, capsize=1.5 * lw, elinewidth=0.6 * lw,
                         gid=f"measured-{name}-{method}", **style)
            if predicted is not None:
                top.plot([e], [predicted], marker="_", color=look.theory, markersize=3 * lw + 6,
                         markeredgewidth=0.8 * lw, linestyle="none")
                bottom.errorbar([e], [delay - predicted], yerr=err, capsize=1.5 * lw,
                                elinewidth=0.6 * lw, gid=f"residual-{name}-{method}", **style)
            if method not in methods_seen:
                methods_seen.append(method)
    for method in methods_seen:
        handles.append(Line2D([], [], marker=MARKERS.get(method, "^"), linestyle="none",
                              color=look.text, markerfacecolor="none",
                              markersize=1.6 * lw + 3, label=method))
    if any(untrusted(facts.analysis, n) for n, _ in measured):
        handles.append(Line2D([], [], marker="o", linestyle="none", color=look.untrusted,
                              markerfacecolor="none", label="untrusted (warned)"))
    top.set_xlim(energies[0], energies[-1])
    top.axvline(info.energy, color=look.grid, linewidth=0.6 * lw, zorder=0)
    top.text(info.energy, 1.0, " E₀", transform=top.get_xaxis_transform(), color=look.text,
             fontsize=0.7 * font, va="top", ha="left")
    top.set_ylabel(f"delay ({u['time']})")
    top.tick_params(labelbottom=False)
    if handles:
        top.legend(handles=handles, fontsize=0.65 * font, frameon=False, labelcolor=look.text,
                   loc="best")
    top.set_title("measured delay by method,\nand the prediction each method should give",
                  fontsize=0.75 * font, loc="left")
    bottom.axhline(0.0, color=look.theory, linewidth=0.6 * lw)
    bottom.set_xlabel(f"packet energy E ({u['energy']})")
    bottom.set_ylabel(f"measured − predicted ({u['time']})", fontsize=0.8 * font)
    bottom.ticklabel_format(axis="y", style="sci", scilimits=(-2, 3))
