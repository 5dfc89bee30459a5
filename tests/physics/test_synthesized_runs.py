"""Delay measurements on exact data: a run file synthesised from stationary
states (PHYSICS §5, exact synthesis) must give each method's own packet
prediction to far better than any propagated run can, which checks the
measuring side apart from the propagator."""
import math

import pytest
from scipy.integrate import quad

from sojourn.build import build
from sojourn.cli import main
from sojourn.measure import measure_delays
from sojourn.workflows import synthesize as write_synthesis
from sojourn.store import RunFile
from sojourn.config.scenario import load
from sojourn.theory import closed_forms as cf

STEP = """\
units: atomic
grid: {span: [-800.0, 400.0], points: 2048}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -350.0, width: 20.0, energy: 0.2}
evolve: {duration: 1250.0, dt: 0.05}
record: {every: 50.0, sample_steps: 10}
measure: {detectors: [-175.0], region: [0.0, 12.0]}
"""


def _closed_form_predictions(E0=0.2, sigma=20.0):
    """(centroid, arrival, spectral) of the unit step below its top from the closed form
    τ_R = ħ/√(E(V₀−E)) (Griffiths 2nd ed., Problem 2.34; R = 1 over the whole band),
    averaged by scipy.integrate.quad over |ψ̃₀(k)|² (ħ = m = 1): ⟨τ k⟩/k₀, ⟨τ⟩, ⟨τ⟩."""
    k0, sk = math.sqrt(2 * E0), 1 / (2 * sigma)
    g = lambda k: math.exp(-0.5 * ((k - k0) / sk) ** 2)
    tau = lambda k: float(cf.step_delay(k * k / 2, 1.0))
    lo, hi = k0 - 8 * sk, k0 + 8 * sk
    Z = quad(g, lo, hi, epsabs=0, epsrel=1e-13)[0]
    mean_tau = quad(lambda k: g(k) * tau(k), lo, hi, epsabs=0, epsrel=1e-13)[0] / Z
    shift = quad(lambda k: g(k) * tau(k) * k, lo, hi, epsabs=0, epsrel=1e-13)[0] / Z
    return shift / k0, mean_tau, mean_tau


def test_synthesized_step_gives_each_method_its_own_prediction(write_scenario, tmp_path):
    # source: exact synthesis ψ = ∫dk φ̃₀ ψ_k e^{−iEt/ħ} for the step of Griffiths 2nd ed.
    # Problem 2.34; each method measures its own average (PHYSICS §5): at E₀ = 0.2 V₀ the
    # three predictions differ by ~1e-3, far more than the tolerances below
    path = write_scenario(STEP)
    setup = build(load(path))
    run = write_synthesis(setup, tmp_path / "exact.h5")
    with RunFile(run) as rf:
        assert rf.status == "complete" and len(rf) == setup.snapshots
    measured = measure_delays(run).reflection.measured
    assert measured["centroid"].delay == pytest.approx(measured["centroid"].predicted, rel=1e-7)
    assert measured["spectral"].delay == pytest.approx(measured["spectral"].predicted, rel=1e-7)
    # incident and reflected passages are ~14σ apart at the detector: overlap < 1e-8
    assert measured["arrival"].delay == pytest.approx(measured["arrival"].predicted, rel=1e-6)
    # synthesis and prediction share the solver's r(k): the closed form keeps a shared
    # error from passing
    centroid, arrival, spectral = _closed_form_predictions()
    assert measured["centroid"].delay == pytest.approx(centroid, rel=1e-7)
    assert measured["spectral"].delay == pytest.approx(spectral, rel=1e-7)
    assert measured["arrival"].delay == pytest.approx(arrival, rel=1e-6)
    assert abs(centroid / arrival - 1) > 1e-4      # the methods' averages really differ


def test_theory_command_writes_a_synthesized_run_file(write_scenario, tmp_path):
    path = write_scenario(STEP.replace("duration: 1250.0", "duration: 100.0"))
    out = tmp_path / "exact.h5"
    assert main(["theory", str(path), "--synthesize", str(out), "-q"]) == 0
    assert main(["inspect", str(out)]) == 0
    assert main(["theory", str(path), "--synthesize", str(out), "-q"]) == 2  # never overwritten
