"""Running a scenario: the time loop between recordings, its samples, and the
run file it writes. This is the I/O edge of the simulation."""
from __future__ import annotations

import math
from pathlib import Path
from typing import Callable, Optional

import numpy as np

from . import observables as obs
from .build import Setup, output_path
from .propagate import Propagator
from .runfile import RunWriter
from .scenario import SojournError


class Sampler:
    """Collects detector flux, region probability, norm and absorption between
    recordings; called by the propagator every `sample_steps` steps."""

    def __init__(self, setup: Setup, raw_absorbed=(0.0, 0.0)):
        g = setup.grid
        self.dt, self.every = setup.dt, setup.sample_steps
        self.dx = g.dx
        self.detectors = obs.Detectors(g, setup.detectors, setup.hbar, setup.mass)
        self.region = _index_slice(g, setup.region)
        self.left, self.right = _index_slice(g, (g.left, setup.reference)), \
            _index_slice(g, (setup.reference, g.right))
        self.layers = []
        if setup.W is not None:
            half = g.points // 2
            for sl in (slice(0, half), slice(half, g.points)):
                w = setup.W[sl]
                nz = np.nonzero(w)[0]
                if nz.size:
                    sl = slice(sl.start + nz[0], sl.start + nz[-1] + 1)
                self.layers.append((sl, 2 * setup.W[sl] / setup.hbar))
        self.raw_absorbed = list(raw_absorbed)
        self.start_step = 0
        self.reset()

    def reset(self) -> None:
        self.t, self.flux, self.p_region, self.norm = [], [], [], []
        self.absorbed = ([], [])

    def take(self, psi: np.ndarray, t: float) -> None:
        self.t.append(t)
        self.flux.append(self.detectors.flux(psi) if len(self.detectors) else [0.0])
        self.p_region.append(obs.probability(psi, self.dx, self.region) if self.region else 0.0)
        total = obs.norm(psi, self.dx)
        self.norm.append(total)
        for side, (sl, rate) in enumerate(self.layers):
            part = psi[sl]
            self.raw_absorbed[side] += float(np.dot(rate, (part.real ** 2 + part.imag ** 2))) \
                * self.dx * self.dt * self.every
        for side, value in enumerate(self.split_absorbed(total)):
            self.absorbed[side].append(value)

    def split_absorbed(self, norm: float) -> tuple[float, float]:
        """Absorbed probability per side: the exact total 1 - norm, shared as the
        sampled integrals ∫2W|ψ|²/ħ dt of each layer."""
        raw = sum(self.raw_absorbed)
        if raw <= 0:
            return 0.0, 0.0
        lost = max(1.0 - norm, 0.0)
        return lost * self.raw_absorbed[0] / raw, lost * self.raw_absorbed[1] / raw

    def __call__(self, psi: np.ndarray, step: int) -> None:
        self.take(psi, (self.start_step + step) * self.dt)

    def batch(self) -> dict:
        out = {"t": np.array(self.t), "flux": np.array(self.flux, dtype=float).reshape(len(self.t), max(len(self.detectors), 1)),
               "P_region": np.array(self.p_region), "norm": np.array(self.norm),
               "absorbed_left": np.array(self.absorbed[0]),
               "absorbed_right": np.array(self.absorbed[1])}
        self.reset()
        return out

    def recording(self, psi, setup: Setup) -> dict:
        values = obs.moments(psi, setup.grid, setup.V, setup.hbar, setup.mass)
        values["P_left"] = obs.probability(psi, self.dx, self.left)
        values["P_right"] = obs.probability(psi, self.dx, self.right)
        values["P_region"] = obs.probability(psi, self.dx, self.region) if self.region else 0.0
        a_left, a_right = self.split_absorbed(values["norm"])
        values["absorbed_left"], values["absorbed_right"] = a_left, a_right
        return values


def _index_slice(grid, interval) -> Optional[slice]:
    if interval is None:
        return None
    a = int(math.ceil((interval[0] - grid.left) / grid.dx - 1e-9))
    b = int(math.floor((interval[1] - grid.left) / grid.dx + 1e-9)) + 1
    return slice(max(a, 0), min(max(b, 0), grid.points))


class NonFinite(SojournError, ArithmeticError):
    """ψ stopped being finite during a run (the run file is kept, status failed)."""


def execute(setup: Setup, output: Optional[Path] = None, overwrite: bool = False,
            resume: bool = False,
            progress: Optional[Callable[[int, int], None]] = None) -> Path:
    """Run a built scenario and write its run file; returns the final path.

    `progress(done_steps, total_steps)` is called after each recording. On
    KeyboardInterrupt (Ctrl-C, or SIGTERM turned into it by the caller) the
    file is closed with status 'interrupted' and can be resumed.
    """
    sc = setup.scenario
    final = Path(output) if output else output_path(sc)
    prop = Propagator(setup.grid, setup.V, setup.hbar, setup.mass, setup.dt, sc.evolve.scheme,
                      setup.W, single=sc.evolve.precision == "single")
    if resume:
        writer, state = RunWriter.open_resume(final, sc.text)
        sampler = Sampler(setup, state["raw_absorbed"])
        step = state["step"]
        prop.set_state(state["psi"])
    else:
        writer = RunWriter.open_new(final, setup, prop.fft.backend, overwrite, sc.record.compress)
        sampler = Sampler(setup)
        step = 0
        psi0 = setup.psi0()
        prop.set_state(psi0)
        sampler.take(prop.psi, 0.0)
        writer.snapshot(0, 0.0, prop.psi, sampler.recording(prop.psi, setup), sampler.batch(),
                        tuple(sampler.raw_absorbed))
    try:
        while step < setup.steps:
            chunk = min(setup.record_steps - step % setup.record_steps, setup.steps - step)
            sampler.start_step = step
            prop.advance(chunk, setup.sample_steps, sampler)
            step += chunk
            psi = prop.psi
            if not np.isfinite(psi[:: max(1, len(psi) // 64)]).all() or not np.isfinite(
                    np.vdot(psi, psi)):
                raise NonFinite(f"ψ became non-finite at t = {step * setup.dt:g}; "
                                "check the potential and the time step")
            writer.snapshot(step, step * setup.dt, psi, sampler.recording(psi, setup),
                            sampler.batch(), tuple(sampler.raw_absorbed))
            if progress:
                progress(step, setup.steps)
    except KeyboardInterrupt:
        writer.close("interrupted")
        raise
    except BaseException:
        writer.close("failed")
        raise
    return writer.finish()
