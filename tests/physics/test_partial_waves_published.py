"""2D partial-wave theory (theory/partial_waves.py, angular_averages.py) against
closed forms, an independent high-precision reference (mpmath) and facts of the
trade; PHYSICS §Partial waves. ħ = m = 1 unless a test says otherwise."""
from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest
from scipy import special
from scipy.integrate import solve_ivp
from scipy.optimize import minimize_scalar

from sojourn.theory.angular_averages import packet_angular_prediction
from sojourn.theory.partial_waves import (hard_disk_phase_shifts, phase_shifts, sliced_shells,
                                         smooth_phase_shifts)

mp.mp.dps = 30


def mod_pi(x):
    return (np.asarray(x) + 0.5 * np.pi) % np.pi - 0.5 * np.pi


# ---------------------------------------------------------------------------------------
# an independent reference: the radial matching written out in mpmath (30 digits),
# differentiated by mpmath's own numerical derivative


def _mp_basis(m, Q, r):
    """Regular and irregular radial solutions and their r-derivatives for
    q² = Q: J_m, Y_m (Q > 0) or I_m, K_m (Q < 0), mpmath."""
    if Q > 0:
        q = mp.sqrt(Q)
        return [(mp.besselj(m, q * r), q * mp.besselj(m, q * r, 1)),
                (mp.bessely(m, q * r), q * mp.bessely(m, q * r, 1))]
    q = mp.sqrt(-Q)
    return [(mp.besseli(m, q * r), q * mp.besseli(m, q * r, 1)),
            (mp.besselk(m, q * r),                     # K' = −(K_{m−1} + K_{m+1})/2 (DLMF 10.29.1)
             -q * (mp.besselk(m - 1, q * r) + mp.besselk(m + 1, q * r)) / 2)]


def mp_delta(m, E, shells):
    """δ_m(E) for shells by explicit matching: α F + β G continued shell by
    shell (a 2×2 solve at each inner radius), tan δ = (kJ'u − Ju')/(kY'u − Yu')."""
    E = mp.mpf(E)
    if math.isinf(shells[0][1]):        # a hard core: R = 0 at its radius
        u, p = mp.mpf(0), mp.mpf(1)
    else:
        u, p = _mp_basis(m, 2 * (E - shells[0][1]), shells[0][0])[0]
    for (a, _), (b, V) in zip(shells[:-1], shells[1:]):
        (fa, fpa), (ga, gpa) = _mp_basis(m, 2 * (E - V), a)
        W = fa * gpa - fpa * ga
        alpha, beta = (u * gpa - p * ga) / W, (p * fa - u * fpa) / W
        (fb, fpb), (gb, gpb) = _mp_basis(m, 2 * (E - V), b)
        u, p = alpha * fb + beta * gb, alpha * fpb + beta * gpb
    k, R = mp.sqrt(2 * E), shells[-1][0]
    N = u * k * mp.besselj(m, k * R, 1) - p * mp.besselj(m, k * R)
    D = u * k * mp.bessely(m, k * R, 1) - p * mp.bessely(m, k * R)
    return mp.atan(N / D)


CASES = [
    ([(3.0, 1.0)], 0.5),                         # the barrier, below its top
    ([(3.0, 1.0)], 2.0),                         # above it
    ([(3.0, -2.0)], 0.7),                        # a well
    ([(2.0, 0.0), (3.0, 1.5)], 0.5),             # a ring
    ([(2.0, -1.0), (2.5, 3.0), (4.0, 0.4)], 0.7),
    ([(1.0, 2.0), (2.0, 0.2), (3.0, 1.0)], 0.5),
    ([(1.0, math.inf), (3.0, 1.0)], 0.5),        # a hard core inside a barrier
]


@pytest.mark.parametrize("shells,E", CASES)
def test_phase_shifts_and_analytic_derivatives_match_an_mpmath_matching(shells, E):
    ps = phase_shifts(shells, [E])
    for m in (0, 4, 11):
        ref = float(mp_delta(m, E, shells))
        dref = float(mp.diff(lambda x: mp_delta(m, x, shells), E))
        assert abs(mod_pi(ref - ps.delta[0, m])) < 1e-12
        assert abs(ps.ddelta_dE[0, m] - dref) < 1e-11 * max(1.0, abs(dref))


def test_partial_waves_that_overflow_inside_a_tiny_inner_shell_stay_exact():
    """k·a = 250 with a first shell of radius 1e-3: Y_m there is beyond 1e308 for
    m ≳ 90, and the regular solution restarts in the next shell."""
    shells = [(1e-3, 0.5), (20.0, 0.3), (40.0, 0.1)]
    ps = phase_shifts(shells, [20.0])
    for m in (100,):
        assert abs(mod_pi(float(mp_delta(m, 20.0, shells)) - ps.delta[0, m])) < 1e-12
        dref = float(mp.diff(lambda x: mp_delta(m, x, shells), 20.0))
        assert ps.ddelta_dE[0, m] == pytest.approx(dref, rel=1e-10)


def test_an_energy_at_a_shell_level_is_finite_and_continuous():
    shells = [(2.0, 0.0), (3.0, 1.0)]
    at = phase_shifts(shells, [1.0], m_max=8)
    near = phase_shifts(shells, [1.0 - 1e-4, 1.0 + 1e-4], m_max=8)
    assert np.all(np.isfinite(at.delta)) and np.all(np.isfinite(at.ddelta_dE))
    assert np.max(np.abs(mod_pi(at.delta[0] - near.delta.mean(axis=0)))) < 1e-6
    assert np.max(np.abs(at.ddelta_dE[0] - near.ddelta_dE.mean(axis=0))) < 1e-5


# ---------------------------------------------------------------------------------------
# the 2D optical theorem and the sum rule (S. K. Adhikari, Am. J. Phys. 54, 362 (1986);
# I. R. Lapidus, Am. J. Phys. 50, 45 (1982): from memory, re-derived in PHYSICS)


@pytest.mark.parametrize("shells,E", CASES)
def test_optical_theorem_and_angular_sum_rule(shells, E):
    ps = phase_shifts(shells, [E])
    k = ps.k[0]
    theta = np.linspace(-np.pi, np.pi, 4097)[:-1]
    integral = ps.cross_section(theta)[0].sum() * (2 * np.pi / theta.size)   # periodic: exact
    sigma = ps.total_cross_section[0]
    assert integral == pytest.approx(sigma, rel=1e-12)
    f0 = ps.amplitude([0.0])[0, 0]
    assert math.sqrt(8 * math.pi / k) * np.imag(np.exp(-0.25j * np.pi) * f0) == \
        pytest.approx(sigma, rel=1e-12)


def test_cross_section_weighted_delay_is_half_the_weighted_partial_delays():
    """∫|f|²τ dθ / ∫|f|² dθ = Σ sin²δ_m·ħδ'_m / Σ sin²δ_m (derived in PHYSICS):
    the angular sums against the partial waves."""
    ps = phase_shifts([(3.0, 1.0)], [0.5])
    theta = np.linspace(-np.pi, np.pi, 2049)[:-1]
    lhs = ps.weighted_delay(theta)[0].sum() / ps.cross_section(theta)[0].sum()
    w = np.sin(ps.delta[0]) ** 2 * np.where(ps.m == 0, 1, 2)
    assert lhs == pytest.approx(np.sum(w * 0.5 * ps.partial_delays[0]) / w.sum(), rel=1e-12)


# ---------------------------------------------------------------------------------------
# the hard disk: tan δ_m = J_m(ka)/Y_m(ka) (common practice, no source; any text on
# 2D scattering), dδ_m/dk = −2/(πk(J_m² + Y_m²)) from the Wronskian J Y' − J' Y = 2/(πz)


def test_a_high_disk_tends_to_the_hard_disk_closed_form():
    a, E = 3.0, 0.5 * (10 / 3.0) ** 2
    k = math.sqrt(2 * E)
    m = np.arange(40)
    exact = np.arctan(special.jv(m, k * a) / special.yv(m, k * a))
    dexact = -2 / (np.pi * k * (special.jv(m, k * a) ** 2 + special.yv(m, k * a) ** 2)) / k
    hard = hard_disk_phase_shifts(a, [E], m_max=39)
    assert np.max(np.abs(mod_pi(hard.delta[0] - exact))) < 1e-13
    assert np.max(np.abs(hard.ddelta_dE[0] - dexact)) < 1e-13
    errors = []
    for V0 in (1e3, 1e5):      # the wall's penetration depth 1/κ: errors fall as V0^(−1/2)
        ps = phase_shifts([(a, V0)], [E], m_max=39)
        errors.append(np.max(np.abs(ps.ddelta_dE[0] - dexact)))
    assert errors[1] < errors[0] / 8


@pytest.mark.parametrize("ka", [10.0, 20.0, 40.0])
def test_hard_disk_back_scattering_delay_tends_to_the_geometric_minus_2a_over_v(ka):
    """A ray reflected straight back from the disk's face at x = −a leaves
    2a/v earlier than a wave from the centre (geometric optics, no source)."""
    a = 3.0
    k = ka / a
    ps = hard_disk_phase_shifts(a, [0.5 * k * k])
    tau = ps.delay([np.pi])[0, 0]
    assert abs(tau / (-2 * a / k) - 1) < 0.2 / ka ** 2        # measured: 0.15/(ka)²


def test_hard_disk_total_cross_section_tends_to_twice_its_shadow():
    """The extinction paradox: σ → 2·(2a) = 4a for ka → ∞ (common practice, no
    source), approached from above."""
    a = 1.0
    s = [hard_disk_phase_shifts(a, [0.5 * ka ** 2]).total_cross_section[0] / (4 * a)
         for ka in (20.0, 80.0)]
    assert 1 < s[1] < s[0] < 1.1 and s[1] < 1.03


# ---------------------------------------------------------------------------------------
# the Born limit: f_B = −√(π/2k) e^{iπ/4} U₀ a J₁(qa)/q, U₀ = 2mV₀/ħ², q = 2k sin(θ/2)
# (2D Born amplitude, derived in PHYSICS from the outgoing Green's function −(i/4)H₀⁽¹⁾)


def test_a_weak_disk_approaches_the_born_amplitude():
    a, E = 3.0, 0.5
    k = math.sqrt(2 * E)
    theta = np.linspace(0.05, np.pi, 12)
    q = 2 * k * np.sin(theta / 2)
    errors = []
    for V0 in (1e-3, 1e-4):
        born = -math.sqrt(np.pi / (2 * k)) * np.exp(0.25j * np.pi) * 2 * V0 * a * \
            special.j1(q * a) / q
        f = phase_shifts([(a, V0)], [E]).amplitude(theta)[0]
        errors.append(np.max(np.abs(f - born)) / np.max(np.abs(born)))
    assert errors[0] < 3e-2
    assert errors[1] == pytest.approx(errors[0] / 10, rel=0.1)     # the next order: O(V₀)


# ---------------------------------------------------------------------------------------
# a resonance of a well inside a ring barrier: Breit–Wigner (G. Breit & E. Wigner,
# Phys. Rev. 49, 519 (1936)): the delay 2ħδ' peaks at 4ħ/Γ, Γ = −2 Im E of the pole of
# S_0 = e^{2iδ₀}, found here in mpmath as the purely outgoing (H⁽¹⁾) solution


def _outgoing_mismatch(E, shells, m=0):
    """k H'u − H u' at the last radius, u continued from inside (mpmath, complex E)."""
    (r0, V0), (a, V1) = shells[0], shells[1]
    q = mp.sqrt(2 * (E - V0))
    u, p = mp.besselj(m, q * r0), q * mp.besselj(m, q * r0, 1)
    q = mp.sqrt(2 * (E - V1))
    A = mp.matrix([[mp.besselj(m, q * r0), mp.bessely(m, q * r0)],
                   [q * mp.besselj(m, q * r0, 1), q * mp.bessely(m, q * r0, 1)]])
    c = mp.lu_solve(A, mp.matrix([u, p]))
    u = c[0] * mp.besselj(m, q * a) + c[1] * mp.bessely(m, q * a)
    p = q * (c[0] * mp.besselj(m, q * a, 1) + c[1] * mp.bessely(m, q * a, 1))
    k = mp.sqrt(2 * E)
    H = mp.hankel1(m, k * a)
    H1 = (mp.hankel1(m - 1, k * a) - mp.hankel1(m + 1, k * a)) / 2
    return u * k * H1 - p * H


def test_ring_resonance_has_the_breit_wigner_width_of_its_pole():
    shells = [(2.0, 0.0), (2.8, 4.0)]
    tau = lambda E: -phase_shifts(shells, [E], m_max=2).partial_delays[0, 0]
    E = np.linspace(0.3, 0.8, 2001)
    guess = E[np.argmax(phase_shifts(shells, E, m_max=2).partial_delays[:, 0])]
    best = minimize_scalar(tau, bracket=(guess - 1e-3, guess, guess + 1e-3),
                           options={"xtol": 1e-12})
    E_peak, peak = best.x, -best.fun
    pole = mp.findroot(lambda e: _outgoing_mismatch(e, shells), mp.mpc(E_peak, -2 / peak))
    width = -2 * float(pole.imag)
    assert abs(E_peak - float(pole.real)) < 0.01 * width
    assert 4 / peak == pytest.approx(width, rel=0.02)            # measured: 0.7%
    # δ₀ passes π/2 (δ is kept in [−π/2, π/2): it wraps) and rises by 2·atan 2
    # from E_r − Γ to E_r + Γ, as δ_bg + atan(Γ/2/(E_r − E)) does
    d = phase_shifts(shells, [E_peak - width, E_peak + width], m_max=2).delta[:, 0]
    assert d[0] > 0 > d[1]
    assert d[1] + np.pi - d[0] == pytest.approx(2 * math.atan(2.0), abs=0.05)
    # the quasi-bound level lies below the hard-walled disk's j₀₁²/(2a²)
    assert float(pole.real) < special.jn_zeros(0, 1)[0] ** 2 / (2 * 2.0 ** 2)


# ---------------------------------------------------------------------------------------
# smooth profiles: radial slicing against scipy's ODE integrator


def _ode_delta(profile, R, E, m):
    """δ_m from the radial equation u'' = [(m² − ¼)/r² − 2(E − V)]u, u = √r·R_m,
    integrated by solve_ivp (DOP853) from r₀ = 1e-4 with u ∝ r^(m+½)."""
    r0 = 1e-4
    rhs = lambda r, y: [y[1], ((m * m - 0.25) / r ** 2 - 2 * (E - profile(r))) * y[0]]
    sol = solve_ivp(rhs, (r0, R), [r0 ** (m + 0.5), (m + 0.5) * r0 ** (m - 0.5)],
                    method="DOP853", rtol=1e-12, atol=1e-30)
    u, du = sol.y[0, -1], sol.y[1, -1]
    Rm, dRm = u / math.sqrt(R), du / math.sqrt(R) - u / (2 * R ** 1.5)
    k = math.sqrt(2 * E)
    N = Rm * k * special.jvp(m, k * R) - dRm * special.jv(m, k * R)
    D = Rm * k * special.yvp(m, k * R) - dRm * special.yv(m, k * R)
    return math.atan(N / D)


def test_a_sliced_gaussian_converges_as_count_squared_to_the_ode_solution():
    profile = lambda r: 0.8 * np.exp(-np.asarray(r) ** 2 / 4)
    R, E = 9.0, 0.6
    ref = np.array([_ode_delta(profile, R, E, m) for m in range(4)])
    err = []
    for n in (100, 200):
        d = phase_shifts(sliced_shells(profile, R, n), [E], m_max=3).delta[0]
        err.append(mod_pi(d - ref))
    assert np.all(np.abs(err[0]) > 1e-7)
    assert np.allclose(err[0] / err[1], 4.0, rtol=0.02)         # midpoint slicing: count⁻²
    rich = smooth_phase_shifts(profile, R, [E], count=100, m_max=3)
    assert np.max(np.abs(mod_pi(rich.delta[0] - ref))) < 1e-7
    # and the energy derivative, against a centred difference of the ODE's δ (h = 1e-4)
    h = 1e-4
    dref = [(_ode_delta(profile, R, E + h, m) - _ode_delta(profile, R, E - h, m)) / (2 * h)
            for m in range(4)]
    assert np.allclose(rich.ddelta_dE[0], dref, rtol=1e-6, atol=1e-7)


# ---------------------------------------------------------------------------------------
# the packet average, against an explicit time-domain synthesis of the scattered wave


def test_packet_averages_are_what_the_flux_through_a_far_circle_gives():
    """ψ_sc(R, θ, t) = ∫dk φ̃(k) f(θ, k) e^{i(kR − ωt)}/√R (each plane-wave
    component scatters alone; the free incident centre passes 0 at t = 0):
    the flux through the arc per radian over all time, over the incident
    fluence, is dσ/dθ; its mean arrival time minus that of the reference built
    from |φ̃ f| is the averaged τ(θ), and that reference arrives at R·⟨1/v⟩
    (PHYSICS §Partial waves): all exact in the far field."""
    shells, k0, sk, Rd = [(3.0, 1.0)], 1.0, 0.05, 400.0
    theta = np.array([0.4, 1.5, 2.6, np.pi])
    pred = packet_angular_prediction(shells, theta, k0=k0, sigma_k=sk)
    k = np.linspace(k0 - 8 * sk, k0 + 8 * sk, 1601)
    dk = k[1] - k[0]
    phi = np.exp(-0.25 * ((k - k0) / sk) ** 2)              # |φ̃|² is the Gaussian of rms σ_k
    f = phase_shifts(shells, 0.5 * k ** 2).amplitude(theta)  # (k, θ)
    t = np.linspace(Rd / k0 - 250, Rd / k0 + 250, 4001)
    phase = np.exp(1j * (np.outer(t, -0.5 * k ** 2) + k * Rd))       # (t, k)
    fluence = 2 * np.pi * np.sum(phi ** 2) * dk
    for j, th in enumerate(theta):
        for g, out in ((phi * f[:, j], "wave"), (phi * np.abs(f[:, j]), "reference")):
            psi = phase @ g * dk / math.sqrt(Rd)
            dpsi = phase @ (g * (1j * k - 0.5 / Rd)) * dk / math.sqrt(Rd)
            J = np.imag(np.conj(psi) * dpsi) * Rd            # radial flux × R, per radian
            if out == "wave":
                prob, arrival = J.sum() * (t[1] - t[0]), np.sum(t * J) / J.sum()
            else:
                reference = np.sum(t * J) / J.sum()
        assert prob / fluence == pytest.approx(pred.cross_section[j], rel=1e-9)
        assert arrival - reference == pytest.approx(pred.delay[j], abs=1e-8)   # seen: 2e-11
        assert reference == pytest.approx(Rd * pred.inverse_speed[j], abs=1e-8)
