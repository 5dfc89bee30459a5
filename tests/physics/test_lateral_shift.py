"""The lateral shift of a packet totally reflected at oblique incidence, and
the motion along the normal of a run in the plane against the same run on a
line (PHYSICS §9)."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import load, with_changes
from sojourn.measure.delays import measure_delays
from sojourn.model.potentials import Potential, Step
from sojourn.theory.scattering import scatter
from sojourn.workflows import run_in_memory

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("degrees", [15.0, 30.0, 45.0, 60.0])
def test_stationary_shift_of_a_step_is_two_tan_over_kappa(degrees):
    """D = (∂φ_r/∂k_x)·tan θ with the step's reflection phase φ_r = −2 arctan(κ/k_x)
    below its top (textbook: Cohen-Tannoudji, Diu, Laloë, Complement H_I), so
    D = 2 tan θ/κ, κ = √(2mV₀/ħ² − k_x²) — the scalar form of the beam shift of
    K. Artmann, Ann. Phys. 437, 87 (1948). The theory's delay ħ dφ/dE at E_x
    times v_x gives ∂φ_r/∂k_x."""
    k, theta = 1.0, math.radians(degrees)
    kx = k * math.cos(theta)
    sc = scatter(Potential([Step(at=0.0, height=1.0)]), [0.5 * kx ** 2], hbar=1.0, x_r=0.0)
    shift = math.tan(theta) * kx * float(sc.delay_reflection[0])
    kappa = math.sqrt(2.0 - kx ** 2)
    assert shift == pytest.approx(2 * math.tan(theta) / kappa, rel=1e-10)


def _cheap_oblique():
    """configs/oblique_step.yaml on a grid twice as coarse along each axis
    (the step still midway between points)."""
    scenario = load(ROOT / "configs" / "oblique_step.yaml")
    return with_changes(scenario, {"grid.points": [360, 175],
                                   "grid.span": [[-194.1, 21.9], [-139.5, 123.0]]})


def _line_twin(plane_setup):
    """The same motion along x on a line: the normal packet (x₀, σ, E_x), the
    same box along x, absorber, detector, duration and time step."""
    sc = plane_setup.scenario
    normal = plane_setup.packet
    return build(with_changes(sc, {
        "grid.span": list(sc.grid.x_span), "grid.points": sc.grid.x_points,
        "packet.center": normal.center, "packet.width": normal.width,
        "packet.energy": normal.energy, "packet.direction": "right",
        "evolve.dt": plane_setup.dt}))


def test_oblique_step_shifts_and_delays_as_predicted_and_as_on_a_line():
    plane = build(_cheap_oblique())
    assert [str(f) for f in plane.findings if f.level in ("warning", "error")] == []
    report = measure_delays(run_in_memory(plane))
    assert report.warnings == []
    shift = report.reflection.lateral_shift
    # on this coarse grid (dx = 0.6, κ·dx = 0.67) the evanescent tail is under-resolved:
    # measured 1.1e-2 here; the shipped grid (dx = 0.3) gives 3.2e-3
    assert shift["measured"] == pytest.approx(shift["predicted"], rel=2e-2)
    assert shift["snapshots_used"] >= 5
    # the packet average lies near the stationary value 2 tan θ/κ at k₀ (a narrow band)
    kx = math.cos(math.radians(30.0))   # |k| = 1 at E₀ = 0.5
    assert shift["stationary"] == pytest.approx(2 * math.tan(math.radians(30.0))
                                                / math.sqrt(2 - kx ** 2), rel=1e-9)
    line = measure_delays(run_in_memory(_line_twin(plane)))
    assert line.warnings == []
    for method in ("centroid", "arrival", "spectral"):
        in_plane = report.reflection.measured[method]
        on_line = line.reflection.measured[method]
        # the same predictions (theory at k_x), and the same measurement to far below
        # the grid's own error: the problem separates (the y absorbers take < 1e-7)
        assert in_plane.predicted == pytest.approx(on_line.predicted, rel=1e-12)
        assert in_plane.delay == pytest.approx(on_line.delay, rel=1e-4), method
        assert in_plane.delay == pytest.approx(in_plane.predicted, rel=2e-2), method
    # D is tan θ times the centroid's lag along the normal (both measured)
    lag = line.reflection.measured["centroid"].delay * plane.packet.group_velocity
    assert shift["measured"] == pytest.approx(math.tan(math.radians(30.0)) * lag, rel=1e-3)


def test_a_packet_along_the_normal_has_no_lateral_shift():
    """θ = 0: the mirror image and the reflected packet share one line (D = 0)."""
    scenario = with_changes(_cheap_oblique(), {"packet.direction": 0.0,
                                               "packet.center": [-50.0, 0.0],
                                               "grid.span": [[-194.1, 21.9], [-99.0, 99.0]],
                                               "grid.points": [360, 132]})
    report = measure_delays(run_in_memory(build(scenario)))
    assert abs(report.reflection.lateral_shift["measured"]) < 1e-6
    assert np.isclose(report.plane["angle"], 0.0)


BARRIER = """\
title: oblique barrier
units: atomic
grid: {span: [[-140.25, 140.75], [-84.0, 96.0]], points: [562, 180]}
potential:
  - barrier: {start: 0.0, end: 1.0, height: 1.3}
packet: {center: [-40.0, -40.0], width: 6.0, energy: 1.0, direction: 30.0}
evolve: {duration: 95.0}
absorber: {width: 12.0}
record: {every: 1.0}
measure: {reference: 0.0, detectors: [-30.0, 30.0]}
"""


@pytest.mark.slow
def test_both_channels_of_an_oblique_barrier_shift_as_predicted():
    """Tunnelling at 30°: the reflected and the transmitted packets are each
    shifted along the barrier by tan θ times their packet-averaged ⟨∂φ/∂k_x⟩."""
    from sojourn.config.scenario import loads
    report = measure_delays(run_in_memory(build(loads(BARRIER, source="b.yaml"))))
    assert report.warnings == [] and len(report.channels()) == 2
    for channel in report.channels():
        shift = channel.lateral_shift
        assert shift["snapshots_used"] >= 5, channel.channel
        # the grid (dx = 0.5 across a barrier 1 wide) leaves the delays 1.7-1.8% low
        # (measured); D carries the same error: it is tan θ times the same lag
        relative = shift["deviation"] / shift["predicted"]
        assert abs(relative) < 2.5e-2, channel.channel
        assert relative == pytest.approx(channel.measured["centroid"].relative, abs=3e-3)
        assert shift["spread"] < 1e-6 * abs(shift["measured"])   # D is constant in time


@pytest.mark.slow
def test_shipped_oblique_step_shifts_within_1e_2_of_its_prediction():
    """configs/oblique_step.yaml on its own grid (Δx = 0.3): measured 3.2e-3."""
    report = measure_delays(run_in_memory(build(load(ROOT / "configs" / "oblique_step.yaml"))))
    assert report.warnings == []
    shift = report.reflection.lateral_shift
    assert shift["measured"] == pytest.approx(shift["predicted"], rel=1e-2)


def test_theory_of_a_scenario_in_the_plane_gives_the_shift():
    """`sojourn theory` in the plane: the line's table at k_x and the lateral shift,
    stationary 2 tan θ/κ at k₀ (as above) beside its packet average."""
    from sojourn.theory.tables import theory_table
    table = theory_table(load(ROOT / "configs" / "oblique_step.yaml"))
    kx = math.cos(math.radians(30.0))
    assert table["plane"]["k_x"] == pytest.approx(kx, rel=1e-12)
    shift = table["plane"]["lateral_shift"]["reflection"]
    assert shift["stationary"] == pytest.approx(2 * math.tan(math.radians(30.0))
                                                / math.sqrt(2 - kx ** 2), rel=1e-9)
    assert shift["packet"] == pytest.approx(shift["stationary"], rel=1e-2)
    assert table["plane"]["lateral_shift"]["transmission"] is None
