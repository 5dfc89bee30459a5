"""The split-operator propagator against published exact results (PHYSICS §2–4)."""
import math

import numpy as np
import pytest

from sojourn.model import packets
from sojourn.build import build
from sojourn.model.grid import Grid
from sojourn.engine.propagate import SCHEMES, Propagator
from sojourn.engine.sampler import Sampler
from sojourn.engine.observables import Detectors, probability, window
from sojourn.store import RunFile
from sojourn.config.scenario import loads


def width_and_centre(x, psi, dx):
    density = np.abs(psi) ** 2
    total = density.sum() * dx
    centre = (x * density).sum() * dx / total
    return math.sqrt(((x - centre) ** 2 * density).sum() * dx / total), centre


def test_free_spreading(run_scenario):
    # source: σ(t) = σ√(1 + (ħt/2mσ²)²), D. J. Griffiths, Introduction to Quantum Mechanics,
    # 2nd ed., Problem 2.22; Cohen-Tannoudji, Diu, Laloë, Quantum Mechanics, Complement G_I
    setup, path = run_scenario("""
        units: atomic
        grid: {span: [-300.0, 300.0], points: 2048}
        packet: {center: -100.0, width: 5.0, wavenumber: 1.0}
        evolve: {duration: 100.0, dt: 0.05}
        record: {every: 25.0}
    """)
    with RunFile(path) as rf:
        for t, psi in rf.snapshots():
            width, centre = width_and_centre(rf.x, psi, setup.grid.dx)
            assert width == pytest.approx(5.0 * math.sqrt(1 + (t / (2 * 25.0)) ** 2), rel=1e-9)
            assert centre == pytest.approx(-100.0 + t, abs=1e-8)


def test_displaced_ground_state_oscillates_rigidly(run_scenario):
    # source: a displaced ground-state Gaussian (σ² = ħ/2mω) in V = ½mω²(x−a)² keeps its
    # shape and its centre follows a + (x₀−a)cos ωt (Cohen-Tannoudji et al., Complement G_V)
    omega = 0.02  # σ = 5 ⇒ ω = ħ/(2mσ²) = 0.02
    setup, path = run_scenario(f"""
        units: atomic
        grid: {{span: [-100.0, 100.0], points: 512}}
        potential:
          - harmonic: {{center: 2.0, omega: {omega}}}
        packet: {{center: 32.0, width: 5.0, wavenumber: 0.0}}
        evolve: {{duration: {2 * math.pi / omega:.10f}, dt: 0.05}}
        record: {{every: 15.0}}
    """)
    with RunFile(path) as rf:
        assert len(rf) > 20
        for t, psi in rf.snapshots():
            width, centre = width_and_centre(rf.x, psi, setup.grid.dx)
            assert centre == pytest.approx(2.0 + 30.0 * math.cos(omega * t), abs=1e-4)
            assert width == pytest.approx(5.0, rel=1e-5)


def test_norm_conserved_without_absorber():
    # source: the split-operator step is unitary for real V (Feit, Fleck & Steiger,
    # J. Comput. Phys. 47, 412 (1982)); norm to round-off over 10⁴ steps
    grid = Grid(-300.0, 300.0, 1024)
    V = np.where(grid.x > 0, 1.0, 0.0)
    prop = Propagator(grid, V, 1.0, 1.0, 0.05)
    prop.set_state(packets.gaussian(grid.x, -100.0, 10.0, 1.0))
    before = np.vdot(prop.psi, prop.psi).real
    prop.advance(10_000)
    assert abs(np.vdot(prop.psi, prop.psi).real / before - 1) < 1e-10


@pytest.mark.parametrize("scheme", ["strang", "yoshida4"])
def test_observed_order_of_convergence(scheme):
    # source: Strang splitting is second order (Feit, Fleck & Steiger 1982); the triple
    # jump is fourth order (H. Yoshida, Phys. Lett. A 150, 262 (1990))
    grid = Grid(-100.0, 100.0, 512)
    V = 0.5 * np.exp(-(grid.x / 3.0) ** 2 / 2)
    psi0 = packets.gaussian(grid.x, -20.0, 4.0, 1.0)
    duration = 20.0

    def final(dt):
        prop = Propagator(grid, V, 1.0, 1.0, dt, scheme)
        prop.set_state(psi0)
        prop.advance(int(round(duration / dt)))
        return prop.psi.copy()

    exact = final(0.5 / 256)
    steps = [0.5, 0.25, 0.125]
    errors = [np.linalg.norm(final(dt) - exact) * math.sqrt(grid.dx) for dt in steps]
    orders = [math.log2(a / b) for a, b in zip(errors, errors[1:])]
    assert all(abs(p - SCHEMES[scheme].order) < 0.25 for p in orders), (errors, orders)


STEP = """
units: atomic
grid: {span: [-600.0, 600.0], points: 2048}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -200.0, width: 20.0, energy: 0.5}
evolve: {duration: 450.0, dt: 0.05}
absorber: {width: 80.0}
record: {every: 50.0}
"""


def test_packet_below_step_is_reflected_completely(run_scenario):
    # source: below a step |r| = 1, no current beyond it (Griffiths 2nd ed., Problem 2.34;
    # Cohen-Tannoudji et al., Complement H_I)
    setup, path = run_scenario(STEP)
    assert setup.grid_phase < math.pi
    with RunFile(path) as rf:
        o = rf.observables()
    assert o["P_right"][-1] + o["absorbed_right"][-1] < 1e-6
    assert o["P_left"][-1] + o["absorbed_left"][-1] == pytest.approx(1.0, abs=1e-6)


def spectrum_average(f, k0, sigma, n=4001):
    # |ψ̃₀(k)|² of the Gaussian of PHYSICS §2: normal in k with σ_k = 1/(2σ)
    sigma_k = 1 / (2 * sigma)
    k = np.linspace(k0 - 8 * sigma_k, k0 + 8 * sigma_k, n)
    w = np.exp(-((k - k0) ** 2) / (2 * sigma_k ** 2))
    return float(np.sum(w * f(k)) / np.sum(w))


def barrier_T(k, V0=1.0, a=1.0):
    # source: rectangular barrier, Griffiths 2nd ed., Problem 2.33 (width a here)
    E = k ** 2 / 2
    kappa = np.sqrt(2 * (V0 - E + 0j))  # ħ = m = 1
    return np.real(1 / (1 + V0 ** 2 * np.abs(np.sinh(kappa * a)) ** 2 / (4 * E * np.abs(V0 - E))))


@pytest.mark.parametrize("absorber", [False, True])
def test_barrier_transmission_matches_spectrum_averaged_closed_form(run_scenario, absorber):
    # source: T = [1 + V₀² sinh²(κa)/(4E(V₀−E))]⁻¹ (Griffiths 2nd ed., Problem 2.33),
    # averaged over the packet's momentum distribution
    text = f"""
        units: atomic
        grid: {{span: [-350.0, 350.0], points: 4096}}
        potential:
          - barrier: {{start: 0.0, end: 1.0, height: 1.0}}
        packet: {{center: -150.0, width: 20.0, energy: 0.5}}
        evolve: {{duration: {500.0 if absorber else 300.0}, dt: 0.01}}
        record: {{every: 30.0}}
        measure: {{reference: 0.5}}
    """ + ("    absorber: {width: 100.0}\n" if absorber else "")
    setup, path = run_scenario(text)
    with RunFile(path) as rf:
        o = rf.observables()
    T_theory = spectrum_average(barrier_T, 1.0, 20.0)
    T_run = o["P_right"][-1] + o["absorbed_right"][-1]
    R_run = o["P_left"][-1] + o["absorbed_left"][-1]
    assert T_run == pytest.approx(T_theory, abs=1e-3)
    assert R_run == pytest.approx(1 - T_theory, abs=1e-3)
    if absorber:  # by the end both parts have entered the layers
        assert o["absorbed_left"][-1] > 0.5 * (1 - T_theory)


def into_left_layer(width, duration):
    """A free packet sent left into the absorbing layer; returns (setup, sampler, ψ(end))."""
    setup = build(loads(f"""
        units: atomic
        grid: {{span: [-400.0, 400.0], points: 2048}}
        packet: {{center: -150.0, width: 20.0, energy: 0.5, direction: left}}
        evolve: {{duration: {duration}, dt: 0.05}}
        absorber: {{width: {width}}}
    """, "a.yaml"))
    sampler = Sampler(setup)
    prop = Propagator(setup.grid, setup.V, 1.0, 1.0, setup.dt, absorber=setup.W)
    prop.set_state(setup.psi0())
    prop.advance(setup.steps, setup.sample_steps, sampler)
    return setup, sampler, prop.psi


def test_absorbing_layer_reflects_little():
    # common practice, no source: a smooth complex absorbing ramp (Riss & Meyer,
    # J. Chem. Phys. 105, 1409 (1996)) should return < 1e-4 of a packet at its energies
    setup, _, psi = into_left_layer(100.0, 500.0)
    assert np.vdot(psi, psi).real * setup.grid.dx < 1e-4


def test_absorbed_probability_stays_on_its_side():
    # a packet entering the left layer must not cross it into the right one through the
    # periodic edge: each side's absorption is then its own (R = P_left + absorbed_left)
    _, sampler, _ = into_left_layer(60.0, 600.0)
    assert sampler.raw_absorbed[1] < 1e-6 * sampler.raw_absorbed[0]
    # the raw sampled integral (rectangle rule); recorded values are rescaled to 1 − norm
    assert sampler.raw_absorbed[0] == pytest.approx(1.0, abs=1e-2)


def test_detector_flux_on_a_ramp_is_the_full_step_current():
    # On a slope the sampled buffer is half a kick e^{-iVΔt/2ħ} short of ψ(t); that
    # phase adds −(Δt/2m)V′|ψ|² to the current (J = (ħ/m)Im ψ*∂ψ, derived in the
    # sampler's docstring). Checked three ways, on V = −FL·tanh(x/L) with V′(0) = −F:
    # (1) the sampled flux equals the flux of ψ(t) from a separate, unsampled run;
    # (2) continuity, dP_right/dt = J(x_d) (the probability beyond the detector,
    #     independent of the stencil; central differences in t, error O(Δt²));
    # (3) the uncorrected buffer's flux differs by exactly (Δt/2m)V′|ψ(x_d)|².
    grid = Grid(-200.0, 200.0, 1024)
    F, L, dt = 0.1, 10.0, 0.05
    V = -F * L * np.tanh(grid.x / L)
    psi0 = packets.gaussian(grid.x, -60.0, 10.0, 1.0)
    prop = Propagator(grid, V, 1.0, 1.0, dt)
    prop.set_state(psi0)
    detector = Detectors(grid, [0.0], 1.0, 1.0)
    on_buffer = detector.with_factor(prop.closing_kick)   # what the sampler does
    beyond = window(grid, 0.0, grid.right + grid.dx)
    flux, raw, P, rho = {}, {}, {}, {}

    def sample(buf, k):
        full = buf * prop.closing_kick
        flux[k] = on_buffer.flux(buf)[0]
        raw[k] = detector.flux(buf)[0]
        P[k] = probability(full, grid.dx, beyond)
        rho[k] = abs(full[grid.index(0.0)]) ** 2

    prop.advance(1600, 1, sample)
    scale = max(abs(j) for j in flux.values())
    assert scale > 0.03                              # the packet crossed the detector
    for k in (800, 1200, 1500):                      # (1)
        other = Propagator(grid, V, 1.0, 1.0, dt)
        other.set_state(psi0)
        other.advance(k)
        assert detector.flux(other.psi)[0] == pytest.approx(flux[k], abs=1e-12 * scale)
    steps = range(2, 1600)
    continuity = max(abs(flux[k] - (P[k + 1] - P[k - 1]) / (2 * dt)) for k in steps)
    assert continuity < 2e-4 * scale                 # (2); measured 4.5e-5
    # the size of what is corrected: (Δt/2)·F·max|ψ|²/max J = 1.3e-3 here, 6× the bound
    assert dt / 2 * F * max(rho.values()) > 5 * 2e-4 * scale
    assert max(abs(raw[k] - flux[k] - dt / 2 * (-F) * rho[k]) for k in flux) < 1e-8 * scale  # (3)
