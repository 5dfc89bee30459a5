"""A scenario with a Larmor clock runs as ONE spinor run: ψ (2, N), one
potential per spin component, observables summed over the components; the run
file, resume, inspect, the Python API and `sojourn delay` all take it."""
import json
import subprocess
import sys

import numpy as np
import pytest

from scenarios import TINY_STEP, scenario_text
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.engine import propagate
from sojourn.measure.larmor import component_scenarios
from sojourn.store.reader import RunFile
from sojourn.theory.averages import packet_prediction
from sojourn.workflows import run, run_in_memory

# our own settings: a barrier with a clock over it, small and coarse (the values
# checked here are exact relations between runs, not convergence)
CLOCK = {**TINY_STEP, "grid": {"span": [-200.0, 200.0], "points": 1024},
         "potential": [{"barrier": {"start": 0.0, "end": 2.0, "height": 1.0}}],
         "packet": {"center": -50.0, "width": 8.0, "energy": 0.5},
         "evolve": {"duration": 90.0, "dt": 0.05}, "record": {"every": 10.0},
         "measure": {"detectors": [-25.0, 30.0]},
         "larmor": {"region": [0.0, 2.0], "omega": 0.05}}


def clock_text(changes=None):
    return scenario_text(CLOCK, changes)


@pytest.fixture(scope="module")
def spinor():
    return run_in_memory(build(loads(clock_text(), "clock.yaml")))


def test_build_splits_the_potential_over_the_cell_averaged_region():
    setup = build(loads(clock_text({"larmor.region": [0.3, 1.1]}), "clock.yaml"))
    x, dx = setup.grid.x, setup.grid.dx
    up, down = setup.V
    # half the splitting ħω_L/2 = 0.025 times the share of each cell inside [0.3, 1.1]
    share = np.clip(np.minimum(x + dx / 2, 1.1) - np.maximum(x - dx / 2, 0.3), 0, None) / dx
    assert np.allclose(up - down, 0.05 * share, rtol=0, atol=1e-15)
    assert np.allclose((up + down) / 2, build(loads(clock_text({"larmor": None}))).V)
    assert setup.state_shape == (2, setup.grid.points)
    # each component starts with the packet / √2: a spin along +x
    psi = setup.psi0()
    assert np.allclose(psi[0], psi[1]) and np.sum(np.abs(psi) ** 2) * dx == pytest.approx(1.0)


def test_spinor_run_is_the_two_component_runs_side_by_side(spinor):
    # a field along z does not mix the components: each evolves as a scalar run with
    # its own potential (common practice, no source); the spin-summed observables
    # are the mean of the two scalar runs' (each component carries half the norm)
    up, down = (run_in_memory(build(s)) for s in
                component_scenarios(loads(clock_text(), "clock.yaml")))
    last = len(spinor) - 1
    assert spinor.psi(last).shape == (2, len(spinor.x))
    for c, scalar in enumerate((up, down)):
        assert np.allclose(np.sqrt(2) * spinor.psi(last)[c], scalar.psi(last), rtol=0, atol=1e-12)
    obs, s_up, s_dn = spinor.observables(), up.observables(), down.observables()
    for name in obs:
        assert np.allclose(obs[name], (s_up[name] + s_dn[name]) / 2, rtol=0, atol=1e-11), name
    samp, a, b = spinor.samples(), up.samples(), down.samples()
    for name in ("flux", "P_region", "norm", "absorbed_left", "absorbed_right"):
        assert np.allclose(samp[name], (a[name] + b[name]) / 2, rtol=0, atol=1e-11), name
    assert np.max(np.abs(samp["flux"])) > 1e-3   # the detectors did see the packet


def test_file_resume_inspect_and_api(tmp_path, spinor, monkeypatch):
    setup = build(loads(clock_text(), "clock.yaml"))
    monkeypatch.setattr(propagate, "CHECK_POINT_STEPS", 512 * 40)
    asked = {"n": 0}

    def stop():
        asked["n"] += 1
        return asked["n"] == 7
    out = tmp_path / "clock.h5"
    with pytest.raises(KeyboardInterrupt):
        run(setup, out, stop=stop)
    path = run(setup, out, resume=True)
    # the guards' estimate counts both components: an upper bound, and not twice too high
    from sojourn.guards import file_estimate
    assert 0.6 * file_estimate(setup) < path.stat().st_size <= file_estimate(setup)
    with RunFile(path) as rf:
        assert rf.axes == ("component", "x") and rf.status == "complete"
        assert rf.psi_rows([0, len(rf) - 1]).shape == (2, 2, setup.grid.points)
        assert np.allclose(rf.psi(len(rf) - 1), spinor.psi(len(spinor) - 1), rtol=0, atol=1e-12)
        assert np.allclose(rf.samples()["flux"], spinor.samples()["flux"], rtol=0, atol=1e-12)
    inspected = subprocess.run([sys.executable, "-m", "sojourn", "inspect", str(path), "--json"],
                               capture_output=True, text=True)
    assert inspected.returncode == 0, inspected.stderr
    assert json.loads(inspected.stdout)["final"]["norm"] == pytest.approx(1.0, abs=1e-6)
    assert json.loads(inspected.stdout)["axes"] == ["component", "x"]
    text = subprocess.run([sys.executable, "-m", "sojourn", "inspect", str(path)],
                          capture_output=True, text=True).stdout
    assert "a spinor run" in text
    import sojourn
    with sojourn.open(path) as handle:
        assert handle.psi.shape == (len(spinor), 2, setup.grid.points)
        assert handle.density[-1].shape == (setup.grid.points,)
        assert handle.density[-1] == pytest.approx(np.sum(np.abs(handle.psi[-1]) ** 2, axis=0))
        xr = pytest.importorskip("xarray")
        ds = handle.to_xarray()
        assert ds["psi"].dims == ("t", "component", "x") and ds["V"].dims == ("component", "x")
        assert isinstance(ds, xr.Dataset)
        assert float(ds["density"].isel(t=0).sum()) * setup.grid.dx == pytest.approx(1.0)


def test_delay_of_a_spinor_run_has_the_clock_and_the_table(tmp_path, spinor):
    from sojourn.measure import measure_delays
    report = measure_delays(spinor).to_dict()
    for channel in ("reflection", "transmission"):
        block = report[channel]["larmor"]
        assert block["omega"] == 0.05
        for key in ("tau_y", "tau_z", "tau"):
            assert set(block[key]) >= {"measured", "predicted", "deviation", "error"}
            assert block[key]["error"] is None          # no reruns: no error bar
        # a coarse grid (dx = 0.39): within 10 % of the packet's exact spinor prediction
        assert block["tau_y"]["measured"] == pytest.approx(block["tau_y"]["predicted"], rel=0.1)
    assert any("spin-summed" in n for n in report["notes"])
    # the ordinary methods measure the spin-summed run, predicted for the field-free
    # potential: the clock moves them by O(ω_L²) (PHYSICS §Larmor). Measured here as the
    # change from the field-free run, beside the change theory gives for the two
    # components' potentials V ± ħω_L/2 (each weighted by its channel probability)
    plain_setup = build(loads(clock_text({"larmor": None})))
    plain = measure_delays(run_in_memory(plain_setup)).to_dict()
    comps = [build(s) for s in component_scenarios(loads(clock_text(), "clock.yaml"))]
    preds = [packet_prediction(s.potential, s.packet, hbar=s.hbar, mass=s.mass,
                               reference=s.reference, region=s.region) for s in comps]
    p0 = packet_prediction(plain_setup.potential, plain_setup.packet, hbar=1.0, mass=1.0,
                           reference=plain_setup.reference, region=plain_setup.region)
    # the dwell time is linear in the density: the mean of the components' exactly
    dwell = report["reflection"]["dwell"]["measured"] - plain["reflection"]["dwell"]["measured"]
    assert dwell == pytest.approx(sum(p.dwell for p in preds) / 2 - p0.dwell, rel=0.1)
    for channel in ("reflection", "transmission"):
        cs = [getattr(p, channel) for p in preds]
        w = np.array([c.probability for c in cs])
        spectral = report[channel]["measured"]["spectral"]["delay"] \
            - plain[channel]["measured"]["spectral"]["delay"]
        expected = float(np.sum(w * [c.spectral_delay for c in cs]) / w.sum()) \
            - getattr(p0, channel).spectral_delay
        assert spectral == pytest.approx(expected, rel=0.15)
        for method, got in report[channel]["measured"].items():   # all small: O(ω_L²)
            ref = plain[channel]["measured"][method]["delay"]
            assert abs(got["delay"] - ref) < 5e-3 * abs(ref), method


def test_a_mirrored_clock_reads_the_same_times(spinor):
    # x → −x with the packet coming from the right: the same scattering problem
    # (parity; common practice, no source), so the same spin in each channel
    from sojourn.measure import measure_delays
    mirrored = clock_text({"potential": [{"barrier": {"start": -2.0, "end": 0.0, "height": 1.0}}],
                           "packet.center": 50.0, "packet.direction": "left",
                           "measure.detectors": [25.0, -30.0], "larmor.region": [-2.0, 0.0]})
    left = measure_delays(run_in_memory(build(loads(mirrored)))).to_dict()
    right = measure_delays(spinor).to_dict()
    for channel in ("reflection", "transmission"):
        for key in ("tau_y", "tau_z", "tau"):
            a, b = (r[channel]["larmor"][key] for r in (left, right))
            assert a["measured"] == pytest.approx(b["measured"], rel=1e-9)
            assert a["predicted"] == pytest.approx(b["predicted"], rel=1e-9)


def test_verify_gives_the_clock_richardson_error_bars(tmp_path, capsys):
    from sojourn import cli
    from sojourn.workflows import verify
    path = run(build(loads(clock_text(), "clock.yaml")), tmp_path / "clock.h5")
    assert cli.main(["delay", str(path), "--verify"]) == 0      # the command, text report
    text = capsys.readouterr().out
    assert "tunnelling times" in text and "transmission.larmor.tau_z" in text
    checked = verify(path)
    for channel in ("reflection", "transmission"):
        block = getattr(checked.report, channel).larmor
        fine = getattr(checked.finer_grid, channel).larmor
        for key in ("tau_y", "tau_z", "tau"):
            move = checked.moves[f"{channel}.larmor.{key}"]
            assert move["grid"] == pytest.approx(fine[key]["measured"] - block[key]["measured"])
            # 1.25 × the h² Richardson estimate (as the delays' bars)
            assert block[key]["error"] >= 1.25 * abs(move["grid"]) * 4 / 3 * (1 - 1e-12)
            # on this coarse grid the bar covers the deviation from the prediction
            assert abs(block[key]["deviation"]) <= block[key]["error"]


def test_a_clock_outside_the_box_or_over_the_packet_is_refused_or_warned(write_scenario):
    out = subprocess.run([sys.executable, "-m", "sojourn", "check",
                          str(write_scenario(clock_text({"larmor.region": [0.0, 500.0]})))],
                         capture_output=True, text=True)
    assert out.returncode == 2 and "larmor.region" in out.stderr + out.stdout
    assert "Traceback" not in out.stderr
    setup = build(loads(clock_text({"larmor.region": [-60.0, 2.0]})))
    assert "larmor.region" in [f.key for f in setup.warnings()]
    assert "larmor.region" not in [f.key for f in build(loads(clock_text())).findings]


def test_a_clock_without_theory_is_still_measured(spinor, monkeypatch):
    from sojourn.errors import TheoryError
    from sojourn.measure import larmor, measure_delays

    def refuse(*args, **kw):
        raise TheoryError("the layered solver cannot treat this potential")
    monkeypatch.setattr(larmor, "packet_larmor", refuse)
    report = measure_delays(spinor)
    block = report.transmission.larmor
    assert block["tau_y"]["measured"] > 0 and block["tau_y"]["predicted"] is None
    assert any(w.startswith("no Larmor prediction") for w in report.warnings)
