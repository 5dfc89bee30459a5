"""From a Scenario to everything a run needs (grid, V, W, ψ₀, steps, detectors).

Pure: no file is read or written here; the guards (`guards.py`) judge the result."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np

from .model import packets
from .model.grid import Grid, PlaneGrid
from .model.potentials import Potential
from .model.absorber import absorber_profile, default_absorber_strength
from .model.spin import clock_region, spin_potentials
from .engine.propagate import SCHEMES, Propagator, TimeDependence
from .config.scenario import Scenario
from .errors import ScenarioError
from .guards import Finding, guard, refuse_endless, refuse_oversized, time_step_limit
from .guards_drive import STEPS_PER_PERIOD, drive_findings
from .planar import guard_plane, plane_absorber, plane_point, plane_values
from .timestep import (GRID_PHASE, band_energy_range, choose as choose_dt, flux_band,
                       sideband_sink, sink_rates)
from .accuracy import plan_findings, plan_scenario
from .passages import default_detectors, packet_band, resolve_auto


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
    drive: Optional[TimeDependence] = None     # what V gains in time; None: static
    transverse: Optional[packets.PacketInfo] = None   # in the plane: the motion along y
    flux_band: Optional[tuple[float, float]] = None   # (k_pass, k_stop) of the detectors' filter
    dt_error: float = 0.0     # a chosen Δt's estimated relative delay bias (timestep.choose)
    accuracy: Optional[object] = None   # the accuracy.Plan, when evolve.accuracy / auto chose
    sink: Optional[tuple] = None   # (k_start, k_full, rate) of the sideband sink (timestep)

    def propagator(self, threads: Optional[int] = None) -> Propagator:
        """The run's propagator: its grid, V, absorber, scheme, drive and sink."""
        return Propagator(self.grid, self.V, self.hbar, self.mass, self.dt,
                          self.scenario.evolve.scheme, self.W,
                          single=self.scenario.evolve.precision == "single", threads=threads,
                          drive=self.drive,
                          sink=None if self.sink is None else sink_rates(self.grid.k, self.sink))

    @property
    def band_phase(self) -> float:
        """Δt·(E_top + ΔV)/ħ over the populated band: must stay below 2π."""
        return self.dt * band_energy_range(self.packet, self.V, self.hbar, self.mass) / self.hbar

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

    @property
    def state_axes(self) -> tuple[tuple[str, np.ndarray], ...]:
        """The named axes of ψ, outermost first: a leading "component" axis
        when V has one (a spinor: one potential per component), then the grid's."""
        lead = V_lead(self.V, self.grid)
        return ((("component", np.arange(lead[0], dtype=float)),) if lead else ()) + self.grid.axes

    @property
    def state_shape(self) -> tuple[int, ...]:
        return tuple(len(values) for _, values in self.state_axes)

    def psi0(self) -> np.ndarray:
        if self.transverse is not None:
            return packets.on_plane(self.grid, self.packet, self.transverse)
        psi = packets.on_grid(self.grid, self.packet)
        lead = V_lead(self.V, self.grid)
        if lead:   # each component carries the packet's amplitude / √C (one spin direction)
            psi = np.broadcast_to(psi / np.sqrt(lead[0]), lead + psi.shape).copy()
        return psi

    def errors(self) -> list:
        return [f for f in self.findings if f.level == "error"]

    def warnings(self) -> list:
        return [f for f in self.findings if f.level == "warning"]


def V_lead(V, grid) -> tuple[int, ...]:
    """The leading component axis of V, () for a scalar potential on the grid."""
    return tuple(np.shape(V)[:1]) if np.ndim(V) == len(grid.shape) + 1 else ()


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
    hbar, mass = scenario.hbar, scenario.particle_mass
    potential = scenario.build_potential()
    plan = None
    if scenario.grid.points == "auto" or scenario.evolve.accuracy is not None:
        plan, scenario = plan_scenario(scenario, potential, _reference)
        potential = scenario.build_potential()   # sampled at the chosen grid's spacing
    refuse_oversized(scenario)
    plane = scenario.dimensions == 2
    grid = PlaneGrid.from_spec(scenario.grid) if plane else Grid.from_spec(scenario.grid)
    V = plane_values(scenario.terms, grid, mass) if plane else potential.on_grid(grid.x, grid.dx)
    if not np.all(np.isfinite(V)):
        bad = np.broadcast_to(grid.x, V.shape)[~np.isfinite(V)][0]
        findings.append(Finding("error", "potential",
                                f"V is not finite (nan or inf) at x = {bad:g}"))
        V = np.nan_to_num(V, nan=0.0, posinf=0.0, neginf=0.0)
    transverse = None
    try:
        if plane:
            level = plane_point(scenario.terms, *scenario.packet.center, mass)
            level = level if math.isfinite(level) else 0.0
            info, transverse = packets.in_plane(scenario.packet, hbar, mass, level)
        else:
            level = float(potential(np.array([scenario.packet.center]))[0])
            if not math.isfinite(level):
                level = 0.0   # the finding above refuses the run; describe the packet all the same
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
    clock = _clock(scenario, potential)
    # the spin components' levels reach ħω_L/2 above and below V
    split = hbar * clock[1] if clock is not None else 0.0
    dt_error = 0.0
    if plane:   # the populated band's rules are worked out on a line: the grid rule here
        limit = time_step_limit(kinetic_max, v_range, hbar)
    else:
        limit = time_step_limit(band_energy_range(info, V, hbar, mass) + split, 0.0, hbar)
    if scenario.evolve.dt is None:
        if plan is not None:
            dt, dt_error = plan.dt, plan.time_error
        elif plane:
            dt = GRID_PHASE * hbar / (kinetic_max + v_range)
        else:
            scheme = SCHEMES[scenario.evolve.scheme]
            dt, dt_error = choose_dt(grid, info, V, None if potential.confining
                                     else potential.support(), hbar, mass,
                                     order=scheme.order, widest=scheme.widest,
                                     sinkable=not potential.driven)
        dt = min([dt] + [d.period / STEPS_PER_PERIOD for d, _ in potential.drives()])
        dt_chosen = True
    else:
        dt, dt_chosen = scenario.evolve.dt, False
    reference, absorber_width = _reference(scenario, potential, info), 0.0
    if scenario.absorber is not None:
        absorber_width = scenario.absorber.width
    band = packet_band(potential, info, hbar, mass, reference)
    detectors = list(scenario.measure.detectors) if scenario.measure.detectors is not None \
        else default_detectors(potential, info, grid, reference, absorber_width, band,
                                hbar, mass)
    duration = scenario.evolve.duration
    if duration == "auto":
        duration = resolve_auto(scenario, potential, info, band, reference, detectors,
                                 (grid.left + absorber_width, grid.right - absorber_width),
                                 findings)
        scenario_sized = scenario.model_copy(update={"evolve": scenario.evolve.model_copy(
            update={"duration": duration})})
    else:
        scenario_sized = scenario
    refuse_endless(scenario_sized, duration / dt if dt > 0 else math.inf, dt)
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
        if record_steps < steps and 4 * _largest_divisor(record_steps, sample_steps) < sample_steps:
            # a record interval of (nearly) a prime number of steps would sample (nearly) every
            # step: move the recordings to a whole number of samples apart (≈ record.every)
            record_steps = min(steps, sample_steps * max(1, round(record_steps / sample_steps)))
    sample_steps = _largest_divisor(record_steps, sample_steps)  # a regular comb through recordings

    # absorber
    W = None
    if scenario.absorber is not None:
        speed_slow = hbar * max(abs(info.k0) - 3 * info.sigma_k, info.sigma_k) / mass
        strength = scenario.absorber.strength or default_absorber_strength(
            absorber_width, speed_slow, hbar)
        W = plane_absorber(grid, absorber_width, strength) if plane else \
            absorber_profile(grid.x, grid.left, grid.right, absorber_width, strength)
        if 2 * absorber_width >= min(grid.length, getattr(grid, "height", grid.length)):
            findings.append(Finding("error", "absorber.width",
                                    f"the layers ({absorber_width:g} each side) fill the box"))
        wavelength = 2 * math.pi / max(abs(info.k0), 1e-300)
        if absorber_width < 2 * wavelength:
            findings.append(Finding("warning", "absorber.width",
                                    f"layer {absorber_width:g} is shorter than two wavelengths "
                                    f"({2 * wavelength:.3g}); it may reflect"))

    region = tuple(scenario.measure.region) if scenario.measure.region else default_region(
        potential, grid, absorber_width, info)

    if clock is not None:   # a spinor: one potential per spin component
        V = spin_potentials(V, grid.x, grid.dx, clock[0], hbar * clock[1])
        findings += _clock_findings(clock[0], grid, absorber_width, info)
    drive = TimeDependence.of_potential(potential, grid.x, grid.dx) if potential.driven else None
    setup = Setup(scenario, grid, potential, V, W, info, dt, dt_chosen, steps, record_steps,
                  sample_steps, detectors, reference, region, findings, drive, transverse,
                  None if plane else flux_band(grid, info, V, hbar, mass, dt), dt_error,
                  sink=None if plane or potential.driven
                  else sideband_sink(grid, info, V, hbar, mass, dt))
    (guard_plane if plane else guard)(setup, limit, absorber_width)
    drive_findings(setup)
    if plan is not None:
        setup.findings.extend(plan_findings(plan, setup.scenario))
        setup.accuracy = plan
    for finding in findings:
        finding.line = scenario.line_of(finding.key)
    return setup


def _clock_findings(region, grid, absorber_width, info) -> list:
    """A clock region must lie in the box inside the absorbers, and the packet
    should start clear of it (its spin starts along +x outside the field)."""
    a, b = region
    inner = (grid.left + absorber_width, grid.right - absorber_width)
    if a < inner[0] or b > inner[1]:
        return [Finding("error", "larmor.region",
                        f"the clock region [{a:g}, {b:g}] reaches outside the box inside its "
                        f"absorbers [{inner[0]:g}, {inner[1]:g}]")]
    if a < info.center + 5 * info.width and b > info.center - 5 * info.width:
        return [Finding("warning", "larmor.region",
                        f"the packet starts inside the clock region [{a:g}, {b:g}] (within 5 "
                        "widths of its centre): its spin precesses from t = 0 and the times "
                        "it reads are not those of the scattering")]
    return []


def _clock(scenario, potential):
    """(region, ω_L) of the scenario's Larmor clock, or None without one."""
    spec = scenario.larmor
    if spec is None:
        return None
    region = clock_region(spec.region, potential)
    if region is None:
        line = scenario.line_of("larmor") or 1
        raise ScenarioError(f"{scenario.source}:{line}: larmor.region: the potential has no "
                            "extent to default to; give the region")
    return region, float(spec.omega)




def _reference(scenario, potential, info) -> float:
    """measure.reference, or where V first departs from its incidence-side level."""
    support = potential.support()
    if scenario.measure.reference is not None:
        return scenario.measure.reference
    if support is not None:
        return support[0] if info.k0 >= 0 else support[1]
    return 0.0
