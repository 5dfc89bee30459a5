"""Unit systems against CODATA via scipy.constants (PHYSICS §1)."""
import math

from scipy import constants as c

from sojourn.model.units import ATOMIC, LAB


def test_lab_hbar_matches_codata():
    # source: CODATA, via scipy.constants; 0.6582119569 eV·fs is the recommended ħ
    assert math.isclose(LAB.hbar, 0.6582119569, rel_tol=1e-8)
    assert math.isclose(LAB.hbar, c.hbar / c.e * 1e15, rel_tol=1e-12)


def test_lab_kinetic_constant_matches_codata():
    # source: CODATA, via scipy.constants: ħ²/(2 m_e) = 0.0380998211 eV·nm²
    assert math.isclose(LAB.hbar ** 2 / (2 * LAB.electron_mass), 0.0380998211, rel_tol=1e-8)


def test_atomic_units_are_unity():
    # Hartree atomic units: ħ = m_e = 1 by definition
    assert ATOMIC.hbar == 1.0 and ATOMIC.electron_mass == 1.0
