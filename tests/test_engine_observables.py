"""Observables against closed forms: the current of a plane wave, the moments of
a Gaussian, probabilities in windows, finite-difference weights."""
import math

import numpy as np
import pytest
from scipy.special import erf

from sojourn.engine import observables as obs
from sojourn.model import packets
from sojourn.model.grid import Grid


def test_fornberg_weights_are_the_central_differences():
    # source: B. Fornberg, Math. Comp. 51, 699 (1988), Table 1 (3-point stencil)
    w = obs.fornberg_weights(0.0, np.array([-1.0, 0.0, 1.0]), 2)
    assert np.allclose(w, [[0, 1, 0], [-0.5, 0, 0.5], [1, -2, 1]], atol=1e-14)


@pytest.mark.parametrize("hbar, mass", [(1.0, 1.0), (0.6582, 5.686)])
def test_plane_wave_current(hbar, mass):
    # source: J = (ħ/m)Im(ψ*ψ') = ħk|A|²/m for ψ = A e^{ikx} (Griffiths, Introduction
    # to Quantum Mechanics, 2nd ed., Problem 2.19); k fits the periodic box
    g = Grid(-50.0, 50.0, 1024)
    k, amplitude = 2 * math.pi * 37 / g.length, 0.3 - 0.4j
    psi = amplitude * np.exp(1j * k * g.x)
    positions = [-31.7, 0.0, 12.3456, 49.0]   # off the grid points, and near the edge
    detectors = obs.Detectors(g, positions, hbar, mass)
    expected = hbar * k / mass * abs(amplitude) ** 2
    assert np.allclose(detectors.flux(psi), expected, rtol=1e-10)
    # a wave moving left carries the opposite current
    assert np.allclose(detectors.flux(psi.conjugate()), -expected, rtol=1e-10)


def test_detector_nodes_hold_all_it_reads():
    g = Grid(-50.0, 50.0, 512)
    detectors = obs.Detectors(g, [-20.0, -19.9, 30.0], 1.0, 1.0)
    nodes = detectors.nodes
    assert nodes.dtype.kind == "i" and np.all(np.diff(nodes) > 0)
    assert len(nodes) <= 3 * 2 * obs.STENCIL_HALF_WIDTH
    psi = packets.gaussian(g.x, -20.0, 3.0, 1.3) + packets.gaussian(g.x, 30.0, 2.0, -0.7)
    known = np.zeros_like(psi)
    known[nodes] = psi[nodes]
    assert np.array_equal(detectors.flux(known), detectors.flux(psi))


def test_a_factor_is_folded_into_the_stencils():
    g = Grid(-50.0, 50.0, 512)
    detectors = obs.Detectors(g, [3.3], 1.0, 1.0)
    psi = packets.gaussian(g.x, 0.0, 4.0, 1.0)
    phase = np.exp(-0.01j * g.x ** 2)
    closed = detectors.with_factor(phase)
    assert closed.flux(psi) == pytest.approx(detectors.flux(psi * phase), rel=1e-13)
    assert closed.flux(psi)[0] != pytest.approx(detectors.flux(psi)[0], rel=1e-3)
    assert np.array_equal(closed.nodes, detectors.nodes)


def test_moments_of_a_gaussian():
    # source: for ψ₀ = (2πσ²)^(-1/4) e^{-(x−x₀)²/4σ² + ik₀x}: ⟨x⟩ = x₀, ⟨p⟩ = ħk₀,
    # ⟨T⟩ = ħ²(k₀² + 1/4σ²)/2m; in V = ½mω²x², ⟨V⟩ = ½mω²(x₀² + σ²)
    # (Cohen-Tannoudji, Diu, Laloë, Quantum Mechanics, Complement G_I)
    hbar, mass, omega = 1.3, 2.0, 0.05
    x0, sigma, k0 = -12.0, 4.0, 1.1
    g = Grid(-100.0, 100.0, 2048)
    V = 0.5 * mass * omega ** 2 * g.x ** 2
    m = obs.moments(packets.gaussian(g.x, x0, sigma, k0), g, V, hbar, mass)
    assert m["norm"] == pytest.approx(1.0, abs=1e-12)
    assert m["x_mean"] == pytest.approx(x0, abs=1e-10)
    assert m["p_mean"] == pytest.approx(hbar * k0, rel=1e-10)
    kinetic = hbar ** 2 * (k0 ** 2 + 1 / (4 * sigma ** 2)) / (2 * mass)
    potential = 0.5 * mass * omega ** 2 * (x0 ** 2 + sigma ** 2)
    assert m["energy"] == pytest.approx(kinetic + potential, rel=1e-10)


def test_moments_of_a_zero_state_are_zero():
    g = Grid(-1.0, 1.0, 64)
    assert obs.moments(np.zeros(64, complex), g, np.zeros(64), 1.0, 1.0) == {
        "norm": 0.0, "x_mean": 0.0, "p_mean": 0.0, "energy": 0.0}


def test_window_of_a_constant_density_is_the_interval_length():
    # the midpoint rule with fractional end cells integrates a constant exactly
    g = Grid(0.0, 10.0, 100)
    psi = np.ones(100, complex)
    for a, b in [(2.0, 7.0), (2.03, 6.98), (4.51, 4.54), (-5.0, 3.0), (9.5, 20.0)]:
        # cell j is [x_j − Δx/2, x_j + Δx/2]: the cells cover [left − Δx/2, right − Δx/2]
        expected = min(b, g.right - g.dx / 2) - max(a, g.left - g.dx / 2)
        assert obs.probability(psi, g.dx, obs.window(g, a, b)) == pytest.approx(expected, abs=1e-12)
    assert obs.window(g, 5.0, 5.0) is None and obs.window(g, 30.0, 40.0) is None
    assert obs.probability(psi, g.dx, None) == 0.0


def test_window_of_a_gaussian_against_erf():
    # ∫_a^b |ψ₀|² dx = ½[erf((b−x₀)/√2σ) − erf((a−x₀)/√2σ)]; the midpoint rule errs by O(Δx²)
    g = Grid(-50.0, 50.0, 4000)
    psi = packets.gaussian(g.x, 1.0, 3.0, 2.0)
    a, b = -2.123, 4.567
    exact = 0.5 * (erf((b - 1.0) / (math.sqrt(2) * 3.0)) - erf((a - 1.0) / (math.sqrt(2) * 3.0)))
    assert obs.probability(psi, g.dx, obs.window(g, a, b)) == pytest.approx(exact, abs=1e-5)


def test_reductions_cover_every_axis():
    rng = np.random.default_rng(5)
    values = rng.standard_normal((2, 50)) + 1j * rng.standard_normal((2, 50))
    assert obs.sum_abs2(values) == pytest.approx(float(np.sum(np.abs(values) ** 2)), rel=1e-13)
    g = Grid(0.0, 5.0, 50)
    where = obs.window(g, 1.0, 3.0)
    both = obs.probability(values, g.dx, where)
    assert both == pytest.approx(sum(obs.probability(v, g.dx, where) for v in values), rel=1e-13)
