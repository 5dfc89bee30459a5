"""All of sojourn's benchmarks, as ratios measured in one run on this machine.

    python benchmarks/run_all.py [--quick] [--only NAME ...] [--json FILE]

Parts: throughput (against the FFT limit and a hand-written numpy loop),
accuracy (time to a given delay accuracy against Crank–Nicolson), scheme
(yoshida4 against strang), precision (single against double), io (share of
run time spent writing snapshots), memory (peak resident memory of a 2^20-point
run). --quick uses fewer sizes and a 1e-2 accuracy target instead of 1e-3
(the accuracy part is time_to_accuracy.py's comparison on the unit step).
Nothing here is a test; nothing asserts on time.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parent))
import cases  # noqa: E402
import time_to_accuracy  # noqa: E402

from sojourn import bench  # noqa: E402
from sojourn.build import build  # noqa: E402
from sojourn.workflows import run as execute  # noqa: E402
from sojourn.config.scenario import with_changes  # noqa: E402


def say(*parts):
    print(*parts, flush=True)


def machine() -> dict:
    model = "unknown"
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return {"cores": os.cpu_count(), "cpu": model, "python": platform.python_version(),
            "numpy": np.__version__, "load_average": os.getloadavg()}


# --------------------------------------------------------------------- throughput

def numpy_loop(points: int):
    """The loop a user writes: np.fft.fft / ifft and exp factors, new arrays each step."""
    x = np.linspace(-600, 600, points, endpoint=False)
    k = 2 * np.pi * np.fft.fftfreq(points, d=x[1] - x[0])
    V = np.where(x > 0, 1.0, 0.0)
    dt = 0.01
    kick = np.exp(-1j * V * dt / 2)
    drift = np.exp(-1j * k ** 2 * dt / 2)
    state = {"psi": np.exp(-(x + 250) ** 2 / 1600 + 0.63j * x)}

    def run(steps):
        psi = state["psi"]
        for _ in range(steps):
            psi = kick * np.fft.ifft(drift * np.fft.fft(kick * psi))
        state["psi"] = psi
    return run


def throughput(sizes, budget):
    rows = []
    say("throughput: steps/s of sojourn (advance + default sampling), of the propagator alone, "
        "of the FFT limit and of a numpy loop")
    for n in sizes:
        setup = bench.standard_setup(n)
        ours, threads = bench.sojourn_loop(setup)
        alone, _ = bench.sojourn_loop(setup, sampled=False)
        bare = bench.bare_loop(n, threads=threads)
        plain = numpy_loop(n)
        (t_ours, t_bare, t_alone, t_np), burst = bench.compare(
            [ours, bare, alone, plain], budget, rounds=7, multiple=setup.sample_steps)
        if burst < setup.sample_steps:
            t_ours += bench.sampler_cost(setup) / setup.sample_steps
        row = {"points": n, "sample_steps": setup.sample_steps,
               "fraction": t_bare / t_ours, "propagator_fraction": t_bare / t_alone,
               "speedup_over_numpy": t_np / t_ours, "steps_per_second": 1 / t_ours}
        rows.append(row)
        say(f"  N = {n:>7}: bare/ours {row['fraction']:.2f} (propagator alone "
            f"{row['propagator_fraction']:.2f}, sampled every {setup.sample_steps}); "
            f"ours is {row['speedup_over_numpy']:.2f}x the numpy loop")
    return rows


def threads(sizes, budget):
    rows = []
    say("threads: 2 FFT threads against 1 (ratio of sojourn steps/s)")
    for n in sizes:
        setup = bench.standard_setup(n)
        one, _ = bench.sojourn_loop(setup, threads=1, sampled=False)
        two, _ = bench.sojourn_loop(setup, threads=2, sampled=False)
        (t1, t2), _ = bench.compare([one, two], budget, rounds=7)
        rows.append({"points": n, "speedup": t1 / t2})
        say(f"  N = {n:>7}: 2 threads are {t1 / t2:.2f}x as fast as 1")
    return rows


# ----------------------------------------------------------------------- accuracy

def accuracy(tol):
    """sojourn at default settings (`points: auto`, `evolve.accuracy: tol`) against
    Crank–Nicolson at its best Δx/Δt balance, unit step (time_to_accuracy.py)."""
    say(f"accuracy: every delay method to {tol:g} relative, unit step")
    records = []
    with threadpool_limits(1, user_api="blas"):
        for record in time_to_accuracy.compare("step", [tol]):
            records.append(record)
            if "solver" in record:
                say(f"    {record['solver']:<16} N = {record['points']:>6}, dt = {record['dt']:.4g}: "
                    f"{record['seconds']:7.2f} s, worst error {record['error']:.2e}")
            elif "ratio" in record:
                say(f"  Crank–Nicolson {'reached' if record['cn_reached'] else 'missed'} it in "
                    f"{record['ratio']:.1f}x sojourn's time (CPU {record['cpu_ratio']:.1f}x)")
    return records


def scheme(base_points, quick):
    """Time for each scheme to bring the delays within 1e-5 of their Δt → 0 limit
    on one grid (the grid's own Δx² error is common to both and left out)."""
    say(f"scheme: yoshida4 against strang on N = {base_points}, time to 1e-5 of the Δt → 0 limit")
    limit = cases.run_sojourn(base_points, cases.phase_dt(base_points, math.pi / 16), "yoshida4")
    out = {"points": base_points, "limit": vars(limit), "runs": []}
    best = {}
    for name in ("yoshida4", "strang"):
        for phase in (6.0, math.pi, math.pi / 2, math.pi / 4, math.pi / 8):
            o = cases.run_sojourn(base_points, cases.phase_dt(base_points, phase), name)
            err = max(abs(o.centroid / limit.centroid - 1), abs(o.arrival / limit.arrival - 1))
            out["runs"].append({**vars(o), "phase": phase, "error_to_limit": err})
            say(f"    {name:<9} phase {phase:.3f}: {o.seconds:6.2f} s, error to limit {err:.1e}")
            if err < 1e-5:
                best[name] = o.seconds
                break
    if len(best) == 2:
        out["strang_over_yoshida4"] = best["strang"] / best["yoshida4"]
        say(f"  strang needs {out['strang_over_yoshida4']:.2f}x the time of yoshida4 for 1e-5")
    return out


def precision(points, dt):
    say(f"precision: single against double on N = {points}, dt = {dt:.4g}")
    reference = cases.predictions()
    double = cases.run_sojourn(points, dt, precision="double")
    single = cases.run_sojourn(points, dt, precision="single")
    out = {"double": vars(double), "single": vars(single),
           "speedup": double.seconds / single.seconds,
           "centroid_change": abs(single.centroid / double.centroid - 1),
           "arrival_change": abs(single.arrival / double.arrival - 1),
           "double_errors": double.errors(reference), "single_errors": single.errors(reference)}
    say(f"  single is {out['speedup']:.2f}x as fast; it changes the delays by "
        f"{out['centroid_change']:.1e} (centroid) and {out['arrival_change']:.1e} (arrival), "
        f"against double's own errors {double.errors(reference)[0]:.1e}, "
        f"{double.errors(reference)[1]:.1e}")
    return out


# ------------------------------------------------------------------------ io, memory

def io_share(points, steps):
    say(f"io: share of run time spent writing snapshots (N = {points}, {steps} steps)")
    dt = cases.phase_dt(points, math.pi)
    duration = steps * dt
    out = {}
    with tempfile.TemporaryDirectory() as folder:
        def timed(every, compress):
            sc = cases.sojourn_scenario(points, dt, every=every, compress=compress)
            sc = with_changes(sc, {"evolve.duration": duration})
            setup = build(sc)
            start = time.perf_counter()
            execute(setup, Path(folder) / f"r{every}{compress}.h5", overwrite=True)
            return time.perf_counter() - start
        for _ in range(3):  # interleaved; fastest of three each
            for key, every, compress in (("none", duration, False), ("plain", 100 * dt, False),
                                         ("compressed", 100 * dt, True)):
                out[key] = min(out.get(key, math.inf), timed(every, compress))
    out["plain_share"] = 1 - out["none"] / out["plain"]
    out["compressed_share"] = 1 - out["none"] / out["compressed"]
    say(f"  one snapshot per 100 steps takes {100 * out['plain_share']:.1f}% of the run time "
        f"uncompressed, {100 * out['compressed_share']:.1f}% compressed (end to end)")
    out.update(snapshot_cost(points, dt))
    say(f"  by parts (fastest of five): a recording {out['recording_ms']:.3f} ms + a snapshot "
        f"write {out['snapshot_ms']:.3f} ms against {out['steps_ms']:.2f} ms for 100 steps: "
        f"{100 * out['parts_share']:.1f}%")
    snapshots = steps // 100 + 1
    say(f"  the two differ by what they count: end to end also writes the file at its full size "
        f"when the run starts ({snapshots} snapshots × {16 * points / 2**20:.2f} MiB, so a full "
        "disk is found first), a checkpoint of ψ at each commit, and the machine's noise; by "
        "parts is the work each further snapshot adds")
    return out


def snapshot_cost(points, dt, rounds=5) -> dict:
    """The per-snapshot work timed directly (the end-to-end difference of two
    short runs is at the mercy of the machine's noise): the recording's
    observables, the writer's snapshot call, and 100 propagator steps."""
    from sojourn.engine.propagate import Propagator
    from sojourn.engine.sampler import Sampler
    from sojourn.store import RunWriter
    setup = build(cases.sojourn_scenario(points, dt, every=100 * dt))
    psi = setup.psi0()
    sampler = Sampler(setup)
    values = sampler.recording(psi, setup)
    prop = Propagator(setup.grid, setup.V, 1.0, 1.0, dt)
    prop.set_state(psi)

    def best(work, repeat):
        times = []
        for _ in range(rounds):
            start = time.perf_counter()
            for _ in range(repeat):
                work()
            times.append((time.perf_counter() - start) / repeat * 1e3)
        return min(times)

    with tempfile.TemporaryDirectory() as folder:
        writer = RunWriter.open_new(Path(folder) / "parts.h5", setup, prop.fft.backend)
        recording = best(lambda: sampler.recording(psi, setup), 60)
        snapshot = best(lambda: writer.snapshot(1, dt, psi, values, sampler.batch(), (0.0, 0.0)), 60)
        writer.finish()
    steps = best(lambda: prop.advance(100), 3)
    return {"recording_ms": recording, "snapshot_ms": snapshot, "steps_ms": steps,
            "parts_share": (recording + snapshot) / (recording + snapshot + steps)}


MEMORY_PROBE = """
import resource, sys
sys.path.insert(0, {here!r})
import cases
from sojourn.build import build
from sojourn.workflows import run as execute
from sojourn.config.scenario import with_changes
sc = cases.sojourn_scenario({points}, 1e-4, every=5e-4)
sc = with_changes(sc, {{"evolve.duration": 1e-3}})
execute(build(sc), {out!r})
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)
"""

BASELINE_PROBE = """
import resource
import sojourn.workflows, sojourn.build, h5py, numpy, scipy, pyfftw
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)
"""


def memory(points=1 << 20):
    say(f"memory: peak resident memory of a {points}-point run")
    with tempfile.TemporaryDirectory() as folder:
        script = MEMORY_PROBE.format(here=str(Path(__file__).resolve().parent), points=points,
                                     out=str(Path(folder) / "m.h5"))
        peak = int(subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                                  check=True).stdout.split()[-1])
        base = int(subprocess.run([sys.executable, "-c", BASELINE_PROBE], capture_output=True,
                                  text=True, check=True).stdout.split()[-1])
    state = points * 16
    out = {"peak_bytes": peak, "baseline_bytes": base, "state_bytes": state,
           "multiple": (peak - base) / state}
    say(f"  peak {peak / 2**20:.0f} MiB, of which {(peak - base) / 2**20:.0f} MiB above the "
        f"interpreter and libraries: {out['multiple']:.1f}x the state ({state / 2**20:.0f} MiB)")
    return out


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--only", nargs="+", choices=["throughput", "threads", "accuracy",
                                                      "scheme", "precision", "io", "memory"])
    parser.add_argument("--json", help="write all results to this JSON file")
    args = parser.parse_args(argv)
    parts = args.only or ["throughput", "threads", "accuracy", "scheme", "precision", "io",
                          "memory"]
    results = {"machine": machine(), "quick": args.quick}
    say(f"machine: {results['machine']['cores']} cores, {results['machine']['cpu']}")
    sizes = (1 << 10, 1 << 12, 1 << 14, 1 << 16, 1 << 18) if args.quick else bench.FULL_SIZES
    if "throughput" in parts:
        results["throughput"] = throughput(sizes, 1.0 if args.quick else 3.0)
    if "threads" in parts:
        results["threads"] = threads((1 << 16, 1 << 18), 1.0 if args.quick else 3.0)
    if "accuracy" in parts:
        results["accuracy"] = accuracy(1e-2 if args.quick else 1e-3)
    if "scheme" in parts:
        results["scheme"] = scheme(1024, args.quick)
    if "precision" in parts:
        results["precision"] = precision(2048, cases.phase_dt(2048, 6.0))
    if "io" in parts:
        results["io"] = io_share(1 << 14, 10000)
    if "memory" in parts:
        results["memory"] = memory()
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=2, default=float))
    return 0


if __name__ == "__main__":
    sys.exit(main())
