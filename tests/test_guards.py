"""The guards judge a scenario before a run: the potential's features against
the grid, the local wavenumber where V is lowest, scale hints, and line numbers
on every finding."""
from __future__ import annotations

import math

import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.errors import ScenarioError
from sojourn.grid_error import rendering_error
from sojourn.theory import closed_forms as cf
from sojourn.workflows import run as execute

BARRIER = """\
title: barrier above its top
units: atomic
grid: {span: [-500.0, 500.0], points: POINTS}
potential:
  - barrier: {start: 0.0, end: 2.0, height: 1.0}
packet: {center: -200.0, width: 20.0, energy: 1.2}
evolve: {duration: 300.0}
absorber: {width: 60.0}
"""


def packet_R_closed_form(k0, sigma_k):
    # R = 1 − T with T of a rectangular barrier above its top (Griffiths, Introduction
    # to Quantum Mechanics, 2nd ed., Problem 2.33), averaged over |ψ̃₀(k)|² ∝ exp(−(k−k₀)²/2σ_k²)
    k = np.linspace(k0 - 8 * sigma_k, k0 + 8 * sigma_k, 4001)
    w = np.exp(-0.5 * ((k - k0) / sigma_k) ** 2)
    R = 1 - cf.barrier_transmission_probability(k ** 2 / 2, 1.0, 2.0)
    return float(np.sum(w * R) / np.sum(w))


def test_a_barrier_four_cells_wide_is_flagged_and_its_error_estimated(tmp_path):
    setup = build(loads(BARRIER.replace("POINTS", "2048"), "b.yaml"))
    warnings = [f for f in setup.warnings() if f.key == "grid.points"]
    assert warnings and "renders the potential coarsely" in warnings[0].message
    estimate = rendering_error(setup)["R"]
    # the run itself: its reflected probability against the closed form
    path = execute(setup, tmp_path / "b.h5")
    from sojourn.store import RunFile
    with RunFile(path) as rf:
        obs = rf.observables()
    measured = float(obs["P_left"][-1] + obs["absorbed_left"][-1])
    exact = packet_R_closed_form(setup.packet.k0, setup.packet.sigma_k)
    actual = abs(measured - exact) / exact
    assert actual > 0.05                      # the run really is off (about 12 %)
    assert actual / 3 < estimate < 3 * actual  # and the estimate says how far


def test_a_resolved_barrier_gives_no_warning_and_a_small_estimate():
    setup = build(loads(BARRIER.replace("POINTS", "32768").replace("energy: 1.2", "energy: 0.5"),
                        "b.yaml"))
    assert not [f for f in setup.warnings() if f.key == "grid.points"]
    assert max(rendering_error(setup).values()) < 1e-3


def test_a_deep_well_needs_the_local_wavenumber_resolved():
    text = BARRIER.replace("POINTS", "1024").replace(
        "barrier: {start: 0.0, end: 2.0, height: 1.0}", "well: {start: 0.0, end: 20.0, depth: 40.0}")
    errors = [f for f in build(loads(text, "w.yaml")).errors() if f.key == "grid.points"]
    # local k = √(k_band² + 2m·40) ≈ 9: the grid's k_max = π/dx ≈ 3.2 cannot hold it
    assert errors and "where V is lowest" in errors[0].message


def test_findings_carry_the_line_of_their_key():
    setup = build(loads(BARRIER.replace("POINTS", "2048").replace(
        "evolve: {duration: 300.0}", "evolve: {duration: 300.0, dt: 5.0}"), "b.yaml"))
    error = next(f for f in setup.errors() if f.key == "evolve.dt")
    assert error.located("b.yaml").startswith("b.yaml:7: evolve.dt: ")


@pytest.mark.parametrize("change,key", [
    (("units: atomic", "units: atomic\nmass: 2.0e-4"), "mass"),
    (("energy: 1.2", "energy: 400.0"), "packet.energy"),
])
def test_scale_hints_name_the_likely_slip(change, key):
    setup = build(loads(BARRIER.replace("POINTS", "2048").replace(*change), "b.yaml"))
    assert any(f.key == key for f in setup.findings if f.level in ("warning", "error"))


def test_a_table_wider_than_the_box_refers_to_where_V_leaves_its_level(tmp_path):
    # the rows run from −1000 to 1000 but V only changes at 0: the reference and
    # the region follow the feature, not the table's ends
    rows = "\n".join(f"{x},{0.0 if x <= 0 else 1.0}" for x in (-1000, 0, 0.001, 1000))
    (tmp_path / "pot.csv").write_text("x,V\n" + rows + "\n")
    text = BARRIER.replace("POINTS", "4096").replace(
        "barrier: {start: 0.0, end: 2.0, height: 1.0}", "table: {file: pot.csv}").replace(
        "energy: 1.2", "energy: 0.5")
    setup = build(loads(text, str(tmp_path / "t.yaml"), tmp_path))
    assert setup.reference == pytest.approx(0.0, abs=1e-9)
    assert setup.potential.support() == pytest.approx((0.0, 0.001), abs=1e-9)


def test_a_narrow_feature_in_a_formula_is_seen_by_the_theory():
    from sojourn.theory import scatter
    text = BARRIER.replace("POINTS", "8192")
    formula = text.replace("barrier: {start: 0.0, end: 2.0, height: 1.0}",
                           'expression: "where(x > 0, 1, 0) * where(x < 0.3, 2.0, 0)"')
    rectangle = text.replace("barrier: {start: 0.0, end: 2.0, height: 1.0}",
                             "barrier: {start: 0.0, end: 0.3, height: 2.0}")
    E = [0.5, 1.2]
    a = scatter(loads(formula, "f.yaml").build_potential(), E, hbar=1.0).R
    b = scatter(loads(rectangle, "r.yaml").build_potential(), E, hbar=1.0).R
    exact = 1 - cf.barrier_transmission_probability(np.array(E), 2.0, 0.3)  # Griffiths Pr. 2.33
    assert a == pytest.approx(exact, rel=1e-9) and b == pytest.approx(exact, rel=1e-9)


def test_a_reversed_region_is_refused():
    with pytest.raises(ScenarioError, match=r"b\.yaml:\d+: measure\.region: must be \[start, end\]"):
        loads(BARRIER.replace("POINTS", "2048") + "measure: {region: [5.0, 0.0]}\n", "b.yaml")


def test_a_mass_in_kilograms_is_named_not_the_time_step():
    text = BARRIER.replace("POINTS", "2048").replace("units: atomic", "units: atomic\nmass: 9.109e-31")
    with pytest.raises(ScenarioError, match=r"^b\.yaml:3: mass: .*not kilograms"):
        build(loads(text, "b.yaml"))
