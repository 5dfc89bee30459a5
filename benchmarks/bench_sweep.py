"""Sweep throughput (points per minute) with 2 local workers against 1, not a test.

Runs the same sweep of the small step scenario (configs/step_small.yaml,
energies zipped with their durations, each point a full run plus its delay
measurement) into fresh temporary folders, once with one worker and once
with two, alternating `--repeats` times, and keeps the fastest of each. The
whole invocation is timed, so process start-up and the table and figure are
included, as a user would see them.

    python benchmarks/bench_sweep.py [--points 4] [--repeats 1]
"""
from __future__ import annotations

import argparse
import math
import shutil
import tempfile
import time
from pathlib import Path

from sojourn.sweep import load_sweep, run_sweep

CONFIGS = Path(__file__).resolve().parent.parent / "configs"


def sweep_file(folder: Path, points: int) -> Path:
    energies = [round(0.2 + 0.5 * i / max(points - 1, 1), 4) for i in range(points)]
    durations = [round(500 / math.sqrt(2 * e), 3) for e in energies]
    shutil.copy(CONFIGS / "step_small.yaml", folder / "base.yaml")
    path = folder / "sweep.yaml"
    path.write_text(f"base: base.yaml\nvary:\n  packet.energy: {energies}\n"
                    f"  evolve.duration: {durations}\npairing: zip\noutput: out\n")
    return path


def timed(workers: int, points: int) -> float:
    with tempfile.TemporaryDirectory(prefix="sojourn-bench-sweep-") as tmp:
        sweep = load_sweep(sweep_file(Path(tmp), points))
        start = time.perf_counter()
        outcome = run_sweep(sweep, workers=workers)
        elapsed = time.perf_counter() - start
        if outcome.count("complete") != points:
            raise RuntimeError(f"only {outcome.count('complete')} of {points} points completed")
    return elapsed


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=4)
    parser.add_argument("--repeats", type=int, default=1)
    args = parser.parse_args()
    best = {1: math.inf, 2: math.inf}
    for _ in range(args.repeats):
        for workers in (1, 2):
            best[workers] = min(best[workers], timed(workers, args.points))
    rate = {w: 60 * args.points / t for w, t in best.items()}
    print(f"sweep of {args.points} points (configs/step_small.yaml, 2048 grid points each)")
    for w in (1, 2):
        print(f"  {w} worker{'s' if w > 1 else ' '}: {best[w]:7.1f} s, {rate[w]:6.1f} points/min")
    print(f"  2 workers / 1 worker: {rate[2] / rate[1]:.2f}x")


if __name__ == "__main__":
    main()
