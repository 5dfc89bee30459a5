"""The grid against numpy.fft's conventions and its own definitions."""
import math

import numpy as np
import pytest

from sojourn.model.grid import Grid


def test_points_spacing_and_periodicity():
    g = Grid(-5.0, 15.0, 40)
    assert g.dx == pytest.approx(0.5) and g.length == 20.0 and g.shape == (40,)
    assert g.x[0] == -5.0 and g.x[-1] == pytest.approx(15.0 - 0.5)   # right is not a point
    assert np.allclose(np.diff(g.x), 0.5)


@pytest.mark.parametrize("points", [16, 17, 1024])
def test_wavenumbers_in_fft_order(points):
    # numpy.fft.fftfreq gives the frequencies of numpy.fft.fft's outputs (cycles per
    # unit); k = 2π·f (numpy documentation, numpy.fft.fftfreq)
    g = Grid(0.0, 3.0, points)
    assert np.allclose(g.k, 2 * math.pi * np.fft.fftfreq(points, d=3.0 / points), rtol=0, atol=1e-12)
    assert np.allclose(g.k_squared, g.k ** 2) and g.k_squared.shape == g.shape
    # the spectrum of e^{ik_m x} sits at index m of the FFT
    m = 3
    wave = np.exp(1j * g.k[m] * g.x)
    assert np.argmax(np.abs(np.fft.fft(wave))) == m


def test_largest_wavenumber_and_kinetic_energy():
    g = Grid(-1.0, 1.0, 200)
    assert g.k_max == pytest.approx(math.pi / 0.01)
    assert np.abs(g.k).max() == pytest.approx(g.k_max)          # the Nyquist wavenumber
    assert g.kinetic_max(2.0, 3.0) == pytest.approx((2.0 * math.pi / 0.01) ** 2 / 6.0)


def test_index_is_the_nearest_point_clipped():
    g = Grid(0.0, 10.0, 10)
    assert g.index(3.4) == 3 and g.index(3.6) == 4
    assert g.index(-100.0) == 0 and g.index(100.0) == 9


def test_from_spec():
    class Spec:
        span, points = (1, 2), 64
    g = Grid.from_spec(Spec)
    assert (g.left, g.right, g.points) == (1.0, 2.0, 64)
