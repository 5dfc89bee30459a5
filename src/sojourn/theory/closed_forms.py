"""Published closed forms for 1D stationary scattering, kept apart from the
general solver (`scattering`, `layers`) so that each can check the other.

All functions take total energies E (arrays allowed), ħ and the mass m in one
consistent unit set, and follow the conventions of PHYSICS §4: incidence from
the left, k = √(2m(E−V))/ħ in each region, T the flux ratio. Amplitudes are
returned with the reference points stated in each docstring.
"""
from __future__ import annotations

import numpy as np


def _k(E, V, hbar, mass):
    return np.sqrt(2.0 * mass * (np.asarray(E, dtype=float) - V)) / hbar


def step_reflection(E, height, hbar=1.0, mass=1.0):
    """Reflection amplitude of a step of `height` at x = 0, referenced at the step.

    E < V₀: r = −exp(2iδ), δ = arctan√(E/(V₀−E)); E > V₀: r = (k−q)/(k+q), real.
    (Griffiths, Introduction to QM, 2nd ed., Problem 2.34; Cohen-Tannoudji,
    Complement H_I.)
    """
    E = np.asarray(E, dtype=float)
    below = E < height
    with np.errstate(invalid="ignore", divide="ignore"):
        delta = np.arctan(np.sqrt(E / np.abs(height - E)))
        k, q = _k(E, 0.0, hbar, mass), np.sqrt(2.0 * mass * np.abs(E - height)) / hbar
        above = (k - q) / (k + q)
    return np.where(below, -np.exp(2j * delta), above + 0j)


def step_transmission(E, height, hbar=1.0, mass=1.0):
    """Transmission amplitude 2k/(k+q) of a step above its top (E > V₀), both
    sides referenced at the step (same sources as `step_reflection`)."""
    k, q = _k(E, 0.0, hbar, mass), _k(E, height, hbar, mass)
    return 2 * k / (k + q) + 0j


def step_delay(E, height, hbar=1.0):
    """Reflection phase delay of a step below its top, relative to an ideal
    mirror at the step: τ_R = ħ/√(E(V₀−E)) (PHYSICS §5; follows from
    `step_reflection` by τ = ħ dφ/dE)."""
    E = np.asarray(E, dtype=float)
    return hbar / np.sqrt(E * (height - E))


def barrier_transmission_probability(E, height, width, hbar=1.0, mass=1.0):
    """T of a rectangular barrier of `height` and `width`:
    E < V₀: [1 + V₀² sinh²(κa)/(4E(V₀−E))]⁻¹; E > V₀: [1 + V₀² sin²(qa)/(4E(E−V₀))]⁻¹.
    (Griffiths 2nd ed., Problem 2.33, with his 2a written as a.)
    Evaluated in a form that stays accurate for opaque barriers (T ~ 1e-300).
    """
    E = np.asarray(E, dtype=float)
    V0, a = height, width
    kappa = np.sqrt(2 * mass * np.abs(height - E)) / hbar
    out = np.empty_like(E)
    below = E < V0
    if np.any(below):
        e, x = E[below], kappa[below] * a
        c = V0 ** 2 / (4 * e * (V0 - e))
        # sinh²x = e^{2x}(1 − e^{−2x})²/4; write 1/(1 + c sinh²x) without overflow
        s = -np.expm1(-2 * x)
        out[below] = np.exp(-2 * x) / (np.exp(-2 * x) + c * s ** 2 / 4)
    above = ~below
    if np.any(above):
        e, x = E[above], kappa[above] * a
        out[above] = 1.0 / (1.0 + V0 ** 2 * np.sin(x) ** 2 / (4 * e * (e - V0)))
    return out


def barrier_transmission(E, height, width, hbar=1.0, mass=1.0):
    """Transmission amplitude of a rectangular barrier on [0, a], with t
    referenced at the exit (ψ = t e^{ik(x−a)} beyond it) and the incident wave
    at the entry: t = 1/(cos(qa) − i (k²+q²)/(2kq) sin(qa)), q = √(2m(E−V₀))/ħ
    (imaginary below the top, where it becomes cosh κa + i(κ²−k²)/(2kκ) sinh κa).
    From memory: the standard result (e.g. Cohen-Tannoudji, Complement H_I); its
    modulus reproduces `barrier_transmission_probability`, which the tests check.
    """
    E = np.asarray(E, dtype=float)
    k = _k(E, 0.0, hbar, mass)
    q = np.sqrt(2 * mass * (E - height) + 0j) / hbar
    q = np.where(E < height, 1j * np.sqrt(2 * mass * np.abs(height - E)) / hbar, q)
    qa = q * width
    return 1.0 / (np.cos(qa) - 1j * (k ** 2 + q ** 2) / (2 * k * q) * np.sin(qa))


def delta_transmission_probability(E, strength, hbar=1.0, mass=1.0):
    """T of a delta barrier αδ(x): 1/(1 + mα²/(2ħ²E)). (Griffiths 2nd ed., Sec. 2.5.2.)"""
    E = np.asarray(E, dtype=float)
    return 1.0 / (1.0 + mass * strength ** 2 / (2 * hbar ** 2 * E))


def delta_amplitudes(E, strength, hbar=1.0, mass=1.0):
    """(r, t) of αδ(x), both referenced at x = 0: β = mα/(ħ²k),
    t = 1/(1 + iβ), r = −iβ/(1 + iβ). (Griffiths 2nd ed., Sec. 2.5.2, written
    for a repulsive strength α > 0.)"""
    beta = mass * strength / (hbar ** 2 * _k(E, 0.0, hbar, mass))
    return -1j * beta / (1 + 1j * beta), 1.0 / (1 + 1j * beta)


def fermi_step_reflection_probability(E, height, width, hbar=1.0, mass=1.0):
    """R of the smooth step U₀/(1+e^{−x/a}) above its top (E > U₀):
    [sinh(πa(k−q))/sinh(πa(k+q))]². (Landau & Lifshitz, QM, §25, problems.)"""
    k, q = _k(E, 0.0, hbar, mass), _k(E, height, hbar, mass)
    # ratio of sinh's without overflow: sinh(u)/sinh(v) = e^{u−v}(1−e^{−2u})/(1−e^{−2v})
    u, v = np.pi * width * (k - q), np.pi * width * (k + q)
    ratio = np.exp(u - v) * np.expm1(-2 * u) / np.expm1(-2 * v)
    return ratio ** 2


def sech2_barrier_transmission_probability(E, height, width, hbar=1.0, mass=1.0):
    """T of the barrier U₀/cosh²(x/a) for 8mU₀a²/ħ² > 1:
    sinh²(πka)/[sinh²(πka) + cosh²((π/2)√(8mU₀a²/ħ² − 1))]. (Landau & Lifshitz,
    QM, §25, problems.)"""
    k = _k(E, 0.0, hbar, mass)
    s = 8 * mass * height * width ** 2 / hbar ** 2
    if s <= 1:
        raise ValueError("this form needs 8 m U0 a^2 / hbar^2 > 1")
    sh2 = np.sinh(np.pi * k * width) ** 2
    return sh2 / (sh2 + np.cosh(np.pi / 2 * np.sqrt(s - 1)) ** 2)


def reflectionless_well_depth(lam: int, width, hbar=1.0, mass=1.0) -> float:
    """Depth ħ²λ(λ+1)/(2ma²) of the sech² well −depth/cosh²(x/a) that reflects
    nothing at any energy for a positive integer λ (I. Kay & H. E. Moses,
    J. Appl. Phys. 27, 1503 (1956))."""
    if int(lam) != lam or lam < 1:
        raise ValueError("lambda must be a positive integer")
    return hbar ** 2 * lam * (lam + 1) / (2 * mass * width ** 2)


def reflectionless_well_transmission(E, lam: int, width, hbar=1.0, mass=1.0):
    """Transmission amplitude of the reflectionless well, both sides referenced
    at its centre: t = Π_{n=1..λ} (k + in/a)/(k − in/a), |t| = 1.
    From memory (the transmission coefficient of the reflectionless Pöschl–Teller
    well, poles at the bound states k = in/a); the tests check it against the
    general solver."""
    k = _k(E, 0.0, hbar, mass)
    out = np.ones_like(k, dtype=complex)
    for n in range(1, int(lam) + 1):
        out = out * (k + 1j * n / width) / (k - 1j * n / width)
    return out
