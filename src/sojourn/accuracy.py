"""The grid, time step and scheme for a requested accuracy (`evolve.accuracy: ε`
with `grid.points: auto`; PHYSICS §3, "Time to accuracy"). Pure: numbers in,
a `Plan` out; `build` applies it.

The error model (measured in benchmarks/dt_scan.py):
1. the grid: a jump's Δx² error, estimated by stationary theory on the grid's
   rendering of V (`guards.grid_rendering_error`) times GRID_SAFETY. It falls
   as Δx² only while each jump keeps its place relative to the cells, so the
   span is shifted (by less than half a cell, its length kept) to put the first
   jump the packet meets on a grid point (`aligned_span`): a grid point of N
   points is one of 2N, so halving Δx keeps it there;
2. the time step: `timestep.bias`, (h_eff·Δt/ħ)² at sharp features, with the
   band rule as a cap; a scheme's largest sub-step |w|·Δt is what the kicks see.
ε is shared: GRID_SHARE·ε to the grid, TIME_SHARE·ε to the time step; the rest
is left for the methods' own errors (tails, sampling). Among the candidate
point counts (2^a and 3·2^a) the fewest that reach the grid share are taken,
and of the schemes the one with the least FFT work for the time share."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import timestep
from .engine.propagate import SCHEMES
from .errors import ScenarioError
from .findings import Finding
from .grid_error import grid_rendering_error
from .guards import RESOLUTION_MARGIN
from .model import packets
from .model.grid import Grid

DEFAULT_ACCURACY = 1e-3    # what grid.points: auto aims at without evolve.accuracy
GRID_SHARE = 0.4           # of ε, for the grid's Δx² error
TIME_SHARE = 0.4           # of ε, for the time step's bias
GRID_SAFETY = 1.5          # the rendering estimate was 0.8–1 × the measured jump error with
                           # the jump on a grid point, 2–4 × above it for the barrier
MAX_AUTO_POINTS = 2 ** 22  # auto stops here (and says the accuracy is out of reach)


@dataclass(frozen=True)
class Plan:
    """What an accuracy request chose, and the error it expects."""

    target: float
    points: int
    span: tuple[float, float]
    shift: float              # how far the span moved to align the first jump
    dt: float
    scheme: str
    grid_error: float
    time_error: float
    reached: bool             # False: the grid share is out of reach below MAX_AUTO_POINTS

    @property
    def estimate(self) -> float:
        return self.grid_error + self.time_error

    def describe(self, units_time: str = "") -> str:
        moved = f" (span moved by {self.shift:+.3g} to put the first jump on a grid point)" \
            if self.shift else ""
        return (f"accuracy {self.target:g}: {self.points} points{moved}, dt = {self.dt:.4g} "
                f"{units_time}, scheme {self.scheme}; estimated relative error "
                f"{self.estimate:.1e} (grid {self.grid_error:.1e}, time step "
                f"{self.time_error:.1e})").replace("  ", " ")


def aligned_span(span, points: int, jumps, moving_right: bool = True) -> tuple[float, float]:
    """The span shifted by less than half a cell (its length kept) so that the
    first jump the packet meets lies on a grid point; unchanged without jumps."""
    left, right = float(span[0]), float(span[1])
    inside = [j for j in jumps if left < j < right]
    if not inside:
        return left, right
    jump = min(inside) if moving_right else max(inside)
    dx = (right - left) / points
    shift = jump - (left + round((jump - left) / dx) * dx)
    return left + shift, right + shift


def candidate_points(at_least: int):
    """FFT-friendly point counts (2^a and 3·2^a) from at_least up to MAX_AUTO_POINTS."""
    out = sorted({c for a in range(4, 23) for c in (2 ** a, 3 * 2 ** (a - 1))
                  if at_least <= c <= MAX_AUTO_POINTS})
    return out or [MAX_AUTO_POINTS]


def grid_error(potential, info, grid: Grid, V, hbar, mass, reference) -> float:
    """GRID_SAFETY × the largest relative change of a delay ⟨τ_R⟩, ⟨τ_T⟩ the grid's
    rendering causes."""
    estimate = grid_rendering_error(potential, info, grid.x, V, grid.dx, hbar, mass, reference)
    delays = [v for name, v in (estimate or {}).items() if name.startswith("tau")]
    return GRID_SAFETY * max(delays) if delays else 0.0


def plan(span, points, dt, scheme, target, potential, info, hbar, mass,
         reference) -> Plan:
    """Choose what the request leaves open: `points` (an int, or 'auto'), `dt`
    (a number, or None) and `scheme` (a name, or None: the cheapest) for a
    relative accuracy `target`."""
    if not 0 < target < 1:
        raise ValueError(f"accuracy must lie in (0, 1), got {target!r}")
    right_moving = info.k0 >= 0
    support = None if potential.confining else potential.support()
    if points == "auto":
        lowest = float(np.min(potential(np.linspace(span[0], span[1], 4097))))
        k = timestep.band_top(info, min(lowest, info.level), hbar, mass)
        fewest = int(math.ceil((span[1] - span[0]) * RESOLUTION_MARGIN * k / math.pi))
        for n in candidate_points(fewest):
            grid = Grid(*aligned_span(span, n, potential.jumps(), right_moving), n)
            V = potential.on_grid(grid.x, grid.dx)
            g_err = grid_error(potential, info, grid, V, hbar, mass, reference)
            if g_err <= GRID_SHARE * target:
                break
    else:
        grid = Grid(float(span[0]), float(span[1]), int(points))
        V = potential.on_grid(grid.x, grid.dx)
        g_err = grid_error(potential, info, grid, V, hbar, mass, reference)
    best = None
    for name in ([scheme] if scheme else list(SCHEMES)):
        s = SCHEMES[name]
        widest = max(abs(w) for w in s.drifts)   # the kicks see sub-steps of |w|·Δt
        if dt is None:
            step, _ = timestep.choose(grid, info, V, support, hbar, mass,
                                      TIME_SHARE * target, s.order)
            step = step / widest if widest > 1 else step
        else:
            step = dt
        t_err = timestep.bias(grid, info, V, support, hbar, mass, step * widest)
        work = len(s.drifts) / step
        if best is None or work < best[0]:
            best = (work, name, step, t_err)
    _, name, step, t_err = best
    return Plan(target, grid.points, (grid.left, grid.right), grid.left - float(span[0]),
                step, name, g_err, t_err, g_err <= GRID_SHARE * target or points != "auto")


def plan_scenario(scenario, potential, reference_of):
    """(Plan, the scenario with what it chose: points, span, scheme) for
    evolve.accuracy / grid.points: auto; `reference_of(scenario, potential, info)`
    gives the reference point (build's rule)."""
    level = float(potential(np.array([scenario.packet.center]))[0])
    try:
        info = packets.describe(scenario.packet, scenario.hbar, scenario.particle_mass,
                                level if math.isfinite(level) else 0.0)
    except ValueError as exc:
        raise ScenarioError(f"{scenario.source}: packet.energy: {exc}") from None
    target = scenario.evolve.accuracy or DEFAULT_ACCURACY
    auto = scenario.grid.points == "auto"
    scheme = None if auto and "scheme" not in scenario.evolve.model_fields_set \
        else scenario.evolve.scheme
    chosen = plan(scenario.grid.span, scenario.grid.points, scenario.evolve.dt, scheme, target,
                  potential, info, scenario.hbar, scenario.particle_mass,
                  reference_of(scenario, potential, info))
    grid = scenario.grid.model_copy(update={"points": chosen.points, "span": chosen.span})
    evolve = scenario.evolve.model_copy(update={"scheme": chosen.scheme})
    return chosen, scenario.model_copy(update={"grid": grid, "evolve": evolve})


def plan_findings(chosen: Plan, scenario) -> list:
    """The plan as an info finding, and a warning where it falls short of its target."""
    key = "grid.points" if scenario.evolve.accuracy is None else "evolve.accuracy"
    found = [Finding("info", key, chosen.describe(scenario.unit_system.time))]
    if not chosen.reached:
        found.append(Finding("warning", "grid.points",
                             f"auto: even {chosen.points} points leave an estimated grid error "
                             f"{chosen.grid_error:.1e}, above the accuracy's share; the "
                             f"accuracy {chosen.target:g} is out of reach in this box"))
    elif chosen.estimate > chosen.target:
        found.append(Finding("warning", key,
                             f"the estimated error {chosen.estimate:.1e} is above the requested "
                             f"accuracy {chosen.target:g} with the given points/dt; leave them "
                             "out (grid.points: auto, no dt) to reach it"))
    for finding in found:
        finding.line = scenario.line_of(finding.key)
    return found
