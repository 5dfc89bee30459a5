"""Driven potentials in a scenario: the `drive` key on a term, formulas in t,
what build carries to the engine and what the guards say (PHYSICS §Driven
potentials)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.errors import ScenarioError
from sojourn.guards_drive import STEPS_PER_PERIOD
from scenarios import small_step

DRIVE = {"amplitude": 0.05, "angular_frequency": 0.3}


def driven(drive=None, **changes):
    term = {"barrier": {"start": 0.0, "end": 3.0, "height": 1.0, "drive": drive or DRIVE}}
    return loads(small_step({"potential": [term], **changes}), "driven.yaml")


@pytest.mark.parametrize("drive,message", [
    ({"amplitude": 0.1, "angular_frequency": -1.0},
     "driven.yaml:15: potential[0].barrier.drive.angular_frequency: must be > 0"),
    ({"amplitude": 0.1}, "driven.yaml:13: potential[0].barrier.drive.angular_frequency: "
                         "required key is missing"),
    ({"amplitude": 0.1, "angular_frequency": 1.0, "phaze": 1.0},
     "driven.yaml:16: potential[0].barrier.drive.phaze: unknown key; did you mean 'phase'?"),
    ({"amplitude": 0.1, "angular_frequency": 1.0, "ramp": -2.0},
     "driven.yaml:16: potential[0].barrier.drive.ramp: must be > 0"),
])
def test_a_wrong_drive_is_one_line_naming_file_line_and_key(drive, message):
    with pytest.raises(ScenarioError) as exc:
        driven(drive)
    assert str(exc.value).startswith(message) and "\n" not in str(exc.value)


def test_static_scenarios_carry_no_drive():
    setup = build(loads(small_step(), "static.yaml"))
    assert setup.drive is None and not setup.potential.driven


def test_drive_acts_on_the_terms_support_with_cell_shares():
    # a step drives its high side, a barrier its interval; Σ S·dx is the interval's length
    # inside the box (cell averages of its indicator: exact, common practice)
    sc = loads(small_step({"potential": [
        {"step": {"at": 0.3, "height": 0.2, "drive": DRIVE}},
        {"barrier": {"start": -20.17, "end": -12.0, "height": 0.1, "drive": DRIVE}}]}), "d.yaml")
    setup = build(sc)
    (f1, where1, S1), (f2, where2, S2) = setup.drive.parts
    dx = setup.grid.dx
    assert np.sum(S1) * dx == pytest.approx(setup.grid.x[-1] + dx / 2 - 0.3, rel=1e-12)
    assert np.sum(S2) * dx == pytest.approx(20.17 - 12.0, rel=1e-12)
    assert f1(0.0) == pytest.approx(0.05) and f1(math.pi / 0.3) == pytest.approx(-0.05)


def test_a_ramp_switches_the_drive_on_smoothly():
    sc = driven({"amplitude": 0.2, "angular_frequency": 0.5, "phase": 0.0, "ramp": 10.0})
    (drive, _), = sc.build_potential().drives()
    assert drive.value(0.0) == 0.0
    assert drive.value(5.0) == pytest.approx(0.2 * 0.5 * math.cos(2.5))
    assert drive.value(12.0) == pytest.approx(0.2 * math.cos(6.0))


def test_a_formula_in_t_is_a_drive():
    sc = loads(small_step({"potential": [{"expression": "0.5*exp(-x**2/4)*(1 + 0.2*cos(0.3*t))"}]}), "f.yaml")
    setup = build(sc)
    assert setup.potential.driven and len(setup.drive.fields) == 1
    x = setup.grid.x
    added = setup.drive(math.pi / 0.3, x.shape)          # cos = −1: −0.2 of the static part
    np.testing.assert_allclose(added, -0.4 * 0.5 * np.exp(-x ** 2 / 4), atol=1e-12)


def test_default_time_step_resolves_the_drive_period():
    setup = build(driven({"amplitude": 0.05, "angular_frequency": 3.0}, **{"evolve.dt": None}))
    assert (2 * math.pi / 3.0) / setup.dt >= STEPS_PER_PERIOD - 1e-9


def test_guards_on_a_driven_run():
    setup = build(driven({"amplitude": 0.05, "angular_frequency": 8.0}, **{"evolve.dt": 0.05}))
    errors = [f for f in setup.errors() if f.key == "evolve.dt"]
    assert errors and "steps per drive period" in errors[0].message and errors[0].forceable
    # the top sideband E₀ + n_max·ħω outruns the coarse grid
    setup = build(driven({"amplitude": 1.5, "angular_frequency": 0.5}, **{"evolve.dt": 0.05}))
    assert any("sidebands" in f.message for f in setup.errors() if f.key == "grid.points")
    # σ_E = ħ²k₀σ_k/m = 0.05 against ħω/3: a warning below ħω = 0.15
    setup = build(driven({"amplitude": 0.01, "angular_frequency": 0.1}))
    assert any("overlap" in f.message for f in setup.warnings() if f.key == "packet.width")
    setup = build(driven({"amplitude": 0.01, "angular_frequency": 0.4}))
    assert not any("overlap" in f.message for f in setup.warnings())


def test_theory_table_of_a_driven_scenario():
    from pathlib import Path
    from sojourn.config.scenario import load
    from sojourn.theory.tables import format_table, theory_table
    table = theory_table(load(Path(__file__).resolve().parents[1] / "configs" /
                              "driven_barrier.yaml"))
    drive = table["drive"]
    # τ_BL = m d/(ħκ), κ = √(2m(V₀ − E₀))/ħ: d = 2, V₀ − E₀ = 0.3 (Büttiker & Landauer 1982)
    assert drive["tau_bl"] == pytest.approx(2.0 / math.sqrt(0.6), rel=1e-12)
    ratio = [r for r in drive["asymmetry"]["T_plus_over_T_minus"] if r is not None]
    assert len(ratio) >= 5 and all(b > a for a, b in zip(ratio, ratio[1:]))
    assert sum(drive["packet_sidebands"]["stationary_transmission"]) < table["packet"][
        "transmission"]["probability"] * 1.2
    assert "Buttiker-Landauer time" in format_table(table)


def test_a_ramp_lasting_past_the_arrival_is_a_warning():
    # the packet (centre −100, width 10, v₀ = 1) reaches the barrier near t ≈ 70
    late = build(driven({"amplitude": 0.05, "angular_frequency": 0.4, "ramp": 200.0}))
    early = build(driven({"amplitude": 0.05, "angular_frequency": 0.4, "ramp": 20.0}))
    assert any("ramp" in f.message for f in late.warnings())
    assert not any("ramp" in f.message for f in early.warnings())
