"""The Larmor clock read from spinor runs: on the exact synthesised spinor (the
packet average the measurement gives) and on propagated runs."""
import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import loads, with_changes
from sojourn.errors import MeasureError
from sojourn.measure.larmor import component_scenarios, larmor_entry, measure_spinor, outgoing_spin
from sojourn.theory.states import synthesize
from sojourn.workflows import run_in_memory

# our own settings: a barrier with a step down behind it (outgoing k' ≠ k, so the
# flux factor k'/k of the transmitted weights matters), a clock over the barrier
SCENARIO = """
title: clock over a barrier before a step down
units: atomic
grid: {span: [-384.0, 384.0], points: 1536}   # jumps on grid nodes
potential:
  - barrier: {start: 0.0, end: 2.0, height: 1.0}
  - step: {at: 2.0, height: -0.3}
packet: {center: -150.0, width: 16.0, energy: 0.5}
evolve: {duration: 300.0, dt: 0.08}
absorber: {width: 50.0}
record: {every: 25.0}
larmor: {region: [0.0, 2.0], omega: 0.01}
"""


def spinor_at_end(scenario, exact):
    up, down = (build(s) for s in component_scenarios(scenario))
    x = up.grid.x
    if exact:
        T = scenario.evolve.duration
        psi = [synthesize(s.potential, s.packet, [T], x, hbar=scenario.hbar,
                          mass=scenario.particle_mass)[0] for s in (up, down)]
    else:
        runs = [run_in_memory(s) for s in (up, down)]
        psi = [r.psi(len(r) - 1) for r in runs]
    return x, psi[0], psi[1], up.packet


def test_synthesised_spinor_reads_the_packet_average():
    # the exact spinor (each component synthesised from its own stationary states)
    # gives the spin ratio-of-integrals of PHYSICS §Larmor, with weights
    # |ψ̃₀(k)|²·(k'/k)|t±|² — agreement to quadrature accuracy in both channels
    sc = loads(SCENARIO)
    x, up, down, packet = spinor_at_end(sc, exact=True)
    got = measure_spinor(x, up, down, (0.0, 2.0), sc, packet)
    assert set(got) == {"reflection", "transmission"}
    for ch in got.values():
        for key in ("tau_y", "tau_z", "tau"):
            assert ch[key]["deviation"] == pytest.approx(0.0, abs=1e-9 * abs(ch[key]["predicted"]))
    assert got["reflection"]["probability"] + got["transmission"]["probability"] == \
        pytest.approx(1.0, abs=1e-9)
    # without the flux factor k'/k the transmitted prediction would differ measurably
    assert abs(got["transmission"]["tau_z"]["predicted"]
               - got["transmission"]["tau_z"]["linear"]) < 1e-3


def test_propagated_runs_converge_to_the_prediction():
    # second-order split-operator runs, dx halved and dt quartered: the deviation
    # from the exact finite-field prediction falls toward 0 (common practice, no source)
    sc = loads(SCENARIO)
    devs = []
    for points, dt in ((1536, 0.08), (3072, 0.02)):
        s = with_changes(sc, {"grid.points": points, "evolve.dt": dt})
        x, up, down, packet = spinor_at_end(s, exact=False)
        got = measure_spinor(x, up, down, (0.0, 2.0), s, packet)
        devs.append([got[c][k]["deviation"] / got[c][k]["predicted"]
                     for c in ("reflection", "transmission") for k in ("tau_y", "tau_z")])
    coarse, fine = np.array(devs)
    assert np.all(np.abs(fine) < np.abs(coarse) / 3)
    # Richardson on h²: the extrapolated deviation is well below the finer run's
    assert np.all(np.abs(fine - (coarse - fine) / 3) < np.abs(fine) / 5)


def test_linear_regime_departure_matches_the_exact_spinor():
    # the times are defined for ω_L → 0 (Büttiker 1983); at finite ω_L the spin reads
    # them with an O(ω_L²) departure. The change of the measured times between two
    # fields, Richardson-extrapolated over two grids (h²), is the exact spinor's change
    sc = loads(SCENARIO)
    change = {}
    for points, dt in ((1536, 0.08), (3072, 0.02)):
        out = {}
        for omega in (0.16, 0.04):
            s = with_changes(sc, {"larmor.omega": omega, "grid.points": points,
                                  "evolve.dt": dt})
            x, up, down, packet = spinor_at_end(s, exact=False)
            out[omega] = measure_spinor(x, up, down, (0.0, 2.0), s, packet)
        change[points] = {(c, k): (out[0.16][c][k]["measured"] - out[0.04][c][k]["measured"],
                                   out[0.16][c][k]["predicted"] - out[0.04][c][k]["predicted"])
                          for c in ("reflection", "transmission") for k in ("tau_y", "tau_z")}
    for key, (fine, expected) in change[3072].items():
        coarse = change[1536][key][0]
        extrapolated = fine + (fine - coarse) / 3
        assert extrapolated == pytest.approx(expected, rel=0.15, abs=1e-5)


def test_entry_and_arguments():
    entry = larmor_entry((1.0, 2e-3, -4e-3), 2e-3, None)
    assert entry["tau_y"]["measured"] == pytest.approx(1.0)
    assert entry["tau_z"]["measured"] == pytest.approx(2.0)
    assert entry["tau"]["measured"] == pytest.approx(5 ** 0.5)
    with pytest.raises(MeasureError):
        outgoing_spin(np.zeros(3), np.zeros(4), np.zeros(4), "transmission", (0, 1))
    with pytest.raises(MeasureError):
        outgoing_spin(np.arange(4.0), np.zeros(4), np.zeros(4), "sideways", (0, 1))
