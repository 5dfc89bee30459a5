"""The states a movie shows: one per stored snapshot, or, for a movie of a
given length, one per frame — taken from the snapshots where they fall on one
and otherwise propagated from the snapshot before with the run's own
Hamiltonian (its V, V(x, t) if driven, absorber W, Δt and scheme), which reproduces the run's
state at those steps exactly (to rounding), instead of repeating frames.
"""
from __future__ import annotations

import math
from typing import Iterator

import numpy as np

from ..engine.propagate import Propagator, TimeDependence
from ..errors import RenderError
from ..model.grid import Grid
from ..store import RunFile
from ..timestep import sink_rates
from .facts import RunFacts

MAX_FRAMES = 100_000


def frame_times(times: np.ndarray, dt: float, seconds: float, fps: float) -> np.ndarray:
    """round(seconds·fps) times spread evenly from the first to the last
    snapshot, each moved to the nearest whole time step (so a frame is a state
    the scheme reaches exactly)."""
    if not (math.isfinite(seconds) and seconds > 0):
        raise RenderError(f"--seconds {seconds:g}: give a length above 0")
    count = int(round(seconds * fps))
    if not 1 <= count <= MAX_FRAMES:
        raise RenderError(f"--seconds {seconds:g} at {fps:g} fps gives {count} frames; "
                          f"choose 1 to {MAX_FRAMES}")
    t0, t1 = float(times[0]), float(times[-1])
    wanted = np.linspace(t0, t1, count) if count > 1 else np.array([t0])
    if dt > 0:
        wanted = t0 + np.rint((wanted - t0) / dt) * dt
    return np.clip(wanted, t0, t1)


def grid_of(x: np.ndarray) -> Grid:
    """The periodic grid whose points are `x`."""
    dx = float(x[1] - x[0])
    return Grid(float(x[0]), float(x[0]) + dx * len(x), len(x))


def propagated_states(run: RunFile, facts: RunFacts, wanted: np.ndarray
                      ) -> Iterator[tuple[float, np.ndarray]]:
    """(t, ψ(t)) for every time in `wanted` (ascending): the stored snapshot
    at or before t, advanced by round((t − t_snap)/Δt) steps of the run's
    scheme. One state is held at a time."""
    if facts.dt <= 0:
        raise RenderError(f"{run.path}: the run file records no time step; it cannot be "
                          "propagated between snapshots")
    times = facts.times
    grid = grid_of(facts.x)
    V = facts.V if facts.components is None else facts.components   # a spinor: one per component
    driven = facts.potential is not None and facts.potential.driven
    drive = TimeDependence.of_potential(facts.potential, grid.x, grid.dx) if driven else None
    prop = Propagator(grid, V, facts.hbar, facts.mass, facts.dt, facts.scheme,
                      facts.absorber, single=facts.single, drive=drive,
                      sink=None if facts.sink is None else sink_rates(grid.k, facts.sink))
    wanted = np.asarray(wanted, float)
    nearest = np.searchsorted(times, wanted + 1e-9 * max(facts.dt, 1e-300), side="right") - 1
    nearest = np.clip(nearest, 0, len(times) - 1)
    current, at_step = -1, 0
    for t, i in zip(wanted, nearest):
        if i != current:
            # the snapshot's own step: a driven potential's kicks read the time from it
            prop.set_state(run.psi(int(i)), int(round(times[i] / facts.dt)))
            current, at_step = int(i), 0
        target = int(round((t - times[i]) / facts.dt))
        if target > at_step:
            prop.advance(target - at_step)
            at_step = target
        yield float(times[i] + target * facts.dt), prop.psi
