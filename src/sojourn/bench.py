"""This machine's throughput: sojourn's time step against the FFT limit.

The FFT limit is the cost of a bare pair of planned in-place pyFFTW transforms
plus the two array multiplies a split step cannot avoid. A sojourn step is
`Propagator.advance` on a standard case (a unit step hit by a Gaussian packet,
ħ = m = 1, the time step and the sampling rate that `build` chooses by default),
including the run loop's sampler (detector flux, region probability, norm,
absorbed probability). Ours and the bare loop are timed in alternating short
bursts and the fastest burst of each is kept, so that a busy, shared machine
disturbs the ratio as little as possible.
"""
from __future__ import annotations

import time
from dataclasses import asdict, dataclass
from typing import Callable, Optional

import numpy as np

from .build import Setup, build
from .engine.sampler import Sampler
from .config.scenario import loads
from .errors import BenchError

QUICK_SIZES = (1 << 10, 1 << 12, 1 << 14, 1 << 16)
FULL_SIZES = tuple(1 << p for p in range(10, 19))

STANDARD_CASE = """\
title: Throughput case (unit step, hbar = m = 1)
units: atomic
grid: {{span: [-600.0, 600.0], points: {points}}}
potential:
  - step: {{at: 0.0, height: 1.0}}
packet: {{center: -250.0, width: 20.0, energy: 0.2}}
evolve: {{duration: 1000.0, precision: {precision}}}
absorber: {{width: 60.0}}
measure: {{detectors: [-130.0]}}
"""




@dataclass
class Throughput:
    """One grid size: steps per second for sojourn and for the bare FFT loop."""

    points: int
    precision: str
    threads: int
    sample_steps: int       # the run loop's default sampling interval for this grid
    steps_per_second: float  # sojourn (Propagator.advance with its sampler)
    limit_steps_per_second: float  # bare FFT pair + two multiplies
    unsampled_steps_per_second: float  # Propagator.advance alone, no sampler

    @property
    def propagator_fraction(self) -> float:
        """Fraction of the FFT limit reached by the propagator alone."""
        return self.unsampled_steps_per_second / self.limit_steps_per_second

    @property
    def fraction(self) -> float:
        """Fraction of the FFT limit reached: bare time / sojourn time per step."""
        return self.steps_per_second / self.limit_steps_per_second

    @property
    def point_steps_per_second(self) -> float:
        """Grid points advanced by one step per second (sizes a run: N·steps / this)."""
        return self.points * self.steps_per_second

    def as_dict(self) -> dict:
        out = asdict(self)
        out["fraction"] = self.fraction
        out["propagator_fraction"] = self.propagator_fraction
        out["point_steps_per_second"] = self.point_steps_per_second
        return out


def standard_setup(points: int, single: bool = False) -> Setup:
    """The standard throughput case built on `points` grid points."""
    text = STANDARD_CASE.format(points=points, precision="single" if single else "double")
    return build(loads(text, "bench-case.yaml"))


def bare_loop(points: int, dtype=np.complex128, threads: int = 1) -> Callable[[int], None]:
    """A callable running `steps` bare split steps: planned forward FFT, multiply,
    planned backward FFT, multiply, all in place on one aligned buffer."""
    try:
        import pyfftw
    except ImportError:  # pragma: no cover - depends on the machine
        raise BenchError("pyFFTW is not installed: the FFT limit is measured with it "
                         "(pip install pyfftw)") from None
    buf = pyfftw.empty_aligned(points, dtype=dtype)
    flags = ("FFTW_MEASURE", "FFTW_DESTROY_INPUT")
    fwd = pyfftw.FFTW(buf, buf, direction="FFTW_FORWARD", flags=flags, threads=threads).execute
    bwd = pyfftw.FFTW(buf, buf, direction="FFTW_BACKWARD", flags=flags, threads=threads).execute
    rng = np.random.default_rng(1)
    buf[:] = rng.standard_normal(points) / points
    drift = np.exp(1j * rng.uniform(0, 6.3, points)).astype(dtype) / points
    kick = np.exp(1j * rng.uniform(0, 6.3, points)).astype(dtype)
    mul = np.multiply

    def run(steps: int) -> None:
        for _ in range(steps):
            fwd()
            mul(buf, drift, out=buf)
            bwd()
            mul(buf, kick, out=buf)
    return run


def sojourn_loop(setup: Setup, threads: Optional[int] = None,
                 sampled: bool = True) -> tuple[Callable[[int], None], int]:
    """A callable running `steps` sojourn steps (with the run loop's sampler at
    its default rate, unless not `sampled`), and the number of threads its FFTs use."""
    prop = setup.propagator(threads)
    prop.set_state(setup.psi0())
    sampler = Sampler(setup)
    state = {"step": 0}

    def run(steps: int) -> None:
        sampler.start_step = state["step"]
        prop.advance(steps, setup.sample_steps, sampler if sampled else None)
        state["step"] += steps
        if len(sampler.t) > 100_000:
            sampler.batch()  # keep the sample lists short, as the recordings do
    return run, prop.fft.threads


def _per_step(run: Callable[[int], None], steps: int) -> float:
    start = time.perf_counter()
    run(steps)
    return (time.perf_counter() - start) / steps


def compare(loops, budget: float, rounds: int = 5, multiple: int = 1) -> tuple[list, int]:
    """Fastest time per step of each loop, timed in alternating bursts within
    about `budget` seconds in all; bursts are a multiple of `multiple` steps
    when that fits the budget (so that periodic work is counted in full).
    Returns the times and the burst length."""
    probe = max(_per_step(loops[0], 2), 1e-9)
    steps = max(1, int(budget / (len(loops) * rounds * probe)))
    if steps >= multiple:
        steps -= steps % multiple
    best = [float("inf")] * len(loops)
    for _ in range(rounds):
        for i, loop in enumerate(loops):
            best[i] = min(best[i], _per_step(loop, steps))
    return best, steps


def sampler_cost(setup: Setup, repeats: int = 200) -> float:
    """Seconds per call of the run loop's sampler on this grid (fastest of a few tries)."""
    sampler = Sampler(setup)
    psi = setup.psi0()
    best = float("inf")
    for _ in range(5):
        start = time.perf_counter()
        for k in range(repeats):
            sampler(psi, k)
        best = min(best, (time.perf_counter() - start) / repeats)
        sampler.reset()
    return best


def throughput(points: int, single: bool = False, threads: Optional[int] = None,
               budget: float = 1.0, rounds: int = 5) -> Throughput:
    """Measure sojourn's steps per second and the FFT limit's on `points` points.

    Where the run loop samples less often than a burst is long, the sampler's
    cost is measured on its own and spread over its interval."""
    setup = standard_setup(points, single)
    ours, used_threads = sojourn_loop(setup, threads)
    unsampled, _ = sojourn_loop(setup, threads, sampled=False)
    bare = bare_loop(points, np.complex64 if single else np.complex128, used_threads)
    every = setup.sample_steps
    (t_ours, t_bare, t_unsampled), burst = compare([ours, bare, unsampled], budget, rounds, every)
    if burst < every:  # the bursts missed the samples: add their share
        t_ours += sampler_cost(setup) / every
    return Throughput(points, "single" if single else "double", used_threads, every,
                      1.0 / t_ours, 1.0 / t_bare, 1.0 / t_unsampled)


def survey(sizes=QUICK_SIZES, single: bool = False, threads: Optional[int] = None,
           budget: float = 1.0, rounds: int = 5) -> list[Throughput]:
    """Throughput at several grid sizes."""
    for n in sizes:
        if n < 64:
            raise BenchError(f"grid size {n} is too small to benchmark; use 64 or more")
    if threads is not None and threads < 1:
        raise BenchError(f"threads must be 1 or more (got {threads})")
    return [throughput(n, single, threads, budget, rounds) for n in sizes]
