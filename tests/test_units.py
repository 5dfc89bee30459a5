"""Unit systems against the CODATA 2018 recommended values, typed here from the
published table (E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, "CODATA
recommended values of the fundamental physical constants: 2018", Rev. Mod.
Phys. 93, 025010 (2021); NIST SP 961 (2019)), not taken from the library the
code reads them from. The code takes its constants from scipy.constants, which
may follow a later CODATA adjustment (CODATA 2022 moved m_e by 1.4e-9 relative,
the Hartree energy and the Bohr radius by less): the mass-dependent checks allow
1e-8, far below anything a delay could show and far above such a revision."""
import math

from sojourn.model.units import ATOMIC, LAB

# CODATA 2018 (SI): e and h exact since the 2019 SI, so ħ = h/2π is exact too
HBAR = 1.054571817e-34            # J s (exact, derived from h = 6.62607015e-34 J s)
E_CHARGE = 1.602176634e-19        # C (exact)
M_E = 9.1093837015e-31            # kg  (uncertainty 2.8e-40)
HARTREE = 4.3597447222071e-18     # J   (uncertainty 8.5e-30)
BOHR = 5.29177210903e-11          # m   (uncertainty 8.0e-21)
AU_TIME = 2.4188843265857e-17     # s   (uncertainty 4.7e-29)


def test_lab_hbar_is_codata_2018_in_ev_fs():
    # ħ in eV·fs: ħ[J s] / e[C] · 1e15 = 0.6582119569... (CODATA 2018 lists
    # ħ = 6.582119569e-16 eV s, exact to the digits shown)
    assert math.isclose(LAB.hbar, HBAR / E_CHARGE * 1e15, rel_tol=1e-9)
    assert math.isclose(LAB.hbar, 0.6582119569, rel_tol=1e-9)


def test_lab_electron_mass_is_codata_2018_in_ev_fs2_per_nm2():
    # m_e in eV·fs²/nm²: kg = J s²/m² = (1/e) eV · (1e15 fs)² / (1e9 nm)², so m_e/e · 1e12
    assert math.isclose(LAB.electron_mass, M_E / E_CHARGE * 1e12, rel_tol=1e-8)


def test_lab_units_reproduce_the_hartree_and_the_bohr_radius():
    # E_h = ħ²/(m_e a₀²) (definition of the atomic units): with the lab ħ and m_e and the
    # CODATA Bohr radius in nm, the CODATA Hartree energy in eV comes out (to the
    # table's own consistency, ~1e-10, and the revision allowance above)
    a0_nm = BOHR * 1e9
    hartree_ev = HARTREE / E_CHARGE
    assert math.isclose(LAB.hbar ** 2 / (LAB.electron_mass * a0_nm ** 2), hartree_ev,
                        rel_tol=1e-8)
    # the atomic unit of time ħ/E_h, in fs
    assert math.isclose(LAB.hbar / hartree_ev, AU_TIME * 1e15, rel_tol=1e-9)


def test_lab_kinetic_constant():
    # ħ²/(2 m_e) = 0.0380998211 eV·nm² from the CODATA 2018 values above
    expected = (HBAR ** 2 / (2 * M_E)) / E_CHARGE * 1e18
    assert math.isclose(LAB.hbar ** 2 / (2 * LAB.electron_mass), expected, rel_tol=1e-8)
    assert math.isclose(expected, 0.0380998211, rel_tol=1e-8)


def test_atomic_units_are_unity():
    # Hartree atomic units: ħ = m_e = 1 by definition
    assert ATOMIC.hbar == 1.0 and ATOMIC.electron_mass == 1.0
