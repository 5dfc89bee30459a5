"""The propagator's contract: argument checks, scheme registry rules, explicit
state (step, time, status), sampling on the absolute step comb, and stopping."""
import math

import numpy as np
import pytest

from sojourn.engine import propagate
from sojourn.engine.propagate import SCHEMES, Propagator, Scheme
from sojourn.model import packets
from sojourn.model.grid import Grid

GRID = Grid(-60.0, 60.0, 256)
V = np.where(GRID.x > 0, 0.4, 0.0)
PSI0 = packets.gaussian(GRID.x, -15.0, 5.0, 1.0)


def _plain_strang(psi, steps, dt):
    """Strang steps written out with numpy.fft, ħ = m = 1 (Feit, Fleck & Steiger,
    J. Comput. Phys. 47, 412 (1982))."""
    half = np.exp(-0.5j * V * dt)
    drift = np.exp(-0.5j * GRID.k ** 2 * dt)
    for _ in range(steps):
        psi = half * np.fft.ifft(drift * np.fft.fft(half * psi))
    return psi


def test_unknown_scheme_names_the_known_ones():
    with pytest.raises(ValueError, match="unknown scheme 'leapfrog'.*strang, yoshida4"):
        Propagator(GRID, V, 1.0, 1.0, 0.1, "leapfrog")


@pytest.mark.parametrize("dt", [0.0, -0.1, math.nan, math.inf])
def test_time_step_must_be_positive_and_finite(dt):
    with pytest.raises(ValueError, match="dt must be finite and > 0"):
        Propagator(GRID, V, 1.0, 1.0, dt)


@pytest.mark.parametrize("name, value", [("hbar", 0.0), ("mass", -1.0), ("mass", math.nan)])
def test_constants_must_be_positive(name, value):
    args = {"hbar": 1.0, "mass": 1.0, name: value}
    with pytest.raises(ValueError, match=name):
        Propagator(GRID, V, args["hbar"], args["mass"], 0.1)


def test_potential_and_absorber_are_checked():
    with pytest.raises(ValueError, match=r"V has shape \(255,\); the grid's is \(256,\)"):
        Propagator(GRID, V[:-1], 1.0, 1.0, 0.1)
    with pytest.raises(ValueError, match="V is not finite"):
        Propagator(GRID, np.where(GRID.x > 0, np.nan, 0.0), 1.0, 1.0, 0.1)
    with pytest.raises(ValueError, match="absorber W has shape"):
        Propagator(GRID, V, 1.0, 1.0, 0.1, absorber=np.zeros(3))
    with pytest.raises(ValueError, match="≥ 0"):
        Propagator(GRID, V, 1.0, 1.0, 0.1, absorber=-np.ones(256))


def test_state_is_explicit():
    prop = Propagator(GRID, V, 1.0, 1.0, 0.1)
    assert prop.status == "empty"
    with pytest.raises(ValueError, match="set_state first"):
        prop.advance(1)
    with pytest.raises(ValueError, match="shape"):
        prop.set_state(PSI0[:10])
    prop.set_state(PSI0)
    assert (prop.step, prop.time, prop.status) == (0, 0.0, "ready")
    assert prop.advance(7) == 7
    assert (prop.step, prop.status) == (7, "ready")
    assert prop.time == pytest.approx(0.7)
    assert np.abs(prop.psi - _plain_strang(PSI0, 7, 0.1)).max() < 1e-12
    with pytest.raises(ValueError, match="whole number"):
        prop.advance(2.5)


def test_a_failure_inside_advance_marks_the_state_broken():
    prop = Propagator(GRID, V, 1.0, 1.0, 0.1)
    prop.set_state(PSI0)

    def boom(buf, k):
        raise RuntimeError("sampler broke")

    with pytest.raises(RuntimeError):
        prop.advance(5, 2, boom)
    assert prop.status == "failed"
    with pytest.raises(ValueError, match="no true state"):
        prop.advance(1)


def test_samples_follow_the_absolute_step_comb():
    prop = Propagator(GRID, V, 1.0, 1.0, 0.1)
    prop.set_state(PSI0, step=5)
    seen = []
    prop.advance(10, 4, lambda buf, k: seen.append(k))
    assert seen == [8, 12] and prop.step == 15


def test_a_stop_request_leaves_a_true_state_and_resuming_continues_it():
    prop = Propagator(GRID, V, 1.0, 1.0, 0.1)
    prop.check_every = 6
    prop.set_state(PSI0)
    asked = []

    def stop():
        asked.append(prop.step)
        return len(asked) == 3

    done = prop.advance(40, 0, None, stop)
    assert done == 18 and prop.status == "stopped" and prop.step == 18
    assert np.abs(prop.psi - _plain_strang(PSI0, 18, 0.1)).max() < 1e-12
    assert prop.advance(22) == 22 and prop.status == "ready"
    assert np.abs(prop.psi - _plain_strang(PSI0, 40, 0.1)).max() < 1e-12


def test_stop_checks_bound_the_work_between_them():
    for points in (64, 4096, 1 << 16, 1 << 22):
        every = max(1, propagate.CHECK_POINT_STEPS // points)
        assert every * points <= max(propagate.CHECK_POINT_STEPS, points)
    assert Propagator(GRID, V, 1.0, 1.0, 0.1).check_every * 256 <= propagate.CHECK_POINT_STEPS


def test_every_registered_scheme_follows_the_rules():
    for name, scheme in SCHEMES.items():
        w = scheme.drifts
        assert sum(w) == pytest.approx(1.0, abs=1e-14), name
        assert w == tuple(reversed(w)), name
        assert scheme.order % 2 == 0 and scheme.order >= 2
    assert propagate.ORDER == {"strang": 2, "yoshida4": 4}


@pytest.mark.parametrize("bad, why", [
    (Scheme((0.5, 0.6), 2), "sum to"),
    (Scheme((0.2, 0.8), 2), "both ways"),
    (Scheme((), 2), "at least one"),
    (Scheme((1.0,), 3), "even"),
])
def test_a_scheme_breaking_the_rules_is_refused(bad, why):
    with pytest.raises(ValueError, match=why):
        propagate._check_scheme("bad", bad)


def test_closing_kick_turns_the_sampled_buffer_into_psi():
    prop = Propagator(GRID, V, 1.0, 1.0, 0.1)
    prop.set_state(PSI0)
    got = {}
    prop.advance(6, 3, lambda buf, k: got.__setitem__(k, buf * prop.closing_kick))
    for k, state in got.items():
        assert np.abs(state - _plain_strang(PSI0, k, 0.1)).max() < 1e-12
