"""Measured delays against published stationary-state results (PHYSICS §5).

Runs use ħ = m = 1 (atomic units), a unit step V₀ = 1 unless said otherwise,
σ = 20, and Δt inside the grid limit Δt·(E_max + ΔV)/ħ < π (PHYSICS §3).
The grid error near a sharp step falls as Δx² (PHYSICS §3), so cheap runs on
N and 2N points are combined by Richardson extrapolation (common practice, no
source) to reach the 5e-4 tolerance without a very fine grid.
"""
import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import erfc

from sojourn.build import build
from sojourn.measure import measure_delays
from sojourn.workflows import verify
from sojourn.workflows import run as execute
from sojourn.config.scenario import loads, with_changes

SIGMA = 20.0
SIGMA_K = 1 / (2 * SIGMA)
BOX = 576.0


def step_delay(E, V0=1.0):
    # source: τ_R = ħ/√(E(V₀−E)) relative to an ideal mirror at the step, from
    # r = −e^{2iδ}, δ = arctan√(E/(V₀−E)) (Griffiths, Introduction to QM, 2nd ed.,
    # Problem 2.34; Wigner, Phys. Rev. 98, 145 (1955) for τ = ħ dφ/dE)
    return 1 / np.sqrt(E * (V0 - E))


def gaussian_average(f, k0, weight=lambda k: 1.0, split=None):
    """∫ f w |ψ̃₀|² dk / ∫ w |ψ̃₀|² dk over k₀ ± 8σ_k by scipy quadrature (in two pieces
    at `split`, a threshold where f or w is singular)."""
    g = lambda k: math.exp(-0.5 * ((k - k0) / SIGMA_K) ** 2) * weight(k)
    lo, hi = k0 - 8 * SIGMA_K, k0 + 8 * SIGMA_K
    cuts = [lo] + ([split] if split is not None and lo < split < hi else []) + [hi]

    def integral(h):
        return sum(quad(h, a, b, epsabs=0, epsrel=1e-12, limit=200)[0]
                   for a, b in zip(cuts[:-1], cuts[1:]))
    return integral(lambda k: f(k) * g(k)) / integral(g)


def own_step_predictions(E0, V0=1.0):
    """Centroid ⟨dφ/dk⟩_w/v₀, flux ⟨τ⟩_w and spectral ⟨τ⟩ at a step, weights R(k) (1 below
    the top, ((k−q)/(k+q))² above, where r is real and τ = 0: Griffiths 2nd ed., Problem
    2.34), by our own quadrature of the published τ(E) (PHYSICS §5 defines the averages)."""
    k0, k_top = math.sqrt(2 * E0), math.sqrt(2 * V0)
    tau = lambda k: step_delay(k * k / 2, V0) if k < k_top else 0.0

    def R(k):
        if k < k_top:
            return 1.0
        q = math.sqrt(k * k - k_top * k_top)
        return ((k - q) / (k + q)) ** 2
    centroid = gaussian_average(lambda k: k * tau(k), k0, R, k_top) / k0   # dφ/dk = v τ
    return {"centroid": centroid, "arrival": gaussian_average(tau, k0, R, k_top),
            "spectral": gaussian_average(tau, k0, split=k_top)}


def scenario_text(E0, points, potential="- step: {at: 0.0, height: 1.0}", extra="",
                  phase=2.5, span=None, duration=None, detectors="[-100.0]", center=-200.0):
    left, length = (-(round(500 / (BOX / points)) + 0.5) * BOX / points, BOX) if span is None \
        else (span[0], span[1] - span[0])
    dx = length / points
    v_max = max(abs(float(h)) for h in [1.0])
    dt = phase / ((math.pi / dx) ** 2 / 2 + v_max)
    v = math.sqrt(2 * E0)
    duration = duration or (300 + 8 * 25) / v
    return f"""
units: atomic
grid: {{span: [{left!r}, {left + length!r}], points: {points}}}
potential:
  {potential}
packet: {{center: {center}, width: {SIGMA}, energy: {E0}}}
evolve: {{duration: {duration:.4f}, dt: {dt:.6g}}}
record: {{every: {duration / 40:.4f}}}
measure: {{detectors: {detectors}}}
{extra}
"""


def run(folder, name, text):
    path = folder / f"{name}.yaml"
    path.write_text(text)
    from sojourn.config.scenario import load
    setup = build(load(path))
    return execute(setup, folder / f"{name}.h5")


@pytest.fixture(scope="module")
def step_pair(tmp_path_factory):
    """Unit step at E₀ = 0.2 V₀ on N = 2048 and 4096 points (Δx ≈ 0.28, 0.14)."""
    folder = tmp_path_factory.mktemp("step")
    coarse = measure_delays(run(folder, "coarse", scenario_text(0.2, 2048)))
    fine = measure_delays(run(folder, "fine", scenario_text(0.2, 4096)))
    return coarse, fine


def extrapolate(coarse, fine):
    return fine + (fine - coarse) / 3   # Δx² error: Richardson (common practice, no source)


def assert_each_method_meets_its_own(coarse, fine, own):
    """Each method's extrapolated delay within 5e-4 of its own prediction and
    clearly off the other method's."""
    for method in ("centroid", "arrival", "spectral"):
        measured = extrapolate(coarse.reflection.measured[method].delay,
                               fine.reflection.measured[method].delay)
        assert measured == pytest.approx(own[method], rel=5e-4), method
        other = own["centroid"] if method != "centroid" else own["arrival"]
        assert abs(measured / other - 1) > 5e-4, method


def test_each_method_against_its_own_prediction_at_a_fifth_of_the_step(step_pair):
    coarse, fine = step_pair
    own = own_step_predictions(0.2)
    # the averages differ by ~1.2e-3 here (our own quadrature above), so the wrong one
    # would fail
    assert abs(own["arrival"] / own["centroid"] - 1) > 1e-3
    assert_each_method_meets_its_own(coarse, fine, own)
    for method in ("centroid", "arrival", "spectral"):
        # the report carries the same prediction from the theory module
        assert fine.reflection.measured[method].predicted == pytest.approx(own[method], rel=1e-6)
    assert fine.reflection.wigner == pytest.approx(step_delay(0.2), rel=1e-9)
    assert fine.reflection.probability == pytest.approx(1.0, abs=1e-6)
    assert fine.reflection.probability_flux == pytest.approx(1.0, abs=1e-4)


def test_each_method_against_its_own_prediction_at_four_fifths_of_the_step(tmp_path):
    own = own_step_predictions(0.8)
    # the averages differ by ~1.2e-3 here too (our own quadrature above)
    assert abs(own["arrival"] / own["centroid"] - 1) > 1e-3
    coarse = measure_delays(run(tmp_path, "coarse", scenario_text(0.8, 2048)))
    fine = measure_delays(run(tmp_path, "fine", scenario_text(0.8, 4096)))
    assert_each_method_meets_its_own(coarse, fine, own)
    assert fine.reflection.wigner == pytest.approx(step_delay(0.8), rel=1e-9)


def test_spectral_delay_curve_follows_the_step_formula(step_pair):
    coarse, fine = step_pair
    k0 = math.sqrt(0.4)
    sc, sf = coarse.reflection.spectrum, fine.reflection.spectrum
    band = np.abs(sf.k - k0) <= 2 * SIGMA_K
    tau = extrapolate(sc.delay[band], sf.delay[band])
    np.testing.assert_allclose(tau, step_delay(sf.energy[band]), rtol=2e-3)
    # |r|² = 1 below the top (Griffiths 2nd ed., Problem 2.34)
    np.testing.assert_allclose(sf.probability[band], 1.0, atol=1e-6)


def test_dwell_time_against_packet_averaged_buttiker(step_pair):
    # source: Büttiker's τ_D = ∫|ψ_E|² dx / (ħk/m) (M. Büttiker, Phys. Rev. B 27, 6178 (1983));
    # beyond the step ψ = (1 + r) e^{−κx} with |1 + r|² = 4E/V₀ (from r = −e^{2iδ},
    # Griffiths 2nd ed., Problem 2.34), so over [0, b] τ_D = (4E/V₀)(1 − e^{−2κb})/(2κv).
    coarse, fine = step_pair
    b = fine.dwell["region"][1]
    assert fine.dwell["region"][0] == 0.0

    def dwell(k):
        E, kappa = k * k / 2, math.sqrt(2 * (1 - k * k / 2))
        return 4 * E * (1 - math.exp(-2 * kappa * b)) / (2 * kappa * k)
    expected = gaussian_average(dwell, math.sqrt(0.4))
    measured = extrapolate(coarse.dwell["measured"], fine.dwell["measured"])
    assert measured == pytest.approx(expected, rel=2e-3)
    assert fine.dwell["predicted"] == pytest.approx(expected, rel=1e-6)


def test_no_potential_gives_zero_transmission_delay(tmp_path):
    # free flight: the run and the reference are the same packet (common practice, no source)
    path = run(tmp_path, "free", """
units: atomic
grid: {span: [-300.0, 300.0], points: 1024}
packet: {center: -150.0, width: 20.0, energy: 0.5}
evolve: {duration: 330.0, dt: 0.1}
record: {every: 10.0}
measure: {detectors: [100.0]}
""")
    report = measure_delays(path)
    assert report.reflection is None
    assert set(report.transmission.measured) == {"centroid", "arrival", "spectral"}
    for result in report.transmission.measured.values():
        assert abs(result.delay) < 1e-6
    assert report.transmission.probability == pytest.approx(1.0, abs=1e-6)


def test_high_step_pins_the_sign_convention(tmp_path):
    # a step V₀ = 2 at x = a, measured against a mirror at 0: the packet's centroid delay is
    # the round trip 2a/v₀ plus the step's own (its phase is 2ka + the step's, Griffiths 2nd
    # ed., Problem 2.34 shifted by a), so a wrong sign (−2a/v₀) or factor (a/v₀) fails by
    # far more than the step's delay itself, which is pinned to 1%
    a, V0, E0 = 10.0, 2.0, 0.5
    delays = []
    for points in (2048, 4096):
        dx = BOX / points
        text = scenario_text(E0, points, potential=f"- step: {{at: {a}, height: {V0}}}").replace(
            "measure: {detectors: [-100.0]}", "measure: {detectors: [-100.0], reference: 0.0}")
        sc = with_changes(loads(text, str(tmp_path / f"high{points}.yaml")),
                          {"evolve.dt": 2.0 / ((math.pi / dx) ** 2 / 2 + V0)})
        report = measure_delays(execute(build(sc), tmp_path / f"high{points}.h5"))
        delays.append(report.reflection.measured["centroid"].delay)
    centroid = extrapolate(*delays)
    round_trip = 2 * a / math.sqrt(2 * E0)
    step = own_step_predictions(E0, V0)["centroid"]
    assert step == pytest.approx(step_delay(E0, V0), rel=2e-3)    # bandwidth correction
    assert centroid - round_trip == pytest.approx(step, rel=1e-2)


def test_above_the_top_warns_and_filtered_reference_keeps_the_centroid(tmp_path):
    # at E₀ = 0.95 V₀ part of the packet passes the step (PHYSICS §5: filtered reference)
    text = scenario_text(0.95, 2048, extra="absorber: {width: 40.0}",
                         span=(-540.0 - 0.5 * 720 / 2048, 180.0 - 0.5 * 720 / 2048))
    report = measure_delays(run(tmp_path, "top", text))
    share = 0.5 * erfc((math.sqrt(2) - math.sqrt(1.9)) / (math.sqrt(2) * SIGMA_K))
    assert share > 1e-3
    assert any("above the barrier top" in w for w in report.warnings)
    assert report.reflection.filtered
    # packet R from the run beside theory's packet R (step R(E) of Griffiths Problem 2.34)
    assert report.reflection.probability == pytest.approx(
        report.reflection.predicted_probability, abs=1e-3)
    fine = measure_delays(run(tmp_path, "top_fine", scenario_text(
        0.95, 4096, extra="absorber: {width: 40.0}",
        span=(-540.0 - 0.5 * 720 / 4096, 180.0 - 0.5 * 720 / 4096))))
    # the grid error falls as Δx² (-2.7% at N = 2048, -1.2% at 4096): extrapolate. What is
    # left is the finite run: components just below the top have τ → ∞ and leave last, so
    # the centroid nears its limit only as ~1/t (an exact synthesis of this run shows
    # -0.7% at its last snapshot, -0.3% when run twice as long)
    centroid = extrapolate(report.reflection.measured["centroid"].delay,
                           fine.reflection.measured["centroid"].delay)
    predicted = fine.reflection.measured["centroid"].predicted
    assert centroid == pytest.approx(predicted, rel=1e-2)
    # the unfiltered reference drifts by (⟨v⟩ − ⟨v⟩_w)·t (PHYSICS §5): far outside that here
    k = np.linspace(math.sqrt(1.9) - 8 * SIGMA_K, math.sqrt(1.9) + 8 * SIGMA_K, 4001)
    q = np.sqrt(np.maximum(k * k - 2, 0))
    R = np.abs((k - q) / (k + q)) ** 2      # |r|² = 1 below the top (Griffiths, Problem 2.34)
    g = np.exp(-0.5 * ((k - math.sqrt(1.9)) / SIGMA_K) ** 2)
    dv = np.trapezoid(g * k, k) / np.trapezoid(g, k) - np.trapezoid(g * R * k, k) / np.trapezoid(g * R, k)
    t_last = 300.0    # the snapshots used end after t = 300
    assert abs(dv) * t_last / math.sqrt(1.9) > 3e-2 * predicted


@pytest.mark.slow
def test_verify_error_bars_bracket_the_converged_value(tmp_path):
    # the converged value is the packet prediction (checked above against the published τ)
    path = run(tmp_path, "base", scenario_text(0.2, 2048))
    result = verify(path)
    own = own_step_predictions(0.2)
    for method, r in result.report.reflection.measured.items():
        assert r.error is not None
        assert abs(r.delay - own[method]) <= r.error, method
        assert r.error < 3 * abs(r.delay - own[method]), method


def layered_transmission(k, edges, heights):
    """t(k) of piecewise-constant layers (ħ = m = 1), incident e^{ik(x−x_r)} at the
    entry x_r = edges[0] and transmitted t e^{ik(x−x_t)} beyond the exit x_t = edges[-1]
    (equal levels outside), by carrying ψ and ψ' across each layer from the right:
    ψ(x−L) = ψ cos qL − ψ' sin(qL)/q, ψ'(x−L) = ψ q sin qL + ψ' cos qL
    (continuity of ψ and ψ' at each jump; Griffiths 2nd ed., Sec. 2.5–2.6)."""
    k = np.asarray(k, dtype=complex)
    psi, dpsi = np.ones_like(k), 1j * k
    for (a, b), h in reversed(list(zip(zip(edges[:-1], edges[1:]), heights))):
        q = np.sqrt(k * k - 2 * h)
        L = b - a
        psi, dpsi = (psi * np.cos(q * L) - dpsi * np.sin(q * L) / q,
                     psi * q * np.sin(q * L) + dpsi * np.cos(q * L))
    return 2 / (psi + dpsi / (1j * k))     # 1/A with ψ = A e^{ik(x−x_r)} + B e^{−ik(x−x_r)}


def own_transmission_predictions(k0, edges, heights):
    """Each method's packet average (PHYSICS §5) of our own t(k): weights |ψ̃₀|²T in dk;
    centroid ⟨dφ/dk⟩_w/v₀, arrival ⟨τ⟩_w, spectral ⟨τ⟩ over |ψ̃₀|², τ = (dφ/dk)/k."""
    h = 1e-6
    phase = lambda k: np.angle(layered_transmission(k, edges, heights))
    dphi = lambda k: (phase(k + h) - phase(k - h)) / (2 * h)   # no 2π jump within 2h
    T = lambda k: abs(layered_transmission(k, edges, heights)) ** 2
    Tw = lambda k: T(np.array([k]))[0]
    d = lambda k: dphi(np.array([k]))[0]
    return {"centroid": gaussian_average(d, k0, Tw) / k0,
            "arrival": gaussian_average(lambda k: d(k) / k, k0, Tw),
            "spectral": gaussian_average(lambda k: d(k) / k, k0),
            "probability": gaussian_average(Tw, k0)}


def transmission_pair(folder, potential, E0, duration, detector, box=(-450.0, 350.0),
                      points=(2048, 4096)):
    """Transmission reports on N and 2N points (jumps on cell midpoints where they fall
    on multiples of the coarse Δx: that keeps the grid error a clean Δx²)."""
    out = []
    for n in points:
        dx = (box[1] - box[0]) / n
        text = scenario_text(E0, n, potential=potential, span=(box[0] - dx / 2, box[1] - dx / 2),
                             duration=duration, detectors=f"[{detector}]", center=-150.0)
        out.append(measure_delays(run(folder, f"t{n}", text)).transmission)
    return out


def test_barrier_transmission_phase_time_with_filtered_reference(tmp_path):
    # rectangular barrier V₀ = 1, a = 2 at E₀ = V₀/2 (κa = 2): T(E₀) = 0.0707 and the
    # phase time 1.92806 (Hartman, J. Appl. Phys. 33, 3427 (1962); T of Griffiths 2nd ed.,
    # Problem 2.33); T(k) rises across the band, so the transmitted spectrum is filtered
    edges, heights = (0.0, 2.0), (1.0,)
    own = own_transmission_predictions(1.0, edges, heights)
    tau0 = np.diff(np.unwrap(np.angle(layered_transmission([1 - 1e-6, 1 + 1e-6], edges,
                                                           heights))))[0] / 2e-6
    assert tau0 == pytest.approx(1.92806, abs=1e-5)
    coarse, fine = transmission_pair(tmp_path, "- barrier: {start: 0.0, end: 2.0, height: 1.0}",
                                     0.5, 380.0, 80.0)
    assert fine.filtered
    assert fine.wigner == pytest.approx(1.92806, abs=1e-5)
    assert fine.probability == pytest.approx(own["probability"], rel=2e-3)
    for method in ("centroid", "arrival", "spectral"):
        measured = extrapolate(coarse.measured[method].delay, fine.measured[method].delay)
        assert measured == pytest.approx(own[method], rel=5e-4), method
        assert fine.measured[method].predicted == pytest.approx(own[method], rel=1e-6), method
    # an unfiltered reference would drift by (⟨v⟩_w − ⟨v⟩)·t (PHYSICS §5: 0.24 per 100 time
    # units here); the snapshots used lie past t = 200, so it would miss by far more than 5e-4
    T = lambda k: abs(layered_transmission(np.array([k]), edges, heights)[0]) ** 2
    dv = gaussian_average(lambda k: k, 1.0, T) - gaussian_average(lambda k: k, 1.0)
    assert dv * 100 == pytest.approx(0.24, abs=0.01)
    assert dv * 200 > 100 * 5e-4 * own["centroid"]


# extrapolated from N = 2048 and 4096 (measured): centroid 6.4e-4, arrival 7.2e-4, spectral
# 1.7e-3, probability 4.2e-3 off their own predictions; from 4096 and 8192 below 5e-4
@pytest.mark.parametrize("points, tolerance", [
    ((2048, 4096), {"centroid": 1e-3, "arrival": 1e-3, "spectral": 2.5e-3, "probability": 6e-3}),
    pytest.param((4096, 8192), {"centroid": 5e-4, "arrival": 5e-4, "spectral": 5e-4,
                                "probability": 1e-3}, marks=pytest.mark.slow)])
def test_double_barrier_near_resonance_with_filtered_reference(tmp_path, points, tolerance):
    # two barriers V₀ = 1, width 1, 2 apart: a resonance near E_r ≈ 0.386 where T → 1 and
    # the phase time peaks (~2ħ/Γ, Breit & Wigner, Phys. Rev. 49, 519 (1936); resonant
    # tunnelling: Tsu & Esaki, Appl. Phys. Lett. 22, 562 (1973)). The packet sits on its
    # low flank (E₀ = 0.37), where T(k) rises steeply: the spectrum is filtered.
    edges, heights = (0.0, 1.0, 3.0, 4.0), (1.0, 0.0, 1.0)
    k = np.linspace(0.8, 0.95, 3001)
    T = np.abs(layered_transmission(k, edges, heights)) ** 2
    assert T.max() == pytest.approx(1.0, abs=1e-6)        # symmetric: T = 1 at resonance
    k0 = math.sqrt(2 * 0.37)
    assert k0 < k[np.argmax(T)]
    own = own_transmission_predictions(k0, edges, heights)
    assert own["probability"] < 0.9
    # the three averages differ by 6e-3 and 3%: each method is held to its own
    assert abs(own["centroid"] / own["arrival"] - 1) > 1.5 * tolerance["arrival"]
    potential = ("- barrier: {start: 0.0, end: 1.0, height: 1.0}\n"
                 "  - barrier: {start: 3.0, end: 4.0, height: 1.0}")
    # Δx = 0.5 and 0.25 (or 0.25, 0.125): every jump midway between grid points.
    # Measured: relative errors 1.6e-2, 4.4e-3, 1.1e-3 on the centroid at N = 2048, 4096, 8192
    coarse, fine = transmission_pair(tmp_path, potential, 0.37, 450.0, 60.0,
                                     box=(-512.0, 512.0), points=points)
    assert fine.filtered
    probability = extrapolate(coarse.probability, fine.probability)
    assert probability == pytest.approx(own["probability"], rel=tolerance["probability"])
    for method in ("centroid", "arrival", "spectral"):
        measured = extrapolate(coarse.measured[method].delay, fine.measured[method].delay)
        assert measured == pytest.approx(own[method], rel=tolerance[method]), method
        assert fine.measured[method].predicted == pytest.approx(own[method], rel=1e-6), method


LAB_STEP = """
units: lab
mass: 0.067
grid: {span: [-600.146484375, 599.853515625], points: 4096}
potential:
  - step: {at: 0.0, height: 0.25}
packet: {center: -250.0, width: 20.0, energy: 0.375}
evolve: {duration: 600.0}
absorber: {width: 80.0}
record: {every: 20.0, sample_steps: 50}
measure: {reference: 0.0, detectors: [-125.0, 150.0]}
"""


def test_transmission_above_a_step_is_not_delayed_in_lab_units(tmp_path):
    # above a step t = 2k/(k+q) and r = (k−q)/(k+q) are real (Griffiths 2nd ed., Problem
    # 2.34), so with the incident wave referred to x_r = 0 and the transmitted one to x_t = 0
    # every delay vanishes. E₀ = 1.5 V₀, m = 0.067 m_e, σ = 20 nm; the step sits midway
    # between grid points. The arrival reference must carry the amplitude |t| = √(T k/q):
    # filtered by √T it was 0.613 fs off here (measured before this fix)
    report = measure_delays(run(tmp_path, "lab", LAB_STEP))
    tr = report.transmission
    assert tr.filtered
    assert set(tr.measured) == {"centroid", "arrival", "spectral"}
    for method, result in tr.measured.items():
        assert abs(result.predicted) < 1e-9, method
        assert abs(result.delay) < 1e-3, method          # fs
    # packet T against the published T(k) = 4kq/(k+q)² averaged with our own quadrature
    hbar, m_e = 0.6582119569, 5.685630      # eV·fs; m_e in eV·fs²/nm² (CODATA 2018, from memory)
    k0, kt = (math.sqrt(2 * 0.067 * m_e * e) / hbar for e in (0.375, 0.25))
    sk = 1 / 40
    T = lambda k: 4 * k * math.sqrt(k * k - kt * kt) / (k + math.sqrt(k * k - kt * kt)) ** 2
    g = lambda k: math.exp(-0.5 * ((k - k0) / sk) ** 2)
    assert k0 - 8 * sk < kt < k0 - 5.9 * sk       # the band's low edge below the top
    expected = quad(lambda k: T(k) * g(k), kt, k0 + 8 * sk)[0] / \
        quad(g, k0 - 8 * sk, k0 + 8 * sk)[0]
    assert tr.probability == pytest.approx(expected, abs=2e-3)
    # the packet lies 6σ_k above the top (a share 1e-9 below it): no "singular" warning
    assert not any("barrier top" in w for w in report.warnings)


@pytest.mark.slow
def test_synthesized_smooth_step_gives_each_method_its_own_prediction(tmp_path):
    # exact synthesis (PHYSICS §5) of a Fermi-shaped step crossed at E₀ = 1.5 V₀: every
    # method must find its own prediction on exact data; the arrival method was 0.5–0.8%
    # off here while its reference was filtered by √T (measured before this fix)
    path = tmp_path / "smooth.yaml"
    path.write_text("""
units: atomic
grid: {span: [-700.0, 500.0], points: 2048}
potential:
  - smooth_step: {at: 0.0, height: 1.0, width: 0.5}
packet: {center: -200.0, width: 20.0, energy: 1.5}
evolve: {duration: 420.0, dt: 0.05}
record: {every: 20.0, sample_steps: 60}
measure: {detectors: [-170.0, 150.0]}
""")
    from sojourn.config.scenario import load
    from sojourn.workflows import synthesize
    report = measure_delays(synthesize(build(load(path)), tmp_path / "smooth.h5"))
    for channel in report.channels():
        for method, result in channel.measured.items():
            assert result.delay == pytest.approx(result.predicted, rel=2e-6), (channel, method)


HOLE = """
units: atomic
grid: {span: [-760.107421875, 439.892578125], points: 4096}
potential:
  - barrier: {start: 0.0, end: 4.1015625, height: 1.0}
packet: {center: -200.0, width: 20.0, energy: 1.293335}
evolve: {duration: 450.0, dt: 0.02}
absorber: {width: 60.0}
record: {every: 10.0}
measure: {reference: 0.0, detectors: [-100.0, 160.0]}
"""


def test_zero_of_the_reflection_above_a_barrier(tmp_path):
    # above a rectangular barrier of width a, r(k) = 0 where qa = π (T = 1 there:
    # Griffiths 2nd ed., Problem 2.33): E₀ = V₀ + (π/a)²/2 puts the zero at the packet's
    # centre. Across it r changes sign; its phase cannot be measured where |r| is lost in
    # the numerical error. For a symmetric barrier r t* is purely imaginary (unitarity
    # and parity; from memory), so τ_R(E) = τ_T(E) and the two spectral delays must agree
    # however large the grid error is (0.8% at 14 cells per barrier here)
    a = 4.1015625
    report = measure_delays(run(tmp_path, "hole", HOLE))
    rf, tr = report.reflection, report.transmission
    hole = [w for w in report.warnings if "spectrum has a zero near E =" in w]
    assert len(hole) == 1 and "reflected" in hole[0] and "%" in hole[0]
    at = float(hole[0].split("near E = ")[1].split()[0])
    assert at == pytest.approx(1 + (math.pi / a) ** 2 / 2, abs=2e-3)
    assert rf.measured["spectral"].predicted == pytest.approx(tr.measured["spectral"].predicted,
                                                              rel=1e-6)
    # with the hole averaged as measured the two differed by 2.5e-3 (measured before this fix)
    assert rf.measured["spectral"].delay == pytest.approx(tr.measured["spectral"].delay, rel=3e-4)
    # the arrival reference passes through the zero with r's change of sign: built from |r|
    # (a kink) it was 10% off (measured before this fix); what is left is the grid error,
    # the same as on the transmitted side
    for channel in (rf, tr):
        r = channel.measured["arrival"]
        assert r.delay == pytest.approx(r.predicted, rel=1.2e-2)
        assert abs(r.relative - tr.measured["arrival"].relative) < 5e-3


HETERO = """
units: lab
mass: 0.067
grid: {span: [-900.0, 300.0], points: 2458}
potential:
  - step: {at: 0.0, height: 0.25}
packet: {center: -250.0, width: 20.0, energy: 0.08}
evolve: {duration: DURATION, scheme: strang}
absorber: {width: 80.0}
record: {every: 10.0}
measure: {reference: 0.0, detectors: [-125.0]}
"""


def test_arrival_error_tail_covers_a_run_cut_short(tmp_path):
    # a run long enough that the reflected flux at the detector has died out (below 1e-9 of
    # its peak) is the converged value; runs cut short miss part of the flux tail, and the
    # arrival method's error_tail must cover that bias without exaggerating it (common
    # practice, no source). Measured: bias −0.499 and −0.0137 fs at 700 and 800 fs.
    def arrival(duration):
        text = HETERO.replace("DURATION", f"{duration:.1f}")
        return measure_delays(run(tmp_path, f"d{duration}", text)).reflection.measured["arrival"]
    converged = arrival(1100)
    # what is left is the bound on the incident tail still crossing the detector (3e-4 fs)
    assert converged.error_tail < 1e-3
    for duration in (700, 800):
        cut = arrival(duration)
        bias = abs(cut.delay - converged.delay)
        assert bias > 1e-2
        assert bias <= cut.error_tail <= 2 * bias + converged.error_tail, duration
        # the error bar the reruns give (discretisation) is widened by the tail term
        assert cut.error is None
        cut.error = 1e-4
        assert cut.error == pytest.approx(1e-4 + cut.error_tail)
        assert cut.to_dict()["error_tail"] == pytest.approx(cut.error_tail)


def test_weak_reflection_warns_of_the_incident_tail_at_its_detector(tmp_path):
    # a Fermi-shaped step crossed at 1.5 V₀ reflects 0.16%; at a detector 107 from the step
    # the incident packet's Gaussian tail still crossing it after the split (2e-6 of it) is
    # not negligible against that: the arrival delay was 0.5% off with no warning (measured
    # before this fix). The bias bound enters error_tail; a detector nearer the packet's
    # start removes the overlap (common practice, no source)
    text = """
units: atomic
grid: {span: [-700.0, 500.0], points: 2048}
potential:
  - smooth_step: {at: 0.0, height: 1.0, width: 0.5}
packet: {center: -200.0, width: 20.0, energy: 1.5}
evolve: {duration: 420.0, dt: 0.05}
absorber: {width: 60.0}
record: {every: 20.0}
measure: {detectors: [DETECTOR]}
"""
    near = measure_delays(run(tmp_path, "near", text.replace("DETECTOR", "-106.9")))
    assert any("passages overlap" in w for w in near.warnings)
    r = near.reflection.measured["arrival"]
    assert abs(r.deviation) > 1e-3 * abs(r.predicted)
    assert abs(r.deviation) <= r.error_tail
    far = measure_delays(run(tmp_path, "far", text.replace("DETECTOR", "-170.0")))
    assert not any("passages overlap" in w for w in far.warnings)
    r = far.reflection.measured["arrival"]
    assert r.delay == pytest.approx(r.predicted, rel=1e-3)
