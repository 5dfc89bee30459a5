"""The Larmor clock read from spinor runs: on the exact synthesised spinor run
(the packet average the measurement gives) and on propagated runs."""
import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import loads, with_changes
from sojourn.errors import MeasureError
from sojourn.measure import measure_delays
from sojourn.measure.larmor import larmor_entry, outgoing_spin
from sojourn.workflows import run_in_memory, synthesize

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
CHANNELS = ("reflection", "transmission")
TIMES = ("tau_y", "tau_z")


def clocks(changes=None):
    """{channel: larmor block} of one propagated spinor run."""
    report = measure_delays(run_in_memory(build(with_changes(loads(SCENARIO), changes or {}))))
    return {c: getattr(report, c).larmor for c in CHANNELS}


def test_synthesised_spinor_run_reads_the_packet_average(tmp_path):
    # the exact spinor run (each component synthesised from its own stationary
    # states) gives the spin ratio-of-integrals of PHYSICS §Larmor, with weights
    # |ψ̃₀(k)|²·(k'/k)|t±|²: agreement to quadrature accuracy in both channels
    # (sparse recordings and samples: the spin is read from the snapshots alone)
    coarse = with_changes(loads(SCENARIO, "s.yaml"), {"record.every": 50.0,
                                                     "record.sample_steps": 125})
    path = synthesize(build(coarse), tmp_path / "exact.h5")
    report = measure_delays(path)
    for channel in CHANNELS:
        block = getattr(report, channel).larmor
        for key in ("tau_y", "tau_z", "tau"):
            assert block[key]["deviation"] == pytest.approx(
                0.0, abs=1e-9 * abs(block[key]["predicted"]))
    T, R = (getattr(report, c).larmor["probability"] for c in ("transmission", "reflection"))
    assert T + R == pytest.approx(1.0, abs=1e-9)
    # the finite-field departure at ω_L = 0.01 is below 1e-3 of the times here
    tz = report.transmission.larmor["tau_z"]
    assert 0 < abs(tz["finite_field"]) < 1e-3 * abs(tz["predicted"])


@pytest.mark.slow
def test_propagated_runs_converge_to_the_prediction():
    # second-order split-operator runs, dx halved and dt quartered: the deviation
    # from the exact finite-field prediction falls as h² (common practice, no source)
    devs = []
    for points, dt in ((1536, 0.08), (3072, 0.02)):
        got = clocks({"grid.points": points, "evolve.dt": dt})
        devs.append([got[c][k]["deviation"] / got[c][k]["predicted"]
                     for c in CHANNELS for k in TIMES])
    coarse, fine = np.array(devs)
    assert np.all(np.abs(fine) < np.abs(coarse) / 3)
    # Richardson on h²: the extrapolated deviation is well below the finer run's
    assert np.all(np.abs(fine - (coarse - fine) / 3) < np.abs(fine) / 5)


def test_linear_regime_departure_matches_the_exact_spinor():
    # the times are defined for ω_L → 0 (Büttiker, Phys. Rev. B 27, 6178 (1983)); at
    # finite ω_L the spin reads them with an O(ω_L²) departure. The change of the
    # measured times between two fields, Richardson-extrapolated over two grids (h²),
    # is the exact spinor's change (theory.larmor.spinor_amplitudes)
    change = {}
    for points, dt in ((1536, 0.08), (3072, 0.02)):
        out = {omega: clocks({"larmor.omega": omega, "grid.points": points, "evolve.dt": dt})
               for omega in (0.16, 0.04)}
        change[points] = {(c, k): (out[0.16][c][k]["measured"] - out[0.04][c][k]["measured"],
                                   out[0.16][c][k]["predicted"] - out[0.04][c][k]["predicted"])
                          for c in CHANNELS for k in TIMES}
    for key, (fine, expected) in change[3072].items():
        coarse = change[1536][key][0]
        extrapolated = fine + (fine - coarse) / 3
        assert extrapolated == pytest.approx(expected, rel=0.15, abs=1e-5)


def test_linear_regime_weak_fields_read_the_same_times():
    # as ω_L → 0 the measured times stop depending on ω_L: halving a weak field
    # moves them by far less than it moves them at a strong one (the departure is
    # O(ω_L²)), and the weak-field times sit on the linear packet average to this
    # grid's h² error (the same at both fields)
    weak = {omega: clocks({"larmor.omega": omega}) for omega in (0.002, 0.001)}
    for c in CHANNELS:
        for k in TIMES:
            a, b = weak[0.002][c][k]["measured"], weak[0.001][c][k]["measured"]
            assert abs(a - b) < 1e-5 * abs(b)
            assert abs(weak[0.001][c][k]["predicted"] - weak[0.001][c][k]["linear"]) \
                < 2e-5 * abs(b)


def test_entry_and_arguments():
    entry = larmor_entry((1.0, 2e-3, -4e-3), 2e-3, None)
    assert entry["tau_y"]["measured"] == pytest.approx(1.0)
    assert entry["tau_z"]["measured"] == pytest.approx(2.0)
    assert entry["tau"]["measured"] == pytest.approx(5 ** 0.5)
    with pytest.raises(MeasureError):
        outgoing_spin(np.zeros(3), np.zeros(4), np.zeros(4), "transmission", (0, 1))
    with pytest.raises(MeasureError):
        outgoing_spin(np.arange(4.0), np.zeros(4), np.zeros(4), "sideways", (0, 1))
