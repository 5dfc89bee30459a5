"""2D partial waves: arguments, convergence in m_max, the table, packet
averages' limits, and the polar figure (nothing clipped, points drawn, bad
input refused). The physics checks against published forms are in
tests/physics/test_partial_waves_published.py."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from PIL import Image

from sojourn.errors import RenderError, TheoryError
from sojourn.render.polar import (PolarCurve, PolarPoints, curves_from_table, polar_figure,
                                  save_polar)
from sojourn.theory.angular_averages import packet_angular_prediction, partial_wave_table
from sojourn.theory.partial_waves import phase_shifts, sliced_shells

DISK = [(3.0, 1.0)]          # the circular barrier: a = 3, V₀ = 1 (atomic units)


@pytest.mark.parametrize("shells,message", [
    ([], "at least one"),
    ([(3.0, 1.0), (2.0, 0.0)], "increasing"),
    ([(0.0, 1.0)], "positive"),
    ([(3.0, float("nan"))], "heights"),
    ([(3.0, -math.inf)], "heights"),
    ([("a", 1.0)], "pairs"),
    (5, "pairs"),
])
def test_bad_shells_are_refused_with_the_reason(shells, message):
    with pytest.raises(TheoryError, match=message):
        phase_shifts(shells, [0.5])


@pytest.mark.parametrize("kw,message", [
    (dict(energies=[0.0]), "positive"), (dict(energies=[math.nan]), "positive"),
    (dict(energies=[]), "positive"), (dict(energies=[0.5], hbar=0.0), "hbar"),
    (dict(energies=[0.5], m_max=-1), "m_max"), (dict(energies=[0.5], m_max=2.5), "m_max"),
    (dict(energies=["half"]), "numbers"),
])
def test_bad_energies_and_constants_are_refused(kw, message):
    with pytest.raises(TheoryError, match=message):
        phase_shifts(DISK, **kw)


def test_automatic_m_max_keeps_every_partial_wave_that_matters():
    E = [0.2, 0.5, 3.0]
    auto = phase_shifts(DISK, E)
    more = phase_shifts(DISK, E, m_max=int(auto.m[-1]) + 25)
    theta = np.linspace(0, np.pi, 19)
    assert np.allclose(auto.cross_section(theta), more.cross_section(theta), rtol=1e-11)
    assert np.allclose(auto.delay(theta), more.delay(theta), rtol=1e-9, atol=1e-12)
    # m_max grows with k·a: the sum needs m up to about k·a
    assert auto.m[-1] >= math.sqrt(2 * 3.0) * 3.0


def test_sliced_shells_hold_midpoint_values_and_refuse_bad_profiles():
    shells = sliced_shells(lambda r: 2 * np.asarray(r), 4.0, 4)
    assert shells == [(1.0, 1.0), (2.0, 3.0), (3.0, 5.0), (4.0, 7.0)]
    with pytest.raises(TheoryError, match="count"):
        sliced_shells(lambda r: r, 4.0, 0)
    with pytest.raises(TheoryError, match="finite value"):
        sliced_shells(lambda r: np.full(3, np.nan), 4.0, 3)


def test_table_is_strict_json_with_one_row_per_energy():
    theta = np.linspace(0, np.pi, 5)
    table = partial_wave_table(DISK, [0.3, 0.5], theta)
    text = json.dumps(table, allow_nan=False)
    assert json.loads(text)["m"][0] == 0
    assert len(table["phase_shift"]) == 2 and len(table["phase_shift"][0]) == len(table["m"])
    assert len(table["delay"][1]) == 5 and len(table["cross_section"][0]) == 5
    with pytest.raises(TheoryError, match="angles"):
        partial_wave_table(DISK, [0.5], [])
    with pytest.raises(TheoryError, match="angles"):
        partial_wave_table(DISK, [0.5], ["north"])


def test_a_narrow_packet_averages_to_the_stationary_values():
    theta = np.array([0.0, 1.0, 2.0, np.pi])
    narrow = packet_angular_prediction(DISK, theta, k0=1.0, sigma_k=1e-4)
    exact = phase_shifts(DISK, [0.5])
    assert np.allclose(narrow.cross_section, exact.cross_section(theta)[0], rtol=1e-6)
    assert np.allclose(narrow.delay, exact.delay(theta)[0], rtol=1e-5)
    assert narrow.excluded_weight < 1e-14
    wide = packet_angular_prediction(DISK, theta, k0=1.0, sigma_k=0.2)
    assert wide.excluded_weight > 0 and wide.k_range[0] == pytest.approx(0.01)
    json.dumps(wide.as_dict(), allow_nan=False)
    with pytest.raises(TheoryError, match="sigma_k"):
        packet_angular_prediction(DISK, theta, k0=1.0, sigma_k=0.0)


# ---------------------------------------------------------------------------------------
# the polar figure


@pytest.fixture(scope="module")
def drawn():
    theta = np.linspace(0, np.pi, 91)
    curves = curves_from_table(partial_wave_table(DISK, [0.5, 0.8], theta), "Eh")
    avg = packet_angular_prediction(DISK, theta[::10], k0=1.0, sigma_k=0.05)
    points = PolarPoints(avg.theta, avg.delay, np.full(avg.theta.size, 0.1),
                         avg.cross_section, 0.05 * avg.cross_section)
    return curves, points


@pytest.mark.parametrize("size,style", [((3.5, 2.6), "paper"), ((8.0, 4.3), "paper"),
                                        ((-1920, -1080), "talk"), ((-640, -360), "talk-light")])
def test_polar_figure_has_nothing_outside_its_canvas(drawn, size, style):
    curves, points = drawn
    fig = polar_figure(curves, measured=points, time_unit="ħ/Eh", length_unit="a₀",
                       style=style, size=size, dpi=100, title="disk a = 3, V₀ = 1")
    fig.canvas.draw()
    box = fig.get_tightbbox(fig.canvas.get_renderer()).transformed(fig.dpi_scale_trans)
    assert box.x0 >= -1 and box.y0 >= -1
    assert box.x1 <= fig.bbox.x1 + 1 and box.y1 <= fig.bbox.y1 + 1


def test_polar_figure_draws_theory_measured_points_and_the_zero_delay_circle(drawn):
    curves, points = drawn
    fig = polar_figure(curves, measured=points, dpi=100)
    gids = {a.get_gid() for ax in fig.axes for a in ax.get_children()}
    assert {"theory-delay-0", "theory-delay-1", "theory-cross-section-0", "zero-delay",
            "measured-delay", "measured-cross-section"} <= gids
    line = next(a for a in fig.axes[0].get_lines() if a.get_gid() == "theory-delay-0")
    theta, r = line.get_data()
    assert theta.min() == pytest.approx(-np.pi) and theta.max() == pytest.approx(np.pi)
    assert np.allclose(r[: r.size // 2][::-1], r[r.size // 2:])    # f(−θ) = f(θ)


def test_a_cross_section_spanning_decades_gets_a_log_radius():
    theta = np.linspace(0, np.pi, 61)
    curves = curves_from_table(partial_wave_table([(3.0, math.inf)], [50.0], theta))
    fig = polar_figure(curves, dpi=100)
    assert fig.axes[1].get_yscale() == "log"
    assert polar_figure(curves_from_table(partial_wave_table(DISK, [0.5], theta)),
                        dpi=100).axes[1].get_yscale() == "linear"


def test_saved_polar_figure_has_the_requested_pixels(drawn, tmp_path):
    curves, _ = drawn
    out = save_polar(polar_figure(curves, size=(6.0, 3.0), dpi=100), tmp_path / "p.png", dpi=100)
    with Image.open(out) as im:
        assert im.size == (600, 300)
    with pytest.raises(RenderError, match="format"):
        save_polar(polar_figure(curves, dpi=100), tmp_path / "p.bmp")


@pytest.mark.parametrize("bad,message", [
    (dict(curves=[]), "at least one"),
    (dict(measured=PolarPoints(np.zeros(3), delay=np.zeros(2))), "2 values for 3"),
    (dict(dpi=0), "dpi"),
    (dict(size=(0.0, 3.0)), "size"),
    (dict(style="neon"), "style"),
])
def test_bad_polar_input_is_refused_with_the_reason(drawn, bad, message):
    kw = {"curves": drawn[0], "dpi": 100, **bad}
    with pytest.raises(RenderError, match=message):
        polar_figure(kw.pop("curves"), **kw)
    with pytest.raises(RenderError, match="partial-wave table"):
        curves_from_table({"theta": [0, 1]})
    with pytest.raises(RenderError, match="two finite angles"):
        polar_figure([PolarCurve("x", np.zeros(1), np.zeros(1), np.zeros(1))])


def test_packet_average_resolves_a_narrow_resonance_inside_the_band():
    """A ring resonance (Γ ≈ 0.006) inside a band of σ_k = 0.01: the panels are
    refined until the averages match a 40001-point trapezoid rule on the band."""
    shells, th = [(2.0, 0.0), (2.8, 4.0)], np.array([0.5, 2.0, np.pi])
    k0, sk = math.sqrt(2 * 0.515125), 0.01
    pred = packet_angular_prediction(shells, th, k0=k0, sigma_k=sk)
    k = np.linspace(k0 - 8 * sk, k0 + 8 * sk, 40001)
    rho = np.exp(-0.5 * ((k - k0) / sk) ** 2)[:, None]
    ps = phase_shifts(shells, 0.5 * k ** 2)
    flux = np.trapezoid(rho * ps.cross_section(th), k, axis=0)
    assert np.allclose(pred.cross_section, flux / np.trapezoid(rho[:, 0], k), rtol=1e-6)
    assert np.allclose(pred.delay, np.trapezoid(rho * ps.weighted_delay(th), k, axis=0) / flux,
                       rtol=1e-6)
    assert pred.nodes > 64


def test_bessel_recurrences_agree_with_scipy():
    """The orders 0…M by recurrence (Miller for J, I; upward for Y, K) against
    scipy.special, relative to the envelope √(J² + Y²) (J, Y) or the value (I, K)."""
    from scipy import special
    from sojourn.theory.radial_matching import _orders
    z = np.concatenate([np.geomspace(1e-3, 1, 12), np.linspace(1, 120, 40)])[:, None]
    orders = np.arange(-1, 152)
    env = np.hypot(special.jv(orders, z), special.yv(orders, z))
    for kind, fn in (("J", special.jv), ("Y", special.yv), ("I", special.ive),
                     ("K", special.kve)):
        ref = fn(orders, z)
        ok = np.isfinite(ref) & (np.abs(ref) > 1e-280) & (np.abs(ref) < 1e280)
        scale = env if kind in "JY" else np.abs(ref)
        got = _orders(kind, 150, z)
        with np.errstate(invalid="ignore"):          # inf − inf where scipy overflows too
            assert np.max(np.abs(got - ref)[ok] / scale[ok]) < 1e-12


def test_bin_predictions_are_flux_weighted_means_over_each_bin():
    """Bin averages against a dense trapezoid rule in θ of the pointwise packet
    averages (the flux per angle and the flux-weighted delay)."""
    from sojourn.theory.angular_averages import packet_bin_prediction
    edges = np.array([0.0, 0.3, 1.0, 2.5, np.pi])
    binned = packet_bin_prediction(DISK, edges, k0=1.0, sigma_k=0.05)
    assert np.allclose(binned.theta, 0.5 * (edges[1:] + edges[:-1]))
    for i in range(edges.size - 1):
        th = np.linspace(edges[i], edges[i + 1], 801)
        point = packet_angular_prediction(DISK, th, k0=1.0, sigma_k=0.05)
        flux = np.trapezoid(point.cross_section, th)
        assert binned.cross_section[i] == pytest.approx(flux / (th[-1] - th[0]), rel=1e-6)
        assert binned.delay[i] == pytest.approx(
            np.trapezoid(point.cross_section * point.delay, th) / flux, rel=1e-6)
    with pytest.raises(TheoryError, match="increasing"):
        packet_bin_prediction(DISK, [1.0, 0.5], k0=1.0, sigma_k=0.05)


def test_beam_prediction_tends_to_the_band_average_for_a_wide_beam():
    """A beam much wider than the potential (σ_ky → 0) leaves only the band
    average; a finite width shifts both by the coherent sum over directions,
    mirror-symmetric under y₀ → −y₀, θ → −θ, and converged in its quadrature."""
    from sojourn.theory.angular_averages import packet_beam_prediction
    theta = np.array([np.pi / 2, 2.5, np.pi])
    kw = dict(k0=1.0, sigma_k=0.05, x0=-45.0)
    band = packet_angular_prediction(DISK, theta, k0=1.0, sigma_k=0.05)
    wide = packet_beam_prediction(DISK, theta, sigma_ky=1e-4, **kw)
    assert np.allclose(wide.delay, band.delay, rtol=1e-6)
    assert np.allclose(wide.cross_section, band.cross_section, rtol=1e-6)
    assert np.allclose(wide.inverse_speed, band.inverse_speed, rtol=1e-6)
    beam = packet_beam_prediction(DISK, theta, sigma_ky=0.05, **kw)
    assert 1e-3 < abs(beam.cross_section[0] / band.cross_section[0] - 1) < 0.05
    finer = packet_beam_prediction(DISK, theta, sigma_ky=0.05, panels=32, alpha_nodes=96, **kw)
    assert np.allclose(finer.delay, beam.delay, rtol=1e-8)
    assert np.allclose(finer.cross_section, beam.cross_section, rtol=1e-8)
    up = packet_beam_prediction(DISK, theta, sigma_ky=0.05, y0=2.0, **kw)
    down = packet_beam_prediction(DISK, -theta, sigma_ky=0.05, y0=-2.0, **kw)
    assert np.allclose(up.delay, down.delay, rtol=1e-10)
    assert np.allclose(up.cross_section, down.cross_section, rtol=1e-10)
    assert not np.allclose(up.cross_section, beam.cross_section, rtol=1e-3)


def test_amplitude_energy_derivative_is_the_slope_of_the_amplitude():
    theta = np.linspace(0, np.pi, 7)
    E, h = 0.5, 1e-5
    analytic = phase_shifts(DISK, [E], m_max=30).amplitude_dE(theta)[0]
    f = phase_shifts(DISK, [E - h, E + h], m_max=30).amplitude(theta)
    assert np.allclose(analytic, (f[1] - f[0]) / (2 * h), rtol=1e-7, atol=1e-9)
