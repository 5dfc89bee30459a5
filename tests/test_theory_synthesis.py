"""Exact time-dependent synthesis from stationary states (PHYSICS §5)."""
from __future__ import annotations

import numpy as np
import pytest

from sojourn.theory import closed_forms as cf
from sojourn.theory import tables
from sojourn.model import packets
from sojourn.model.grid import Grid
from sojourn import theory as th
from sojourn.config.scenario import loads


def predict(sc, **kw):
    """packet_prediction with the numbers a run of `sc` uses."""
    i = tables.scenario_inputs(sc)
    return th.packet_prediction(i.potential, i.packet, hbar=i.hbar, mass=i.mass,
                                reference=i.reference, region=i.region, **kw)


def synth(sc, times, x=None, **kw):
    """synthesize with the numbers a run of `sc` uses (x: its grid by default)."""
    i = tables.scenario_inputs(sc)
    x = Grid.from_spec(sc.grid).x if x is None else x
    return th.synthesize(i.potential, i.packet, times, x, hbar=i.hbar, mass=i.mass,
                         reference=i.reference, **kw)


def scenario(potential: str, E0=0.5, center=-200.0, direction="right", points=4096,
             span=(-600.0, 600.0)):
    return loads(f"""
units: atomic
grid: {{span: [{span[0]}, {span[1]}], points: {points}}}
potential: {potential}
packet: {{center: {center}, width: 20.0, energy: {E0}, direction: {direction}}}
evolve: {{duration: 300.0}}
""")


STEP = "[{step: {at: 0.0, height: 1.0}}]"
BARRIER = "[{barrier: {start: 0.0, end: 2.0, height: 1.0}}]"


def free_gaussian(x, t, x0=-200.0, s=20.0, k0=1.0):
    """Exact free evolution of ψ₀ (ħ = m = 1): the Gaussian integral done in closed form.
    source: Cohen-Tannoudji, Diu, Laloë, Complement G_I (free Gaussian packet)."""
    b = t / 2
    a = s ** 2 + 1j * b
    c = (2 * np.pi * s ** 2) ** -0.25 * 2 * s * np.sqrt(np.pi) / (2 * np.pi)
    return c * np.exp(1j * k0 * x0) * np.sqrt(np.pi / a) * np.exp(
        -(x - x0 - k0 * t) ** 2 / (4 * a) + 1j * k0 * (x - x0) - 1j * b * k0 ** 2)


def test_initial_state_is_the_normalised_gaussian():
    sc = scenario(STEP)
    x = Grid.from_spec(sc.grid).x
    psi = synth(sc, [0.0])[0]
    assert np.max(np.abs(psi - packets.gaussian(x, sc.packet.center, sc.packet.width, tables.scenario_inputs(sc).packet.k0))) < 1e-10
    assert np.sum(np.abs(psi) ** 2) * (x[1] - x[0]) == pytest.approx(1.0, abs=1e-10)


def test_free_potential_reproduces_free_spreading():
    # source: Griffiths 2nd ed., Problem 2.22: σ(t) = σ√(1 + (ħt/(2mσ²))²)
    sc = scenario("[]")
    x = Grid.from_spec(sc.grid).x
    times = [0.0, 150.0, 300.0]
    psi = synth(sc, times)
    dx = x[1] - x[0]
    for row, t in zip(psi, times):
        assert np.max(np.abs(row - free_gaussian(x, t))) < 1e-10
        w = np.abs(row) ** 2 * dx
        mean = np.sum(x * w)
        width = np.sqrt(np.sum((x - mean) ** 2 * w))
        assert mean == pytest.approx(-200.0 + t, abs=1e-8)
        assert width == pytest.approx(20.0 * np.sqrt(1 + (t / (2 * 400.0)) ** 2), rel=1e-9)


@pytest.mark.parametrize("pot", [STEP, BARRIER])
def test_norm_is_conserved(pot):
    # unitarity (common practice, no source): the synthesized state keeps its norm
    sc = scenario(pot, points=8192)
    x = Grid.from_spec(sc.grid).x
    psi = synth(sc, [0.0, 100.0, 300.0, 420.0])
    norms = np.sum(np.abs(psi) ** 2, axis=1) * (x[1] - x[0])
    assert np.allclose(norms, 1.0, atol=1e-6)


def test_step_reflected_centroid_matches_the_closed_form_phase():
    # source: Griffiths 2nd ed., Problem 2.34 (r = −e^{2iδ}) and PHYSICS §5: the outgoing
    # centroid lags the mirrored free packet by ⟨dφ/dk⟩_w, exactly
    sc = scenario(STEP)
    x = Grid.from_spec(sc.grid).x
    t = 400.0
    psi = synth(sc, [t])[0]
    w = np.abs(psi) ** 2
    left = x < 0
    centroid = np.sum(x[left] * w[left]) / np.sum(w[left])
    # ⟨dφ/dk⟩ and ⟨v⟩ over the Gaussian |ψ̃₀|², with φ from the closed form
    k0, sk = 1.0, 1 / 40
    k = np.linspace(k0 - 10 * sk, k0 + 10 * sk, 20001)
    g = np.exp(-0.5 * ((k - k0) / sk) ** 2)
    phase = np.unwrap(np.angle(cf.step_reflection(k ** 2 / 2, 1.0)))
    dphi_dk = np.gradient(phase, k)
    shift = np.trapezoid(g * dphi_dk, k) / np.trapezoid(g, k)
    vbar = np.trapezoid(g * k, k) / np.trapezoid(g, k)
    predicted = -(-200.0) - vbar * t + shift        # mirror image about x_r = 0, then the lag
    assert centroid == pytest.approx(predicted, abs=1e-6)
    pred = predict(sc).reflection
    assert pred.centroid_shift == pytest.approx(shift, rel=1e-7)


def test_barrier_transmitted_probability_matches_packet_T():
    # source: Griffiths 2nd ed., Problem 2.33 (T(E)), averaged over the packet's spectrum
    sc = scenario(BARRIER, points=8192)
    x = Grid.from_spec(sc.grid).x
    psi = synth(sc, [420.0])[0]
    dx = x[1] - x[0]
    right = np.sum(np.abs(psi[x > 2.0]) ** 2) * dx
    k0, sk = 1.0, 1 / 40
    k = np.linspace(k0 - 10 * sk, k0 + 10 * sk, 20001)
    g = np.exp(-0.5 * ((k - k0) / sk) ** 2)
    T = np.trapezoid(g * cf.barrier_transmission_probability(k ** 2 / 2, 1.0, 2.0), k) \
        / np.trapezoid(g, k)
    assert right == pytest.approx(T, rel=1e-6)
    assert predict(sc).transmission.probability == pytest.approx(T, rel=1e-9)


def test_left_moving_packet_is_the_mirror_image():
    # common practice, no source: the problem mirrored in x gives the mirrored solution
    right = scenario(BARRIER, center=-200.0)
    mirrored = scenario("[{barrier: {start: -2.0, end: 0.0, height: 1.0}}]", center=200.0,
                        direction="left", span=(-600.0, 600.0))
    x = np.linspace(-500.0, 500.0, 2001)
    a = synth(right, [0.0, 250.0], x)
    b = synth(mirrored, [0.0, 250.0], -x)
    assert np.max(np.abs(a - b)) < 1e-10


def test_stationary_synthesis_at_late_times_stays_accurate_with_more_nodes():
    # the automatic k-spacing is converged: doubling the nodes changes nothing
    sc = scenario(BARRIER)
    x = np.linspace(-500.0, 500.0, 801)
    a = synth(sc, [300.0], x)
    n = synth(sc, [300.0], x, nodes=4000)
    assert np.max(np.abs(a - n)) < 1e-10
