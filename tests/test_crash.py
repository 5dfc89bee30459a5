"""Crash safety with real processes: `kill -9` mid-run leaves a readable
.partial file holding every committed snapshot, and --resume completes it to
the state of an uninterrupted run; SIGTERM and SIGINT close it cleanly."""
from __future__ import annotations

import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from sojourn.build import build
from sojourn.workflows import run as execute
from sojourn.store import RunFile, lock_path, partial_path
from sojourn.errors import RunFileError
from sojourn.config.scenario import load

# about 160 000 steps on 4096 points with a snapshot every 400 steps: several
# seconds of run on a quiet machine, so that a signal lands in the middle
LONG = """\
title: long enough to be killed
units: atomic
grid: {span: [-400.0, 400.0], points: 4096}
potential:
  - barrier: {start: 0.0, end: 2.0, height: 0.6}
packet: {center: -150.0, width: 15.0, energy: 0.5}
evolve: {duration: 400.0, dt: 0.0025}
absorber: {width: 60.0}
record: {every: 1.0}
measure: {detectors: [-75.0, 75.0]}
"""


def start(scenario, out, *extra):
    return subprocess.Popen([sys.executable, "-m", "sojourn", "run", str(scenario), "-q",
                             "-o", str(out), *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def wait_for_snapshots(process, partial, count, timeout=120.0) -> int:
    """Poll the growing file (SWMR read) until it has `count` committed snapshots."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        assert process.poll() is None, process.communicate()
        try:
            with RunFile(partial) as rf:
                seen = len(rf)
        except (RunFileError, OSError, KeyError):
            seen = 0
        if seen >= count:
            return seen
        time.sleep(0.1)
    process.kill()
    raise AssertionError(f"the run did not commit {count} snapshots in {timeout} s")


def test_kill_9_keeps_committed_snapshots_and_resume_completes(write_scenario, tmp_path):
    path = write_scenario(LONG)
    out = tmp_path / "killed.h5"
    partial = partial_path(out)
    process = start(path, out)
    seen = wait_for_snapshots(process, partial, 5)
    process.send_signal(signal.SIGKILL)
    process.communicate()
    assert process.returncode == -signal.SIGKILL
    setup = build(load(path))
    with RunFile(partial) as rf:
        kept = len(rf)
        assert rf.status == "running"            # nobody closed it
        assert seen <= kept < setup.snapshots     # nothing committed was lost
        times = rf.times
        assert np.allclose(np.diff(times), setup.record_steps * setup.dt)
        for i in range(kept):
            psi = rf.psi(i)
            assert np.all(np.isfinite(psi))
            assert 0.5 < np.vdot(psi, psi).real * setup.grid.dx <= 1 + 1e-9
    resumed = start(path, out, "--resume")
    _, err = resumed.communicate(timeout=300)
    assert resumed.returncode == 0, err
    assert out.exists() and not partial.exists() and not lock_path(out).exists()
    whole = execute(setup, tmp_path / "whole.h5")
    with RunFile(whole) as a, RunFile(out) as b:
        assert b.status == "complete" and len(a) == len(b) == setup.snapshots
        assert np.allclose(a.times, b.times, rtol=0, atol=1e-12)
        assert np.abs(a.psi(len(a) - 1) - b.psi(len(b) - 1)).max() < 1e-12
        oa, ob = a.observables(), b.observables()
        for name in ("norm", "x_mean", "energy", "P_left", "P_right"):
            assert np.allclose(oa[name], ob[name], rtol=0, atol=1e-12), name
        sa, sb = a.samples(), b.samples()
        assert np.allclose(sa["t"], sb["t"]) and np.allclose(sa["flux"], sb["flux"], atol=1e-12)


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT])
def test_a_signal_closes_the_file_as_interrupted(write_scenario, tmp_path, sig):
    path = write_scenario(LONG)
    out = tmp_path / "stopped.h5"
    process = start(path, out)
    seen = wait_for_snapshots(process, partial_path(out), 2)
    process.send_signal(sig)
    _, err = process.communicate(timeout=60)
    assert process.returncode == 130, err
    assert "interrupted" in err and "--resume" in err and "Traceback" not in err
    with RunFile(partial_path(out)) as rf:
        assert rf.status == "interrupted" and len(rf) >= seen
    assert not out.exists() and not lock_path(out).exists()


def test_a_second_process_cannot_write_the_same_output(write_scenario, tmp_path):
    # ten times longer than LONG: the first run is surely still writing when the
    # second one is ready (it is stopped with SIGTERM afterwards)
    path = write_scenario(LONG.replace("duration: 400.0", "duration: 4000.0"))
    out = tmp_path / "shared.h5"
    first = start(path, out)
    wait_for_snapshots(first, partial_path(out), 1)
    second = start(path, out, "--overwrite")
    _, err = second.communicate(timeout=120)
    first.send_signal(signal.SIGTERM)
    first.communicate(timeout=60)
    assert second.returncode == 2 and "another run is writing" in err, err
    with RunFile(partial_path(out)) as rf:   # the first run's file, not a mix of two
        assert rf.status == "interrupted"
        assert np.all(np.diff(rf.times) > 0)
