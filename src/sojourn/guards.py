"""The guards: judge a Setup before any time is spent (resolution, time step,
packet placement, duration, memory and disk), as `Finding`s (PHYSICS §2–3)."""
from __future__ import annotations

import math
import os
import shutil
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from .errors import ScenarioError
from .model import packets
from .store.paths import output_path

STATE_COPIES = 8          # complex arrays of N the propagator and the recorder hold
RESOLUTION_MARGIN = 2.0   # k_max ≥ margin·(|k₀| + 6σ_k)  (common practice, no source)
DEFAULT_DT_PHASE = math.pi / 2  # default Δt·(E_max + ΔV)/ħ, well inside the limit of 2π


def time_step_limit(kinetic_max: float, v_range: float, hbar: float) -> float:
    """Largest Δt with Δt·(E_max + V_max - V_min)/ħ < 2π (PHYSICS §3)."""
    return 2 * math.pi * hbar / (kinetic_max + v_range)


@dataclass
class Finding:
    """One result of the guards: level 'error' (refuses a run), 'warning' or 'info'."""

    level: str
    key: str
    message: str
    forceable: bool = False

    def __str__(self) -> str:
        return f"{self.key}: {self.message}" if self.key else self.message


def refuse_oversized(scenario) -> None:
    """Refuse, before any array exists, a grid that cannot fit in memory."""
    memory = STATE_COPIES * scenario.grid.points * 16
    available = _physical_memory()
    if available and memory > 0.8 * available:
        raise ScenarioError(f"{scenario.source}: grid.points: {scenario.grid.points} points need "
                            f"about {_size(memory)} of memory; this machine has {_size(available)}")


MAX_STEPS = 10 ** 12   # about a year of steps at a microsecond each (common practice, no source)


def refuse_endless(scenario, steps: float, dt: float) -> None:
    """Refuse a run that could never finish, before any loop is planned."""
    if not math.isfinite(steps) or steps > MAX_STEPS:
        raise ScenarioError(f"{scenario.source}: evolve.dt: duration {scenario.evolve.duration:g} "
                            f"at dt = {dt:g} is {steps:.3g} steps, more than {MAX_STEPS:.0e}; "
                            "use a larger dt or a shorter duration")


def guard(s, limit: float, absorber_width: float) -> None:
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
