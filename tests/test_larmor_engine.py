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
    assert setup.V.shape == (2, setup.grid.points)   # the clock's scenario builds a spinor
    with pytest.raises(ValueError):
        Propagator(setup.grid, np.zeros((2, 3)), 1.0, 1.0, 0.1)
    with pytest.raises(ValueError):
        Propagator(setup.grid, np.stack([setup.V, setup.V]), 1.0, 1.0, 0.1)
    prop = Propagator(setup.grid, setup.V, 1.0, 1.0, 0.1)
    with pytest.raises(ValueError):
        prop.set_state(setup.psi0()[0])


def test_delay_report_gains_larmor_blocks_and_the_tunnelling_table():
    from sojourn.cli_format import format_tunnelling_times
    from sojourn.measure.delays import measure_delays
    from sojourn.measure.larmor import measure_spinor_runs, with_larmor
    sc = loads(SCENARIO)
    up, down = (run_in_memory(build(s)) for s in component_scenarios(sc))
    blocks = measure_spinor_runs(sc, up, down)
    # the report of the unperturbed scenario, with the clock's blocks attached
    report = with_larmor(measure_delays(run_in_memory(build(sc))).to_dict(), blocks)
    for channel in ("reflection", "transmission"):
        block = report[channel]["larmor"]
        assert block["omega"] == 0.02
        assert set(block) >= {"tau_y", "tau_z", "tau", "spin"}
        assert set(block["tau_y"]) >= {"measured", "predicted", "deviation", "error"}
    # the dwell identity T·τ_y^T + R·τ_y^R = τ_D (Büttiker 1983) between two
    # independent measurements of one run: the spin of the outgoing packets and
    # ∫P_region dt (both carry this grid's error of the barrier's sampled width)
    T, R = (blocks[c]["probability"] for c in ("transmission", "reflection"))
    lhs = T * blocks["transmission"]["tau_y"]["measured"] + R * blocks["reflection"]["tau_y"]["measured"]
    assert lhs == pytest.approx(report["reflection"]["dwell"]["measured"], rel=2e-3)
    lines = format_tunnelling_times(report, "ħ/Eₕ")
    assert lines[0].startswith("tunnelling times")
    assert any(line.strip().startswith("Larmor τ_y") for line in lines)
    assert any(line.strip().startswith("dwell") for line in lines)
    with pytest.raises(Exception):
        measure_spinor_runs(sc, up, object())
