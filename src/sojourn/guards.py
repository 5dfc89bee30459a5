"""The guards: judge a Setup before any time is spent (resolution, time step,
packet placement, duration, memory and disk), as `Finding`s (PHYSICS §2–3)."""
from __future__ import annotations

import math
import os
import shutil
import time
from pathlib import Path
from typing import Optional

import numpy as np

from .errors import ScenarioError
from .findings import Finding
from .grid_error import RENDERING_WARN, RENDERING_WARN_LEVEL, grid_findings
from .model import packets
from .engine.propagate import SCHEMES, Propagator
from .model.grid import Grid
from .store import layout
from . import timestep
from .store.paths import output_path

# A run's peak memory, fitted to peaks measured with `python -m sojourn run` at
# 2^18-2^21 points (getrusage RUSAGE_CHILDREN ru_maxrss; within 10% at each):
# FIXED_BYTES (the interpreter and its libraries) + N·(FLOAT_BYTES + STATE_COPIES·ψ item).
STATE_COPIES = 10         # complex arrays of N: propagator buffer and factors, FFT plans, recorder
FLOAT_BYTES = 36          # bytes per point in real arrays (x, V, W, the sampler's windows)
FIXED_BYTES = 150 * 2**20
FILE_OVERHEAD = 64 * 1024  # a run file's metadata past its allocated data (measured: < 30 KiB)
ROW_OVERHEAD = 96          # per ψ row: its chunk's index entry and checksum (measured 40-83 B)
MAX_RUN_SECONDS = 30 * 86400   # a longer estimated run is refused without --force
CALIBRATION = {"points": 4096, "steps": 300}
RESOLUTION_MARGIN = 2.0   # k_max ≥ margin·(|k₀| + 6σ_k)  (common practice, no source)


def time_step_limit(kinetic_max: float, v_range: float, hbar: float) -> float:
    """Largest Δt with Δt·(E + V_max - V_min)/ħ < 2π (PHYSICS §3): E the grid's
    E_max for the grid limit, the populated band's E_top for the hard limit."""
    return 2 * math.pi * hbar / (kinetic_max + v_range)


def memory_estimate(points: int, precision: str = "double") -> int:
    """The peak memory of a run on `points` points (see STATE_COPIES)."""
    item = 8 if precision == "single" else 16
    return int(FIXED_BYTES + points * (FLOAT_BYTES + STATE_COPIES * item))


def file_estimate(setup) -> int:
    """The bytes of the run file: what the layout allocates, its metadata and
    chunk overhead (with compression, ψ counted uncompressed: an upper bound)."""
    return int(layout.allocated_bytes(setup, False) + FILE_OVERHEAD
               + ROW_OVERHEAD * (setup.snapshots + 2))


_STEP_SECONDS: dict = {}   # (scheme, precision) -> seconds per point·log2(point)·step


def step_seconds(scheme: str, precision: str = "double") -> float:
    """Seconds per N·log2 N per step on this machine, timed once per process on
    a small grid with the real propagator (the FFTs dominate a step)."""
    key = (scheme, precision)
    if key not in _STEP_SECONDS:
        n, steps = CALIBRATION["points"], CALIBRATION["steps"]
        grid = Grid(-float(n) / 2, float(n) / 2, n)
        prop = Propagator(grid, np.zeros(n), 1.0, 1.0, 0.01, scheme,
                          single=precision == "single")
        prop.set_state(np.exp(-grid.x ** 2 / 100 + 0.5j * grid.x).astype(complex))
        prop.advance(10)   # plans and caches warmed
        start = time.perf_counter()
        prop.advance(steps)
        _STEP_SECONDS[key] = (time.perf_counter() - start) / (steps * n * math.log2(n))
    return _STEP_SECONDS[key]


def run_time_estimate(points: int, steps: int, scheme: str, precision: str = "double") -> float:
    """Seconds a run of `steps` steps on `points` points takes here (calibrated)."""
    return step_seconds(scheme, precision) * steps * points * math.log2(max(points, 2))


def _duration(seconds: float) -> str:
    for unit, size in (("years", 365.25 * 86400), ("days", 86400), ("hours", 3600),
                       ("minutes", 60)):
        if seconds >= size:
            return f"{seconds / size:.3g} {unit}"
    return f"{seconds:.2g} s"


def refuse_oversized(scenario) -> None:
    """Refuse, before any array exists, a grid that cannot fit in memory."""
    memory = memory_estimate(scenario.grid.total_points, scenario.evolve.precision)
    available = _physical_memory()
    if available and memory > 0.8 * available:
        raise ScenarioError(f"{scenario.source}: grid.points: {scenario.grid.total_points} "
                            f"points need "
                            f"about {_size(memory)} of memory; this machine has {_size(available)}")


MAX_STEPS = 10 ** 12   # about a year of steps at a microsecond each (common practice, no source)


def refuse_endless(scenario, steps: float, dt: float) -> None:
    """Refuse a run that could never finish, before any loop is planned (naming
    the mass when its scale, not the time step, is the likely cause)."""
    if not math.isfinite(steps) or steps > MAX_STEPS:
        if not MASS_RANGE[0] <= scenario.mass <= MASS_RANGE[1]:
            raise ScenarioError(f"{scenario.source}:{scenario.line_of('mass') or 1}: mass: "
                                f"{scenario.mass:g} electron masses makes the run {steps:.3g} "
                                f"steps long; `mass` is in electron masses (expected "
                                f"{MASS_RANGE[0]:g}…{MASS_RANGE[1]:g}), not kilograms")
        line = scenario.line_of("evolve.dt") or scenario.line_of("evolve") or 1
        raise ScenarioError(f"{scenario.source}:{line}: evolve.dt: duration "
                            f"{scenario.evolve.duration:g} at dt = {dt:g} is {steps:.3g} steps, "
                            f"more than {MAX_STEPS:.0e}; use a larger dt or a shorter duration")


def guard(s, limit: float, absorber_width: float) -> None:
    """Append the guards' findings to s.findings."""
    add = s.findings.append
    info, grid, hbar, mass = s.packet, s.grid, s.hbar, s.mass
    units = s.scenario.unit_system

    # resolution of the packet's momentum content, where V is lowest (the local k is largest)
    k_band = abs(info.k0) + 6 * info.sigma_k
    finite_V = not any(f.key == "potential" and f.level == "error" for f in s.findings)
    drop = max(info.level - float(np.min(s.V)), 0.0) \
        if finite_V and not s.potential.confining else 0.0
    k_local = math.sqrt(k_band ** 2 + 2 * mass * drop / hbar ** 2)
    needed = RESOLUTION_MARGIN * k_local
    if grid.k_max < needed:
        points = int(2 ** math.ceil(math.log2(grid.length * needed / math.pi)))
        where = "" if drop == 0 else f" where V is lowest ({float(np.min(s.V)):g})"
        add(Finding("error", "grid.points",
                    f"grid resolution too coarse: k_max = π/dx = {grid.k_max:.4g} but the packet "
                    f"needs ≥ {needed:.4g}{where} (2·local k at |k₀| + 6σ_k); use points ≥ "
                    f"{points}", forceable=True))
    if finite_V:
        grid_findings(s, add)
    _scale_hints(s, add)
    if info.k_ratio < 6 and not s.potential.confining:
        add(Finding("warning", "packet.width",
                    f"k₀/σ_k = {info.k_ratio:.3g} < 6: the packet has content near k = 0, where "
                    "delays diverge; make the packet wider or faster"))

    _time_step(s, limit, add)

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
        off_point = min(offset, 1 - offset)
        if off_point > 1e-6:
            add(Finding("info", "potential",
                        f"the jump at x = {x_jump:g} is {off_point:.2f}·dx from the nearest grid "
                        "point: its cell is averaged so its position is kept, but halving dx "
                        "moves it within its cell (the Δx² error then changes irregularly with "
                        "N); grid.points: auto puts the first jump on a grid point"))
            break

    resource_findings(s, add)


def resource_findings(s, add) -> None:
    """Memory, disk and run time of a Setup on a line or in the plane: an error
    past the run-time cap (forceable) or the free disk, and the estimates."""
    points = int(np.prod(s.state_shape))    # a spinor carries one state per component
    shape = "×".join(map(str, s.grid.shape[::-1]))   # N on a line, Nx×Ny in the plane
    memory = memory_estimate(points, s.scenario.evolve.precision)
    disk = file_estimate(s)
    seconds = run_time_estimate(points, s.steps, s.scenario.evolve.scheme,
                                s.scenario.evolve.precision)
    if seconds > MAX_RUN_SECONDS:
        add(Finding("error", "evolve.duration",
                    f"the run would take about {_duration(seconds)} here ({s.steps:.3g} steps of "
                    f"{shape} points), more than {_duration(MAX_RUN_SECONDS)}; use a larger "
                    "dt, fewer points or a shorter duration", forceable=True))
    out_dir = _output_dir(s.scenario)
    free = _free_disk(out_dir)
    if free is not None and disk > free:
        add(Finding("error", "record.every",
                    f"the run file needs about {_size(disk)} ({s.snapshots} snapshots of "
                    f"{shape} points); {out_dir} has {_size(free)} free"))
    at_most = "at most " if s.scenario.record.compress else ""
    add(Finding("info", "", f"estimated memory {_size(memory)}, run file {at_most}{_size(disk)} "
                            f"({s.snapshots} snapshots of {shape} points), run time "
                            f"{_duration(seconds)} here"))


def _time_step(s, limit: float, add) -> None:
    """The time step against the packet's band (a hard limit: 2π over the band)
    and, past the grid limit, against the bias the sidebands it opens at sharp
    features cause (PHYSICS §3, "Time step and the populated band")."""
    phase, band_phase, units = s.grid_phase, s.band_phase, s.scenario.unit_system
    scheme = SCHEMES[s.scenario.evolve.scheme]
    sinkable = not s.potential.driven
    sunk = timestep.sinks(s.grid, s.packet, s.V, s.hbar, s.mass, s.dt, sinkable)
    safe, _ = timestep.choose(s.grid, s.packet, s.V, s.potential.support(), s.hbar, s.mass,
                              order=scheme.order, widest=scheme.widest, sinkable=sinkable)
    if s.dt_chosen:
        bias = f", estimated bias ≤ {s.dt_error:.1e}" if s.dt_error else ""
        add(Finding("info", "evolve.dt",
                    f"no dt given: using dt = {s.dt:.4g} {units.time} (Δt·(E_top+ΔV)/ħ = "
                    f"{band_phase:.3g} over the packet's band, limit 2π; Δt·(E_max+ΔV)/ħ = "
                    f"{phase:.3g} on the grid{bias})"))
    if band_phase >= 2 * math.pi:
        add(Finding("error", "evolve.dt",
                    f"dt = {s.dt:g} aliases the packet's own band: Δt·(E_top + V_max − V_min)/ħ "
                    f"= {band_phase:.3g} ≥ 2π (E_top the kinetic energy at |k₀| + 8σ_k); the "
                    f"largest allowed is {limit:.4g} {units.time}, and {safe:.4g} is safe",
                    forceable=True))
        return
    if phase <= math.pi:
        return
    bias = timestep.bias(s.grid, s.packet, s.V, s.potential.support(), s.hbar, s.mass,
                         s.dt * scheme.widest, scheme.order, sunk)
    h = timestep.sharpness(s.V, s.grid.dx, s.potential.support(), s.grid.left, 0.0)
    grid_limit = time_step_limit(s.grid.kinetic_max(s.hbar, s.mass), float(np.ptp(s.V)), s.hbar)
    if phase >= 2 * math.pi and bias > RENDERING_WARN_LEVEL:
        allowed = min(max(grid_limit, timestep.largest_dt(h, RENDERING_WARN_LEVEL, s.hbar,
                                                           scheme.order, sunk) / scheme.widest),
                      limit)
        add(Finding("error", "evolve.dt",
                    f"dt = {s.dt:g} is past the grid limit Δt·(E_max + V_max − V_min)/ħ < 2π "
                    f"(here {phase:.3g}) and the potential's sharp features (height {h:.3g}) "
                    f"feed the spurious components this opens enough to bias delays by about "
                    f"{bias:.1e}; the largest allowed is {allowed:.4g} {units.time}, and "
                    f"{safe:.4g} is safe", forceable=True))
    elif bias > (s.scenario.evolve.accuracy or RENDERING_WARN) or band_phase > math.pi:
        add(Finding("warning", "evolve.dt",
                    f"Δt·(E_max + ΔV)/ħ = {phase:.3g} is above π: sharp features feed spurious "
                    f"high-k components (estimated relative bias {bias:.1e}); dt ≤ {safe:.4g} "
                    "is safe"))
    elif s.dt_chosen or phase >= 2 * math.pi:
        add(Finding("info", "evolve.dt",
                    f"Δt·(E_max + ΔV)/ħ = {phase:.3g}: the grid holds the time step's sidebands; "
                    f"the detectors read the state filtered to the packet's band (estimated "
                    f"relative bias {bias:.1e})"))


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


MASS_RANGE = (1e-3, 1e5)   # electron masses: an effective mass ... a heavy ion (common practice)


def _scale_hints(s, add) -> None:
    """Numbers whose scale suggests a unit slip (a mass in kg, an energy in meV)."""
    sc, info = s.scenario, s.packet
    units = sc.unit_system
    if not MASS_RANGE[0] <= sc.mass <= MASS_RANGE[1]:
        add(Finding("warning", "mass",
                    f"mass {sc.mass:g} is outside {MASS_RANGE[0]:g}…{MASS_RANGE[1]:g} electron "
                    "masses: `mass` is in electron masses, not kilograms"))
    v_range = float(np.ptp(s.V))
    kinetic = info.energy - info.level
    if v_range > 0 and not s.potential.confining and kinetic > 0:
        ratio = kinetic / v_range
        if ratio > 100 or ratio < 1e-3:
            add(Finding("warning", "packet.energy",
                        f"the packet's kinetic energy {kinetic:.4g} {units.energy} is "
                        f"{ratio:.3g}× the potential's range {v_range:.4g} {units.energy}: is it "
                        f"in {units.energy}, the scenario's energy unit?"))
    if info.width > s.grid.length / 6:
        add(Finding("warning", "packet.width",
                    f"the packet's width {info.width:g} is more than a sixth of the box "
                    f"({s.grid.length:g} {units.length}): it cannot separate from the potential "
                    "in this box"))
