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
2. the time step: `timestep.bias`, x² (Strang) or x⁴ (Yoshida-4), x =
   h_eff·Δt/ħ at sharp features, with the band rule as a cap; a scheme's
   largest sub-step |w|·Δt is what the kicks see (the sink takes the
   sidebands, `timestep.sideband_sink`).
Of BUDGET·ε, the grid takes its error at each candidate point count (2^a and
3·2^a, from the fewest that resolve the band) and the time step the rest; the
count and scheme with the least FFT work win."""
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
BUDGET = 0.9               # of ε, for the grid's error and the time step's bias together; the
                           # rest is left for the methods' own errors (tails, sampling)
FLOOR_SHARE = 0.1          # of the budget: the least the time step is given, and the grid
                           # error below which finer grids are not tried
GRID_SAFETY = 1.25         # the rendering estimate over the measured jump error, the jump on a
                           # grid point (unit step, Strang at Δt 0.0012–0.03 with the sink):
                           # 1.2 at N = 8192, 1.1 at 12288, 0.9 at 16384
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
         reference, sinkable: bool = True) -> Plan:
    """Choose what the request leaves open: `points` (an int, or 'auto'), `dt`
    (a number, or None) and `scheme` (a name, or None: the cheapest) for a
    relative accuracy `target`, at the least FFT work (points × drifts / Δt)
    with grid error + time-step bias ≤ BUDGET·target."""
    if not 0 < target < 1:
        raise ValueError(f"accuracy must lie in (0, 1), got {target!r}")
    auto = points == "auto"
    support = None if potential.confining else potential.support()
    budget = BUDGET * target
    if auto:
        lowest = float(np.min(potential(np.linspace(span[0], span[1], 4097))))
        k = timestep.band_top(info, min(lowest, info.level), hbar, mass)
        counts = candidate_points(int(math.ceil((span[1] - span[0]) * RESOLUTION_MARGIN
                                                * k / math.pi)))
    else:
        counts = [int(points)]
    best = None
    for n in counts:
        grid = Grid(*aligned_span(span, n, potential.jumps(), info.k0 >= 0), n) if auto \
            else Grid(float(span[0]), float(span[1]), n)
        V = potential.on_grid(grid.x, grid.dx)
        g_err = grid_error(potential, info, grid, V, hbar, mass, reference)
        room = max(budget - g_err, FLOOR_SHARE * budget)
        for name in ([scheme] if scheme else list(SCHEMES)):
            s = SCHEMES[name]
            if dt is None:
                step, t_err = timestep.choose(grid, info, V, support, hbar, mass, room,
                                              s.order, s.widest, sinkable)
            else:
                step = dt
                t_err = timestep.bias(grid, info, V, support, hbar, mass, dt * s.widest, s.order,
                                      timestep.sinks(grid, info, V, hbar, mass, dt, sinkable))
            work = n * len(s.drifts) / step
            option = (g_err + t_err > budget, work, grid, name, step, g_err, t_err)
            if best is None or option[:2] < best[:2]:
                best = option
        if g_err <= FLOOR_SHARE * budget:
            break    # finer grids leave the time step little more room: they only cost more
    missed, _, grid, name, step, g_err, t_err = best
    return Plan(target, grid.points, (grid.left, grid.right), grid.left - float(span[0]),
                step, name, g_err, t_err, not (auto and g_err > budget))


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
                  reference_of(scenario, potential, info), sinkable=not potential.driven)
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
