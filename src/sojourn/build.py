"""From a Scenario to everything a run needs (grid, V, W, ψ₀, steps, detectors),
and the guards that judge it before any time is spent (PHYSICS §2–3)."""
from __future__ import annotations

import math
import os
import shutil
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

import numpy as np

from . import packets
from .grid import Grid
from .potentials import Potential
from .propagate import default_absorber_strength, absorber_profile, time_step_limit
from .scenario import Scenario, ScenarioError

STATE_COPIES = 8          # complex arrays of N the propagator and the recorder hold
RESOLUTION_MARGIN = 2.0   # k_max ≥ margin·(|k₀| + 6σ_k)  (common practice, no source)
DEFAULT_DT_PHASE = math.pi / 2  # default Δt·(E_max + ΔV)/ħ, well inside the limit of 2π


@dataclass
class Finding:
    """One result of the guards: level 'error' (refuses a run), 'warning' or 'info'."""

    level: str
    key: str
    message: str
    forceable: bool = False

    def __str__(self) -> str:
        return f"{self.key}: {self.message}" if self.key else self.message


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


def _default_region(potential, grid, absorber_width, packet):
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
    _refuse_oversized(scenario)
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
    _refuse_endless(scenario, duration / dt if dt > 0 else math.inf, dt)
    steps = max(1, int(math.ceil(duration / dt - 1e-9)))
    dt = duration / steps  # the run ends exactly at the duration (dt shrinks, if at all, by < 1 step)
    every = scenario.record.every or duration / 100
    record_steps = max(1, int(round(every / dt)))
    passage = info.width / max(abs(info.group_velocity), 1e-300)
    sample_steps = scenario.record.sample_steps
    if "sample_steps" not in scenario.record.model_fields_set:
        # 50 samples per temporal width of a passage: the trapezoid rule is then
        # exact to far below the delays' precision for these smooth signals
        sample_steps = max(1, min(record_steps, int(passage / 50 / dt)))
    while record_steps % sample_steps:   # samples fall on a regular comb through recordings
        sample_steps -= 1

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
    region = tuple(scenario.measure.region) if scenario.measure.region else _default_region(
        potential, grid, absorber_width, info)
    detectors = list(scenario.measure.detectors) if scenario.measure.detectors is not None \
        else _default_detectors(potential, info, grid, reference, absorber_width)

    setup = Setup(scenario, grid, potential, V, W, info, dt, dt_chosen, steps, record_steps,
                  sample_steps, detectors, reference, region, findings)
    _guard(setup, limit, absorber_width)
    return setup


def _refuse_oversized(scenario: Scenario) -> None:
    """Refuse, before any array exists, a grid that cannot fit in memory."""
    memory = STATE_COPIES * scenario.grid.points * 16
    available = _physical_memory()
    if available and memory > 0.8 * available:
        raise ScenarioError(f"{scenario.source}: grid.points: {scenario.grid.points} points need "
                            f"about {_size(memory)} of memory; this machine has {_size(available)}")


MAX_STEPS = 10 ** 12   # about a year of steps at a microsecond each (common practice, no source)


def _refuse_endless(scenario: Scenario, steps: float, dt: float) -> None:
    """Refuse a run that could never finish, before any loop is planned."""
    if not math.isfinite(steps) or steps > MAX_STEPS:
        raise ScenarioError(f"{scenario.source}: evolve.dt: duration {scenario.evolve.duration:g} "
                            f"at dt = {dt:g} is {steps:.3g} steps, more than {MAX_STEPS:.0e}; "
                            "use a larger dt or a shorter duration")


def _guard(s: Setup, limit: float, absorber_width: float) -> None:
    """Append the guards' findings to s.findings."""
    add = s.findings.append
    info, grid, hbar, mass = s.packet, s.grid, s.hbar, s.mass
    units = s.scenario.unit_system

    # resolution of the packet's momentum content
    needed = RESOLUTION_MARGIN * (abs(info.k0) + 6 * info.sigma_k)
    if grid.k_max < needed:
        points = int(2 ** math.ceil(math.log2(grid.length * needed / math.pi)))
        add(Finding("error", "grid.points",
                    f"grid resolution too coarse: k_max = π/dx = {grid.k_max:.4g} but the packet "
                    f"needs ≥ {needed:.4g} (2·(|k₀| + 6σ_k)); use points ≥ {points}", forceable=True))
    if info.k_ratio < 6 and not s.potential.confining:
        add(Finding("warning", "packet.width",
                    f"k₀/σ_k = {info.k_ratio:.3g} < 6: the packet has content near k = 0, where "
                    "delays diverge; make the packet wider or faster"))

    # the time step against the grid limit
    phase = s.grid_phase
    if s.dt_chosen:
        add(Finding("info", "evolve.dt", f"no dt given: using dt = {s.dt:.4g} {units.time} "
                    f"(Δt·(E_max+ΔV)/ħ = {phase:.3g}, limit 2π)"))
    if phase >= 2 * math.pi:
        add(Finding("error", "evolve.dt",
                    f"dt = {s.dt:g} is past the grid limit Δt·(E_max + V_max − V_min)/ħ < 2π "
                    f"(here {phase:.3g}); the largest allowed is {limit:.4g} {units.time}, "
                    f"and {limit / 2:.4g} is safe", forceable=True))
    elif phase > math.pi:
        add(Finding("warning", "evolve.dt",
                    f"Δt·(E_max + ΔV)/ħ = {phase:.3g} is above π: sharp features may feed "
                    f"spurious high-k components; dt ≤ {limit / 2:.4g} is safe"))

    # the packet inside the box, clear of absorbers and the potential
    inner = (grid.left + absorber_width, grid.right - absorber_width)
    if not grid.left <= info.center < grid.right:
        add(Finding("error", "packet.center",
                    f"packet centre {info.center:g} is outside the box [{grid.left:g}, {grid.right:g})"))
    elif not inner[0] + 5 * info.width <= info.center <= inner[1] - 5 * info.width:
        add(Finding("warning", "packet.center",
                    f"the packet (centre {info.center:g}, width {info.width:g}) is within 5 widths of "
                    f"the box edge or the absorber"))
    support = s.potential.support()
    if support is not None and not s.potential.confining:
        distance = support[0] - info.center if info.k0 >= 0 else info.center - support[1]
        if distance < 5 * info.width:
            add(Finding("warning", "packet.center",
                        f"the packet starts {distance:.3g} from the potential (< 5 widths): it "
                        "overlaps the potential at t = 0, which biases delays"))

    # duration against the box and the outgoing packet
    if not s.potential.confining:
        v0 = abs(info.group_velocity)
        v_fast = hbar * (abs(info.k0) + 4 * info.sigma_k) / mass
        width_end = float(packets.free_width(info.width, s.duration, hbar, mass))
        travel_out = abs(s.reference - info.center) + max(
            abs(s.reference - d) for d in s.detectors) if s.detectors else 0.0
        needed_time = (travel_out + 5 * width_end) / max(v0, 1e-300)
        if s.duration < needed_time:
            add(Finding("warning", "evolve.duration",
                        f"duration {s.duration:g} may be too short for the outgoing packet to clear "
                        f"the detectors by 5σ(t) (about {needed_time:.4g} {units.time} needed)"))
        if s.W is None:
            # the reflected part returns to the near edge; a transmitted part (only if the
            # far side is open to the packet's fast components) runs to the far edge
            left_level, right_level = s.potential.levels()
            far_level = right_level if info.k0 >= 0 else left_level
            e_fast = info.level + 0.5 * mass * v_fast ** 2
            if info.k0 >= 0:
                rooms = [abs(s.reference - info.center) + abs(s.reference - grid.left)]
                far = grid.right - info.center
            else:
                rooms = [abs(info.center - s.reference) + abs(grid.right - s.reference)]
                far = info.center - grid.left
            if far_level < e_fast:
                rooms.append(far)
            room = min(rooms)
            if v_fast * s.duration > room:
                add(Finding("warning", "absorber",
                            f"no absorber, and the fast part of the packet (v ≈ {v_fast:.3g}) can "
                            f"reach the box edge at t ≈ {room / v_fast:.4g} < {s.duration:g}: "
                            "probability will wrap around; add an absorber or enlarge the box"))

    for x_jump in s.potential.jumps():
        offset = ((x_jump - grid.left) / grid.dx) % 1.0
        if abs(offset - 0.5) > 1e-6:
            add(Finding("info", "potential",
                        f"the jump at x = {x_jump:g} is {abs(offset - 0.5):.2f}·dx off the midpoint "
                        "between grid points: its cell is averaged so its position is kept"))
            break

    # memory and disk
    item = 8 if s.scenario.evolve.precision == "single" else 16
    memory = STATE_COPIES * grid.points * 16
    disk = s.snapshots * grid.points * item + grid.points * 8 * 3
    out_dir = _output_dir(s.scenario)
    free = _free_disk(out_dir)
    if free is not None and disk > free:
        add(Finding("error", "record.every",
                    f"the run file needs about {_size(disk)} ({s.snapshots} snapshots of "
                    f"{grid.points} points); {out_dir} has {_size(free)} free"))
    s.findings.append(Finding("info", "", f"estimated memory {_size(memory)}, run file "
                                          f"{_size(disk)} ({s.snapshots} snapshots)"))


def output_path(scenario: Scenario) -> Path:
    """The run file a scenario writes: record.output (relative to the scenario's
    folder), else ./outputs/NAME.h5."""
    if scenario.record.output:
        path = Path(scenario.record.output)
        if not path.is_absolute() and scenario.source:
            path = Path(scenario.source).parent / path
        return path
    return Path("outputs") / f"{scenario.name}.h5"


def _output_dir(scenario) -> Path:
    path = output_path(scenario).parent
    while not path.exists() and path != path.parent:
        path = path.parent
    return path


def _physical_memory() -> Optional[int]:
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return None


def _free_disk(path: Path) -> Optional[int]:
    try:
        return shutil.disk_usage(path).free
    except OSError:
        return None


def _size(nbytes: float) -> str:
    for unit in ("B", "KiB", "MiB", "GiB", "TiB", "PiB"):
        if nbytes < 1024 or unit == "PiB":
            return f"{nbytes:.3g} {unit}"
        nbytes /= 1024
    return f"{nbytes:.3g} PiB"
