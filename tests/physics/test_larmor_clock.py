"""The shipped Larmor clock (configs/larmor_clock.yaml): a rectangular barrier
with a weak field over it. Its measured τ_y, τ_z in both channels against their
packet-averaged predictions, Richardson-extrapolated on fine grids, and the
dwell identity between two independent measurements of one run."""
from pathlib import Path

import pytest

from sojourn.build import build
from sojourn.config.scenario import load
from sojourn.measure import measure_delays
from sojourn.workflows import run, run_in_memory, verify

CONFIG = Path(__file__).resolve().parents[2] / "configs" / "larmor_clock.yaml"
CHANNELS = ("reflection", "transmission")


@pytest.fixture(scope="module")
def report():
    return measure_delays(run_in_memory(build(load(CONFIG))))


def test_shipped_clock_reads_its_predictions_within_its_grid_error(report):
    # N = 4096 (dx = 0.25): measured 2.26 % (τ_y, both channels), 0.9-1.1 % (τ_z) above
    # the packet's exact spinor prediction; the h² error of the barrier's sampled edges
    for channel in CHANNELS:
        block = getattr(report, channel).larmor
        for key in ("tau_y", "tau_z"):
            assert block[key]["deviation"] == pytest.approx(0.0, abs=0.03 * abs(block[key]["predicted"]))
    assert report.warnings == []


def test_dwell_identity_between_the_spin_and_the_region_probability(report):
    # T·τ_y^T + R·τ_y^R = τ_D for a clock over the whole barrier (Büttiker, Phys. Rev. B
    # 27, 6178 (1983)): the outgoing spins on one side, ∫P_region dt on the other
    T, R = (getattr(report, c).larmor["probability"] for c in ("transmission", "reflection"))
    lhs = T * report.transmission.larmor["tau_y"]["measured"] \
        + R * report.reflection.larmor["tau_y"]["measured"]
    assert lhs == pytest.approx(report.dwell["measured"], rel=1e-4)
    # and between the predictions: the linear packet averages against Büttiker's
    # packet dwell time (two quadratures of theory)
    lin = T * report.transmission.larmor["tau_y"]["linear"] \
        + R * report.reflection.larmor["tau_y"]["linear"]
    assert lin == pytest.approx(report.dwell["predicted"], rel=1e-6)


@pytest.mark.slow
def test_fine_grids_reach_the_predictions_to_1e_3(tmp_path):
    # the bar: Richardson over N = 4096 (Δt = 0.02) and 8192 (Δt/4), as
    # `sojourn delay --verify` does; measured 2.5e-4 relative at worst (τ_y), and
    # 3e-5 from 8192 and 16384. The verify error bars cover the base run's deviation.
    path = run(build(load(CONFIG)), tmp_path / "clock.h5")
    checked = verify(path)
    base, fine = checked.report, checked.finer_grid
    for channel in CHANNELS:
        for key in ("tau_y", "tau_z"):
            b, f = (getattr(r, channel).larmor[key] for r in (base, fine))
            extrapolated = f["measured"] + (f["measured"] - b["measured"]) / 3
            assert extrapolated == pytest.approx(b["predicted"], rel=1e-3), (channel, key)
            assert abs(b["deviation"]) <= b["error"]
            assert f"{channel}.larmor.{key}" in checked.moves
