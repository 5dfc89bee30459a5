"""A step in the plane against the FFT limit: sojourn's 2D split step (with
the run loop's sampler at its default rate) against a bare planned in-place
2D pyFFTW pair plus the two multiplies a split step cannot avoid, timed in
alternating bursts (the fastest of each kept), at 512² … 2048².

    python benchmarks/bench_plane.py [--sizes 512 1024] [--budget 4]

The case is configs/oblique_step.yaml's physics on an n × n grid.
Nothing here is a test; nothing asserts on time.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

from sojourn import bench
from sojourn.build import build
from sojourn.config.scenario import load, with_changes

ROOT = Path(__file__).resolve().parents[1]


def plane_setup(n: int):
    scenario = load(ROOT / "configs" / "oblique_step.yaml")
    return build(with_changes(scenario, {"grid.points": [n, n]}))


def bare_plane_loop(shape, threads: int = 1):
    """`steps` bare 2D split steps: planned forward FFT, multiply, planned backward FFT, multiply."""
    import pyfftw
    buf = pyfftw.empty_aligned(shape, dtype=np.complex128)
    flags = ("FFTW_MEASURE", "FFTW_DESTROY_INPUT")
    plans = [pyfftw.FFTW(buf, buf, axes=(0, 1), direction=d, flags=flags, threads=threads)
             for d in ("FFTW_FORWARD", "FFTW_BACKWARD")]
    fwd, bwd = plans[0].execute, plans[1].execute
    rng = np.random.default_rng(1)
    points = shape[0] * shape[1]
    buf[:] = rng.standard_normal(shape) / points
    drift = np.exp(1j * rng.uniform(0, 6.3, shape)) / points
    kick = np.exp(1j * rng.uniform(0, 6.3, shape))

    def run(steps: int) -> None:
        for _ in range(steps):
            fwd()
            np.multiply(buf, drift, out=buf)
            bwd()
            np.multiply(buf, kick, out=buf)
    return run


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[512, 1024])
    parser.add_argument("--budget", type=float, default=4.0, help="seconds per size")
    args = parser.parse_args(argv)
    print(f"{'n × n':>11} {'sampled every':>13} {'bare / sojourn':>14} "
          f"{'bare / propagator':>17}")
    for n in args.sizes:
        setup = plane_setup(n)
        ours, threads = bench.sojourn_loop(setup)
        unsampled, _ = bench.sojourn_loop(setup, sampled=False)
        bare = bare_plane_loop(setup.grid.shape, threads)
        every = setup.sample_steps
        (t_ours, t_bare, t_unsampled), burst = bench.compare([ours, bare, unsampled],
                                                             args.budget, 5, every)
        if burst < every:
            t_ours += bench.sampler_cost(setup) / every
        print(f"{n:>5} × {n:<5} {every:>13} {t_bare / t_ours:>14.2f} "
              f"{t_bare / t_unsampled:>17.2f}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
