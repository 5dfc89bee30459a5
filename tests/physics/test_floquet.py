"""Floquet scattering by driven potentials (theory/floquet.py) against
independent references: the static layer solver, a first-order closed form
derived in PHYSICS §Driven potentials, Bessel-function limits and the
Büttiker–Landauer sidebands. ħ = m = 1."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import jv

from sojourn import theory as th
from sojourn.model.packets import PacketInfo
from sojourn.model.potentials import Barrier, Potential, Step, Well
from sojourn.model.terms import Drive
from sojourn.theory import floquet as fl
from sojourn.theory.floquet_averages import packet_sidebands


def barrier(V1, omega, *, height=1.0, width=3.0, phase=0.0):
    return Potential([Barrier(start=0.0, end=width, height=height,
                              drive=Drive(amplitude=V1, angular_frequency=omega, phase=phase))])


@pytest.mark.parametrize("potential", [
    barrier(0.2, 0.15), barrier(0.6, 0.3, height=0.4),
    Potential([Step(at=0.0, height=0.3, drive=Drive(amplitude=0.2, angular_frequency=0.2))]),
    Potential([Well(start=-2.0, end=2.0, depth=0.5, drive=Drive(amplitude=0.3,
                                                                 angular_frequency=0.25,
                                                                 phase=1.0)),
               Barrier(start=3.0, end=4.0, height=1.0)]),
])
def test_probability_is_conserved_over_all_sidebands(potential):
    # Σ_n (R_n + T_n) = 1: flux conservation of a Hermitian H(t) (common practice, no source)
    E = np.linspace(0.45, 1.6, 13)
    sc = fl.floquet_scatter(potential, E, hbar=1.0)
    np.testing.assert_allclose(sc.R.sum(axis=1) + sc.T.sum(axis=1), 1.0, atol=1e-10)
    assert sc.T[:, sc.sidebands + 1].max() > 1e-4      # the drive does make sidebands


def test_static_limit_is_the_layer_solver():
    # V1 → 0: sideband 0 is the static barrier's r and t from theory.layers (another solver)
    E = np.linspace(0.2, 2.5, 17)
    sc = fl.floquet_scatter(barrier(1e-12, 0.2), E, hbar=1.0)
    static = th.scatter(Potential([Barrier(start=0.0, end=3.0, height=1.0)]), E, hbar=1.0)
    np.testing.assert_allclose(sc.r[:, sc.sidebands], static.r, atol=1e-11)
    np.testing.assert_allclose(sc.t[:, sc.sidebands], static.t, atol=1e-11)
    assert np.max(np.abs(np.delete(sc.T, sc.sidebands, axis=1))) < 1e-20


@pytest.mark.parametrize("energy,omega,phase", [(0.5, 0.15, 0.0), (0.3, 0.1, 0.7),
                                                (1.4, 0.3, 2.0), (0.8, 0.9, 0.0)])
def test_weak_drive_first_order_sidebands_match_the_closed_form(energy, omega, phase):
    # the first-order Green's-function result derived in PHYSICS §Driven potentials;
    # the next correction is relative O(V1²), far below the tolerance at V1 = 1e-4
    V1 = 1e-4
    sc = fl.floquet_scatter(barrier(V1, omega, phase=phase), [energy], hbar=1.0)
    closed = fl.weak_drive_sidebands(1.0, 3.0, V1, omega, energy, phase=phase)
    for n in (1, -1):
        if energy + n * omega <= 0:
            continue
        R, T = closed[n]
        assert sc.order(n, "reflection")[0] == pytest.approx(R, rel=1e-5)
        assert sc.order(n)[0] == pytest.approx(T, rel=1e-5)


def test_sidebands_converge_in_the_number_kept():
    pot = barrier(0.4, 0.2)
    values = [fl.floquet_scatter(pot, [0.6], hbar=1.0, sidebands=N).order(1)[0]
              for N in (3, 5, 7, 9, 12, 16)]
    changes = np.abs(np.diff(values))
    # falls geometrically (faster than J_N(V1/ħω)) to the round-off floor near 1e-12
    assert np.all(changes[1:4] < 0.05 * changes[:3]) and np.all(changes[3:] < 1e-11)
    auto = fl.floquet_scatter(pot, [0.6], hbar=1.0)
    assert auto.order(1)[0] == pytest.approx(values[-1], abs=1e-10)


def test_fast_particle_into_an_oscillating_half_space_follows_bessel_weights():
    # no static step and E ≫ V1, ħω: reflection vanishes and the transmitted sidebands
    # carry J_n(V1/ħω)² (P. K. Tien & J. P. Gordon, Phys. Rev. 129, 647 (1963) — from memory)
    V1, omega = 0.15, 0.1
    pot = Potential([Step(at=0.0, height=0.0, drive=Drive(amplitude=V1, angular_frequency=omega))])
    sc = fl.floquet_scatter(pot, [200.0], hbar=1.0)
    for n in range(-3, 4):
        assert sc.order(n)[0] == pytest.approx(jv(n, V1 / omega) ** 2, abs=2e-5)
    assert sc.R.sum() < 1e-6


@pytest.mark.parametrize("omega", [0.01, 0.02])
def test_opaque_barrier_sidebands_follow_buttiker_landauer(omega):
    # T_{±1}/T_0 = (V1/2ħω)² (e^{±ωτ} − 1)², τ = m d/(ħκ), for an opaque barrier driven
    # weakly at ħω ≪ V0 − E (M. Büttiker & R. Landauer, Phys. Rev. Lett. 49, 1739 (1982);
    # the paper and its traversal time were checked, the sideband formula is from memory)
    V1 = 1e-4
    pot = Potential([Barrier(start=0.0, end=10.0, height=1.0,
                             drive=Drive(amplitude=V1, angular_frequency=omega))])
    tau = fl.buttiker_landauer_time(pot, 0.5, hbar=1.0)
    assert tau == pytest.approx(10.0)          # κ = 1: τ = d
    sc = fl.floquet_scatter(pot, [0.5], hbar=1.0)
    for n in (1, -1):
        expected = (V1 / (2 * omega)) ** 2 * (math.exp(n * omega * tau) - 1) ** 2
        assert sc.order(n)[0] / sc.order(0)[0] == pytest.approx(expected, rel=0.05)


def test_buttiker_landauer_time_of_a_smooth_barrier():
    # a parabolic cap V = V0(1 − x²/a²) above E: ∫ m dx/(ħκ) = π a √(m/(2V0)) exactly
    from sojourn.model.potentials import Expression
    pot = Potential([Expression(formula="maximum(1.0 - x**2/4.0, 0.0)")], span=(-10.0, 10.0))
    assert fl.buttiker_landauer_time(pot, 0.0, hbar=1.0) == pytest.approx(
        math.pi * 2.0 * math.sqrt(0.5), rel=1e-2)


def test_sideband_asymmetry_crosses_over_near_one_over_the_traversal_time():
    layers = fl.driven_layers(barrier(1e-3, 0.1, width=6.0), 1.0)
    tau = 6.0 / math.sqrt(2 * 0.5)
    omegas = np.array([0.02, 0.5, 2.0]) / tau
    ratio = fl.sideband_asymmetry(layers, 0.5, omegas, hbar=1.0, mass=1.0)
    assert abs(ratio[0] - 1) < 0.15          # slow drive: the particle sees a static barrier
    assert ratio[1] > 1.5 and ratio[2] > 10 * ratio[1] ** 0.5   # absorbing quanta wins


def test_packet_averaged_sidebands_are_weighted_means_of_the_stationary_ones():
    # a narrow band: the average tends to the value at k₀; a wide one is a true mean
    pot = barrier(0.2, 0.15)
    narrow = PacketInfo(center=-500.0, width=400.0, k0=1.0, sigma_k=1 / 800, energy=0.5,
                        mean_energy=0.5, group_velocity=1.0, level=0.0)
    got = packet_sidebands(pot, narrow, hbar=1.0, mass=1.0)
    at_k0 = fl.floquet_scatter(pot, [0.5], hbar=1.0)
    for n in (-2, -1, 0, 1, 2):
        for channel in ("transmission", "reflection"):
            expected = at_k0.order(n, channel)[0]
            assert got.stationary[channel][n] == pytest.approx(expected, rel=1e-3)
            # a band far narrower than ħω: every window holds its own sideband only
            assert got.windowed[channel][n] == pytest.approx(expected, rel=1e-3)


def test_packet_averaged_sidebands_of_a_wide_band():
    pot = barrier(0.2, 0.15)
    wide = PacketInfo(center=-50.0, width=10.0, k0=1.0, sigma_k=0.05, energy=0.5,
                      mean_energy=0.5, group_velocity=1.0, level=0.0)
    got = packet_sidebands(pot, wide, hbar=1.0, mass=1.0, orders=range(-5, 6))
    for kind in (got.stationary, got.windowed):
        total = sum(kind["transmission"].values()) + sum(kind["reflection"].values())
        assert total == pytest.approx(1.0, abs=1e-7)   # ~1e-8 lies beyond ±5.5ħω
    # σ_E = ħω/3: the windows also catch the neighbours' tails
    assert got.windowed["transmission"][1] != pytest.approx(got.stationary["transmission"][1],
                                                            rel=1e-3)
    # by hand: a plain Riemann sum of the weights over a fine k grid
    k = np.linspace(1.0 - 0.4, 1.0 + 0.4, 1001)   # spectrally accurate for a Gaussian
    w = np.exp(-0.5 * ((k - 1.0) / 0.05) ** 2)
    sc = fl.floquet_scatter(pot, k ** 2 / 2, hbar=1.0, sidebands=12)
    T1 = sc.order(1)
    assert got.stationary["transmission"][1] == pytest.approx(np.sum(w * T1) / np.sum(w),
                                                              rel=1e-6)
    # the windows tile the outgoing spectrum: together they hold R + T = 1 (they reach
    # E₀ ± 5.5ħω, past the band's ±8σ_E); their interference terms cancel in the sum
    assert all(v >= 0 for ch in got.windowed.values() for v in ch.values())


def test_refusals_are_theory_errors():
    from sojourn.errors import TheoryError
    two = Potential([Barrier(start=0, end=1, height=1, drive=Drive(amplitude=0.1,
                                                                  angular_frequency=0.1)),
                     Barrier(start=2, end=3, height=1, drive=Drive(amplitude=0.1,
                                                                  angular_frequency=0.2))])
    with pytest.raises(TheoryError, match="different angular frequencies"):
        fl.floquet_scatter(two, [0.5], hbar=1.0)
    with pytest.raises(TheoryError, match="above the incidence-side level"):
        fl.floquet_scatter(barrier(0.1, 0.1), [-1.0], hbar=1.0)
