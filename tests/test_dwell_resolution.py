"""The dwell time's grid error: what `check` and `delay` say the grid allows
the dwell time (guards.dwell_grid_error), against the dwell actually measured
on a barrier beside Büttiker's packet-averaged dwell time (M. Büttiker, Phys.
Rev. B 27, 6178 (1983); the layered solver computes it, checked against the
closed form in the theory tests)."""
from __future__ import annotations

import numpy as np
import pytest

from scenarios import small_step
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.grid_error import DWELL_GRID_ERROR, dwell_grid_error
from sojourn.measure.delays import measure_delays
from sojourn.workflows import run_in_memory


def _barrier(points: int) -> str:
    return small_step({"grid": {"span": [-200.0, 200.0], "points": points},
                       "potential": [{"barrier": {"start": 0.0, "end": 2.0, "height": 1.0}}],
                       "packet": {"center": -80.0, "width": 10.0, "energy": 0.5},
                       "evolve": {"duration": "auto", "dt": 0.01},
                       "absorber": {"width": 40.0}, "measure": {"region": [0.0, 2.0],
                                                                 "detectors": [-40.0, 40.0]}})


def test_the_estimate_counts_each_edge_of_the_forbidden_zone():
    # κ = √(2m(V − E))/ħ = 1 for V − E = 1/2 (ħ = m = 1): a step has one edge, a barrier two
    dx = 0.1
    step = np.r_[np.zeros(50), np.ones(50)]
    barrier = np.r_[np.zeros(50), np.ones(10), np.zeros(40)]
    assert dwell_grid_error(step, dx, 0.5, 1.0, 1.0) == pytest.approx(DWELL_GRID_ERROR * dx ** 2)
    assert dwell_grid_error(barrier, dx, 0.5, 1.0, 1.0) == pytest.approx(2 * DWELL_GRID_ERROR * dx ** 2)
    assert dwell_grid_error(barrier, dx, 1.5, 1.0, 1.0) is None   # nothing forbidden


@pytest.mark.parametrize("points", [1024, 2048])
def test_measured_dwell_is_within_what_the_grid_allows(points):
    setup = build(loads(_barrier(points), source="barrier.yaml"))
    report = measure_delays(run_in_memory(setup))
    dwell = report.dwell
    allowed = dwell["grid_error"]
    assert allowed is not None and allowed > 1e-3
    # the estimate is a size, not a bound: within 1.5× of the deviation it stands for
    assert abs(dwell["relative"]) <= 1.5 * allowed
    assert abs(dwell["relative"]) >= allowed / 10
    findings = [f for f in setup.findings if "evanescent" in f.message]
    assert findings and f"{allowed:.1%}" in findings[0].message


def test_a_coarse_tail_warns_only_where_the_dwell_time_is_asked_for():
    # 256 points over 400: κΔx = 1.6, an allowance far past a few per cent
    asked = build(loads(_barrier(256), source="barrier.yaml"))
    default = build(loads(small_step({"grid": {"span": [-200.0, 200.0], "points": 256},
                                      "potential": [{"barrier": {"start": 0.0, "end": 2.0,
                                                                 "height": 1.0}}],
                                      "packet": {"center": -80.0, "width": 10.0,
                                                 "energy": 0.5},
                                      "evolve": {"duration": 150.0, "dt": 0.05},
                                      "absorber": {"width": 40.0}}), source="b.yaml"))
    levels = {name: [f.level for f in s.findings if "evanescent" in f.message]
              for name, s in (("asked", asked), ("default", default))}
    assert levels == {"asked": ["warning"], "default": ["info"]}
