"""The propagator with a leading component axis: a spinor in a field along z
is two scalar waves with their own potentials, drifted alike."""
import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.engine.propagate import Propagator
from sojourn.measure.larmor import component_scenarios, measure_spinor
from sojourn.workflows import run_in_memory

SCENARIO = """
title: clock over a barrier
units: atomic
grid: {span: [-384.0, 384.0], points: 1536}
potential:
  - barrier: {start: 0.0, end: 2.0, height: 1.0}
packet: {center: -150.0, width: 16.0, energy: 0.5}
evolve: {duration: 300.0, dt: 0.08}
absorber: {width: 50.0}
record: {every: 300.0}
larmor: {omega: 0.02}
"""


def test_component_axis_propagates_each_component_with_its_own_potential():
    sc = loads(SCENARIO)
    up, down = (build(s) for s in component_scenarios(sc))
    prop = Propagator(up.grid, np.stack([up.V, down.V]), up.hbar, up.mass, up.dt,
                      absorber=up.W)
    prop.set_state(np.stack([up.psi0(), down.psi0()]))
    prop.advance(up.steps)
    assert prop.psi.shape == (2, up.grid.shape[0])
    separate = [run_in_memory(s) for s in (up, down)]
    for c, run in enumerate(separate):
        assert np.allclose(prop.psi[c], run.psi(len(run) - 1), rtol=0, atol=1e-12)
    # the spin it carries reads the Larmor times: within this grid's known h²
    # error (a few per cent at dx = 0.5, see tests/physics/test_larmor_measure.py)
    got = measure_spinor(up.grid.x, prop.psi[0], prop.psi[1], (0.0, 2.0), sc, up.packet)
    for ch in got.values():
        for key in ("tau_y", "tau_z"):
            assert ch[key]["measured"] == pytest.approx(ch[key]["predicted"], rel=0.1)


def test_component_axis_shape_checks():
    sc = loads(SCENARIO)
    setup = build(sc)
    with pytest.raises(ValueError):
        Propagator(setup.grid, np.zeros((2, 3)), 1.0, 1.0, 0.1)
    prop = Propagator(setup.grid, np.stack([setup.V, setup.V]), 1.0, 1.0, 0.1)
    with pytest.raises(ValueError):
        prop.set_state(setup.psi0())
