"""The delay report's shape, saving and the command line."""
import json

import h5py
import numpy as np
import pytest

from sojourn import cli
from sojourn.measure import measure_delays
from sojourn.store import save_analysis
from sojourn.store import RunFile

FREE = """
units: atomic
grid: {span: [-300.0, 300.0], points: 512}
packet: {center: -150.0, width: 20.0, energy: 0.5}
evolve: {duration: 330.0, dt: 0.2}
record: {every: 15.0}
measure: {detectors: [100.0]}
"""


def test_json_shape_and_save_touches_only_analysis(run_scenario, capsys):
    _, path = run_scenario(FREE)
    with h5py.File(path, "r") as f:
        before = f["snapshots/psi"][...]
    assert cli.main(["delay", str(path), "--json", "--save"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert set(out) >= {"units", "reflection", "transmission", "warnings"}
    assert out["units"]["time"] == "hbar/E_h"
    tr = out["transmission"]
    assert set(tr) >= {"probability", "measured", "theory", "dwell"}
    assert set(tr["theory"]) >= {"wigner", "packet"}
    for method in ("centroid", "arrival", "spectral"):
        assert set(tr["measured"][method]) >= {"delay", "predicted", "deviation", "error"}
    with RunFile(path) as rf:
        assert rf.analysis()["transmission"]["probability"] == pytest.approx(tr["probability"])
        assert np.array_equal(rf.h5["snapshots/psi"][...], before)


def test_plain_table_and_bad_file(run_scenario, tmp_path, capsys):
    _, path = run_scenario(FREE)
    assert cli.main(["delay", str(path)]) == 0
    text = capsys.readouterr().out
    assert "transmission" in text and "centroid" in text and "predicted" in text
    bad = tmp_path / "nothing.h5"
    bad.write_text("not hdf5")
    assert cli.main(["delay", str(bad)]) == 2
    assert "Traceback" not in capsys.readouterr().err


def test_report_to_dict_is_json(run_scenario):
    _, path = run_scenario(FREE)
    report = measure_delays(path)
    json.dumps(report.to_dict())
    save_analysis(path, report.to_dict())
    with RunFile(path) as rf:
        assert rf.analysis() == json.loads(json.dumps(report.to_dict()))


STEP = """
units: atomic
grid: {span: [-400.25, 199.75], points: 1024}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -200.0, width: 20.0, energy: 0.5}
evolve: {duration: 400.0, dt: 0.1}
record: {every: 20.0}
measure: {detectors: [DETECTOR]}
"""


def test_reference_run_gives_the_same_delays_as_the_exact_free_evolution(run_scenario, capsys):
    # the split-operator step is exact for a free packet (the kinetic factor is applied in
    # k-space: Feit, Fleck & Steiger, J. Comput. Phys. 47, 412 (1982)), so a named free
    # reference run must reproduce the exact free evolution's delays
    _, path = run_scenario(STEP.replace("DETECTOR", "-100.0"), "step.yaml")
    # the free packet runs on to x ≈ 200 + 6σ(t): a box that holds it (no wrap-around)
    free = STEP.replace("potential:\n  - step: {at: 0.0, height: 1.0}\n", "").replace(
        "[-400.25, 199.75]", "[-400.25, 399.75]")
    _, ref = run_scenario(free.replace("DETECTOR", "100.0"), "free.yaml")
    exact = measure_delays(path).reflection.measured
    assert cli.main(["delay", str(path), "--reference-run", str(ref), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    named = out["reflection"]["measured"]
    for method in ("centroid", "arrival"):
        assert named[method]["delay"] == pytest.approx(exact[method].delay, rel=1e-5), method
    assert not any("reference run" in w for w in out["warnings"])
    # a reference run without the mirrored detector falls back, and says so
    _, bare = run_scenario(free.replace("DETECTOR", "-100.0"), "bare.yaml")
    assert cli.main(["delay", str(path), "--reference-run", str(bare)]) == 0
    assert "has no detector" in capsys.readouterr().out


def strict(text: str):
    """json.loads that refuses NaN and Infinity (not JSON: RFC 8259, Sec. 6)."""
    def refuse(token):
        raise ValueError(f"non-JSON token {token}")
    return json.loads(text, parse_constant=refuse)


OPAQUE = """
units: atomic
grid: {span: [-300.0, 300.0], points: 1024}
potential:
  - barrier: {start: 0.0, end: 10.0, height: 5.0}
packet: {center: CENTER, width: 10.0, energy: 0.5}
evolve: {duration: 250.0, dt: 0.05}
record: {every: 10.0}
measure: {detectors: [-100.0, 100.0]}
"""


def test_packet_overlapping_the_potential_is_not_called_leakage(run_scenario):
    # an opaque barrier (κa = 30: T ~ e^{−60}, Griffiths 2nd ed., Problem 2.33) with the
    # packet's centre 2σ before it: 2.3% of the packet sits at or beyond the barrier at t = 0
    # (Gaussian tail, ½erfc(√2)); what leaves on the far side was never transmitted
    _, path = run_scenario(OPAQUE.replace("CENTER", "-20.0"), "overlap.yaml")
    report = measure_delays(path)
    assert not any("leakage" in w for w in report.warnings)
    overlap = [w for w in report.warnings if "overlaps the potential" in w]
    assert len(overlap) == 1 and "2.28%" in overlap[0]
    # the same barrier with the packet far away: nothing gets through, and nothing is said
    # about a transmitted channel but why it is not measured
    _, far = run_scenario(OPAQUE.replace("CENTER", "-150.0"), "far.yaml")
    clean = measure_delays(far)
    assert clean.transmission is None
    assert not any("leakage" in w or "overlaps" in w for w in clean.warnings)
    assert any(n.startswith("transmission not measured") for n in clean.notes)


def test_no_runtime_warning_and_strict_json(run_scenario, capsys):
    # numpy RuntimeWarnings never reach the user; every missing number is null, not NaN
    import warnings
    _, free = run_scenario(FREE)
    _, step = run_scenario(STEP.replace("DETECTOR", "-100.0"), "step.yaml")
    _, overlap = run_scenario(OPAQUE.replace("CENTER", "-20.0"), "overlap.yaml")
    for path in (free, step, overlap):
        with warnings.catch_warnings():
            warnings.simplefilter("error", RuntimeWarning)
            report = measure_delays(path)
        strict(json.dumps(report.to_dict(), allow_nan=False))
        assert cli.main(["delay", str(path), "--json"]) == 0
        strict(capsys.readouterr().out)
    # the free run has a zero prediction: its relative deviation is missing, as null
    tr = measure_delays(free).transmission.to_dict(measure_delays(free).dwell)
    assert tr["measured"]["centroid"]["predicted"] == 0.0
    assert tr["measured"]["centroid"]["relative"] is None


def test_arguments_are_checked_up_front(tmp_path):
    from sojourn.errors import MeasureError
    with pytest.raises(MeasureError, match="run-file reader"):
        measure_delays(42)
    with pytest.raises(MeasureError, match="reference run"):
        measure_delays(tmp_path / "x.h5", reference_run=3.5)


def test_a_method_is_one_function_and_one_registry_entry(run_scenario, monkeypatch):
    # the recipe of DEVELOPERS.md, done in a test: a centroid read at the FIRST separated
    # snapshot instead of the last, compared with the theory's centroid average
    from sojourn.measure import METHODS
    from sojourn.measure.methods import Method, MethodResult

    def early_centroid(run, channel, ctx):
        if channel != "reflection" or not ctx.usable.any():
            return None
        i = int(ctx.usable.nonzero()[0][0])
        t = run.times[i]
        mirror = 2 * run.x_r - run.info.center - run.info.group_velocity * t
        return MethodResult(float((ctx.stats["x_out"][i] - mirror) / run.info.group_velocity))

    monkeypatch.setitem(METHODS, "early", Method(early_centroid, "centroid_delay", ()))
    _, path = run_scenario(STEP.replace("DETECTOR", "-100.0"), "step.yaml")
    ch = measure_delays(path).reflection
    assert list(ch.measured) == ["centroid", "arrival", "spectral", "early"]
    early, late = ch.measured["early"], ch.measured["centroid"]
    assert early.predicted == late.predicted
    # at E₀ = V₀/2 the step delay is 2ħ/V₀ = 2 (Griffiths 2nd ed., Problem 2.34: τ =
    # ħ/√(E(V₀−E))); the first separated snapshot already gives it to a few percent
    assert early.delay == pytest.approx(2.0, rel=5e-2)
