"""The sideband sink: a damping rate in k far above the packet's band that
takes out the time step's sidebands before they wrap round the box and
return to a jump (timestep.sideband_sink; PHYSICS §3, "Time to accuracy")."""
import json
import math

import numpy as np
import pytest

from sojourn import timestep
from sojourn.accuracy import aligned_span
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.engine.propagate import Propagator
from sojourn.grid_error import grid_rendering_error
from sojourn.measure.delays import measure_delays
from sojourn.model import packets
from sojourn.model.grid import Grid
from sojourn.store import RunFile
from sojourn.workflows import run_in_memory

from test_time_to_accuracy import reflection_predictions

STEP = """\
units: {units}
{mass}grid: {{span: [{left!r}, {right!r}], points: {points}}}
potential:
  - step: {{at: 0.0, height: {height}}}
packet: {{center: {center}, width: 20.0, energy: {energy}}}
evolve: {{duration: auto, dt: {dt!r}}}
absorber: {{width: {absorber}}}
record: {{every: 20.0}}
"""
UNIT = dict(units="atomic", mass="", height=1.0, center=-100.0, energy=0.2, absorber=60.0)
# an electron of effective mass 0.067 at a 0.25 eV step (nm, eV, fs): settings of our own
LAB = dict(units="lab", mass="mass: 0.067\n", height=0.25, center=-250.0, energy=0.08,
           absorber=80.0)


def unit_step(points, dt, span=(-380.0, 120.0), **keys):
    left, right = aligned_span(span, points, [0.0])
    return loads(STEP.format(points=points, dt=dt, left=left, right=right, **{**UNIT, **keys}),
                 "step.yaml")


def test_sink_is_zero_on_the_band_and_full_at_the_first_sideband():
    s = build(unit_step(8192, 0.02))
    k_start, k_full, rate = s.sink
    k_pass = timestep.band_top(s.packet, 0.0, 1.0, 1.0)
    # the first sideband: kinetic energy + 2πħ/Δt − (V_max − level), ħ = m = 1, level 0
    k_low = abs(s.packet.k0) - 8 * s.packet.sigma_k
    assert k_full == pytest.approx(math.sqrt(2 * (k_low ** 2 / 2 + 2 * math.pi / s.dt - 1.0)),
                                   rel=1e-9)
    assert k_start >= 1.5 * k_pass and k_start == pytest.approx(0.5 * k_full)
    gamma = timestep.sink_rates(s.grid.k, s.sink)
    assert np.all(gamma >= 0) and np.all(gamma[np.abs(s.grid.k) <= k_start] == 0)
    assert np.all(gamma[np.abs(s.grid.k) >= k_full] == pytest.approx(rate))
    # no sideband on the grid (the grid rule's step): no sink
    assert build(unit_step(1024, 0.005)).sink is None


def test_a_sunk_free_packet_spreads_as_the_closed_form():
    # source: the free Gaussian (Cohen-Tannoudji, Diu, Laloë, Complement G_I), in closed
    # form in packets.free_evolution; its band lies far below the sink's start, so the
    # sink leaves it alone (Yoshida-4's backward drift included: a sink never amplifies)
    g = Grid(-500.0, 300.0, 8192)
    info = packets.describe(loads(STEP.format(points=8192, dt=0.01, left=-500.0, right=300.0,
                                              **UNIT), "s.yaml").packet, 1.0, 1.0, 0.0)
    sink = timestep.sink_rates(g.k, (3.0, 6.0, 5.0))
    for scheme in ("strang", "yoshida4"):
        prop = Propagator(g, np.zeros(g.points), 1.0, 1.0, 0.05, scheme, sink=sink)
        prop.set_state(packets.free_evolution(g.x, 0.0, info, 1.0, 1.0))
        prop.advance(200)
        exact = packets.free_evolution(g.x, 10.0, info, 1.0, 1.0)
        assert np.abs(prop.psi - exact).max() < 1e-10
    noise = np.random.default_rng(1).normal(size=g.points) * (1 + 0j)
    for scheme in ("strang", "yoshida4"):
        prop = Propagator(g, np.zeros(g.points), 1.0, 1.0, 0.05, scheme, sink=sink)
        prop.set_state(noise)
        before = np.sum(np.abs(noise) ** 2)
        prop.advance(10)
        assert np.sum(np.abs(prop.psi) ** 2) < before
    with pytest.raises(ValueError, match="sink"):
        Propagator(g, np.zeros(g.points), 1.0, 1.0, 0.05, sink=-sink)


@pytest.mark.parametrize("system", ["atomic", "lab"])
def test_sink_removes_the_sidebands_interference_and_keeps_the_delays(system):
    # source: the unit step's reflection delay below the top, dφ/dk = 2/κ (Cohen-Tannoudji,
    # Diu, Laloë, Complement H_I), packet-averaged by quadrature (test_time_to_accuracy).
    # Without the sink, at Δt = 0.025 (N = 8192) the sidebands' waves returned to the
    # jump and moved the centroid delay by −4.2e-3 against −0.8e-3 at the grid rule's
    # step (benchmarks/dt_scan.py); with it the error is the grid's plus a smooth
    # 0.4·(hΔt/ħ)², within the bound time_error gives
    if system == "atomic":
        text = unit_step(8192, 0.025)
    else:   # the same packet in lab units: a heterojunction step (settings of our own)
        text = unit_step(4096, 0.5, span=(-700.0, 300.0), **LAB)
    s = build(text)
    assert s.sink is not None and s.flux_band is not None
    report = measure_delays(run_in_memory(s))
    bound = s.dt_error if s.dt_chosen else timestep.bias(
        s.grid, s.packet, s.V, s.potential.support(), s.hbar, s.mass, s.dt)
    grid = grid_rendering_error(s.potential, s.packet, s.grid.x, s.V, s.grid.dx, s.hbar,
                                s.mass, s.reference)["tau_R"]
    for name, result in report.reflection.measured.items():
        assert abs(result.relative) < 1.25 * grid + bound + 2e-4, (name, result.relative)
    if system == "atomic":
        expected = reflection_predictions(abs(s.packet.k0), 20.0)["centroid"]
        assert report.reflection.measured["centroid"].delay / expected - 1 == pytest.approx(
            -1.0e-3, abs=3e-4)
    # what the sidebands took is within its bound SIDEBAND_SHARE·x² (total reflection: R = 1)
    share = timestep.sideband_share(s.packet, s.V, s.grid.dx, s.potential.support(), s.grid.left,
                                    s.hbar, s.mass, s.dt)
    assert 0 < 1 - report.reflection.probability < share + 1e-4


def test_the_run_file_records_the_sink(run_scenario):
    setup, path = run_scenario(STEP.format(points=2048, dt=0.1, left=-380.0, right=120.0,
                                           **{**UNIT, "center": -100.0}))
    assert setup.sink is not None
    with RunFile(path) as rf:
        assert json.loads(rf.attrs["sideband_sink"]) == pytest.approx(list(setup.sink))
