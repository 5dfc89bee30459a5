"""The sideband panels of a driven run's figure: each outgoing packet's
spectrum against energy with the sidebands E₀ + nħω marked, and, from a saved
delay analysis, each sideband's measured probability beside its Floquet
prediction (PHYSICS §Driven potentials)."""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from ..measure.sidebands import drive_frequency, reported_orders
from ..measure.spectra import momentum_amplitude
from .facts import RunFacts

POINTS = 1200       # energies the spectrum is drawn at


def outgoing_spectra(facts: RunFacts, psi: np.ndarray) -> dict:
    """{channel: (E, dP/dE)} of a snapshot's outgoing packets: the momentum
    spectrum |C(q)|² of the side beyond the potential, per unit outgoing energy."""
    omega = drive_frequency(facts.potential)
    orders = reported_orders(facts.potential, facts.hbar)
    hbar, m, info = facts.hbar, facts.mass, facts.packet
    s = 1 if info.k0 >= 0 else -1
    support = facts.potential.support() or (facts.reference, facts.reference)
    left, right = facts.potential.levels()
    near, far = (left, right) if s > 0 else (right, left)
    top = info.energy + (max(orders) + 1) * hbar * omega
    out = {}
    dx = float(facts.x[1] - facts.x[0])
    for channel, level, mask, sign in (
            ("reflection", near, s * (facts.x - facts.reference) < 0, -s),
            ("transmission", far, s * facts.x > s * (support[1] if s > 0 else support[0]), s)):
        if top <= level or not mask.any():
            continue
        E = np.linspace(level, top, POINTS + 1)[1:]
        q = np.sqrt(2 * m * (E - level)) / hbar
        c, _ = momentum_amplitude(facts.x[mask], psi[mask], sign * q, dx)
        out[channel] = (E, np.abs(c) ** 2 * m / (hbar ** 2 * q))
    return out


def sideband_panels(upper, lower, facts: RunFacts, spectra: dict, look, font: float,
                    lw: float, units: dict) -> None:
    """Upper: the outgoing spectra (log scale) with E₀ + nħω marked; lower: the
    saved analysis's sideband probabilities, measured (dots) and predicted (rings)."""
    omega = drive_frequency(facts.potential)
    hw = facts.hbar * omega
    colours = {"reflection": look.reflected, "transmission": look.transmitted}
    peak = max((float(np.max(d)) for _, d in spectra.values()), default=1.0) or 1.0
    for channel, (E, density) in spectra.items():
        upper.plot(E, np.maximum(density, peak * 1e-9), color=colours[channel], linewidth=lw,
                   label=f"{channel} spectrum", gid=f"spectrum-{channel}")
    for n in reported_orders(facts.potential, facts.hbar):
        e = facts.packet.energy + n * hw
        for ax in (upper, lower):
            ax.axvline(e, color=look.grid, linewidth=0.5 * lw, linestyle=":")
        upper.text(e, peak * 2, f"{n:+d}" if n else "0", ha="center", va="bottom",
                   fontsize=0.6 * font, color=look.text)
    upper.set_yscale("log")
    upper.set_ylim(peak * 1e-8, peak * 20)
    upper.set_ylabel(f"dP/dE (1/{units['energy']})", fontsize=0.7 * font)
    upper.set_title(f"outgoing spectra: sidebands E₀ + nħω (ħω = {hw:.4g} {units['energy']})",
                    fontsize=0.7 * font, loc="left")
    upper.legend(fontsize=0.55 * font, frameon=False, labelcolor=look.text, loc="lower center")
    rows = _analysis_rows(facts.analysis)
    for channel, entries in rows.items():
        e = [r["energy"] for r in entries]
        upper_points = [r["probability"] for r in entries]
        predicted = [r["predicted"] for r in entries]
        lower.plot(e, upper_points, "o", color=colours[channel], markersize=3 * lw,
                   label=f"{channel}: measured", gid=f"sidebands-{channel}")
        lower.plot(e, predicted, "o", markerfacecolor="none", color=look.reference,
                   markersize=5 * lw, label="Floquet prediction" if channel == "reflection"
                   else None)
    lower.set_yscale("log")
    lower.set_xlabel(f"outgoing energy ({units['energy']})", fontsize=0.7 * font)
    lower.set_ylabel("P in sideband", fontsize=0.7 * font)
    if rows:
        lower.legend(fontsize=0.5 * font, frameon=False, labelcolor=look.text, loc="lower center")
    else:
        lower.text(0.5, 0.5, "run `sojourn delay --save` for the sideband probabilities",
                   transform=lower.transAxes, ha="center", va="center", fontsize=0.6 * font,
                   color=look.text)


def _analysis_rows(analysis: Optional[dict]) -> dict:
    """The saved analysis's sideband rows per channel (finite values only)."""
    out = {}
    for channel in ("reflection", "transmission"):
        part = analysis.get(channel) if isinstance(analysis, dict) else None
        rows = part.get("sidebands") if isinstance(part, dict) else None
        if isinstance(rows, list):
            ok = [r for r in rows if all(isinstance(r.get(k), (int, float)) and math.isfinite(
                r[k]) and r[k] > 0 for k in ("energy", "probability", "predicted"))]
            if ok:
                out[channel] = ok
    return out
