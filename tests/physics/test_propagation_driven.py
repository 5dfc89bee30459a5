"""The split-operator propagator with a driven potential V(x) + f(t)·S(x)
(engine/propagate.py, `TimeDependence`) against exact results and its own
order of convergence (PHYSICS §Driven potentials)."""
import math

import numpy as np
import pytest

from sojourn.engine.propagate import SCHEMES, Propagator, TimeDependence
from sojourn.model import packets
from sojourn.model.grid import Grid


def test_uniform_oscillation_is_a_pure_phase():
    # V1·cos(ωt) everywhere: ψ(t) = ψ_free(t)·exp(−i(V1/ħω) sin ωt) exactly (it commutes
    # with H₀; common practice, no source). The midpoint kicks integrate cos to O(Δt²).
    grid = Grid(-200.0, 200.0, 1024)
    V1, omega, dt, steps = 0.3, 0.4, 0.01, 1000
    drive = TimeDependence(parts=((lambda t: V1 * math.cos(omega * t), slice(None),
                                   np.ones(grid.points)),))
    prop = Propagator(grid, np.zeros(grid.points), 1.0, 1.0, dt, drive=drive)
    info = packets.PacketInfo(-20.0, 5.0, 1.0, 0.1, 0.5, 0.505, 1.0, 0.0)
    psi0 = packets.on_grid(grid, info)
    prop.set_state(psi0)
    for chunk in (1, 7, 300, 692):            # stretches of any length join correctly
        prop.advance(chunk)
    t = steps * dt
    exact = packets.free_evolution(grid.x, t, info, 1.0, 1.0) * np.exp(
        -1j * V1 / omega * math.sin(omega * t))
    assert np.max(np.abs(prop.psi - exact)) < 1e-5


def _driven_case(scheme, dt, chunk):
    grid = Grid(-100.0, 100.0, 512)
    V = 0.5 * np.exp(-(grid.x / 3.0) ** 2 / 2)
    S = np.exp(-(grid.x / 4.0) ** 2 / 2)
    drive = TimeDependence(parts=((lambda t: 0.4 * math.cos(0.9 * t + 0.3), slice(None), S),),
                           fields=(lambda t: 0.1 * math.sin(0.5 * t) ** 2 * np.tanh(grid.x / 5),))
    prop = Propagator(grid, V, 1.0, 1.0, dt, scheme, drive=drive)
    prop.set_state(packets.gaussian(grid.x, -20.0, 4.0, 1.0))
    steps = int(round(20.0 / dt))
    while prop.step < steps:                  # stretches of `chunk` steps, as between samples
        prop.advance(min(chunk, steps - prop.step))
    return prop.psi.copy(), grid.dx


@pytest.mark.parametrize("scheme", ["strang", "yoshida4"])
def test_driven_run_keeps_the_scheme_order(scheme):
    # source: Strang is second order, the triple jump fourth (Feit, Fleck & Steiger 1982;
    # H. Yoshida, Phys. Lett. A 150, 262 (1990)) — for V(x, t) too when each kick takes V at
    # its sub-step's midpoint; the reference is the same scheme at a 256× smaller step
    exact, dx = _driven_case(scheme, 0.5 / 256, 1000)
    steps = [0.5, 0.25, 0.125]
    errors = [np.linalg.norm(_driven_case(scheme, dt, 7)[0] - exact) * math.sqrt(dx)
              for dt in steps]
    orders = [math.log2(a / b) for a, b in zip(errors, errors[1:])]
    assert all(abs(p - SCHEMES[scheme].order) < 0.25 for p in orders), (errors, orders)


def test_static_propagator_does_no_drive_work():
    # an empty TimeDependence is no drive: the static path runs (common practice)
    grid = Grid(-50.0, 50.0, 256)
    prop = Propagator(grid, np.zeros(256), 1.0, 1.0, 0.05, drive=TimeDependence())
    assert prop.drive is None
    with pytest.raises(ValueError, match="TimeDependence"):
        Propagator(grid, np.zeros(256), 1.0, 1.0, 0.05, drive=lambda t: 0)
