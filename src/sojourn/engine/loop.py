"""Running a scenario: the time loop between recordings, its samples, and the
run file it writes. This is the I/O edge of the simulation."""
from __future__ import annotations

import math
from pathlib import Path
from typing import Callable, Optional

import numpy as np

from . import observables as obs
from ..build import Setup
from ..store.paths import output_path
from .fft import FFTPair
from .propagate import Propagator
from ..store.runfile import RunWriter
from ..errors import NonFinite


class Sampler:
    """Collects detector flux, region probability, norm and absorption between
    recordings; called by the propagator every `sample_steps` steps."""

    def __init__(self, setup: Setup, raw_absorbed=(0.0, 0.0)):
        g = setup.grid
        self.dt, self.every = setup.dt, setup.sample_steps
        self.dx = g.dx
        self.detectors = obs.Detectors(g, setup.detectors, setup.hbar, setup.mass)
        self.region = obs.window(g, *setup.region) if setup.region else None
        self.left = obs.window(g, g.left - g.dx, setup.reference)
        self.right = obs.window(g, setup.reference, g.right + g.dx)
        self.layers = []
        if setup.W is not None:
            half = g.points // 2
            for sl in (slice(0, half), slice(half, g.points)):
                w = setup.W[sl]
                nz = np.nonzero(w)[0]
                if nz.size:
                    sl = slice(sl.start + nz[0], sl.start + nz[-1] + 1)
                self.layers.append((sl, np.sqrt(2 * setup.W[sl] / setup.hbar)))
        self.raw_absorbed = list(raw_absorbed)
        self.start_step = 0
        self._spectrum = FFTPair(g.points)  # a planned transform for ⟨p⟩ and ⟨H⟩
        self.reset()

    def _transform(self, psi: np.ndarray) -> np.ndarray:
        self._spectrum.buffer[:] = psi
        self._spectrum.forward()
        return self._spectrum.buffer

    def reset(self) -> None:
        self.t, self.flux, self.p_region, self.norm = [], [], [], []
        self.absorbed = ([], [])

    def take(self, psi: np.ndarray, t: float) -> None:
        self.t.append(t)
        self.flux.append(self.detectors.flux(psi) if len(self.detectors) else [0.0])
        self.p_region.append(obs.probability(psi, self.dx, self.region))
        total = obs.norm(psi, self.dx)
        self.norm.append(total)
        for side, (sl, root_rate) in enumerate(self.layers):  # ∫ 2W|ψ|²/ħ dx, sampled
            self.raw_absorbed[side] += obs.sum_abs2(root_rate * psi[sl]) * self.dx * self.dt \
                * self.every
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
        values = obs.moments(psi, setup.grid, setup.V, setup.hbar, setup.mass, self._transform)
        values["P_left"] = obs.probability(psi, self.dx, self.left)
        values["P_right"] = obs.probability(psi, self.dx, self.right)
        values["P_region"] = obs.probability(psi, self.dx, self.region)
        a_left, a_right = self.split_absorbed(values["norm"])
        values["absorbed_left"], values["absorbed_right"] = a_left, a_right
        return values




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
            values = sampler.recording(psi, setup)
            if not math.isfinite(values["norm"]):  # a nan or inf anywhere reaches the norm
                raise NonFinite(f"ψ became non-finite at t = {step * setup.dt:g}; "
                                "check the potential and the time step")
            writer.snapshot(step, step * setup.dt, psi, values, sampler.batch(),
                            tuple(sampler.raw_absorbed))
            if progress:
                progress(step, setup.steps)
    except KeyboardInterrupt:
        writer.close("interrupted")
        raise
    except BaseException:
        writer.close("failed")
        raise
    return writer.finish()


def write_synthesis(setup: Setup, output: Path, overwrite: bool = False,
                    progress: Optional[Callable[[int, int], None]] = None) -> Path:
    """Write the exact solution built from stationary states (theory.synthesize)
    as a run file in the same layout, at the times a run would record and
    sample, so that every other command works on it. No absorber, norm 1."""
    from ..theory.solver import synthesize
    sc = setup.scenario
    if setup.W is not None:
        setup = _without_absorber(setup)
    writer = RunWriter.open_new(Path(output), setup, "exact synthesis (theory)", overwrite,
                                sc.record.compress)
    sampler = Sampler(setup)
    g = setup.grid
    nodes = sorted({i for sl in sampler.detectors._slices for i in range(sl.start, sl.stop)}
                   | (set(range(sampler.region.cells.start, sampler.region.cells.stop)) if sampler.region
                      else set()))
    nodes = np.array(nodes, dtype=int)
    recordings = list(range(0, setup.steps, setup.record_steps)) + [setup.steps]
    try:
        previous = None
        for step in recordings:
            # the samples a run takes up to this recording: t = 0 first, then every
            # sample_steps steps after the previous recording
            sampled = [0] if previous is None else list(
                range(previous + setup.sample_steps, step + 1, setup.sample_steps))
            times = np.array(sampled, dtype=float) * setup.dt
            full = np.zeros(g.points, complex)
            for tk, values in zip(times, synthesize(sc, times, x=g.x[nodes])):
                full[nodes] = values
                sampler.take(full, float(tk))
                sampler.norm[-1] = 1.0
            psi = synthesize(sc, [step * setup.dt], x=g.x)[0]
            writer.snapshot(step, step * setup.dt, psi, sampler.recording(psi, setup),
                            sampler.batch(), (0.0, 0.0))
            if progress:
                progress(step, setup.steps)
            previous = step
    except BaseException:
        writer.close("failed")
        raise
    return writer.finish()


def _without_absorber(setup: Setup) -> Setup:
    from dataclasses import replace
    return replace(setup, W=None)
