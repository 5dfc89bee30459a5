"""The k-band check of measure.health: probability outside the packet's band
counted per unit of the incident probability, so that a long run whose box is
nearly empty at the end is not flagged, while spurious components are."""
from __future__ import annotations

import numpy as np

from scenarios import tiny_step
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.measure.delays import measure_delays
from sojourn.workflows import run_in_memory


def _band_warnings(report):
    return [w for w in report.warnings if "k-band" in w]


def _run(duration):
    return run_in_memory(build(loads(tiny_step({"evolve.duration": duration}), source="s.yaml")))


def test_an_emptied_box_is_not_flagged():
    run = _run(400.0)   # the reflected packet has long been absorbed
    final = run.observables()["norm"][-1]
    assert final < 1e-3
    assert not _band_warnings(measure_delays(run))


def test_spurious_components_are_flagged():
    run = _run(140.0)   # the reflected packet well clear of the step: nothing out of band
    assert not _band_warnings(measure_delays(run))
    x = run.x
    psi = run._psi[-1]
    k_high = 0.8 * np.pi / (x[1] - x[0])          # far above the band k₀ ± 8σ_k
    spurious = np.sqrt(1e-4 / (x[-1] - x[0])) * np.exp(1j * k_high * x)   # 1e-4 of the probability
    run._psi[-1] = psi + spurious.astype(psi.dtype)
    warnings = _band_warnings(measure_delays(run))
    assert warnings and warnings[0].startswith("0.0001 of the incident probability")
