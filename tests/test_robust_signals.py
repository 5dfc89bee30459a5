"""A signal stops a run within about a second, wherever the run is: the loop
checkpoints the current state between recordings, the file is closed
'interrupted' (exit 130), and --resume completes it to the uninterrupted run."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import load
from sojourn.store import RunFile, partial_path
from sojourn.workflows import run as execute

# two recordings 10 000 steps apart: each interval is a second or more of run
SHORT = """\
title: two long recording intervals
units: atomic
grid: {{span: [-{half}, {half}], points: {points}}}
potential:
  - barrier: {{start: 0.0, end: 2.0, height: 0.6}}
packet: {{center: -150.0, width: 15.0, energy: 0.5}}
evolve: {{duration: {duration}, dt: 0.005}}
absorber: {{width: 60.0}}
record: {{every: {every}}}
measure: {{detectors: [-75.0, 75.0]}}
"""


def start(scenario, out, *extra):
    return subprocess.Popen([sys.executable, "-m", "sojourn", "run", str(scenario), "-q",
                             "-o", str(out), *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def wait_for(path, process, timeout=60.0):
    deadline = time.monotonic() + timeout
    while not path.exists():
        assert process.poll() is None, process.communicate()
        assert time.monotonic() < deadline, "the run never started its file"
        time.sleep(0.02)


def same_run(a, b, tol=1e-10):
    """Every recorded number of two run files agrees to `tol` (absolute; all are O(1))."""
    with RunFile(a) as ra, RunFile(b) as rb:
        assert len(ra) == len(rb) and ra.status == rb.status == "complete"
        np.testing.assert_array_equal(ra.times, rb.times)
        for i in range(len(ra)):
            assert np.max(np.abs(ra.psi(i) - rb.psi(i))) < tol
        for name, values in ra.observables().items():
            np.testing.assert_allclose(values, rb.observables()[name], rtol=0, atol=tol)
        sa, sb = ra.samples(), rb.samples()
        for name in sa:
            assert sa[name].shape == sb[name].shape, name
            np.testing.assert_allclose(sa[name], sb[name], rtol=0, atol=tol)


def interrupt_and_resume(write_scenario, tmp_path, text, wait=0.0):
    """SIGTERM a real run once it has started (after `wait` s); returns the
    seconds from the signal to the exit and the checkpoint step and record_steps."""
    path = write_scenario(text)
    out = tmp_path / "run.h5"
    process = start(path, out)
    wait_for(partial_path(out), process)
    time.sleep(wait)
    sent = time.monotonic()
    process.send_signal(signal.SIGTERM)
    _, err = process.communicate(timeout=120)
    latency = time.monotonic() - sent
    assert process.returncode == 130, err
    assert "Traceback" not in err
    with RunFile(partial_path(out)) as rf:
        assert rf.status == "interrupted"
        slot = rf.h5["checkpoint"][rf.committed.slot]
        step, record_steps = int(slot.attrs["step"]), int(rf.attrs["record_steps"])
        last = int(rf.h5["snapshots/step"][len(rf) - 1])
        assert rf.samples()["t"][-1] <= float(slot.attrs["t"])
    resumed = start(path, out, "--resume")
    _, err = resumed.communicate(timeout=600)
    assert resumed.returncode == 0, err
    whole = execute(build(load(path)), tmp_path / "whole.h5")
    same_run(out, whole)
    return latency, step, last, record_steps


def test_sigterm_checkpoints_between_recordings_and_resume_matches(write_scenario, tmp_path):
    _, step, last, record_steps = interrupt_and_resume(
        write_scenario, tmp_path, SHORT.format(points=4096, half=400.0, duration=100.0, every=50.0))
    # the state kept is where the run was, not the last recording: a recording
    # is 10 000 steps (a second or more of run) and the signal came at once
    assert step % record_steps != 0 and last < step < last + record_steps


@pytest.mark.slow
def test_sigterm_stops_within_two_seconds_on_a_minute_long_interval(write_scenario, tmp_path):
    # 65 536 points: one recording interval of 5000 steps is far longer than 2 s here
    latency, step, last, record_steps = interrupt_and_resume(
        write_scenario, tmp_path, SHORT.format(points=65536, half=6400.0, duration=50.0, every=25.0), wait=3.0)
    assert latency < 2.0
    assert last < step < last + record_steps
