"""Time to accuracy, both solvers at their best, in one process (issue: time to accuracy, step 5).

For each case and target ε:
- sojourn with default settings: the scenario with `grid.points: auto`,
  `evolve.accuracy: ε` and no dt (nothing tuned by hand): build, run in memory,
  measure every delay method; timed from the scenario text to the report;
- Crank–Nicolson finite differences (second-order Laplacian, the same
  cell-averaged V and absorbing layer −iW, Dirichlet walls), its banded
  (tridiagonal) LU factored once with scipy.linalg.lapack (zgttrf/zgttrs),
  sampled and recorded through sojourn's own Sampler into a MemoryRun so that
  exactly the same measurement code judges both. Its best Δx/Δt balance comes
  from its error model e ≈ a·Δx² + b·Δt² (both second order), fitted to three
  cheap calibration runs, minimising N/Δt for e = ε; that run is then made
  and timed, and if it misses ε the grid and step are both refined by 2^(1/4)
  until it reaches it (each try timed; the reported time is the successful one).
Times are wall-clock and CPU seconds of this process (the CPU ratio is the
one to trust on a shared machine). The error of a run is the largest relative deviation of any delay method on
any channel from its own packet-averaged prediction. Ratios go to RESULTS.md.

    nice python benchmarks/time_to_accuracy.py --case step --targets 1e-2 1e-3
"""
from __future__ import annotations

import argparse
import json
import math
import sys
import time
from dataclasses import replace

import numpy as np
from scipy.linalg import lapack
from threadpoolctl import threadpool_limits

from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.engine.sampler import Sampler
from sojourn.measure.delays import measure_delays
from sojourn.store import MemoryRun
from sojourn.workflows import run_in_memory

CASES = {
    # unit step, ħ = m = V₀ = 1, E₀ = 0.2, σ = 20, x₀ = −100 (the packet; auto duration)
    "step": """\
units: atomic
grid: {{span: [-380.0, 120.0], points: {points}}}
potential:
  - step: {{at: 0.0, height: 1.0}}
packet: {{center: -100.0, width: 20.0, energy: 0.2}}
evolve: {{duration: auto, {time}}}
absorber: {{width: 60.0}}
record: {{every: 20.0}}
""",
    # an electron with a GaAs-like effective mass at a 0.25 eV heterojunction step (lab units)
    "heterojunction": """\
units: lab
mass: 0.067
grid: {{span: [-700.0, 300.0], points: {points}}}
potential:
  - step: {{at: 0.0, height: 0.25}}
packet: {{center: -250.0, width: 20.0, energy: 0.08}}
evolve: {{duration: auto, {time}}}
absorber: {{width: 80.0}}
record: {{every: 10.0}}
measure: {{reference: 0.0, detectors: [-125.0]}}
""",
}


def worst_error(report) -> tuple[float, dict]:
    """The largest |relative deviation| over methods and channels, and each."""
    each = {}
    for channel in report.channels():
        for name, result in channel.measured.items():
            if result.relative is not None:
                each[f"{channel.channel}.{name}"] = result.relative
    return (max(abs(v) for v in each.values()) if each else math.inf), each


def sojourn_run(case: str, target: float) -> dict:
    """The default settings for a target, timed from text to report."""
    start, cpu = time.perf_counter(), time.process_time()
    setup = build(loads(CASES[case].format(points="auto", time=f"accuracy: {target!r}"),
                        f"{case}.yaml"))
    report = measure_delays(run_in_memory(setup))
    seconds, cpu = time.perf_counter() - start, time.process_time() - cpu
    error, each = worst_error(report)
    return {"solver": "sojourn", "case": case, "target": target, "points": setup.grid.points,
            "dt": setup.dt, "steps": setup.steps, "scheme": setup.scenario.evolve.scheme,
            "seconds": seconds, "cpu": cpu, "error": error, "each": each,
            "estimate": setup.accuracy.estimate}


def crank_nicolson_run(case: str, points: int, dt: float) -> dict:
    """One Crank–Nicolson run on the case's setup (its V, W, detectors, region,
    sampling and recording combs), measured like a sojourn run."""
    start, cpu = time.perf_counter(), time.process_time()
    setup = build(loads(CASES[case].format(points=points, time=f"dt: {dt!r}"), f"{case}.yaml"))
    setup = replace(setup, flux_band=None)   # plain stencils: CN's state has no sidebands
    hbar, mass, n, dx = setup.hbar, setup.mass, setup.grid.points, setup.grid.dx
    W = np.zeros(n) if setup.W is None else setup.W
    c = hbar ** 2 / (2 * mass * dx * dx)     # H = −ħ²/2m ∂² + V − iW, central differences
    a = 0.5j * setup.dt / hbar
    off = np.full(n - 1, -a * c, complex)
    diag = 1 + a * (2 * c + setup.V - 1j * W)
    dl, d, du, du2, ipiv, info = lapack.zgttrf(off.copy(), diag, off.copy())
    if info:
        raise ArithmeticError("tridiagonal factorisation failed")
    recorder = MemoryRun(setup, "Crank-Nicolson (benchmark)")
    sampler = Sampler(setup)
    psi = setup.psi0()
    recorder.snapshot(0, 0.0, psi.copy(), sampler.recording(psi, setup), sampler.batch(),
                      tuple(sampler.raw_absorbed))
    for step in range(1, setup.steps + 1):
        solved = lapack.zgttrs(dl, d, du, du2, ipiv, 2 * psi)[0]
        psi = solved - psi
        if step % setup.sample_steps == 0:
            sampler.take(psi, step * setup.dt)
        if step % setup.record_steps == 0 or step == setup.steps:
            recorder.snapshot(step, step * setup.dt, psi.copy(), sampler.recording(psi, setup),
                              sampler.batch(), tuple(sampler.raw_absorbed))
    report = measure_delays(recorder.finish())
    seconds, cpu = time.perf_counter() - start, time.process_time() - cpu
    error, each = worst_error(report)
    return {"solver": "Crank-Nicolson", "case": case, "points": points, "dt": setup.dt,
            "steps": setup.steps, "seconds": seconds, "cpu": cpu, "error": error, "each": each}


def fit_crank_nicolson(case: str, points: int, dt: float) -> tuple[float, float, list]:
    """a, b of e ≈ a·Δx² + b·Δt² from runs at (N, Δt), (2N, Δt), (N, Δt/2)
    (signed worst-method errors: the signs of the leading terms are kept)."""
    runs = [crank_nicolson_run(case, p, s) for p, s in ((points, dt), (2 * points, dt),
                                                       (points, dt / 2))]

    def signed(r):
        return max(r["each"].values(), key=abs)

    e0, e_x, e_t = (signed(r) for r in runs)
    a_part = (e0 - e_x) * 4 / 3          # a·Δx² at N
    b_part = (e0 - e_t) * 4 / 3          # b·Δt² at Δt
    return a_part * points ** 2, b_part / dt ** 2, runs


def crank_nicolson_best(target: float, a: float, b: float, fallback_dt: float) -> tuple[int, float]:
    """N and Δt minimising N/Δt with |a|/N² + |b|·Δt² = target: the two shares equal
    (the minimum of N/Δt on that curve)."""
    points = int(math.ceil(math.sqrt(2 * abs(a) / target)))
    dt = math.sqrt(target / (2 * abs(b))) if b else fallback_dt
    return max(points, 256), dt


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", choices=sorted(CASES), default="step")
    parser.add_argument("--targets", type=float, nargs="+", default=[1e-2, 1e-3])
    parser.add_argument("--calibrate", type=float, nargs=2, default=None,
                        metavar=("POINTS", "DT"), help="CN calibration grid and step")
    parser.add_argument("--max-cn-tries", type=int, default=4)
    parser.add_argument("--sojourn-only", action="store_true",
                        help="only sojourn's runs (to set beside a saved Crank–Nicolson run)")
    args = parser.parse_args(argv)
    with threadpool_limits(1, user_api="blas"):   # both solvers: no idle BLAS thread spinning
        run(args)


def run(args) -> None:
    if args.sojourn_only:
        for target in args.targets:
            print(json.dumps(sojourn_run(args.case, target)), flush=True)
        return
    for record in compare(args.case, args.targets, args.max_cn_tries, args.calibrate):
        print(json.dumps(record), flush=True)


def compare(case: str, targets, max_cn_tries: int = 4, calibrate=None):
    """The records of one comparison, as they come: Crank–Nicolson's calibration and
    model, then per target sojourn's run, Crank–Nicolson's tries and the ratio."""
    defaults = {"step": (8192, 0.05), "heterojunction": (4096, 0.5)}
    points0, dt0 = calibrate or defaults[case]
    a, b, runs = fit_crank_nicolson(case, int(points0), float(dt0))
    for r in runs:
        yield {**r, "role": "calibration"}
    yield {"case": case, "cn_model": {"a": a, "b": b}}
    for target in targets:
        ours = sojourn_run(case, target)
        yield ours
        points, dt = crank_nicolson_best(target, a, b, dt0)
        for _ in range(max_cn_tries):
            theirs = crank_nicolson_run(case, points, dt)
            yield {**theirs, "target": target}
            if theirs["error"] <= target:
                break
            points, dt = int(points * 2 ** 0.25), dt / 2 ** 0.25
        yield {"case": case, "target": target,
               "sojourn_error": ours["error"], "cn_error": theirs["error"],
               "cn_reached": theirs["error"] <= target,
               "ratio": theirs["seconds"] / ours["seconds"],
               "cpu_ratio": theirs["cpu"] / ours["cpu"]}


if __name__ == "__main__":
    sys.exit(main())
