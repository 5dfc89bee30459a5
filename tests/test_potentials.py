"""Potential terms: exact profiles, grid cell averages, and the shape facts the
theory relies on."""
import math

import numpy as np
import pytest

from sojourn.model import expression as expression
from sojourn.model.potentials import Barrier, DeltaLike, Expression, Gaussian, Harmonic, Potential, Ramp, Sech2, SmoothStep, Step, Well


def cells(term, left=-20.0, right=20.0, n=400):
    dx = (right - left) / n
    x = left + dx * np.arange(n) + dx / 2
    return x, dx, term.cell(x, dx)


@pytest.mark.parametrize("term,exact", [
    (Step(at=0.123, height=2.0), lambda a, b: 2.0 * (max(b, 0.123) - max(a, 0.123))),
    (Barrier(start=-1.37, end=2.71, height=0.5),
     lambda a, b: 0.5 * max(0.0, min(b, 2.71) - max(a, -1.37))),
    (Well(start=-1.37, end=2.71, depth=0.5),
     lambda a, b: -0.5 * max(0.0, min(b, 2.71) - max(a, -1.37))),
])
def test_cell_averages_integrate_the_profile_exactly(term, exact):
    # a cell average times dx is the integral of the exact profile over the cell
    # (definition of the cell average; common practice, no source)
    x, dx, v = cells(term)
    for xi, vi in zip(x[::7], v[::7]):
        assert vi * dx == pytest.approx(exact(xi - dx / 2, xi + dx / 2), abs=1e-13)


def test_cell_average_keeps_jump_position():
    # the first moment of the jump's derivative sits at the true jump position
    x, dx, v = cells(Step(at=0.317, height=1.0))
    jump = np.diff(v)
    centre = np.sum(jump * (x[:-1] + dx / 2)) / np.sum(jump)
    assert centre == pytest.approx(0.317, abs=1e-12)


def test_ramp_is_linear_and_cell_average_matches_integral():
    ramp = Ramp(start=-2.0, end=3.0, height=1.5)
    assert ramp.point([-5, -2, 0.5, 3, 9]) == pytest.approx([0, 0, 0.75, 1.5, 1.5])
    x, dx, v = cells(ramp)
    fine = np.linspace(-20, 20, 400001)
    integral = np.trapezoid(ramp.point(fine), fine)
    assert v.sum() * dx == pytest.approx(integral, rel=1e-8)
    assert ramp.levels() == (0.0, 1.5)


def test_delta_like_keeps_strength_and_centre():
    x, dx, v = cells(DeltaLike(at=0.77, strength=0.3))
    assert v.sum() * dx == pytest.approx(0.3, rel=1e-12)
    assert np.sum(v * x) / np.sum(v) == pytest.approx(0.77, abs=1e-12)
    assert DeltaLike(at=0.77, strength=0.3).deltas() == [(0.77, 0.3)]


def test_smooth_shapes():
    # Fermi form U₀/(1+e^{-x/a}) and U₀/cosh²(x/a) (Landau & Lifshitz §25 problems)
    s = SmoothStep(at=1.0, height=2.0, width=0.5)
    assert s.point([1.0])[0] == pytest.approx(1.0)
    assert s.point([1.0 + 0.5 * math.log(3)])[0] == pytest.approx(2.0 * 0.75)
    h = Sech2(center=0.0, height=-3.0, width=2.0)
    assert h.point([2.0])[0] == pytest.approx(-3.0 / math.cosh(1.0) ** 2)
    g = Gaussian(center=1.0, height=0.4, width=2.0)
    assert g.point([3.0])[0] == pytest.approx(0.4 * math.exp(-0.5))
    a, b = g.support()
    assert g.point([a])[0] < 1e-12 * 0.4 * 1.0001


def test_harmonic_uses_the_mass():
    trap = Harmonic(center=1.0, omega=0.5)
    assert trap.point([3.0], mass=2.0)[0] == pytest.approx(0.5 * 2.0 * 0.25 * 4.0)


def test_potential_sum_levels_and_support():
    p = Potential([Step(at=0.0, height=1.0), Barrier(start=5.0, end=6.0, height=2.0)])
    assert p.levels() == (0.0, 1.0)
    assert p.support() == (0.0, 6.0)
    assert p.breakpoints() == [0.0, 5.0, 6.0]
    assert p.piecewise_constant


def test_expression_levels_read_off_the_span():
    p = Potential([Expression(formula="0.5*tanh(x/3) + 0.5")], span=(-200.0, 200.0))
    left, right = p.levels()
    assert left == pytest.approx(0.0, abs=1e-12) and right == pytest.approx(1.0)


@pytest.mark.parametrize("formula", [
    "__import__('os').system('true')", "x.__class__", "(lambda: 1)()", "[t for t in x]",
    "x[0]", "open('f')", "globals()", "z + 1", "'text'", "x if x else 1",
])
def test_expression_rejects_everything_but_arithmetic(formula):
    with pytest.raises(expression.ExpressionError):
        expression.parse(formula)


def test_expression_blow_up_is_harmless():
    with pytest.raises(expression.ExpressionError, match="not a finite number"):
        expression.parse("9**9**9")   # refused before any grid exists


def test_large_grids_are_evaluated_in_chunks_with_the_same_values():
    # the chunked sum equals the direct evaluation of each term (definition of the sum)
    from sojourn.model import potentials
    x = np.linspace(-50, 50, 3 * potentials.CHUNK + 17)
    terms = [Expression(formula="0.3*exp(-x**2/8)*tanh(x)"), Step(at=0.3, height=0.7)]
    pot = Potential(terms)
    direct = terms[0].point(x) + terms[1].point(x)
    assert np.array_equal(pot(x), direct)
    dx = x[1] - x[0]
    assert np.allclose(pot.on_grid(x, dx), terms[0].cell(x, dx) + terms[1].cell(x, dx), rtol=0,
                       atol=1e-15)
