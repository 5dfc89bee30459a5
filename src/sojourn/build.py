"""From a Scenario to everything a run needs (grid, V, W, ψ₀, steps, detectors).

Pure: no file is read or written here; the guards (`guards.py`) judge the result."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np

from .model import packets
from .model.grid import Grid
from .model.potentials import Potential
from .model.absorber import absorber_profile, default_absorber_strength
from .config.scenario import Scenario
from .errors import ScenarioError
from .guards import (DEFAULT_DT_PHASE, Finding, guard, refuse_endless, refuse_oversized,
                     time_step_limit)


@dataclass
class Setup:
    """A scenario made concrete: arrays and counts, in the scenario's units."""

    scenario: Scenario
    grid: Grid
    potential: Potential
    V: np.ndarray
    W: Optional[np.ndarray]
    packet: packets.PacketInfo
    dt: float
    dt_chosen: bool
    steps: int
    record_steps: int
    sample_steps: int
    detectors: list
    reference: float
    region: Optional[tuple[float, float]]
    findings: list = field(default_factory=list)

    @property
    def hbar(self) -> float:
        return self.scenario.hbar

    @property
    def mass(self) -> float:
        return self.scenario.particle_mass

    @property
    def duration(self) -> float:
        return self.steps * self.dt

    @property
    def snapshots(self) -> int:
        return self.steps // self.record_steps + 1 + (self.steps % self.record_steps != 0)

    @property
    def grid_phase(self) -> float:
        """Δt·(E_max + V_max - V_min)/ħ: must stay below 2π, best below π."""
        return self.dt * (self.grid.kinetic_max(self.hbar, self.mass) + np.ptp(self.V)) / self.hbar

    def psi0(self) -> np.ndarray:
        return packets.on_grid(self.grid, self.packet)

    def errors(self) -> list:
        return [f for f in self.findings if f.level == "error"]

    def warnings(self) -> list:
        return [f for f in self.findings if f.level == "warning"]


def _default_detectors(potential, packet, grid, reference, absorber_width):
    """One detector between the packet's start and the reference point, and, if
    anything can be transmitted, one at the same distance beyond the potential."""
    support = potential.support()
    inner_left = grid.left + absorber_width
    inner_right = grid.right - absorber_width
    if packet.k0 >= 0:
        gap = reference - packet.center
        left_detector = packet.center + gap / 2
        out = [left_detector]
        if support is not None and potential.levels()[1] < packet.energy + 10 * abs(packet.energy):
            right_edge = support[1]
            out.append(min(right_edge + gap / 2, (right_edge + inner_right) / 2))
    else:
        gap = packet.center - reference
        out = [packet.center - gap / 2]
        if support is not None:
            left_edge = support[0]
            out.append(max(left_edge - gap / 2, (left_edge + inner_left) / 2))
    return out


def default_region(potential, grid, absorber_width, packet):
    """The potential's support; beyond a step the packet cannot cross (the far
    level above its whole band) the region reaches to that side's absorber, so
    the dwell time counts the evanescent penetration."""
    support = potential.support()
    if support is None or potential.confining:
        return None
    a, b = support
    left, right = potential.levels()
    # the energy at |k₀| + 6σ_k (kinetic energy scales as k²)
    band_top = packet.level + (packet.energy - packet.level) * (
        (abs(packet.k0) + 6 * packet.sigma_k) / abs(packet.k0)) ** 2
    if packet.k0 >= 0 and right > band_top:
        b = grid.right - absorber_width
    elif packet.k0 < 0 and left > band_top:
        a = grid.left + absorber_width
    return (a, b)


def _largest_divisor(n: int, at_most: int) -> int:
    """The largest divisor of n not above at_most (n up to 1e12: √n trials)."""
    best = 1
    for d in range(1, math.isqrt(n) + 1):
        if n % d == 0:
            for c in (d, n // d):
                if best < c <= at_most:
                    best = c
    return best


def build(scenario: Scenario) -> Setup:
    """Make a scenario concrete and run the guards (see `Setup.findings`)."""
    try:
        return _build(scenario)
    except (OverflowError, ZeroDivisionError, FloatingPointError) as exc:
        # numbers each valid alone (1e308, 1e-300) whose products leave the floats
        raise ScenarioError(f"{scenario.source}: the scenario's numbers are too large or too "
                            f"small to compute with ({exc}); check mass, grid, packet and "
                            "evolve for extreme values") from None


def _build(scenario: Scenario) -> Setup:
    findings: list[Finding] = []
    refuse_oversized(scenario)
    grid = Grid.from_spec(scenario.grid)
    hbar, mass = scenario.hbar, scenario.particle_mass
    potential = scenario.build_potential()
    V = potential.on_grid(grid.x, grid.dx)
    if not np.all(np.isfinite(V)):
        bad = grid.x[~np.isfinite(V)][0]
        findings.append(Finding("error", "potential",
                                f"V is not finite (nan or inf) at x = {bad:g}"))
        V = np.nan_to_num(V, nan=0.0, posinf=0.0, neginf=0.0)
    level = float(potential(np.array([scenario.packet.center]))[0])
    if not math.isfinite(level):
        level = 0.0   # the finding above refuses the run; describe the packet all the same
    try:
        info = packets.describe(scenario.packet, hbar, mass, level)
    except ValueError as exc:
        raise ScenarioError(f"{scenario.source}: packet.energy: {exc}") from None

    # time step
    kinetic_max = grid.kinetic_max(hbar, mass)
    v_range = float(np.ptp(V))
    if not (math.isfinite(kinetic_max + v_range) and kinetic_max > 0):
        raise ScenarioError(f"{scenario.source}: grid.points: the grid's largest kinetic "
                            f"energy ħ²k_max²/2m = {kinetic_max:g} plus the range of V "
                            f"({v_range:g}) is not a usable number; check mass, grid and potential")
    limit = time_step_limit(kinetic_max, v_range, hbar)
    if scenario.evolve.dt is None:
        dt = DEFAULT_DT_PHASE * hbar / (kinetic_max + v_range)
        dt_chosen = True
    else:
        dt, dt_chosen = scenario.evolve.dt, False
    duration = scenario.evolve.duration
    refuse_endless(scenario, duration / dt if dt > 0 else math.inf, dt)
    steps = max(1, int(math.ceil(duration / dt - 1e-9)))
    dt = duration / steps  # the run ends exactly at the duration (dt shrinks, if at all, by < 1 step)
    every = scenario.record.every or duration / 100
    record_steps = min(steps, max(1, int(round(every / dt))))
    passage = info.width / max(abs(info.group_velocity), 1e-300)
    sample_steps = scenario.record.sample_steps
    if sample_steps is None:
        # 50 samples per temporal width of a passage: the trapezoid rule is then
        # exact to far below the delays' precision for these smooth signals
        sample_steps = max(1, min(record_steps, int(passage / 50 / dt)))
    sample_steps = _largest_divisor(record_steps, sample_steps)  # a regular comb through recordings

    # absorber
    W = None
    absorber_width = 0.0
    if scenario.absorber is not None:
        absorber_width = scenario.absorber.width
        speed_slow = hbar * max(abs(info.k0) - 3 * info.sigma_k, info.sigma_k) / mass
        strength = scenario.absorber.strength or default_absorber_strength(
            absorber_width, speed_slow, hbar)
        W = absorber_profile(grid.x, grid.left, grid.right, absorber_width, strength)
        if 2 * absorber_width >= grid.length:
            findings.append(Finding("error", "absorber.width",
                                    f"the layers ({absorber_width:g} each side) fill the box"))
        wavelength = 2 * math.pi / max(abs(info.k0), 1e-300)
        if absorber_width < 2 * wavelength:
            findings.append(Finding("warning", "absorber.width",
                                    f"layer {absorber_width:g} is shorter than two wavelengths "
                                    f"({2 * wavelength:.3g}); it may reflect"))

    support = potential.support()
    if scenario.measure.reference is not None:
        reference = scenario.measure.reference
    elif support is not None:
        reference = support[0] if info.k0 >= 0 else support[1]
    else:
        reference = 0.0
    region = tuple(scenario.measure.region) if scenario.measure.region else default_region(
        potential, grid, absorber_width, info)
    detectors = list(scenario.measure.detectors) if scenario.measure.detectors is not None \
        else _default_detectors(potential, info, grid, reference, absorber_width)

    setup = Setup(scenario, grid, potential, V, W, info, dt, dt_chosen, steps, record_steps,
                  sample_steps, detectors, reference, region, findings)
    guard(setup, limit, absorber_width)
    for finding in findings:
        finding.line = scenario.line_of(finding.key)
    return setup


