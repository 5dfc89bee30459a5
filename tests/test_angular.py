"""Angle-resolved scattering off a circular obstacle in the plane: `sojourn
theory` of a disk against the closed-form phase shifts, the measured τ(θ)
and dσ/dθ per detector bin against the packet-averaged partial-wave
prediction, the JSON block, the polar figure, and the one-line refusals."""
from __future__ import annotations

import json
import math
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from scipy import special

from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.measure.delays import measure_delays

ROOT = Path(__file__).resolve().parents[1]

# a cheaper grid than configs/disk_scattering.yaml (dx = 0.5, σ = 6 from x₀ = −30)
CHEAP = textwrap.dedent("""\
    title: disk, cheap
    units: atomic
    grid:
      span: [[-76.0, 36.0], [-50.0, 50.0]]
      points: [224, 200]
    potential:
      - disk: {center: [0.0, 0.0], radius: 3.0, height: 1.0}
    packet:
      center: [-30.0, 0.0]
      width: 6.0
      energy: 0.5
      direction: 0.0
    evolve:
      duration: 110.0
    absorber: {width: 12.0}
    record:
      every: 1.0
    measure: {bins: 12}
    """)


def sojourn(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "sojourn", *args], capture_output=True,
                          text=True, cwd=cwd)


def disk_phase_shift(m: int, k: float, a: float, height: float) -> float:
    """tan δ_m for a barrier disk above the energy (E < V₀): inside I_m(κr),
    outside cos δ J_m − sin δ Y_m, ψ'/ψ matched at r = a (the textbook
    matching, evaluated with scipy's Bessel functions)."""
    kappa = math.sqrt(2 * height - k ** 2)
    i, di = special.iv(m, kappa * a), special.ivp(m, kappa * a)
    j, dj = special.jv(m, k * a), special.jvp(m, k * a)
    y, dy = special.yv(m, k * a), special.yvp(m, k * a)
    return math.atan((k * dj * i - kappa * j * di) / (k * dy * i - kappa * y * di))


def test_theory_of_a_disk_prints_its_closed_form_phase_shifts(tmp_path):
    out = sojourn("theory", str(ROOT / "configs/disk_scattering.yaml"), "--json")
    assert out.returncode == 0, out.stderr
    table = json.loads(out.stdout)
    assert table["shells"] == [[3.0, 1.0]] and table["energy"] == [0.5]
    for m in range(6):
        assert table["phase_shift"][0][m] == pytest.approx(
            disk_phase_shift(m, 1.0, 3.0, 1.0), abs=1e-9)
    # the 2D optical theorem (PHYSICS §Partial waves): σ = (4/k) Σ_m sin²δ_m, m from −∞ to ∞
    d = np.array(table["phase_shift"][0])
    assert table["total_cross_section"][0] == pytest.approx(
        4 * (np.sin(d[0]) ** 2 + 2 * np.sum(np.sin(d[1:]) ** 2)), rel=1e-9)
    text = sojourn("theory", str(ROOT / "configs/disk_scattering.yaml"), "--energies",
                   "0.4:0.6:2", "--plot", str(tmp_path / "polar.png"))
    assert text.returncode == 0, text.stderr
    assert "E = 0.4 " in text.stdout and "E = 0.6 " in text.stdout
    assert "packet average" in text.stdout and (tmp_path / "polar.png").stat().st_size > 0


def test_theory_of_other_planar_potentials_is_refused_in_one_line(tmp_path):
    path = tmp_path / "rect.yaml"
    path.write_text(CHEAP.replace("disk: {center: [0.0, 0.0], radius: 3.0, height: 1.0}",
                                  "rectangle: {x: [-2.0, 2.0], y: [-2.0, 2.0], height: 1.0}")
                    .replace("measure: {bins: 12}\n", ""))
    out = sojourn("theory", str(path))
    assert out.returncode == 2
    assert "no partial-wave theory for this potential" in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1 and "Traceback" not in out.stderr


@pytest.fixture(scope="module")
def cheap_run(tmp_path_factory):
    from sojourn.workflows import run
    folder = tmp_path_factory.mktemp("disk")
    setup = build(loads(CHEAP, source=str(folder / "disk.yaml")))
    return run(setup, folder / "disk.h5")


def test_disk_delays_and_cross_section_per_bin_match_partial_waves(cheap_run):
    """The measured τ(θ) and dσ/dθ against `packet_beam_prediction` on the
    detector's bins (the partial-wave sums of PHYSICS §Partial waves). On
    this dx = 0.5 grid we measured |Δτ/τ| ≤ 0.6% and |Δ(dσ/dθ)| ≤ 5.1% in the
    back-scattering half (the disk's edge sampled at dx; the fine-grid slow
    test below asks 2%); tolerances 1.5% and 7%."""
    report = measure_delays(cheap_run)
    block = report.scattering["angular"]
    assert not report.warnings, report.warnings
    theta = np.array(block["theta"])
    tau, tau_p = np.array(block["measured"]), np.array(block["predicted"])
    cs, cs_p = np.array(block["cross_section"]), np.array(block["predicted_cross_section"])
    back = np.abs(theta) > math.pi / 2
    assert np.max(np.abs(tau / tau_p - 1)[back]) < 1.5e-2
    assert np.max(np.abs(cs / cs_p - 1)[back]) < 7e-2
    # forward: the delays are small, so absolutely (measured ≤ 0.031)
    assert np.max(np.abs(tau - tau_p)[~back]) < 0.06
    assert np.max(np.abs(cs / cs_p - 1)[~back]) < 7e-2     # measured ≤ 4.6%
    # the symmetry f(−θ) = f(θ) of a centred packet on a circular potential
    np.testing.assert_allclose(tau, tau[::-1], atol=1e-6)
    # every bin's probability sums to the scattered share; P = dσ/dθ·Δθ·F
    P = np.array(block["probability"])
    assert np.sum(P) == pytest.approx(block["probability_scattered"])
    np.testing.assert_allclose(P, cs * (2 * math.pi / 12) * block["fluence"], rtol=1e-12)


def test_delay_json_carries_the_angular_block_and_render_draws_the_polar_figure(
        cheap_run, tmp_path):
    out = sojourn("delay", str(cheap_run), "--json")
    assert out.returncode == 0, out.stderr
    block = json.loads(out.stdout)["scattering"]["angular"]
    for key in ("theta", "measured", "predicted", "error", "probability", "cross_section",
                "predicted_cross_section"):
        assert len(block[key]) == 12
    text = sojourn("delay", str(cheap_run))
    assert "scattering off the obstacle" in text.stdout
    fig = sojourn("render", str(cheap_run), "--polar", str(tmp_path / "p.png"))
    assert fig.returncode == 0, fig.stderr
    assert (tmp_path / "p.png").stat().st_size > 0


def test_a_detector_circle_off_the_free_region_gets_the_one_line_error(tmp_path):
    path = tmp_path / "far.yaml"
    path.write_text(CHEAP.replace("measure: {bins: 12}", "measure: {ring: 60.0}")
                    .replace("duration: 110.0", "duration: 2.0"))
    run = sojourn("run", str(path), "-o", str(tmp_path / "far.h5"), "-q")
    assert run.returncode == 0, run.stderr
    out = sojourn("delay", str(tmp_path / "far.h5"))
    assert out.returncode == 2
    assert "measure.ring" in out.stderr and "Traceback" not in out.stderr


def _worst_back(report):
    block = report.scattering["angular"]
    theta = np.array(block["theta"])
    back = np.abs(theta) > math.pi / 2
    tau = np.abs(np.array(block["measured"]) / np.array(block["predicted"]) - 1)[back]
    cs = np.abs(np.array(block["cross_section"]) /
                np.array(block["predicted_cross_section"]) - 1)[back]
    return float(tau.max()), float(cs.max())


@pytest.mark.slow
def test_shipped_disk_example_measures_without_warning():
    """configs/disk_scattering.yaml (dx = 0.4): no warning; measured here
    |Δτ/τ| ≤ 0.7% and |Δ(dσ/dθ)| ≤ 3.8% in the back half (tolerances 1.5%, 5%)."""
    from sojourn.config.scenario import load
    from sojourn.workflows import run_in_memory
    report = measure_delays(run_in_memory(build(load(ROOT / "configs/disk_scattering.yaml"))))
    assert report.warnings == []
    tau, cs = _worst_back(report)
    assert tau < 1.5e-2 and cs < 5e-2


@pytest.mark.slow
def test_disk_on_a_fine_grid_meets_two_percent(tmp_path):
    """The target: the shipped example on dx = 0.25 gives τ(θ) and dσ/dθ within
    2% of the beam's packet-averaged partial-wave prediction in the
    back-scattering half (measured: 0.4% and 1.7%)."""
    from sojourn.workflows import run
    text = (ROOT / "configs/disk_scattering.yaml").read_text()
    text = text.replace("points: [400, 360]", "points: [640, 576]")
    assert "points: [640, 576]" in text
    path = run(build(loads(text, source=str(tmp_path / "fine.yaml"))), tmp_path / "fine.h5")
    report = measure_delays(path)
    assert report.warnings == []
    tau, cs = _worst_back(report)
    assert tau < 2e-2 and cs < 2e-2


class _Thinned:
    """A run file seen through every `step`-th snapshot (as if record.every were larger)."""

    def __init__(self, rf, step):
        self.rf, self.step = rf, step

    def __getattr__(self, name):
        return getattr(self.rf, name)

    @property
    def times(self):
        return np.asarray(self.rf.times)[::self.step]

    def snapshots(self):
        for i, pair in enumerate(self.rf.snapshots()):
            if i % self.step == 0:
                yield pair


def test_time_integral_is_exact_while_the_snapshots_keep_the_band(cheap_run):
    """The trapezoid rule over snapshots is exact for a band-limited signal
    while 2πħ/Δt exceeds the band (the aliasing argument of PHYSICS §Angle-
    resolved delays; common practice, no source): Δt = 2 (below πħ/E_hi = 2.3)
    changes nothing that matters, Δt = 4 is reported."""
    from sojourn.measure.angular import measure_angular
    from sojourn.store.reader import RunFile
    with RunFile(cheap_run) as rf:
        fine, found = measure_angular(rf)
        every2, found2 = measure_angular(_Thinned(rf, 2))
        _, found4 = measure_angular(_Thinned(rf, 4))
    assert found == [] and found2 == []
    np.testing.assert_allclose(every2["measured"], fine["measured"], rtol=2e-3)
    np.testing.assert_allclose(every2["cross_section"], fine["cross_section"], rtol=2e-3)
    assert any("record.every" in w for w in found4)


@pytest.mark.parametrize("old, new", [
    ("disk: {center: [0.0, 0.0], radius: 3.0, height: 1.0}",
     "rectangle: {x: [-2.0, 2.0], y: [-2.0, 2.0], height: 1.0}"),
    ("  - disk: {center: [0.0, 0.0], radius: 3.0, height: 1.0}\n",
     "  - disk: {center: [0.0, 0.0], radius: 3.0, height: 1.0}\n"
     "  - disk: {center: [9.0, 0.0], radius: 1.0, height: 1.0}\n"),
])
def test_a_detector_circle_without_one_obstacle_names_file_line_and_key(old, new):
    from sojourn.errors import ScenarioError
    text = CHEAP.replace(old, new)
    assert text != CHEAP
    with pytest.raises(ScenarioError) as err:
        loads(text, source="d.yaml")
    line = next(i for i, s in enumerate(text.splitlines(), 1) if s.startswith("measure:"))
    assert str(err.value).startswith(f"d.yaml:{line}: measure.bins:")


def test_verify_says_in_one_line_that_angular_delays_have_no_richardson_bars(cheap_run):
    out = sojourn("delay", str(cheap_run), "--verify")
    assert out.returncode == 2
    last = out.stderr.strip().splitlines()[-1]
    assert "error" in last and "no Richardson error bars for angle-resolved delays" in last
    assert "Traceback" not in out.stderr
