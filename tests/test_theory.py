"""The stationary-theory module: conventions, derivatives, edge cases, tables,
the command. Physics checks name their source; the rest is consistency."""
from __future__ import annotations

import json

import numpy as np
import pytest

from sojourn.theory import closed_forms as cf
from sojourn.theory import tables
from sojourn.model import potentials as P
from sojourn import theory as th
from sojourn.theory.layers import solve_layers
from sojourn.errors import TheoryError
from sojourn.cli import main
from sojourn.config.scenario import PacketSpec, loads
from sojourn.model.packets import describe
from sojourn.errors import SojournError


def pot(*terms, mass=1.0, span=(-50.0, 50.0)):
    return P.Potential(list(terms), mass=mass, span=span)


def scatter(potential, E, **kw):
    return th.scatter(potential, np.asarray(E, dtype=float), hbar=1.0, **kw)


CASES = {
    "barrier": [P.Barrier(start=0.0, end=2.0, height=1.0)],
    "double": [P.Barrier(start=0.0, end=1.5, height=1.0), P.Barrier(start=4.0, end=5.5, height=1.0)],
    "step_down_delta": [P.Step(at=0.0, height=-0.4), P.DeltaLike(at=1.0, strength=0.6),
                        P.Well(start=1.0, end=3.0, depth=0.5)],
    "up_step_barrier": [P.Step(at=0.0, height=0.2), P.Barrier(start=0.0, end=1.0, height=0.9)],
}


@pytest.mark.parametrize("name", list(CASES))
def test_flux_conservation_R_plus_T(name):
    # common practice, no source: R + T = 1 for a real potential (PHYSICS §4)
    E = np.linspace(0.25, 3.0, 57)
    s = scatter(pot(*CASES[name]), E)
    assert np.max(np.abs(s.R + s.T - 1)) < 1e-12


def _fd_phase_derivative(potential, E, which, h=1e-3, **kw):
    """8th-order central difference of arg(amplitude), phases taken relative to E."""
    c = np.array([1 / 280, -4 / 105, 1 / 5, -4 / 5, 0, 4 / 5, -1 / 5, 4 / 105, -1 / 280])
    offs = np.arange(-4, 5) * h
    out = []
    for e in E:
        s = scatter(potential, e + offs, **kw)
        amp = getattr(s, which)
        ph = np.angle(amp / amp[4])
        out.append(np.dot(c, ph) / h)
    return np.array(out)


@pytest.mark.parametrize("name", list(CASES))
def test_analytic_energy_derivatives_match_high_order_finite_differences(name):
    # common practice, no source: the analytic derivative of the matching equals an
    # 8th-order central difference of the phase to ~1e-8
    V = pot(*CASES[name])
    E = np.array([0.37, 0.81, 1.6, 2.3])
    s = scatter(V, E)
    for which, delay in (("r", s.delay_reflection), ("t", s.delay_transmission)):
        fd = _fd_phase_derivative(V, E, which)
        assert np.allclose(delay, fd, rtol=1e-8, atol=1e-8 * np.max(np.abs(delay)))


def test_derivatives_of_a_sliced_potential_at_fixed_slicing():
    # common practice, no source: same check for a smooth potential at a fixed slicing
    V = pot(P.Gaussian(center=0.0, height=0.7, width=1.0), P.Ramp(start=-1.0, end=2.0, height=0.3))
    E = np.array([0.5, 1.1])
    s = scatter(V, E, cells=800)
    for which, delay in (("r", s.delay_reflection), ("t", s.delay_transmission)):
        fd = _fd_phase_derivative(V, E, which, cells=800)
        assert np.allclose(delay, fd, rtol=1e-8)


def test_energy_exactly_at_an_inner_level_is_regular():
    # common practice, no source: r(E) is analytic at E = V of an inner layer
    V = pot(*CASES["barrier"])
    s = scatter(V, [1.0 - 1e-5, 1.0, 1.0 + 1e-5])
    assert np.all(np.isfinite(s.r)) and np.all(np.isfinite(s.delay_transmission))
    assert s.T[1] == pytest.approx(0.5 * (s.T[0] + s.T[2]), rel=1e-8)
    # Griffiths 2nd ed., Problem 2.33, limit E → V₀: T = 1/(1 + mV₀a²/(2ħ²))
    assert s.T[1] == pytest.approx(1 / (1 + 1.0 * 4.0 / 2), rel=1e-9)
    assert s.delay_transmission[1] == pytest.approx(
        0.5 * (s.delay_transmission[0] + s.delay_transmission[2]), rel=1e-7)


def test_closed_channel_and_threshold():
    # source: Griffiths 2nd ed., Problem 2.34: below a step no current passes (R = 1)
    V = pot(P.Step(at=0.0, height=1.0))
    s = scatter(V, [0.5, 1.0, 1.5])
    assert s.R[0] == pytest.approx(1, abs=1e-15) and s.T[0] == 0
    assert not s.open[0] and np.isnan(s.delay_transmission[0])
    assert s.R[1] == pytest.approx(1, abs=1e-15) and s.T[1] == 0   # exactly at the level
    assert np.isnan(s.delay_reflection[1])
    assert s.open[2] and s.T[2] > 0


def test_energies_at_or_below_the_incidence_level_are_clear_errors():
    V = pot(P.Step(at=0.0, height=1.0))
    for bad in ([0.0], [-0.1], [0.5, float("nan")]):
        with pytest.raises(TheoryError):
            scatter(V, bad)
    with pytest.raises(SojournError, match="incident"):
        scatter(pot(P.Expression(formula="0.5 - 0.5*tanh(x)")), [0.2])   # left level 1


def test_confining_potential_is_refused():
    with pytest.raises(TheoryError, match="not a scattering potential"):
        scatter(pot(P.Harmonic(center=0.0, omega=0.1)), [1.0])


def test_free_potential_transmits_everything_with_the_free_phase():
    s = scatter(pot(), [0.5, 2.0], x_r=0.0, x_t=3.0)
    assert np.all(s.R == 0) and np.allclose(s.T, 1)
    assert np.allclose(s.delay_transmission, 3.0 / np.sqrt(2 * np.array([0.5, 2.0])))


def test_unequal_levels_left_and_right():
    # source: Griffiths 2nd ed., Problem 2.34 with the step written as a drop of 0.3:
    # r = (k − q)/(k + q), T = 4kq/(k + q)²
    E = np.array([0.1, 0.5, 2.0])
    s = scatter(pot(P.Step(at=0.0, height=-0.3)), E)
    k, q = np.sqrt(2 * E), np.sqrt(2 * (E + 0.3))
    assert np.allclose(s.r, (k - q) / (k + q), rtol=1e-13)
    assert np.allclose(s.T, 4 * k * q / (k + q) ** 2, rtol=1e-13)


def test_incidence_from_the_right_is_the_mirrored_problem():
    # common practice, no source: reflecting x → −x swaps the incidence side
    V = pot(P.Barrier(start=0.0, end=1.0, height=0.8), P.Step(at=1.0, height=0.3))
    E = np.array([0.5, 0.9, 1.4]) + 0.3
    left = scatter(V, E, direction="left")
    # the mirrored potential written by hand: level 0.3 left of −1, barrier 0.8 on [−1, 0]
    hand = th.Layers(np.array([-1.0, 0.0]), np.array([0.3, 0.8, 0.0]), np.zeros(2))
    ref = solve_layers(hand, E, 1.0, 1.0, -1.0, 0.0, False)
    assert left.x_r == 1.0 and left.x_t == 0.0
    assert np.allclose(left.r, ref.r, rtol=1e-13) and np.allclose(left.t, ref.t, rtol=1e-13)
    assert np.max(np.abs(left.R + left.T - 1)) < 1e-12


def test_opaque_barrier_dwell_and_phase_time_do_not_overflow():
    s = scatter(pot(P.Barrier(start=0.0, end=400.0, height=1.0)), [0.5])
    assert np.isfinite(s.dwell[0]) and s.dwell[0] > 0
    assert np.isfinite(s.delay_reflection[0])


def test_stationary_state_is_continuous_and_has_the_delta_kink():
    # matching conditions (PHYSICS §4 / potentials.DeltaLike): ψ continuous, ψ' jumps by 2mα/ħ²·ψ
    alpha = 0.7
    V = pot(P.DeltaLike(at=0.5, strength=alpha), P.Barrier(start=1.0, end=2.0, height=0.6))
    eps = 1e-7
    x = np.array([0.5 - 2 * eps, 0.5 - eps, 0.5 + eps, 0.5 + 2 * eps, 1 - eps, 1 + eps])
    psi = th.stationary_state(V, [0.9], x, hbar=1.0)[0]
    assert abs(psi[1] - psi[2]) < 1e-6 and abs(psi[4] - psi[5]) < 1e-6
    left = (psi[1] - psi[0]) / eps
    right = (psi[3] - psi[2]) / eps
    assert (right - left) / (2 * alpha * psi[1]) == pytest.approx(1, rel=1e-5)


def test_stationary_state_far_field_has_the_stated_form():
    V = pot(P.Barrier(start=0.0, end=2.0, height=1.0))
    E = np.array([0.4, 1.3])
    s = scatter(V, E)
    x = np.array([-7.3, 9.1])
    psi = th.stationary_state(V, E, x, hbar=1.0)
    k = np.sqrt(2 * E)
    assert np.allclose(psi[:, 0], np.exp(1j * k * (x[0] - 0)) + s.r * np.exp(-1j * k * (x[0] - 0)))
    assert np.allclose(psi[:, 1], s.t * np.exp(1j * k * (x[1] - 2.0)))


def _ode_dwell(layers, E, x_t):
    """∫|ψ|² dx / k over the layers (ħ = m = 1), ψ integrated by scipy's solve_ivp
    (DOP853) from ψ = e^{ik(x−x_t)} at x_t back to the entry, one layer at a time,
    then divided by the incident amplitude: independent of the layer solver."""
    from scipy.integrate import solve_ivp
    k = np.sqrt(2 * E)
    y = np.array([1.0 + 0j, 1j * k, 0.0 + 0j])
    for a, b, V in reversed(layers):
        def rhs(x, y):
            return [y[1], 2 * (V - E) * y[0], abs(y[0]) ** 2]
        y = solve_ivp(rhs, (b, a), y, method="DOP853", rtol=1e-12, atol=1e-14).y[:, -1]
    incident = 0.5 * (y[0] + y[1] / (1j * k))
    return float(-y[2].real) / abs(incident) ** 2 / k


def test_dwell_time_equals_integral_of_the_stationary_state():
    # Büttiker, Phys. Rev. B 27, 6178 (1983): τ_D = ∫|ψ|² dx over the region / (ħk/m);
    # ψ from scipy's ODE solver (independent), and the returned states agree with it
    V = pot(*CASES["double"])
    E = np.array([0.3, 0.9])
    s = scatter(V, E)
    layers = [(0.0, 1.5, 1.0), (1.5, 4.0, 0.0), (4.0, 5.5, 1.0)]
    for i, e in enumerate(E):
        assert s.dwell[i] == pytest.approx(_ode_dwell(layers, e, 5.5), rel=1e-8)
    x = np.linspace(0.0, 5.5, 200001)
    psi = th.stationary_state(V, E, x, hbar=1.0)
    integral = np.trapezoid(np.abs(psi) ** 2, x, axis=1)
    assert np.allclose(s.dwell, integral / np.sqrt(2 * E), rtol=1e-8)


def test_dwell_and_state_at_an_exact_inner_level():
    # barrier V₀ = 0.5 on [0, a = 3], ħ = m = 1, E = V₀ (k = 1): ψ'' = 0 inside, so
    # matching ψ = t e^{ik(x−a)} at a and e^{ikx} + r e^{−ikx} at 0 gives
    # ψ = t(1 + ik(x−a)), t = 2/(2 − ika); ∫₀³|ψ|²dx / v = 12·|t|² = 12·4/13 (worked
    # by hand; scipy.integrate.quad of |ψ|² checks the integral). Before: 3.0014.
    from scipy.integrate import quad
    a, k = 3.0, 1.0
    t = 2 / (2 - 1j * k * a)
    exact = quad(lambda x: abs(t * (1 + 1j * k * (x - a))) ** 2, 0.0, a, epsabs=0,
                 epsrel=1e-13)[0] / k
    assert exact == pytest.approx(12 * 4 / 13, rel=1e-12)
    V = pot(P.Barrier(start=0.0, end=a, height=0.5))
    s = scatter(V, [0.5])
    assert s.dwell[0] == pytest.approx(exact, rel=1e-8)
    assert s.T[0] == pytest.approx(abs(t) ** 2, rel=1e-12)
    assert _ode_dwell([(0.0, a, 0.5)], 0.5, a) == pytest.approx(exact, rel=1e-8)
    x = np.linspace(0.0, a, 13)
    psi = th.stationary_state(V, [0.5], x, hbar=1.0)[0]
    assert np.max(np.abs(psi - t * (1 + 1j * k * (x - a)))) < 1e-9


def test_phase_unwrapping_follows_the_derivative():
    V = pot(*CASES["double"])
    E = np.linspace(0.2, 3.0, 60)          # coarse: np.unwrap alone could not be trusted
    s = scatter(V, E)
    fine = np.linspace(0.2, 3.0, 59 * 100 + 1)   # contains the coarse points
    sf = scatter(V, fine)
    assert np.allclose(s.phase_transmission, sf.phase_transmission[::100], rtol=0, atol=1e-9)
    assert np.all(np.diff(sf.phase_transmission) > -1e-9)   # rises monotonically here


def test_refinement_reports_and_respects_the_tolerance():
    V = pot(P.SmoothStep(at=0.0, height=1.0, width=0.5))
    E = np.array([1.5, 3.0])
    loose = scatter(V, E, tol=1e-6)
    tight = scatter(V, E, tol=1e-11)
    R_ref = cf.fermi_step_reflection_probability(E, 1.0, 0.5)
    assert loose.cells < tight.cells and loose.error_estimate <= 1e-6
    assert np.allclose(tight.R, R_ref, rtol=1e-8)
    assert np.allclose(loose.R, R_ref, rtol=1e-4)


def test_vectorised_call_equals_scalar_calls():
    V = pot(*CASES["up_step_barrier"])
    E = np.array([0.5, 1.3, 2.2])
    s = scatter(V, E)
    for i, e in enumerate(E):
        one = scatter(V, e)
        assert one.r[0] == pytest.approx(s.r[i], rel=1e-14)
        assert one.dwell[0] == pytest.approx(s.dwell[i], rel=1e-12)


# ---------------------------------------------------------------------------------------
# tables and the command

STEP = """
title: unit step
units: atomic
grid: {span: [-600.0, 600.0], points: 4096}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -200.0, width: 20.0, energy: 0.5}
evolve: {duration: 300.0}
"""


def test_theory_table_has_no_nan_and_none_where_undefined():
    sc = loads(STEP)
    table = tables.theory_table(sc, np.array([0.2, 0.5, 1.0, 1.5]))
    for key in tables.COLUMNS:
        assert len(table[key]) == 4
    assert table["delay_transmission"][:3] == [None, None, None]
    assert table["delay_reflection"][2] is None
    text = json.dumps(table, allow_nan=False)       # raises on NaN or inf
    assert '"units"' in text and table["units"]["time"] == "hbar/E_h"
    assert table["reference_points"] == {"x_r": 0.0, "x_t": 0.0}
    assert table["packet"]["reflection"]["wigner_delay"] == pytest.approx(2.0)


def test_default_energies_cover_the_packet_band_above_the_level():
    sc = loads(STEP)
    i = tables.scenario_inputs(sc)
    E = tables.default_energies(i.packet, i.hbar, i.mass)
    k = np.sqrt(2 * E)
    assert E.min() > 0 and k.min() == pytest.approx(1 - 4 / 40) and k.max() == pytest.approx(1.1)


def test_parse_energies():
    assert np.allclose(tables.parse_energies("0.1:0.5:5"), [0.1, 0.2, 0.3, 0.4, 0.5])
    for bad in ("1:2", "a:b:3", "0:1:0", "0:inf:3"):
        with pytest.raises(TheoryError):
            tables.parse_energies(bad)


def test_cli_theory_json_csv_plain_and_plot(tmp_path, capsys):
    path = tmp_path / "step.yaml"
    path.write_text(STEP)
    assert main(["theory", str(path), "--energies", "0.2:0.8:4", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["delay_reflection"][0] == pytest.approx(cf.step_delay(0.2, 1.0))
    assert main(["theory", str(path), "--energies", "0.2:0.8:4", "--csv"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[0].startswith("energy,R,T") and len(lines) == 5
    png = tmp_path / "t.png"
    assert main(["theory", str(path), "--plot", str(png)]) == 0
    out = capsys.readouterr().out
    assert "tau_R" in out and png.stat().st_size > 1000


def test_cli_theory_bad_input_is_one_line_exit_2(tmp_path, capsys):
    path = tmp_path / "step.yaml"
    path.write_text(STEP)
    assert main(["theory", str(path), "--energies", "1:2"]) == 2
    err = capsys.readouterr().err
    assert "A:B:N" in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert main(["theory", str(path), "--energies", "-1:0.5:3"]) == 2
    harmonic = tmp_path / "h.yaml"
    harmonic.write_text(STEP.replace("step: {at: 0.0, height: 1.0}", "harmonic: {omega: 0.1}"))
    assert main(["theory", str(harmonic)]) == 2
    assert "not a scattering potential" in capsys.readouterr().err


def test_json_is_strict_where_a_number_is_missing(tmp_path, capsys):
    # RFC 8259 has no NaN: a missing number is null
    pred = th.ChannelPrediction("transmission", 0.5, float("nan"), None, float("inf"), 1.0, None)
    assert pred.as_dict()["centroid_shift"] is None and pred.as_dict()["flux_delay"] is None
    path = tmp_path / "hetero.yaml"
    path.write_text(STEP.replace("units: atomic", "units: lab\nmass: 0.067").replace(
        "height: 1.0", "height: 0.3").replace("energy: 0.5", "energy: 0.29"))
    assert main(["theory", str(path), "--json"]) == 0

    def refuse(name):
        raise AssertionError(f"bare {name} in the JSON output")
    data = json.loads(capsys.readouterr().out, parse_constant=refuse)
    assert data["packet"]["reflection"]["flux_delay"] is not None


def test_theory_and_the_run_use_one_dwell_region():
    # the region rule of build.default_region: below the step top it reaches to the box
    # edge, so the packet dwell is the evanescent penetration. Closed form (Büttiker,
    # Phys. Rev. B 27, 6178 (1983), with the step state of Griffiths 2nd ed., Problem 2.34,
    # ħ = m = V₀ = 1): τ_D(k) = |t|²(1 − e^{−2κL})/(2κk), |t|² = 4k²/(k² + κ²) = 2k²,
    # averaged with scipy.integrate.quad over the packet's |ψ̃₀(k)|²
    from scipy.integrate import quad
    from sojourn.build import build
    sc = loads(STEP)
    table = tables.theory_table(sc, np.array([0.5]))
    assert table["dwell_region"] == list(build(sc).region) == [0.0, 600.0]
    k0, sk, L = 1.0, 1 / 40, 600.0
    g = lambda k: np.exp(-0.5 * ((k - k0) / sk) ** 2)
    kappa = lambda k: np.sqrt(2 - k * k)
    tau = lambda k: 2 * k * k * -np.expm1(-2 * kappa(k) * L) / (2 * kappa(k) * k)
    lo, hi = k0 - 8 * sk, k0 + 8 * sk
    expected = quad(lambda k: g(k) * tau(k), lo, hi, epsrel=1e-12)[0] / quad(g, lo, hi)[0]
    assert table["packet"]["dwell"] == pytest.approx(expected, rel=1e-8)
    assert table["dwell"][0] == pytest.approx(tau(1.0), rel=1e-10)


def _packet(E0, center=-200.0, width=20.0, level=0.0):
    """The PacketInfo a run makes of this packet (ħ = m = 1)."""
    return describe(PacketSpec(center=center, width=width, energy=E0), 1.0, 1.0, level)


def test_opaque_barrier_says_why_its_transmission_is_left_out():
    # T ~ 16E(V₀−E)/V₀² e^{−2κa} (Griffiths 2nd ed., Problem 2.33, opaque limit): with
    # κa = 20 the packet T (~1e-17) is far below what a run can measure; with κa = 1000 it
    # is below the smallest float
    V = pot(P.Barrier(start=0.0, end=20.0, height=1.0))
    p = th.packet_prediction(V, _packet(0.5), hbar=1.0, mass=1.0)
    T0 = 16 * 0.5 * 0.5 * np.exp(-2 * 20.0)
    assert 0.1 * T0 < p.transmission.probability < 10 * T0
    assert any("opaque barrier" in w and "cannot measure" in w for w in p.warnings)
    V = pot(P.Barrier(start=0.0, end=1000.0, height=1.0))
    p = th.packet_prediction(V, _packet(0.5), hbar=1.0, mass=1.0)
    assert p.transmission is None and p.reflection.probability == pytest.approx(1, abs=1e-12)
    assert any("opaque barrier" in w and "no transmission prediction" in w for w in p.warnings)
    # a step below its top has no open channel at all: nothing to explain
    step = th.packet_prediction(pot(P.Step(at=0.0, height=1.0)), _packet(0.5), hbar=1.0,
                                mass=1.0)
    assert step.transmission is None and step.warnings == ()


def test_share_above_the_top_warns_only_when_the_band_straddles_it():
    # share = ½ erfc((k_top − k₀)/(√2σ_k)) of the Gaussian |ψ̃₀(k)|² (common practice)
    V = pot(P.Barrier(start=0.0, end=2.0, height=1.0))
    far = th.packet_prediction(V, _packet(1.5), hbar=1.0, mass=1.0)
    assert far.share_above_top == pytest.approx(1.0, abs=1e-12)
    assert not any("above the barrier top" in w for w in far.warnings)
    near = th.packet_prediction(V, _packet(1.0), hbar=1.0, mass=1.0)   # k₀ = k_top
    assert near.share_above_top == pytest.approx(0.5, abs=1e-12)
    text = [w for w in near.warnings if "above the barrier top" in w]
    assert text and f"{100 * near.share_above_top:.3g}% of the packet" in text[0]


def test_a_zero_of_r_inside_the_band_is_named():
    # above a rectangular barrier T = 1 where qa = nπ (Griffiths 2nd ed., Problem 2.33):
    # V₀ = 1, a = 2, n = 1 gives E = 1 + π²/8 = 2.2337
    V = pot(P.Barrier(start=0.0, end=2.0, height=1.0))
    E_zero = 1 + np.pi ** 2 / 8
    p = th.packet_prediction(V, _packet(E_zero, width=5.0), hbar=1.0, mass=1.0)
    holes = [w for w in p.warnings if "zero of r" in w]
    assert len(holes) == 1
    assert float(holes[0].split("E = ")[1].split()[0]) == pytest.approx(E_zero, rel=2e-3)
    # a step below its top reflects everything: no hole
    step = th.packet_prediction(pot(P.Step(at=0.0, height=1.0)), _packet(0.5), hbar=1.0,
                                mass=1.0)
    assert not any("zero of r" in w for w in step.warnings)


def test_transmission_above_a_step_has_no_delay():
    # source: Griffiths 2nd ed., Problem 2.34: above a step t = 2k/(k + q) is real, so with
    # r and t referenced at the step every transmission delay is 0 (unequal levels)
    for height in (0.3, -0.3):
        V = pot(P.Step(at=0.0, height=height))
        p = th.packet_prediction(V, _packet(1.5 * abs(height) + max(height, 0)), hbar=1.0,
                                 mass=1.0)
        tr = p.transmission
        for value in (tr.centroid_shift, tr.centroid_delay, tr.flux_delay, tr.spectral_delay,
                      tr.wigner_delay):
            assert abs(value) < 1e-12


def test_physics_entry_points_check_their_arguments():
    V = pot(P.Step(at=0.0, height=1.0))
    good = _packet(0.5)
    for kwargs in (dict(hbar=0.0, mass=1.0), dict(hbar=1.0, mass=-1.0),
                   dict(hbar=1.0, mass=1.0, region=(5.0, 0.0)),
                   dict(hbar=1.0, mass=1.0, reference=float("nan"))):
        with pytest.raises(TheoryError):
            th.packet_prediction(V, good, **kwargs)
    with pytest.raises(TheoryError, match="PacketInfo"):
        th.packet_prediction(V, {"k0": 1.0}, hbar=1.0, mass=1.0)
    with pytest.raises(TheoryError, match="PacketInfo"):
        th.synthesize(V, None, [0.0], [0.0], hbar=1.0, mass=1.0)
    with pytest.raises(TheoryError):
        th.synthesize(V, good, [0.0], [0.0], hbar=1.0, mass=0.0)


def test_the_text_table_is_readable_and_the_machine_formats_complete():
    # a terminal shows a few rounded rows; --json and --csv keep every energy
    sc = loads("""\
units: atomic
grid: {span: [-300.0, 300.0], points: 4096}
potential:
  - barrier: {start: 0.0, end: 2.0, height: 1.0}
packet: {center: -120.0, width: 20.0, energy: 0.5}
evolve: {duration: 100.0}
""", "b.yaml")
    table = tables.theory_table(sc)
    text = tables.format_table(table).splitlines()
    body = [line for line in text if line[:1] == " " and line.strip()[:1].isdigit()]
    assert len(body) == tables.DISPLAY_ROWS < len(table["energy"])
    assert any("energies shown" in line for line in text)
    assert len(tables.table_csv(table).strip().splitlines()) >= len(table["energy"])


def test_a_table_potential_gets_its_predictions_quickly():
    # a table that is a step up to a 0.001-wide ramp: its phase delay at E₀ = V₀/2 is
    # the step's ħ/√(E(V₀−E)) = 2 (Landau & Lifshitz §25; closed_forms.step_delay)
    # up to the ramp's width, and the packet averages exist (they once failed after 40 s)
    pot = P.Potential([P.Table(data=[(-1000, 0), (0, 0), (0.001, 1), (1000, 1)])],
                      span=(-300.0, 300.0))
    info = describe(PacketSpec(center=-100.0, width=10.0, energy=0.5), 1.0, 1.0, 0.0)
    pred = th.packet_prediction(pot, info, hbar=1.0, mass=1.0, reference=0.0, region=(0.0, 250.0))
    assert pred.reflection.wigner_delay == pytest.approx(float(cf.step_delay(0.5, 1.0)), rel=2e-3)
    assert pred.reflection.probability == pytest.approx(1.0, abs=1e-12)
