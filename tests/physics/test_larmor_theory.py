"""Larmor times from the layered solver against published closed forms,
identities and a finite-difference check of the analytic derivative."""
import math

import numpy as np
import pytest

from sojourn.errors import TheoryError
from sojourn.model.potentials import Potential
from sojourn.model.terms import Barrier, SmoothStep
from sojourn.theory.larmor import (larmor_times, packet_larmor, spin_vector,
                                   spinor_amplitudes, times_from_spin)
from sojourn.theory.scattering import scatter

HBAR = M = 1.0


def barrier(height=1.0, width=2.0, start=0.0):
    return Potential([Barrier(start=start, end=start + width, height=height)], mass=M)


def buttiker_rectangular(E, V0, d):
    """Büttiker, Phys. Rev. B 27, 6178 (1983), rectangular barrier below its top
    (k outside, κ inside, k₀² = k² + κ²): with t = 1/(cosh κd + iε sinh κd),
    ε = (κ² − k²)/2kκ,
      τ_y = (mk/ħκ)·[k₀² sinh 2κd + 2κd(κ² − k²)] / [4k²κ² + k₀⁴ sinh² κd],
      τ_z = (mk₀²/2ħκ²)·[2(κ² − k²) sinh² κd + k₀²κd sinh 2κd] / [4k²κ² + k₀⁴ sinh² κd].
    The printed forms are recalled from memory; here they are re-derived from
    the textbook t (d/dV acts on κ only, ∂κ/∂V = m/ħ²κ)."""
    k = np.sqrt(2 * M * E) / HBAR
    kap = np.sqrt(2 * M * (V0 - E)) / HBAR
    k0 = k ** 2 + kap ** 2
    den = 4 * k ** 2 * kap ** 2 + k0 ** 2 * np.sinh(kap * d) ** 2
    ty = M * k / (HBAR * kap) * (k0 * np.sinh(2 * kap * d) + 2 * kap * d * (kap ** 2 - k ** 2)) / den
    tz = (M * k0 / (2 * HBAR * kap ** 2) * (2 * (kap ** 2 - k ** 2) * np.sinh(kap * d) ** 2
                                             + k0 * kap * d * np.sinh(2 * kap * d)) / den)
    return ty, tz


def test_rectangular_barrier_closed_forms():
    E = np.linspace(0.05, 0.95, 19)
    lt = larmor_times(barrier(), E, hbar=HBAR)
    ty, tz = buttiker_rectangular(E, 1.0, 2.0)
    assert np.allclose(lt.tau_y_transmission, ty, rtol=1e-11, atol=0)
    assert np.allclose(lt.tau_z_transmission, tz, rtol=1e-11, atol=0)
    # a symmetric barrier: τ_y of reflection equals that of transmission
    # (Büttiker 1983, symmetric barriers; from memory)
    assert np.allclose(lt.tau_y_reflection, lt.tau_y_transmission, rtol=1e-11)


def test_opaque_barrier_tends_to_buttiker_landauer_time():
    # τ_z^T → m·d/(ħκ) (Büttiker & Landauer, Phys. Rev. Lett. 49, 1739 (1982));
    # the next term of the κd → ∞ expansion is m(κ² − k²)/(ħκ²k₀²), then O(e^{−2κd})
    E, V0 = 0.3, 1.0
    kap, k0 = math.sqrt(2 * (V0 - E)), math.sqrt(2 * V0)
    for d in (5.0, 10.0, 20.0):
        tz = larmor_times(barrier(V0, d), [E], hbar=HBAR).tau_z_transmission[0]
        bl = M * d / (HBAR * kap)
        tail = M * (kap ** 2 - 2 * E) / (HBAR * kap ** 2 * k0 ** 2)
        assert abs(tz - bl - tail) < 10 * math.exp(-2 * kap * d) * bl + 1e-13 * bl
        assert abs(tz / bl - 1) < 1.2 / (kap * d)


@pytest.mark.parametrize("direction", ["right", "left"])
def test_dwell_identity(direction):
    # T·τ_y^T + R·τ_y^R = τ_D for a region equal to the barrier (Büttiker 1983);
    # an asymmetric profile (barrier beside a step down) so both channels differ
    pot = Potential([Barrier(start=0.0, end=1.5, height=1.2),
                     Barrier(start=1.5, end=2.5, height=0.4)], mass=M)
    E = np.linspace(0.1, 2.0, 25)
    lt = larmor_times(pot, E, hbar=HBAR, direction=direction)
    dwell = scatter(pot, E, hbar=HBAR, direction=direction).dwell
    assert np.allclose(lt.T * lt.tau_y_transmission + lt.R * lt.tau_y_reflection, dwell,
                       rtol=1e-10, atol=0)


def test_analytic_derivative_matches_finite_difference_on_smooth_potential():
    # smooth step: sliced and Romberg-refined; region a sub-interval. The finite
    # difference shifts the potential inside the region by ±h (central, h² error)
    term = SmoothStep(at=0.0, height=0.6, width=1.0)
    region = (-1.0, 2.0)
    pot = Potential([term], mass=M)
    E = np.array([0.65, 0.75, 0.9])
    lt = larmor_times(pot, E, hbar=HBAR, region=region)
    h = 1e-5

    def amplitudes(s):
        shift = Barrier(start=region[0], end=region[1], height=s)
        sc = scatter(Potential([term, shift], mass=M), E, hbar=HBAR, x_r=-30.0, x_t=30.0,
                     dwell=False)
        return sc.t, sc.r

    tp, rp = amplitudes(h)
    tm, rm = amplitudes(-h)
    for a_p, a_m, ty, tz in ((tp, tm, lt.tau_y_transmission, lt.tau_z_transmission),
                             (rp, rm, lt.tau_y_reflection, lt.tau_z_reflection)):
        assert np.allclose(ty, -HBAR * np.angle(a_p / a_m) / (2 * h), rtol=1e-6, atol=1e-8)
        assert np.allclose(tz, -HBAR * np.log(np.abs(a_p) / np.abs(a_m)) / (2 * h),
                           rtol=1e-6, atol=1e-8)


def test_spinor_linear_limit_and_departure():
    # exact spinor: ⟨σ_y⟩/ω → τ_y, −⟨σ_z⟩/ω → τ_z as ω → 0, with an O(ω²)
    # departure (the spin reads centred differences of arg t and ln|t| of step ħω)
    pot, E = barrier(), np.array([0.5])
    lt = larmor_times(pot, E, hbar=HBAR)
    errs = []
    for w in (4e-2, 2e-2, 1e-2):
        amp = spinor_amplitudes(pot, E, hbar=HBAR, omega=w)
        sx, sy, sz = spin_vector(amp.t_up, amp.t_down)
        assert sx ** 2 + sy ** 2 + sz ** 2 == pytest.approx(1.0, abs=1e-12)   # a pure state
        # exact: the phase and log-modulus differences of the two components
        assert math.atan2(sy, sx) == pytest.approx(
            float(np.angle(amp.t_down[0] / amp.t_up[0])), abs=1e-12)
        assert math.atanh(sz) == pytest.approx(
            float(np.log(np.abs(amp.t_up[0] / amp.t_down[0]))), abs=1e-12)
        ty, tz = times_from_spin((sx, sy, sz), w)
        errs.append(abs(ty - lt.tau_y_transmission[0]) + abs(tz - lt.tau_z_transmission[0]))
    assert errs[0] / errs[1] == pytest.approx(4.0, rel=0.05)
    assert errs[1] / errs[2] == pytest.approx(4.0, rel=0.05)


def test_packet_average_weights():
    # linear packet times: ⟨τ⟩ with weights |ψ̃₀(k)|²·T(k), checked against
    # scipy's adaptive quadrature of the same integrals
    from scipy.integrate import quad
    pot, k0, sk = barrier(), 1.0, 0.05
    out = packet_larmor(pot, k0, sk, 0.0, hbar=HBAR, omega=1e-3)
    tr = out["transmission"]

    def f(k, which):
        lt = larmor_times(pot, [0.5 * k * k], hbar=HBAR)
        g = math.exp(-0.5 * ((k - k0) / sk) ** 2) * lt.T[0]
        return g * (1.0 if which == "w" else getattr(lt, which)[0])

    lo, hi = k0 - 8 * sk, k0 + 8 * sk
    Z = quad(f, lo, hi, args=("w",), epsabs=0, epsrel=1e-11)[0]
    ty = quad(f, lo, hi, args=("tau_y_transmission",), epsabs=0, epsrel=1e-11)[0] / Z
    assert tr["tau_y"] == pytest.approx(ty, rel=1e-9)
    # the exact finite-field spin reads the same times up to O(ω²)
    assert tr["tau_y_exact"] == pytest.approx(tr["tau_y"], rel=1e-4)
    assert tr["tau_z_exact"] == pytest.approx(tr["tau_z"], rel=1e-4)


def test_bad_arguments_refused():
    with pytest.raises(TheoryError):
        larmor_times(barrier(), [0.5], hbar=HBAR, region=(2.0, 1.0))
    with pytest.raises(TheoryError):
        larmor_times(barrier(), [0.5], hbar=-1.0)
    with pytest.raises(TheoryError):
        spinor_amplitudes(barrier(), [0.5], hbar=HBAR, omega=float("nan"))
    with pytest.raises(TheoryError):
        larmor_times(barrier(), [-0.1], hbar=HBAR)
