"""Pictures of a driven run: the potential moves in the movie (V(x, t) at
each frame's time), states between snapshots are propagated with the drive,
and the figure shows the outgoing spectra with the sidebands and their
predictions."""
from __future__ import annotations

import math

import numpy as np
import pytest

from sojourn import cli, render
from sojourn.store import RunFile

# an oscillating barrier on a small box, atomic units (our own test settings)
DRIVEN = """\
title: Test oscillating barrier
units: atomic
grid: {span: [-400.1953125, 399.8046875], points: 2048}
potential:
  - barrier: {start: 0.0, end: 2.0, height: 1.0,
              drive: {amplitude: 0.3, angular_frequency: 0.5, phase: 0.4}}
packet: {center: -60.0, width: 8.0, energy: 0.7}
evolve: {duration: 230.0}
absorber: {width: 40.0}
record: {every: 5.0}
"""


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("driven")
    scenario = folder / "driven.yaml"
    scenario.write_text(DRIVEN)
    out = folder / "driven.h5"
    assert cli.main(["run", str(scenario), "-o", str(out), "-q", "--force"]) == 0
    assert cli.main(["delay", str(out), "--save"]) == 0
    return out


def test_the_potential_line_follows_v_of_t(run):
    with RunFile(run) as rf:
        facts = render.run_facts(rf)
        frame = render.MovieFrame(facts, render.MovieOptions(size=(320, 180)),
                                  render.scan_run(rf, facts))
        t, psi = next(iter(rf.snapshots()))
        line = frame.potential_line
        top = []
        for when in (0.0, math.pi / 0.5):       # cos(ωt + φ) at t = 0 and half a period on
            frame.draw(when, psi)
            top.append(float(np.max(line.get_ydata())))
    # V₀ + V₁ cos(φ) and V₀ − V₁ cos(φ) on the barrier's inner cells
    assert top[0] == pytest.approx(1.0 + 0.3 * math.cos(0.4), rel=1e-9)
    assert top[1] == pytest.approx(1.0 - 0.3 * math.cos(0.4), rel=1e-9)


def test_states_between_snapshots_are_propagated_with_the_drive(run):
    # a frame one step before snapshot 5, propagated from snapshot 4, then the last step by
    # hand: snapshot 5 itself (the kicks read the time from the snapshot's own step)
    from sojourn.engine.propagate import Propagator, TimeDependence
    from sojourn.render.frames import grid_of, propagated_states
    with RunFile(run) as rf:
        facts = render.run_facts(rf)
        times, dt = facts.times, facts.dt
        wanted = np.array([times[5] - dt])
        (t, psi), = [(t, p.copy()) for t, p in propagated_states(rf, facts, wanted)]
        assert t == pytest.approx(times[5] - dt)
        grid = grid_of(facts.x)
        drive = TimeDependence.of_potential(facts.potential, grid.x, grid.dx)
        prop = Propagator(grid, facts.V, facts.hbar, facts.mass, dt, facts.scheme,
                          facts.absorber, drive=drive)
        prop.set_state(psi, int(round(t / dt)))
        prop.advance(1)
        stored = rf.psi(5)
    assert np.max(np.abs(prop.psi - stored)) < 1e-8 * np.max(np.abs(stored))


def test_figure_shows_spectra_and_sideband_predictions(run, tmp_path):
    fig = render.figure(run, render.FigureOptions())
    gids = {line.get_gid() for ax in fig.axes for line in ax.get_lines()}
    assert {"spectrum-reflection", "spectrum-transmission", "sidebands-reflection",
            "sidebands-transmission"} <= gids
    assert "outgoing-centroid" in gids          # the space-time map stays
    out = tmp_path / "driven.png"
    assert cli.main(["render", str(run), "--figure", str(out)]) == 0 and out.stat().st_size
