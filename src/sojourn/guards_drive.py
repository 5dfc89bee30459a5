"""The guards of a driven potential (PHYSICS §Driven potentials): Δt resolves
each drive's period, the grid the top sideband, the packet's band the
sidebands' spacing, and a ramp ends before the packet arrives. Findings are
appended to a Setup's like the other guards' (`guards.Finding`)."""
from __future__ import annotations

import math

from .guards import RESOLUTION_MARGIN, Finding

STEPS_PER_PERIOD = 20     # time steps per drive period at least (common practice, no source)
SIDEBAND_REACH = 3        # sidebands counted beyond V1/ħω (J_n(β) is negligible past β + 3)
SIDEBAND_BAND = 1 / 3     # the packet's σ_E must stay below this share of ħω


def drive_findings(s) -> None:
    """Append a driven Setup's findings to s.findings (nothing for a static one)."""
    if s.potential.driven:
        _drive_findings(s, s.findings.append)


def _drive_findings(s, add) -> None:
    """A driven potential: Δt resolves each drive's period, the grid the top
    sideband E₀ + n_max·ħω, and the packet's band the sidebands' spacing."""
    info, hbar, mass, units = s.packet, s.hbar, s.mass, s.scenario.unit_system
    drives = s.potential.drives()
    for index, (drive, _) in enumerate(drives):
        per_period = drive.period / s.dt
        if per_period < STEPS_PER_PERIOD:
            add(Finding("error", "evolve.dt",
                        f"dt = {s.dt:.4g} gives {per_period:.3g} steps per drive period "
                        f"{drive.period:.4g} {units.time}; at least {STEPS_PER_PERIOD} are needed "
                        f"(dt ≤ {drive.period / STEPS_PER_PERIOD:.4g})", forceable=True))
            break
    if not drives:
        return
    hw = hbar * max(d.angular_frequency for d, _ in drives)
    swing = sum(abs(d.amplitude) for d, _ in drives)
    beta = swing / hw
    phase = s.grid_phase + 2 * swing * s.dt / hbar     # V's range grows by the drive's swing
    if phase >= 2 * math.pi > s.grid_phase:
        add(Finding("error", "evolve.dt",
                    f"with the drive's swing ±{swing:.4g} {units.energy}, Δt·(E_max + ΔV)/ħ = "
                    f"{phase:.3g} is past the grid limit 2π; use a smaller dt", forceable=True))
    n_max = int(math.ceil(beta)) + SIDEBAND_REACH
    kinetic = info.energy - info.level + n_max * hw
    k_top = math.sqrt(2 * mass * kinetic) / hbar + 6 * info.sigma_k
    if s.grid.k_max < RESOLUTION_MARGIN * k_top:
        points = int(2 ** math.ceil(math.log2(s.grid.length * RESOLUTION_MARGIN * k_top / math.pi)))
        add(Finding("error", "grid.points",
                    f"grid resolution too coarse for the sidebands: the top one (n = {n_max}, "
                    f"E₀ + {n_max}ħω) needs k_max ≥ {RESOLUTION_MARGIN * k_top:.4g}, the grid has "
                    f"{s.grid.k_max:.4g}; use points ≥ {points}", forceable=True))
    sigma_E = hbar ** 2 * abs(info.k0) * info.sigma_k / mass
    if sigma_E >= SIDEBAND_BAND * hw:
        add(Finding("warning", "packet.width",
                    f"the packet's energy spread σ_E = {sigma_E:.3g} {units.energy} is not below "
                    f"ħω/3 = {hw / 3:.3g}: its sidebands overlap in the outgoing spectrum; "
                    f"a packet wider than {info.width * 3 * sigma_E / hw:.4g} separates them"))
    edges = s.potential.support() or (info.center, info.center)
    arrival = max(min(abs(e - info.center) for e in edges) - 3 * info.width, 0.0) / max(
        abs(info.group_velocity), 1e-300)
    late = [d.ramp for d, _ in drives if d.ramp is not None and d.ramp > arrival]
    if late:
        add(Finding("warning", "potential",
                    f"a drive's ramp ({max(late):.4g} {units.time}) lasts past the packet's "
                    f"arrival at the potential (t ≈ {arrival:.4g}): the sideband predictions assume "
                    "a steady drive"))
