"""Resource guards that hold: the run time estimated from a calibration of
this machine (a run of years is refused without --force), the memory estimate
against the peak a real `sojourn run` reaches, and the run-file size estimate
against the file written."""
from __future__ import annotations

import os
import subprocess
import sys

import pytest

from sojourn import cli, guards
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.workflows import run as execute


def scenario(points: int, duration: float = 2.0, dt: float = 0.005, every: float = 0.5,
             precision: str = "double") -> str:
    half = 0.1953125 * points / 2   # dx fixed, the box grows with the points
    return f"""\
units: atomic
grid: {{span: [-{half}, {half}], points: {points}}}
potential:
  - barrier: {{start: 0.0, end: 2.0, height: 0.6}}
packet: {{center: -150.0, width: 15.0, energy: 0.5}}
evolve: {{duration: {duration}, dt: {dt}, precision: {precision}}}
absorber: {{width: 60.0}}
record: {{every: {every}}}
measure: {{detectors: [-75.0, 75.0]}}
"""


def test_a_run_of_years_is_refused_unless_forced(write_scenario, capsys):
    # 9.8e10 steps (the red-team case) of 65 536 points: ok by the step count
    # limit, years of run on any machine today
    path = write_scenario(scenario(65536, duration=4.9e8, dt=0.005, every=1e8))
    capsys.readouterr()
    assert cli.main(["check", str(path)]) == 2
    out = capsys.readouterr().out
    assert "years here" in out and "the run would take about" in out
    assert cli.main(["run", str(path), "-q"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "evolve.duration: the run would take about" in err[0]
    assert "(--force overrides this)" in err[0]


def test_the_run_time_estimate_scales_as_n_log_n_steps():
    one = guards.run_time_estimate(4096, 1000, "strang")
    assert one > 0
    assert guards.run_time_estimate(4096, 2000, "strang") == pytest.approx(2 * one)
    assert guards.run_time_estimate(8192, 1000, "strang") == pytest.approx(2 * one * 13 / 12)
    assert guards.step_seconds("strang") is guards.step_seconds("strang")   # cached


# a fresh parent for each measurement: RUSAGE_CHILDREN keeps the largest peak of
# every child a process has waited for, so a test process's own would mix runs
MEASURE = """
import resource, subprocess, sys
done = subprocess.run([sys.executable, "-m", "sojourn", "run", *sys.argv[1:]],
                      capture_output=True, text=True)
print(done.returncode, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
"""


def peak_of_a_run(tmp_path, points, precision="double") -> int:
    """ru_maxrss of a `python -m sojourn run` child (bytes)."""
    path = tmp_path / f"m{points}.yaml"
    path.write_text(scenario(points, precision=precision))
    done = subprocess.run([sys.executable, "-c", MEASURE, str(path), "-q", "-o",
                           str(tmp_path / f"m{points}.h5")], capture_output=True, text=True)
    code, peak = map(int, done.stdout.split())
    assert code == 0, done.stderr
    return peak * 1024   # Linux reports KiB


def test_the_memory_estimate_is_not_below_the_measured_peak(tmp_path):
    # 2^18 points: the arrays are most of the peak; the estimate must not fall short
    peak = peak_of_a_run(tmp_path, 2 ** 18)
    assert guards.memory_estimate(2 ** 18) > 0.8 * peak


@pytest.mark.slow
@pytest.mark.parametrize("points,precision", [(2 ** 20, "double"), (2 ** 20, "single"),
                                              (2 ** 21, "double")])
def test_the_memory_estimate_is_within_20_percent_of_the_peak(tmp_path, points, precision):
    peak = peak_of_a_run(tmp_path, points, precision)
    assert abs(guards.memory_estimate(points, precision) / peak - 1) < 0.2


@pytest.mark.parametrize("points,every,precision", [(2048, None, "double"),
                                                    (4096, 0.05, "double"),
                                                    (512, 0.01, "single")])
def test_the_run_file_size_estimate_is_within_20_percent(tmp_path, points, every, precision):
    text = scenario(points, duration=20.0, dt=0.02, every=every or 0.2, precision=precision)
    setup = build(loads(text, str(tmp_path / "s.yaml")))
    path = execute(setup, tmp_path / "s.h5")
    assert abs(guards.file_estimate(setup) / os.path.getsize(path) - 1) < 0.2
