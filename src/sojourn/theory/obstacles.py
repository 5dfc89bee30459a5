"""A scenario in the plane whose potential is one circular obstacle (a disk or
a ring), seen by the 2D partial-wave theory (PHYSICS §Partial waves): the
obstacle as radial shells, the packet in the incidence frame (θ measured from
the packet's direction, the obstacle's centre at the origin), and the table
`sojourn theory` prints for it.

Shells: a disk is [(radius, height)], a ring [(inner, 0), (outer, height)]
(a ring with inner = 0 is a disk). Any other planar potential has no
partial-wave theory here (`obstacle_of` gives the reason instead).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np

from ..errors import TheoryError
from ..model.shapes import Disk, Ring
from .angular_averages import packet_beam_prediction, partial_wave_table

NO_THEORY = "no partial-wave theory for this potential (one disk or one ring is needed)"
TABLE_ANGLES = 13          # θ = 0, 15°, …, 180° in the printed table


@dataclass(frozen=True)
class Obstacle:
    """One circular obstacle: its centre in the plane and its radial shells."""

    center: tuple[float, float]
    shells: tuple[tuple[float, float], ...]
    outer: float


@dataclass(frozen=True)
class IncidentPacket:
    """The packet in the incidence frame: |k| = k0, rms σ_k along its
    direction and σ_ky across, its starting centre (x0, y0) relative to the
    obstacle, `direction` (radians from +x) the angle θ_lab − θ."""

    k0: float
    sigma_k: float
    sigma_ky: float
    x0: float
    y0: float
    direction: float
    energy: float


def obstacle_of(potential) -> tuple[Optional[Obstacle], Optional[str]]:
    """(the obstacle, None) when the potential is exactly one disk or ring,
    else (None, the reason)."""
    terms = list(getattr(potential, "terms", []))
    if len(terms) != 1 or not isinstance(terms[0], (Disk, Ring)):
        return None, NO_THEORY
    term = terms[0]
    if getattr(term, "drive", None) is not None:
        return None, "no partial-wave theory for a driven obstacle"
    if isinstance(term, Disk):
        shells = ((float(term.radius), float(term.height)),)
        outer = float(term.radius)
    elif term.inner == 0:
        shells = ((float(term.outer), float(term.height)),)
        outer = float(term.outer)
    else:
        shells = ((float(term.inner), 0.0), (float(term.outer), float(term.height)))
        outer = float(term.outer)
    return Obstacle(tuple(float(c) for c in term.center), shells, outer), None


def incident_packet(scenario, obstacle: Obstacle) -> IncidentPacket:
    """The scenario's packet in the incidence frame (V = 0 at its centre)."""
    spec = scenario.packet
    hbar, mass = scenario.hbar, scenario.particle_mass
    if spec.wavenumber is not None:
        k = abs(float(spec.wavenumber))
    else:
        if not spec.energy > 0:
            raise TheoryError(f"packet.energy: {spec.energy} is not above V = 0 outside the "
                              "obstacle")
        k = math.sqrt(2 * mass * spec.energy) / hbar
    angle = math.radians({"right": 0.0, "left": 180.0}.get(spec.direction, spec.direction))
    widths = spec.width if isinstance(spec.width, tuple) else (spec.width, spec.width)
    if not math.isclose(widths[0], widths[1], rel_tol=1e-12) and angle % (math.pi / 2) != 0:
        raise TheoryError("packet.width: an oblique packet with σx ≠ σy is not a Gaussian "
                          "beam along its direction; give one width")
    along, across = (widths[0], widths[1]) if math.cos(angle) ** 2 >= 0.5 else (widths[1],
                                                                                 widths[0])
    dx, dy = spec.center[0] - obstacle.center[0], spec.center[1] - obstacle.center[1]
    c, s = math.cos(angle), math.sin(angle)
    return IncidentPacket(k0=k, sigma_k=1 / (2 * along), sigma_ky=1 / (2 * across),
                          x0=c * dx + s * dy, y0=-s * dx + c * dy, direction=angle,
                          energy=hbar ** 2 * k ** 2 / (2 * mass))


def obstacle_table(scenario, energies=None, *, angles: int = TABLE_ANGLES) -> dict:
    """What `sojourn theory` reports for a disk/ring scenario, JSON-ready: the
    partial-wave table at the packet's energy (or `energies`), θ from the
    packet's direction, and the packet-averaged τ(θ), dσ/dθ of the beam."""
    obstacle, why = obstacle_of(scenario.build_potential())
    if obstacle is None:
        raise TheoryError(why)
    packet = incident_packet(scenario, obstacle)
    hbar, mass = scenario.hbar, scenario.particle_mass
    E = np.atleast_1d(np.asarray([packet.energy] if energies is None else energies, float))
    if E.size == 0 or not np.all(np.isfinite(E)) or np.any(E <= 0):
        raise TheoryError("--energies: give positive energies (V = 0 outside the obstacle)")
    theta = np.linspace(0.0, math.pi, angles)
    table = partial_wave_table(list(obstacle.shells), E, theta, hbar=hbar, mass=mass)
    beam = packet_beam_prediction(list(obstacle.shells), theta, k0=packet.k0,
                                  sigma_k=packet.sigma_k, sigma_ky=packet.sigma_ky,
                                  x0=packet.x0, y0=packet.y0, hbar=hbar, mass=mass)
    units = scenario.unit_system
    table.update({"scenario": scenario.title, "shells": [list(s) for s in obstacle.shells],
                  "center": list(obstacle.center), "direction": packet.direction,
                  "units": {"length": units.length, "energy": units.energy,
                            "time": units.time, "system": units.name},
                  "packet": {"k0": packet.k0, "sigma_k": packet.sigma_k,
                             "sigma_ky": packet.sigma_ky, "x0": packet.x0, "y0": packet.y0,
                             **{k: v for k, v in beam.as_dict().items()
                                if k in ("cross_section", "delay", "theta")}}})
    return table


def format_obstacle_table(table: dict, shown_m: int = 8) -> str:
    """Plain text: δ_m and 2ħ dδ_m/dE, then |f(θ)|² and τ(θ) per energy, and
    the packet-averaged values."""
    u = table["units"]
    fmt = lambda v: "—" if v is None else f"{v:+.5g}"
    lines = [f"{table['scenario']}: partial waves off shells {table['shells']} centred at "
             f"{tuple(table['center'])}; θ from the packet's direction "
             f"({math.degrees(table['direction']):g}° from +x)"]
    m = table["m"][:shown_m]
    for i, e in enumerate(table["energy"]):
        lines.append(f"\nE = {e:.6g} {u['energy']}   σ_total = "
                     f"{fmt(table['total_cross_section'][i])} {u['length']}")
        lines.append("  m   δ_m (rad)      2ħ dδ_m/dE (" + u["time"] + ")")
        for j, mm in enumerate(m):
            lines.append(f"  {mm:<3d} {fmt(table['phase_shift'][i][j]):<14s} "
                         f"{fmt(table['partial_delay'][i][j])}")
        lines.append(f"  θ (deg)  |f(θ)|² ({u['length']})   τ(θ) ({u['time']})")
        for j, th in enumerate(table["theta"]):
            lines.append(f"  {math.degrees(th):7.1f}  {fmt(table['cross_section'][i][j]):<16s} "
                         f"{fmt(table['delay'][i][j])}")
    p = table["packet"]
    lines.append(f"\npacket average (k₀ = {p['k0']:.5g}, σ_k = {p['sigma_k']:.3g}, "
                 f"σ_ky = {p['sigma_ky']:.3g}, from x₀ = {p['x0']:g}):")
    lines.append(f"  θ (deg)  dσ/dθ ({u['length']})    τ(θ) ({u['time']})")
    for j, th in enumerate(p["theta"]):
        lines.append(f"  {math.degrees(th):7.1f}  {fmt(p['cross_section'][j]):<16s} "
                     f"{fmt(p['delay'][j])}")
    return "\n".join(lines) + "\n"


def beam_curve(scenario, angles: int = 181):
    """(θ from the packet's direction on [0, π], τ, dσ/dθ) of the scenario's
    beam (`packet_beam_prediction`): the theory curve under measured points."""
    obstacle, why = obstacle_of(scenario.build_potential())
    if obstacle is None:
        raise TheoryError(why)
    packet = incident_packet(scenario, obstacle)
    theta = np.linspace(0.0, math.pi, angles)
    beam = packet_beam_prediction(list(obstacle.shells), theta, k0=packet.k0,
                                  sigma_k=packet.sigma_k, sigma_ky=packet.sigma_ky,
                                  x0=packet.x0, y0=packet.y0, hbar=scenario.hbar,
                                  mass=scenario.particle_mass)
    return theta, beam.delay, beam.cross_section
