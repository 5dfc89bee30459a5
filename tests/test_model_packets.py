"""The Gaussian packet against textbook closed forms."""
import math
from types import SimpleNamespace

import numpy as np
import pytest

from sojourn.model import packets
from sojourn.model.grid import Grid

G = Grid(-400.0, 400.0, 8192)


def _spec(**kw):
    base = dict(center=-50.0, width=5.0, energy=None, wavenumber=None, direction="right")
    base.update(kw)
    return SimpleNamespace(**base)


def _moments(psi):
    density = np.abs(psi) ** 2
    norm = density.sum() * G.dx
    mean = (G.x * density).sum() * G.dx / norm
    width = math.sqrt(((G.x - mean) ** 2 * density).sum() * G.dx / norm)
    spectrum = np.abs(np.fft.fft(psi)) ** 2
    return norm, mean, width, (G.k * spectrum).sum() / spectrum.sum()


def test_norm_position_width_and_momentum():
    # (2πσ²)^(-1/4) e^{-(x−x₀)²/4σ² + ik₀x}: norm 1, ⟨x⟩ = x₀, rms width σ, ⟨p⟩ = ħk₀
    # (Cohen-Tannoudji, Diu, Laloë, Quantum Mechanics, Complement G_I)
    norm, mean, width, k_mean = _moments(packets.gaussian(G.x, -50.0, 5.0, 1.7))
    assert norm == pytest.approx(1.0, abs=1e-12)
    assert mean == pytest.approx(-50.0, abs=1e-10)
    assert width == pytest.approx(5.0, rel=1e-10)
    assert k_mean == pytest.approx(1.7, rel=1e-10)


def test_on_grid_is_normalised_on_the_grid():
    info = packets.describe(_spec(wavenumber=1.0), 1.0, 1.0)
    psi = packets.on_grid(Grid(-30.0, 30.0, 64), info)   # coarse: the sum, not the integral
    assert np.vdot(psi, psi).real * 60.0 / 64 == pytest.approx(1.0, abs=1e-14)


def test_describe_from_energy_and_level():
    # E₀ = ħ²k₀²/2m + V(x₀); σ_k = 1/(2σ); ⟨E⟩ = ħ²(k₀² + σ_k²)/2m + V(x₀)
    hbar, mass, level = 0.6582, 5.686, 0.1
    info = packets.describe(_spec(energy=0.3), hbar, mass, level)
    assert hbar ** 2 * info.k0 ** 2 / (2 * mass) + level == pytest.approx(0.3, rel=1e-14)
    assert info.sigma_k == pytest.approx(0.1)
    assert info.mean_energy == pytest.approx(hbar ** 2 * (info.k0 ** 2 + 0.01) / (2 * mass) + level)
    assert info.group_velocity == pytest.approx(hbar * info.k0 / mass)
    left = packets.describe(_spec(energy=0.3, direction="left"), hbar, mass, level)
    assert left.k0 == -info.k0 and left.group_velocity < 0
    with pytest.raises(ValueError, match="not above the potential"):
        packets.describe(_spec(energy=0.05), hbar, mass, level)


def test_free_spreading():
    # source: σ(t) = σ√(1 + (ħt/2mσ²)²) (Griffiths, Introduction to Quantum Mechanics,
    # 2nd ed., Problem 2.22; Cohen-Tannoudji et al., Complement G_I); the centre moves
    # at ħk₀/m. The exact state is checked against the free propagator applied in
    # Fourier space by numpy.fft (exact for a band-limited packet on a periodic grid).
    hbar, mass = 1.0, 2.0
    info = packets.describe(_spec(wavenumber=1.2), hbar, mass)
    psi0 = packets.gaussian(G.x, info.center, info.width, info.k0)
    assert np.abs(packets.free_evolution(G.x, 0.0, info, hbar, mass) - psi0).max() < 1e-14
    for t in (10.0, 60.0):
        exact = packets.free_evolution(G.x, t, info, hbar, mass)
        spectral = np.fft.ifft(np.exp(-1j * hbar * G.k ** 2 * t / (2 * mass)) * np.fft.fft(psi0))
        assert np.abs(exact - spectral).max() < 1e-10
        _, mean, width, _ = _moments(exact)
        assert width == pytest.approx(5.0 * math.sqrt(1 + (hbar * t / (2 * mass * 25.0)) ** 2),
                                      rel=1e-9)
        assert float(packets.free_width(5.0, t, hbar, mass)) == pytest.approx(width, rel=1e-9)
        assert mean == pytest.approx(-50.0 + hbar * 1.2 / mass * t, abs=1e-8)
