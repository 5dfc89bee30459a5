"""Stationary scattering theory against published closed forms and facts of
the trade (PHYSICS §4–5). ħ = m = 1 unless a test says otherwise."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import constants as C
from scipy.integrate import solve_ivp
from scipy.optimize import brentq, minimize_scalar

from sojourn.theory import closed_forms as cf
from sojourn.theory import tables
from sojourn.model import potentials as P
from sojourn import theory as th
from sojourn.config.scenario import loads


def predict(sc, **kw):
    """packet_prediction with the numbers a run of `sc` uses."""
    i = tables.scenario_inputs(sc)
    return th.packet_prediction(i.potential, i.packet, hbar=i.hbar, mass=i.mass,
                                reference=i.reference, region=i.region, **kw)


def scatter_sc(sc, E):
    """scatter with the scenario's ħ, potential and packet direction."""
    return th.scatter(sc.build_potential(), E, hbar=sc.hbar, direction=sc.packet.direction)


def pot(*terms, mass=1.0):
    return P.Potential(list(terms), mass=mass)


def scatter(potential, E, **kw):
    return th.scatter(potential, np.asarray(E, dtype=float), hbar=1.0, **kw)


# ---------------------------------------------------------------------------------------
# closed forms, six or more energies each, to 1e-6 relative


def test_step_amplitude_below_and_above_the_top():
    # source: Griffiths, Introduction to QM, 2nd ed., Problem 2.34 (r = −e^{2iδ} below,
    # (k−q)/(k+q) above); Cohen-Tannoudji, Complement H_I
    E = np.array([0.05, 0.2, 0.4, 0.6, 0.8, 0.95, 1.3, 2.0, 5.0])
    s = scatter(pot(P.Step(at=0.0, height=1.0)), E)
    assert np.max(np.abs(s.r - cf.step_reflection(E, 1.0))) < 1e-12
    above = E > 1
    t_ref = cf.step_transmission(E[above], 1.0)
    assert np.allclose(s.t[above], t_ref, rtol=1e-12, atol=0)
    assert np.all(s.T[~above] == 0) and np.all(s.R[~above] == pytest.approx(1, abs=1e-14))


def test_step_delay_is_hbar_over_sqrt_E_times_V0_minus_E():
    # source: PHYSICS §5 (τ_R = 2ħ dδ/dE = ħ/√(E(V₀−E)), from Griffiths Problem 2.34's r);
    # minimum 2ħ/V₀ at E = V₀/2
    E = np.array([0.03, 0.1, 0.25, 0.5, 0.7, 0.9, 0.99])
    s = scatter(pot(P.Step(at=0.0, height=1.0)), E)
    assert np.allclose(s.delay_reflection, cf.step_delay(E, 1.0), rtol=1e-9, atol=0)
    assert s.delay_reflection[3] == pytest.approx(2.0, rel=1e-12)


def test_step_delay_with_mirror_elsewhere_adds_the_free_round_trip():
    # common practice, no source: moving the reference point from the step to x_r < 0
    # adds the free round trip 2(0 − x_r)/v to the reflection delay
    E = np.array([0.2, 0.5, 0.8])
    s = scatter(pot(P.Step(at=0.0, height=1.0)), E, x_r=-3.0)
    v = np.sqrt(2 * E)
    assert np.allclose(s.delay_reflection, cf.step_delay(E, 1.0) + 2 * 3.0 / v, rtol=1e-12)


def test_rectangular_barrier_transmission_below_and_above():
    # source: Griffiths 2nd ed., Problem 2.33 (his barrier is 2a wide)
    E = np.array([0.1, 0.3, 0.5, 0.7, 0.9, 1.1, 1.5, 2.5, 4.0])
    V = pot(P.Barrier(start=0.0, end=3.0, height=1.0))
    s = scatter(V, E)
    T_ref = cf.barrier_transmission_probability(E, 1.0, 3.0)
    assert np.allclose(s.T, T_ref, rtol=1e-10, atol=0)
    assert np.max(np.abs(s.R + s.T - 1)) < 1e-12


def test_barrier_amplitude_formula_matches_the_transmission_probability():
    # the amplitude (from memory, standard; Cohen-Tannoudji Complement H_I) must
    # reproduce Griffiths Problem 2.33's T; then it checks the solver's phase
    E = np.array([0.1, 0.3, 0.5, 0.9, 1.5, 3.0])
    t = cf.barrier_transmission(E, 1.0, 2.0)
    assert np.allclose(np.abs(t) ** 2, cf.barrier_transmission_probability(E, 1.0, 2.0), rtol=1e-12)
    s = scatter(pot(P.Barrier(start=0.0, end=2.0, height=1.0)), E)
    assert np.allclose(s.t, t, rtol=1e-11, atol=0)


def test_opaque_barrier_kappa_a_40():
    # source: Griffiths 2nd ed., Problem 2.33; PHYSICS §4 (κa = 40 gives T ≈ 7e-35)
    V = pot(P.Barrier(start=0.0, end=40.0, height=1.0))
    E = np.array([0.5])
    s = scatter(V, E)
    T_ref = cf.barrier_transmission_probability(E, 1.0, 40.0)
    assert 6e-35 < T_ref[0] < 8e-35
    assert s.T[0] == pytest.approx(T_ref[0], rel=1e-6)
    assert abs(s.R[0] + s.T[0] - 1) < 1e-12


def test_very_opaque_barrier_stays_accurate_to_1e_minus_40_and_below():
    # source: Griffiths 2nd ed., Problem 2.33 (a naive transfer product fails from κa ≈ 10)
    E = np.array([0.2, 0.5, 0.8])
    for a in (30.0, 50.0, 80.0):
        s = scatter(pot(P.Barrier(start=0.0, end=a, height=1.0)), E)
        assert np.allclose(s.T, cf.barrier_transmission_probability(E, 1.0, a), rtol=1e-9, atol=0)
    assert s.T.max() < 1e-40


def test_delta_barrier():
    # source: Griffiths 2nd ed., Sec. 2.5.2 (T = 1/(1 + mα²/(2ħ²E)))
    E = np.array([0.05, 0.2, 0.5, 1.0, 2.0, 7.0])
    for alpha in (0.3, 1.7):
        s = scatter(pot(P.DeltaLike(at=0.0, strength=alpha)), E)
        assert np.allclose(s.T, cf.delta_transmission_probability(E, alpha), rtol=1e-12)
        r_ref, t_ref = cf.delta_amplitudes(E, alpha)
        assert np.allclose(s.r, r_ref, rtol=1e-12) and np.allclose(s.t, t_ref, rtol=1e-12)


def test_fermi_step_reflection_above_the_top():
    # source: Landau & Lifshitz, QM, §25, problems: R = [sinh(πa(k−q))/sinh(πa(k+q))]²
    E = np.array([1.05, 1.2, 1.5, 2.0, 3.0, 5.0])
    s = scatter(pot(P.SmoothStep(at=0.0, height=1.0, width=0.5)), E)
    R_ref = cf.fermi_step_reflection_probability(E, 1.0, 0.5)
    assert np.allclose(s.R, R_ref, rtol=1e-6, atol=0)
    assert np.max(np.abs(s.R + s.T - 1)) < 1e-12


def test_sech2_barrier_transmission():
    # source: Landau & Lifshitz, QM, §25, problems (8mU₀a²/ħ² = 8 > 1 here)
    E = np.array([0.2, 0.5, 0.8, 1.0, 1.3, 2.0, 4.0])
    s = scatter(pot(P.Sech2(center=0.0, height=1.0, width=1.0)), E)
    T_ref = cf.sech2_barrier_transmission_probability(E, 1.0, 1.0)
    assert np.allclose(s.T, T_ref, rtol=1e-6, atol=0)


@pytest.mark.parametrize("lam", [1, pytest.param(2, marks=pytest.mark.slow),
                                 pytest.param(3, marks=pytest.mark.slow)])
def test_reflectionless_sech2_well(lam):
    # source: I. Kay & H. E. Moses, J. Appl. Phys. 27, 1503 (1956): R = 0 at every energy;
    # the transmission phase Π(k + in/a)/(k − in/a) is from memory (tested here)
    depth = cf.reflectionless_well_depth(lam, 1.0)
    E = np.array([0.02, 0.1, 0.4, 1.0, 2.5, 6.0])
    s = scatter(pot(P.Sech2(center=0.0, height=-depth, width=1.0)), E)
    assert np.all(s.R < 1e-16)
    assert np.allclose(s.T, 1.0, rtol=0, atol=1e-12)
    t_centre = s.t * np.exp(-1j * s.k_in * (s.x_t - s.x_r))   # both sides referenced at 0
    assert np.allclose(t_centre, cf.reflectionless_well_transmission(E, lam, 1.0), rtol=1e-8)


def test_non_integer_sech2_well_does_reflect():
    # source: Kay & Moses 1956: only integer λ is reflectionless (a test that can fail)
    depth = cf.reflectionless_well_depth(1, 1.0) * 1.3
    s = scatter(pot(P.Sech2(center=0.0, height=-depth, width=1.0)), [0.05, 0.2])
    assert np.all(s.R > 1e-4)


# ---------------------------------------------------------------------------------------
# delays


@pytest.mark.parametrize("kappa_a, expected", [(2, 1.92806), (5, 1.99982), (10, 2.00000)])
def test_hartman_saturation_of_the_entry_to_exit_phase_time(kappa_a, expected):
    # source: T. E. Hartman, J. Appl. Phys. 33, 3427 (1962); values of PHYSICS §5
    # (E = V₀/2, ħ = m = V₀ = 1, so κ = 1 and a = κa)
    s = scatter(pot(P.Barrier(start=0.0, end=float(kappa_a), height=1.0)), [0.5])
    assert s.x_r == 0.0 and s.x_t == kappa_a
    assert s.delay_transmission[0] == pytest.approx(expected, abs=6e-6)


def test_delay_with_reference_at_zero_and_unequal_levels():
    # source: PHYSICS §5: with t₀ referenced at x = 0, the entry-to-exit time is
    # ħ d(arg t₀)/dE + x_t/v′ − x_r/v (unequal levels: a step then a barrier)
    V = pot(P.Step(at=1.0, height=-0.3), P.Barrier(start=1.0, end=3.0, height=1.2))
    E = np.array([0.4, 0.6, 0.8])
    s = scatter(V, E)
    s0 = scatter(V, E, x_r=0.0, x_t=0.0)
    v, vp = np.sqrt(2 * E), np.sqrt(2 * (E + 0.3))
    assert np.allclose(s.delay_transmission, s0.delay_transmission + s.x_t / vp - s.x_r / v,
                       rtol=1e-10)


def _double_barrier(b=2.5, w=5.0, V0=1.0):
    return pot(P.Barrier(start=0.0, end=b, height=V0), P.Barrier(start=b + w, end=2 * b + w,
                                                                    height=V0))


def test_double_barrier_resonance_width_and_delay():
    # source: Breit & Wigner, Phys. Rev. 49, 519 (1936): at a resonance of width Γ (FWHM)
    # the phase rises by π and τ = 2ħ/Γ at the peak; symmetric barriers give T = 1
    # (resonant tunnelling: Tsu & Esaki, Appl. Phys. Lett. 22, 562 (1973))
    V = _double_barrier()
    E = np.linspace(0.05, 0.5, 4000)
    T = scatter(V, E, dwell=False).T
    guess = E[np.argmax(T)]
    res = minimize_scalar(lambda e: -scatter(V, [e], dwell=False).T[0],
                          bounds=(guess - 1e-3, guess + 1e-3), method="bounded",
                          options={"xatol": 1e-13})
    Er = res.x
    assert scatter(V, [Er]).T[0] == pytest.approx(1.0, abs=1e-8)

    def half(e):
        return scatter(V, [e], dwell=False).T[0] - 0.5
    lo = brentq(half, Er - 0.05, Er, xtol=1e-15)
    hi = brentq(half, Er, Er + 0.05, xtol=1e-15)
    gamma = hi - lo
    assert gamma / Er < 1e-2
    tau = scatter(V, [Er]).delay_transmission[0]
    assert tau == pytest.approx(2 / gamma, rel=1e-2)
    # the phase rises by about π across the resonance
    ph = scatter(V, np.linspace(Er - 20 * gamma, Er + 20 * gamma, 801)).phase_transmission
    assert ph[-1] - ph[0] == pytest.approx(np.pi, rel=0.1)


def test_dwell_time_of_an_opaque_barrier_beside_the_phase_time():
    # source: M. Büttiker, Phys. Rev. B 27, 6178 (1983), the dwell time of a rectangular
    # barrier below its top, written from memory:
    # τ_D = (mk/(ħκ))·[2κa(κ²−k²) + k₀² sinh(2κa)] / [4k²κ² + k₀⁴ sinh²(κa)], k₀² = 2mV₀/ħ²
    E, V0 = np.array([0.2, 0.5, 0.8]), 1.0
    for a in (0.5, 2.0, 6.0):
        s = scatter(pot(P.Barrier(start=0.0, end=a, height=V0)), E)
        k, kappa, k0sq = np.sqrt(2 * E), np.sqrt(2 * (V0 - E)), 2 * V0
        ref = (k / kappa) * (2 * kappa * a * (kappa ** 2 - k ** 2) + k0sq * np.sinh(2 * kappa * a)) \
            / (4 * k ** 2 * kappa ** 2 + k0sq ** 2 * np.sinh(kappa * a) ** 2)
        assert np.allclose(s.dwell, ref, rtol=1e-10)


# ---------------------------------------------------------------------------------------
# smooth potentials against an ODE integration


def _ode_amplitudes(V, E, x_r, x_t, left, right):
    """r, t by integrating ψ'' = 2(V − E)ψ from x_t (ψ = e^{ik'(x−x_t)}) back to x_r."""
    k = np.sqrt(2 * (E - left))
    kp = np.sqrt(2 * (E - right) + 0j)

    def rhs(x, y):
        return [y[1], 2 * (V(np.array([x]))[0] - E) * y[0]]
    sol = solve_ivp(rhs, (x_t, x_r), [1.0 + 0j, 1j * kp], method="DOP853", rtol=1e-12,
                    atol=1e-14)
    psi, dpsi = sol.y[0, -1], sol.y[1, -1]
    a = 0.5 * (psi + dpsi / (1j * k))      # incident amplitude at x_r
    b = 0.5 * (psi - dpsi / (1j * k))
    return b / a, 1 / a


@pytest.mark.parametrize("terms", [
    [P.Gaussian(center=0.0, height=0.8, width=1.5)],
    [P.Ramp(start=-2.0, end=2.0, height=-0.4), P.Gaussian(center=0.5, height=0.6, width=0.7)],
    [P.Expression(formula="0.5*exp(-x**2/2)*cos(x)")],
])
def test_sliced_potential_agrees_with_solve_ivp(terms):
    # source: scipy.integrate.solve_ivp (DOP853) as the independent reference (PHYSICS §4)
    V = P.Potential(terms, span=(-30.0, 30.0))
    left, right = V.levels()
    E = np.array([0.3, 0.7, 1.5])
    s = scatter(V, E)
    for i, e in enumerate(E):
        r, t = _ode_amplitudes(V, e, s.x_r, s.x_t, left, right)
        assert abs(s.r[i] - r) < 1e-8 * max(abs(r), 1e-3)
        assert abs(s.t[i] - t) < 1e-8 * abs(t)
    assert np.max(np.abs(s.R + s.T - 1)) < 1e-10


# ---------------------------------------------------------------------------------------
# packet-averaged predictions


def _step_scenario(E0, extra=""):
    return loads(f"""
units: atomic
grid: {{span: [-600.0, 600.0], points: 4096}}
potential:
  - step: {{at: 0.0, height: 1.0}}
packet: {{center: -200.0, width: 20.0, energy: {E0}}}
evolve: {{duration: 300.0}}
{extra}
""")


def test_packet_predictions_agree_at_half_the_step_height():
    # source: PHYSICS §5 (unit step, σ = 20): the three averages agree to 2e-6 at
    # E₀ = V₀/2, ⟨dφ/dk⟩/v₀ = 2.00252, Wigner 2.0
    p = predict(_step_scenario(0.5))
    r = p.reflection
    assert r.centroid_delay == pytest.approx(2.00252, abs=5e-6)
    assert r.wigner_delay == pytest.approx(2.0, rel=1e-12)
    vals = [r.centroid_delay, r.flux_delay, r.spectral_delay]
    assert (max(vals) - min(vals)) / r.flux_delay < 3e-6
    assert p.transmission is None and r.probability == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("E0, spread", [(0.1, 2.8e-3), (0.2, 1.2e-3), (0.8, 1.2e-3)])
def test_packet_predictions_differ_away_from_the_minimum(E0, spread):
    # source: PHYSICS §5: at 0.2 V₀ and 0.8 V₀ the averages differ by ~1.2e-3, at 0.1 V₀
    # by 2.8e-3 (ħ = m = V₀ = 1, σ = 20); the sign follows dτ/dE
    r = predict(_step_scenario(E0)).reflection
    rel = (r.centroid_delay - r.flux_delay) / r.flux_delay
    assert abs(rel) == pytest.approx(spread, rel=0.1)
    assert np.sign(rel) == (1 if E0 > 0.5 else -1)
    assert r.spectral_delay == pytest.approx(r.flux_delay, rel=1e-8)   # |r| = 1 in the band


def test_packet_prediction_first_order_bandwidth_correction():
    # common practice, no source: to first order in σ_k², centroid − flux = (dτ/dk)σ_k²/k₀
    E0 = 0.2
    p = predict(_step_scenario(E0))
    k0, sk = p.k0, p.sigma_k
    dk = 1e-4
    tau = cf.step_delay(np.array([(k0 - dk) ** 2 / 2, (k0 + dk) ** 2 / 2]), 1.0)
    slope = (tau[1] - tau[0]) / (2 * dk)
    diff = p.reflection.centroid_delay - p.reflection.flux_delay
    assert diff == pytest.approx(slope * sk ** 2 / k0, rel=2e-2)


# ---------------------------------------------------------------------------------------
# units


def test_lab_and_atomic_units_give_the_same_physics():
    # source: CODATA via scipy.constants (Bohr radius, Hartree energy, atomic time unit)
    a0_nm = C.physical_constants["Bohr radius"][0] * 1e9
    Eh_eV = C.physical_constants["Hartree energy in eV"][0]
    t_fs = C.physical_constants["atomic unit of time"][0] * 1e15
    lab = loads("""
units: lab
mass: 0.067
grid: {span: [-700.0, 300.0], points: 2048}
potential:
  - barrier: {start: 0.0, end: 3.0, height: 0.3}
  - barrier: {start: 8.0, end: 11.0, height: 0.3}
packet: {center: -250.0, width: 20.0, energy: 0.08}
evolve: {duration: 100.0}
""")
    atomic = loads(f"""
units: atomic
mass: 0.067
grid: {{span: [{-700 / a0_nm}, {300 / a0_nm}], points: 2048}}
potential:
  - barrier: {{start: 0.0, end: {3 / a0_nm}, height: {0.3 / Eh_eV}}}
  - barrier: {{start: {8 / a0_nm}, end: {11 / a0_nm}, height: {0.3 / Eh_eV}}}
packet: {{center: {-250 / a0_nm}, width: {20 / a0_nm}, energy: {0.08 / Eh_eV}}}
evolve: {{duration: 100.0}}
""")
    E_lab = np.array([0.05, 0.08, 0.12, 0.2])
    s_lab = scatter_sc(lab, E_lab)
    s_at = scatter_sc(atomic, E_lab / Eh_eV)
    assert np.allclose(s_lab.T, s_at.T, rtol=1e-9)
    assert np.allclose(s_lab.delay_transmission, s_at.delay_transmission * t_fs, rtol=1e-9)
    assert np.allclose(s_lab.dwell, s_at.dwell * t_fs, rtol=1e-9)
    p_lab, p_at = predict(lab), predict(atomic)
    assert p_lab.reflection.flux_delay == pytest.approx(p_at.reflection.flux_delay * t_fs, rel=1e-8)
    assert p_lab.transmission.probability == pytest.approx(p_at.transmission.probability,
                                                           rel=1e-8)


# ---------------------------------------------------------------------------------------
# the run's own packet


def test_prediction_uses_the_runs_k0_where_the_packet_starts_on_a_slope():
    # source: Landau & Lifshitz, QM, §25, problems: R of the Fermi step above its top,
    # [sinh(πa(k−q))/sinh(πa(k+q))]² (closed_forms.fermi_step_reflection_probability),
    # averaged by scipy.integrate.quad over the packet's |ψ̃₀(k)|² with E(k) = V(x₀) + k²/2,
    # the energies of the packet the run starts (k₀ given, V(x₀) ≈ 0.05, not the left level 0)
    from scipy.integrate import quad
    from sojourn.build import build
    a, x0, k0, sigma = 0.5, -1.4722, 1.8, 20.0
    sc = loads(f"""
units: atomic
grid: {{span: [-600.0, 600.0], points: 4096}}
potential:
  - smooth_step: {{at: 0.0, height: 1.0, width: {a}}}
packet: {{center: {x0}, width: {sigma}, wavenumber: {k0}}}
evolve: {{duration: 300.0}}
""")
    run_packet = build(sc).packet
    level = 1.0 / (1.0 + np.exp(-x0 / a))
    assert run_packet.level == pytest.approx(level, rel=1e-12) and level > 0.04
    p = predict(sc, tol=1e-7)
    assert p.k0 == pytest.approx(run_packet.k0, rel=1e-15)
    assert p.energy0 == pytest.approx(run_packet.energy, rel=1e-15)
    sk = 1 / (2 * sigma)

    def average(lev):
        g = lambda k: np.exp(-0.5 * ((k - k0) / sk) ** 2)
        R = lambda k: g(k) * float(cf.fermi_step_reflection_probability(lev + k * k / 2, 1.0, a))
        lo, hi = k0 - 10 * sk, k0 + 10 * sk
        return (quad(R, lo, hi, epsabs=0, epsrel=1e-12, limit=200)[0]
                / quad(g, lo, hi, epsabs=0, epsrel=1e-12)[0])

    expected = average(level)
    assert p.reflection.probability == pytest.approx(expected, rel=1e-6)
    # the incidence-side level (the old convention) gives a clearly different number
    assert abs(average(0.0) / expected - 1) > 0.1


# ---------------------------------------------------------------------------------------
# a packet whose band reaches the step top, in lab and in atomic units

HBAR_EV_FS = C.hbar / C.e * 1e15                       # CODATA via scipy.constants
ME_EV_FS2_NM2 = C.m_e / C.e * 1e12                      # m_e in eV fs²/nm²


def _hetero_step(E0, atomic=False):
    """The hetero step (m = 0.067, V₀ = 0.3 eV, σ = 25 nm; E₀ in eV) in lab or atomic units."""
    a0_nm = C.physical_constants["Bohr radius"][0] * 1e9
    Eh_eV = C.physical_constants["Hartree energy in eV"][0]
    L, E = (1 / a0_nm, 1 / Eh_eV) if atomic else (1.0, 1.0)
    return loads(f"""
units: {'atomic' if atomic else 'lab'}
mass: 0.067
grid: {{span: [{-1500 * L}, {500 * L}], points: 4096}}
potential:
  - step: {{at: 0.0, height: {0.3 * E}}}
packet: {{center: {-500 * L}, width: {25 * L}, energy: {E0 * E}}}
evolve: {{duration: 100.0}}
""")


def _step_top_quadrature(E0, V0=0.3, m_eff=0.067, sigma=25.0):
    """(centroid, flux, spectral) reflection delays in fs by scipy.integrate.quad, from
    the closed-form step amplitude (Griffiths 2nd ed., Problem 2.34: τ_R = ħ/√(E(V₀−E))
    below the top, r = (k−q)/(k+q) real above it); the (k_th − k)^(−1/2) end is
    integrated by QUADPACK's algebraic weight."""
    from scipy.integrate import quad
    hbar, m = HBAR_EV_FS, m_eff * ME_EV_FS2_NM2
    c = hbar ** 2 / (2 * m)
    k0, sk = np.sqrt(E0 / c), 1 / (2 * sigma)
    k_th = np.sqrt(V0 / c)
    lo, hi = max(k0 - 8 * sk, k0 / 100), k0 + 8 * sk
    g = lambda k: np.exp(-0.5 * ((k - k0) / sk) ** 2)
    R_above = lambda k: ((k - np.sqrt(k * k - k_th ** 2)) / (k + np.sqrt(k * k - k_th ** 2))) ** 2
    tau_root = lambda k: hbar / np.sqrt(c * k * k * c * (k_th + k))   # τ·√(k_th − k)
    opts = dict(epsabs=0, epsrel=1e-12, limit=200)
    top = min(hi, k_th)

    def below(f):    # ∫_lo^top f(k) τ(k) dk with the singular end at k_th
        if top < k_th:
            return quad(lambda k: f(k) * tau_root(k) / np.sqrt(k_th - k), lo, top, **opts)[0]
        return quad(lambda k: f(k) * tau_root(k), lo, k_th, weight="alg", wvar=(0, -0.5),
                    **opts)[0]

    Z = quad(g, lo, hi, **opts)[0]
    P_R = quad(g, lo, top, **opts)[0] + (quad(lambda k: g(k) * R_above(k), k_th, hi, **opts)[0]
                                         if hi > k_th else 0.0)
    flux = below(g) / P_R                       # R = 1 wherever τ ≠ 0
    shift = below(lambda k: g(k) * hbar * k / m) / P_R
    return shift / (hbar * k0 / m), flux, below(g) / Z


@pytest.mark.parametrize("atomic", [False, True])
def test_band_touching_the_step_top_gives_finite_delays_in_both_unit_systems(atomic):
    # reference values from an independent quadrature (an external audit): E₀ = 0.2 eV →
    # centroid 4.69335 fs, arrival = spectral 4.68765 fs; m = 0.067, V₀ = 0.3 eV, σ = 25 nm.
    # This code gave NaN here in lab units (a node rounded to E = V₀).
    t_fs = C.physical_constants["atomic unit of time"][0] * 1e15 if atomic else 1.0
    r = predict(_hetero_step(0.2, atomic)).reflection
    assert r.centroid_delay * t_fs == pytest.approx(4.69335, abs=6e-6)
    assert r.flux_delay * t_fs == pytest.approx(4.68765, abs=6e-6)
    assert r.spectral_delay * t_fs == pytest.approx(4.68765, abs=6e-6)
    for E0 in (0.2, 0.28, 0.29):          # 0.28, 0.29: the threshold inside the band
        p = predict(_hetero_step(E0, atomic))
        got = [p.reflection.centroid_delay, p.reflection.flux_delay,
               p.reflection.spectral_delay]
        assert np.all(np.isfinite(got))
        assert np.allclose(np.array(got) * t_fs, _step_top_quadrature(E0), rtol=1e-7, atol=0)
