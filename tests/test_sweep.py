"""Sweeps: sweep-file validation, a four-point energy sweep of a unit step
against published theory, failing points, restarts, a Dask cluster, the lock.

The runs use ħ = m = V₀ = 1 (atomic units), σ = 20 and the box and grid of the
delay tests at their coarse level (N = 2048 over 576, Δx = 0.28, the step
midway between grid points, Δt·(E_max + V₀)/ħ = 2.5 < π).
"""
import json
import math
import shutil
import textwrap

import numpy as np
import pytest
from scipy.integrate import quad

from sojourn import cli
from sojourn.errors import ScenarioError
from sojourn.sweep import METHODS, folder_lock, load_sweep, loads_sweep, run_sweep
from sojourn.errors import SweepError

SIGMA = 20.0
SIGMA_K = 1 / (2 * SIGMA)
ENERGIES = [0.2, 0.35, 0.5, 0.65]

BASE = """\
units: atomic
grid: {span: [-500.203125, 75.796875], points: 2048}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -200.0, width: 20.0, energy: 0.5}
evolve: {duration: 500.0, dt: 0.0394411}
record: {every: 10.0}
measure: {detectors: [-100.0], reference: 0.0}
"""


def durations(energies):
    # long enough for the reflected packet to clear the detector, short enough to
    # stay in the box: 500/v₀ (the delay tests' choice)
    return [round(500 / math.sqrt(2 * e), 3) if e > 0 else 500.0 for e in energies]


def sweep_text(energies, output="out"):
    return textwrap.dedent(f"""\
        base: base.yaml
        vary:
          packet.energy: {energies}
          evolve.duration: {durations(energies)}
        pairing: zip
        output: {output}
        """)


def step_delay(E, V0=1.0):
    # source: τ_R = ħ/√(E(V₀−E)) relative to an ideal mirror at the step, from
    # r = −e^{2iδ}, δ = arctan√(E/(V₀−E)) (Griffiths, Introduction to QM, 2nd ed.,
    # Problem 2.34; Wigner, Phys. Rev. 98, 145 (1955) for τ = ħ dφ/dE)
    return 1 / math.sqrt(E * (V0 - E))


def published_averages(E0):
    """The step's τ(E) averaged over the packet as each method measures it
    (PHYSICS §5: centroid ⟨dφ/dk⟩/v₀, flux and spectral ⟨τ⟩ with R = 1), by
    scipy quadrature over k₀ ± 8σ_k."""
    k0 = math.sqrt(2 * E0)
    g = lambda k: math.exp(-0.5 * ((k - k0) / SIGMA_K) ** 2)
    lo, hi = k0 - 8 * SIGMA_K, k0 + 8 * SIGMA_K
    avg = lambda f: (quad(lambda k: f(k) * g(k), lo, hi, epsabs=0, epsrel=1e-12, limit=200)[0]
                     / quad(g, lo, hi, epsabs=0, epsrel=1e-12, limit=200)[0])
    tau = lambda k: step_delay(k * k / 2)
    flux = avg(tau)
    return {"centroid": avg(lambda k: k * tau(k)) / k0, "arrival": flux, "spectral": flux}


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    path = tmp_path_factory.mktemp("sweep")
    (path / "base.yaml").write_text(BASE)
    # four valid energies and one invalid one (E₀ must be > 0)
    (path / "sweep.yaml").write_text(sweep_text(ENERGIES[:2] + [-0.1] + ENERGIES[2:]))
    return path


@pytest.fixture(scope="module")
def local(folder):
    sweep = load_sweep(folder / "sweep.yaml")
    events = []
    outcome = run_sweep(sweep, workers=2, progress=lambda *a: events.append(a))
    return sweep, outcome, events


# ----------------------------------------------------------------------------------------
# The table against theory


def test_table_matches_the_published_step_delay(local):
    sweep, outcome, _ = local
    rows = [r for r in outcome.rows if r["status"] == "complete"]
    assert [r["packet.energy"] for r in rows] == ENERGIES
    for row in rows:
        E0 = row["packet.energy"]
        own = published_averages(E0)
        assert row["reflection_delay_wigner"] == pytest.approx(step_delay(E0), rel=1e-9)
        assert row["reflection_delay_packet"] == pytest.approx(own["arrival"], rel=1e-6)
        assert row["R"] == pytest.approx(1.0, abs=1e-6)
        for method in METHODS:
            measured = row[f"reflection_delay_{method}"]
            predicted = row[f"reflection_predicted_{method}"]
            # the table's prediction is the published τ(E) with its bandwidth correction
            assert predicted == pytest.approx(own[method], rel=1e-6), (E0, method)
            # One run on this grid carries the sharp step's Δx² error (PHYSICS §3),
            # measured here 0.6e-3 to 7e-3 of the delay (largest at E₀ = 0.2); the
            # delay tests reach 5e-4 only by Richardson over N and 2N, which would
            # cost 5× this sweep. So each delay is held to 1e-2 ...
            assert measured == pytest.approx(predicted, rel=1e-2), (E0, method)
        # ... and the differences between methods, where that error cancels (the
        # same wave function), to the delay tests' 5e-4 of the delay; the
        # differences themselves are up to 1.2e-3 of it (PHYSICS §5), so a method
        # compared with another method's prediction fails where they differ.
        for method in ("arrival", "spectral"):
            gap = row[f"reflection_delay_{method}"] - row["reflection_delay_centroid"]
            expected = own[method] - own["centroid"]
            assert abs(gap - expected) <= 5e-4 * own["centroid"], (E0, method)
    gap_at_fifth = published_averages(0.2)
    assert gap_at_fifth["arrival"] - gap_at_fifth["centroid"] > 1e-3 * gap_at_fifth["centroid"]


def test_invalid_point_fails_alone_with_its_error(local):
    _, outcome, _ = local
    failed = [r for r in outcome.rows if r["status"] == "failed"]
    assert len(failed) == 1 and outcome.count("complete") == 4
    bad = failed[0]
    assert bad["packet.energy"] == -0.1
    assert "packet.energy" in bad["error"] and "must be > 0" in bad["error"]
    assert "\n" not in bad["error"]
    assert bad["R"] is None and bad["reflection_delay_centroid"] is None


def test_table_files_and_figure(local, folder):
    sweep, outcome, events = local
    out = folder / "out"
    lines = (out / "table.csv").read_text().splitlines()
    assert lines[0].startswith("#") and "units" in lines[0] and "hbar/E_h" in lines[0]
    header = lines[1].split(",")
    assert header[:3] == ["point", "packet.energy", "evolve.duration"]
    for column in ("R", "T", "reflection_delay_wigner", "reflection_delay_packet", "status",
                   "error", *(f"reflection_{w}_{m}" for w in ("delay", "predicted")
                              for m in METHODS)):
        assert column in header
    assert not any(c.startswith("reflection_error_") for c in header)   # no --verify
    assert len(lines) == 2 + 5
    table = json.loads((out / "table.json").read_text())
    assert table["units"]["time"] == "hbar/E_h" and len(table["rows"]) == 5
    assert table["rows"] == outcome.rows
    for name in ("point-000.h5", "point-000.yaml", "point-000.json", "point-004.h5"):
        assert (out / name).exists()
    assert not (out / "point-002.h5").exists()      # the invalid point never ran
    assert (out / "summary.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # the progress callback saw every point, with counts by status
    assert events[-1][0] == events[-1][1] == 5
    assert events[-1][2] == {"complete": 4, "failed": 1}


def test_second_invocation_skips_complete_points(local, folder):
    sweep, first, _ = local
    out = folder / "out"
    runs = sorted(out.glob("point-*.h5"))
    before = {p.name: p.stat().st_mtime_ns for p in runs}
    again = run_sweep(load_sweep(folder / "sweep.yaml"), workers=2)
    assert {p.name: p.stat().st_mtime_ns for p in runs} == before
    assert [r["status"] for r in again.rows] == ["skipped"] * 2 + ["failed"] + ["skipped"] * 2
    for a, b in zip(first.rows, again.rows):
        assert {k: v for k, v in a.items() if k != "status"} == \
            {k: v for k, v in b.items() if k != "status"}


def test_dask_cluster_gives_the_same_table(local, folder):
    distributed = pytest.importorskip("distributed")
    _, outcome, _ = local
    text = (folder / "sweep.yaml").read_text().replace("output: out", "output: on-dask")
    (folder / "dask.yaml").write_text(text)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        on_dask = run_sweep(load_sweep(folder / "dask.yaml"), scheduler=cluster.scheduler_address)
    assert on_dask.columns == outcome.columns
    for a, b in zip(outcome.rows, on_dask.rows):
        assert a["status"] == b["status"]
        for column in outcome.columns:
            if isinstance(a[column], float):
                # FFTW may plan a transform differently in another process: round-off
                # (1e-12 relative seen) differs, physics does not (common practice)
                assert b[column] == pytest.approx(a[column], rel=1e-9, abs=1e-12), column
            else:
                assert a[column] == b[column], column
    assert (folder / "on-dask" / "point-004.h5").exists()


def test_lock_refuses_a_concurrent_sweep(local, folder, capsys):
    out = folder / "out"
    with folder_lock(out):
        with pytest.raises(SweepError, match="another sweep is running"):
            run_sweep(load_sweep(folder / "sweep.yaml"), workers=1)
        assert cli.main(["sweep", str(folder / "sweep.yaml"), "-q"]) == 2
    err = capsys.readouterr().err
    assert "another sweep is running" in err and "Traceback" not in err
    assert len([line for line in err.splitlines() if line.startswith("sojourn: error")]) == 1


def test_cli_reports_skipped_points(local, folder, capsys):
    assert cli.main(["sweep", str(folder / "sweep.yaml"), "-q"]) == 1   # one point failed
    out = capsys.readouterr().out
    assert "0 complete, 4 already done, 1 failed of 5 points" in out


# ----------------------------------------------------------------------------------------
# Sweep-file validation (nothing runs)


@pytest.fixture
def base_dir(tmp_path):
    (tmp_path / "base.yaml").write_text(BASE)
    return tmp_path


def check_error(base_dir, text, expected):
    with pytest.raises(ScenarioError) as info:
        loads_sweep(textwrap.dedent(text), "sw.yaml", base_dir)
    message = str(info.value)
    assert message.startswith(expected), message
    assert "\n" not in message
    return message


def test_unknown_key_is_named_with_a_suggestion(base_dir):
    check_error(base_dir, """\
        base: base.yaml
        vary: {packet.energy: [0.2]}
        ouput: out
        """, "sw.yaml:3: ouput: unknown key; did you mean 'output'?")


def test_varied_path_must_exist_in_the_base(base_dir):
    message = check_error(base_dir, """\
        base: base.yaml
        vary:
          packet.energy: [0.2]
          packet.enrgy: [0.3]
        output: out
        """, "sw.yaml:4: vary.packet.enrgy: no key 'packet.enrgy'")
    assert "did you mean 'packet.energy'?" in message
    check_error(base_dir, """\
        base: base.yaml
        vary: {potential.3.step.height: [1.0, 2.0]}
        output: out
        """, "sw.yaml:2: vary.potential.3.step.height: 'potential.3': potential is a list of 1")
    check_error(base_dir, """\
        base: base.yaml
        vary: {grid: [1, 2]}
        output: out
        """, "sw.yaml:2: vary.grid: 'grid' is a whole section")


def test_zip_needs_equal_lengths_and_product_combines(base_dir):
    check_error(base_dir, """\
        base: base.yaml
        vary:
          packet.energy: [0.2, 0.3]
          packet.width: [20.0]
        pairing: zip
        output: out
        """, "sw.yaml:5: pairing: zip pairs the i-th values")
    sweep = loads_sweep(textwrap.dedent("""\
        base: base.yaml
        vary:
          packet.energy: [0.2, 0.3]
          evolve.dt: [0.02, 0.01, 0.005]
        output: out
        """), "sw.yaml", base_dir)
    # evolve.dt is not in the base file but is a key of its evolve section
    assert [p.values for p in sweep.points][:2] == [
        {"packet.energy": 0.2, "evolve.dt": 0.02}, {"packet.energy": 0.2, "evolve.dt": 0.01}]
    assert len(sweep.points) == 6 and all(p.error is None for p in sweep.points)
    assert sweep.points[5].scenario.evolve.dt == 0.005
    assert sweep.points[5].scenario.packet.energy == 0.3
    assert sweep.output == base_dir / "out"


def test_missing_base_and_wrong_types(base_dir):
    check_error(base_dir, "base: nowhere.yaml\nvary: {packet.energy: [0.2]}\noutput: out\n",
                "sw.yaml:1: base: no scenario file at")
    check_error(base_dir, "base: base.yaml\nvary: {packet.energy: 0.2}\noutput: out\n",
                "sw.yaml:2: vary.packet.energy: must be a non-empty list")
    check_error(base_dir, "base: base.yaml\nvary: {packet.energy: [0.2]}\n",
                "sw.yaml:1: (top level): required key 'output' is missing")
    check_error(base_dir, "base: base.yaml\nvary: {packet.energy: [0.2]}\noutput: o\n"
                          "pairing: cross\n", "sw.yaml:4: pairing: must be one of product | zip")


def test_cli_bad_sweep_file_exits_2(base_dir, capsys):
    (base_dir / "bad.yaml").write_text("base: base.yaml\nvary: {packet.speed: [1]}\noutput: o\n")
    assert cli.main(["sweep", str(base_dir / "bad.yaml")]) == 2
    err = capsys.readouterr().err
    assert "bad.yaml:2: vary.packet.speed: no key 'packet.speed'" in err
    assert "Traceback" not in err


# ----------------------------------------------------------------------------------------
# Interruption


def test_points_do_not_begin_after_an_interrupt(base_dir):
    from sojourn.sweep.runner import STOP_NAME, _task, run_point
    sweep = loads_sweep("base: base.yaml\nvary: {packet.energy: [0.2]}\noutput: out\n",
                        "sw.yaml", base_dir)
    sweep.output.mkdir()
    (sweep.output / STOP_NAME).touch()
    result = run_point(_task(sweep, sweep.points[0], sweep.output, False))
    assert result["status"] == "interrupted"
    assert not list(sweep.output.glob("point-000.*"))


@pytest.mark.slow
def test_ctrl_c_keeps_completed_points_and_the_next_run_finishes(tmp_path):
    import os
    import signal
    import subprocess
    import sys
    import time
    (tmp_path / "base.yaml").write_text(BASE)
    (tmp_path / "sweep.yaml").write_text(sweep_text(ENERGIES))
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "sojourn", "sweep", str(tmp_path / "sweep.yaml"),
                             "--workers", "2", "-q"], start_new_session=True,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 300
    while not list(out.glob("point-*.json")) and time.monotonic() < deadline:
        time.sleep(0.1)
    os.killpg(proc.pid, signal.SIGINT)      # as a terminal's Ctrl-C: the whole group
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 130 and "Traceback" not in err
    rows = json.loads((out / "table.json").read_text())["rows"]
    done = {r["point"] for r in rows if r["status"] == "complete"}
    assert done and len(done) < 4
    mtimes = {p: (out / f"{p}.h5").stat().st_mtime_ns for p in done}
    again = run_sweep(load_sweep(tmp_path / "sweep.yaml"), workers=2)
    assert {p: (out / f"{p}.h5").stat().st_mtime_ns for p in done} == mtimes
    assert {r["point"]: r["status"] for r in again.rows} == {
        r["point"]: ("skipped" if r["point"] in done else "complete") for r in rows}


# ----------------------------------------------------------------------------------------
# Outputs never replace inputs or files no sweep wrote (nothing runs)


TABLE_BASE = BASE.replace("  - step: {at: 0.0, height: 1.0}", "  - table: {file: table.csv}")


def test_output_beside_an_input_table_is_refused_and_the_table_kept(tmp_path, capsys):
    # the red-team case: base reads table.csv, sweep output '.' would write table.csv
    (tmp_path / "table.csv").write_text("x,V\n-1000,0\n0,0\n0.001,1\n1000,1\n")
    (tmp_path / "base.yaml").write_text(TABLE_BASE)
    (tmp_path / "sw.yaml").write_text("base: base.yaml\nvary: {packet.energy: [0.2]}\noutput: .\n")
    before = (tmp_path / "table.csv").read_bytes()
    assert cli.main(["sweep", str(tmp_path / "sw.yaml"), "-q"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "table.csv, which is one of its inputs" in err[0]
    assert (tmp_path / "table.csv").read_bytes() == before
    assert not list(tmp_path.glob("point-*")) and not (tmp_path / ".sweep.lock").exists()


def test_sweep_file_and_base_are_inputs_too(base_dir):
    # the sweep file named like a point's scenario, in the output folder
    (base_dir / "point-000.yaml").write_text("base: base.yaml\nvary: {packet.energy: [0.2]}\n"
                                             "output: .\n")
    with pytest.raises(SweepError, match="point-000.yaml, which is one of its inputs"):
        run_sweep(load_sweep(base_dir / "point-000.yaml"))
    (base_dir / "point-001.yaml").write_text(BASE)   # the base named like point 1's scenario
    sweep = loads_sweep("base: point-001.yaml\nvary: {packet.energy: [0.2, 0.3]}\noutput: .\n",
                        "sw.yaml", base_dir)
    with pytest.raises(SweepError, match="point-001.yaml, which is one of its inputs"):
        run_sweep(sweep)


def test_a_table_no_sweep_wrote_is_not_replaced(base_dir):
    out = base_dir / "out"
    out.mkdir()
    (out / "table.json").write_text('{"mine": 1}')
    sweep = loads_sweep("base: base.yaml\nvary: {packet.energy: [0.2]}\noutput: out\n",
                        "sw.yaml", base_dir)
    with pytest.raises(SweepError, match="was not written by a sweep"):
        run_sweep(sweep)
    assert (out / "table.json").read_text() == '{"mine": 1}'
    # a figure is known by its mark, or by a sweep's own table beside it (older sweeps)
    from sojourn.sweep.table import is_ours
    (out / "summary.png").write_bytes(b"\x89PNG\r\n\x1a\n unmarked")
    assert not is_ours(out / "summary.png")
    (out / "table.json").write_text('{"sweep": "sw.yaml", "rows": []}')
    assert is_ours(out / "summary.png") and is_ours(out / "table.json")


# ----------------------------------------------------------------------------------------
# Sweep files are bounded before anything is expanded


def bomb(levels=9):
    """A billion-laughs list: 10**levels items once expanded, a few hundred bytes as text."""
    lines = ["a0: &a0 [0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2]"]
    for i in range(1, levels):
        lines.append(f"a{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * 10) + "]")
    return lines


@pytest.mark.parametrize("where", ["vary", "base", "pairing", "extra"])
def test_alias_bombs_are_refused_before_expansion(base_dir, where):
    head = bomb()
    top = {"vary": "base: base.yaml\nvary: {packet.energy: *a8}\noutput: out\n",
           "base": "base: *a8\nvary: {packet.energy: [0.2]}\noutput: out\n",
           "pairing": "base: base.yaml\nvary: {packet.energy: [0.2]}\npairing: *a8\noutput: o\n",
           "extra": "base: base.yaml\nvary: {packet.energy: [0.2], evolve.dt: [*a8]}\noutput: o\n"}
    text = "\n".join(["anchors:"] + ["  " + line for line in head]) + "\n" + top[where]
    with pytest.raises(SweepError, match="more than 100,000 values") as info:
        loads_sweep(text, "sw.yaml", base_dir)
    assert "\n" not in str(info.value) and str(info.value).startswith("sw.yaml:1:")


def test_size_limits_on_text_points_and_values(base_dir):
    with pytest.raises(SweepError, match="at most 1,000,000 are read"):
        loads_sweep("base: base.yaml\n# " + "x" * 1_000_001 + "\n", "sw.yaml", base_dir)
    many = "[" + ", ".join(["0.2"] * 200) + "]"
    with pytest.raises(SweepError, match="makes 40,000 points; at most 10,000"):
        loads_sweep(f"base: base.yaml\nvary: {{packet.energy: {many}, packet.width: {many}}}\n"
                    "output: o\n", "sw.yaml", base_dir)
    long_value = "[" + ", ".join(["1"] * 2000) + "]"
    with pytest.raises(SweepError, match=r"vary.packet.energy\[1\]: a value with more than 1,000"):
        loads_sweep(f"base: base.yaml\nvary:\n  packet.energy: [0.2, {long_value}]\noutput: o\n",
                    "sw.yaml", base_dir)


# ----------------------------------------------------------------------------------------
# The lock file, and workers whose sweep was killed


def test_lock_file_is_removed_when_the_sweep_ends(tmp_path):
    with folder_lock(tmp_path) as path:
        assert path.exists() and path.read_text().strip().isdigit()
    assert not (tmp_path / ".sweep.lock").exists()
    with folder_lock(tmp_path):    # and can be taken again
        pass


def test_a_killed_sweeps_lock_is_free_at_once(tmp_path):
    import os
    import signal
    import subprocess
    import sys
    code = ("import sys, time; from sojourn.sweep import folder_lock\n"
            f"with folder_lock({str(tmp_path)!r}):\n    print('held', flush=True); time.sleep(600)\n")
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "held"
    with pytest.raises(SweepError, match="another sweep is running in this folder"):
        with folder_lock(tmp_path):
            pass
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    with folder_lock(tmp_path):   # kill -9: the lock went with the process
        pass


def test_workers_stop_when_the_sweep_process_is_killed(tmp_path):
    # the local pool's workers watch their parent: after a kill -9 of the sweep
    # they stop their point (as on Ctrl-C) instead of finishing it unseen
    import os
    import signal
    import subprocess
    import sys
    import time
    code = textwrap.dedent("""\
        import multiprocessing, os, sys, time
        from concurrent.futures import ProcessPoolExecutor
        from sojourn.sweep import runner

        def point(marker):              # a point's shape: busy, and cleans up when stopped
            runner._BUSY.set()
            open(marker, "w").write("started")
            try:
                time.sleep(600)
            except KeyboardInterrupt:
                open(marker, "w").write("interrupted")
            finally:
                runner._BUSY.clear()

        if __name__ == "__main__":
            pool = ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("spawn"),
                                       initializer=runner._watch_parent,
                                       initargs=(os.getpid(), 0.1))
            pool.submit(point, sys.argv[1])
            while not os.path.exists(sys.argv[1]):
                time.sleep(0.05)
            print(*pool._processes, flush=True)
            time.sleep(600)
        """)
    (tmp_path / "parent.py").write_text(code)
    marker = tmp_path / "stopped"
    proc = subprocess.Popen([sys.executable, str(tmp_path / "parent.py"), str(marker)],
                            stdout=subprocess.PIPE, text=True)
    worker = int(proc.stdout.readline().split()[0])
    os.kill(worker, 0)                      # the worker is busy with its point
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    deadline = time.monotonic() + 60        # a liveness bound, not a timing check
    gone = False
    while time.monotonic() < deadline and not gone:
        try:
            os.kill(worker, 0)
            # a zombie counts as gone: it is not running a point any more
            with open(f"/proc/{worker}/stat") as handle:
                gone = handle.read().split(")")[-1].split()[0] == "Z"
        except (ProcessLookupError, FileNotFoundError):
            gone = True
        time.sleep(0.2)
    assert gone and marker.read_text() == "interrupted"   # the point was stopped, then the worker left


# ----------------------------------------------------------------------------------------
# Warnings travel with the numbers; strict JSON; untrusted points hollow (nothing runs)


def test_warnings_column_full_texts_strict_json_and_hollow_points(base_dir):
    from sojourn.sweep import summary_figure, write_results
    sweep = loads_sweep("base: base.yaml\nvary: {packet.energy: [0.3, 0.5]}\noutput: out\n",
                        "sw.yaml", base_dir)
    sweep.output.mkdir()
    text = "the reflection packet has not separated from the potential by the end"

    def measured(delay):
        values = {"R": 1.0, "T": float("nan"), "reflection_delay_wigner": 2.0,
                  "reflection_delay_packet": 2.0}
        for m in METHODS:
            values.update({f"reflection_delay_{m}": delay, f"reflection_predicted_{m}": 2.0,
                           f"reflection_error_{m}": None})
        return values

    results = {0: {"status": "complete", "measured": measured(2.01), "warnings": []},
               1: {"status": "complete", "measured": measured(float("nan")),
                   "warnings": [text, text + " again"]}}
    results[1]["measured"]["reflection_delay_centroid"] = 2.5
    outcome = write_results(sweep, results)
    rows = {r["point"]: r for r in outcome.rows}
    assert rows["point-000"]["warnings"] == ""
    assert rows["point-001"]["warnings"] == "reflection-packet-not-separated"
    # strict JSON (RFC 8259 has no NaN): the parser refuses any NaN/Infinity token
    raw = outcome.table_json.read_text()
    table = json.loads(raw, parse_constant=lambda name: pytest.fail(f"{name} in table.json"))
    assert table["rows"][1]["T"] is None and table["rows"][1]["reflection_delay_arrival"] is None
    assert table["warning_texts"] == {"point-001": [text, text + " again"]}
    header = outcome.table_csv.read_text().splitlines()[1].split(",")
    assert header[-3:] == ["status", "error", "warnings"]
    fig = summary_figure(sweep, outcome.rows)
    centroid = [line for line in fig.axes[0].lines if line.get_marker() == "o"
                and len(line.get_xdata()) == 1]
    faces = {float(line.get_xdata()[0]): line.get_markerfacecolor() for line in centroid}
    assert faces[0.5] == "none" and faces[0.3] != "none"   # untrusted hollow, trusted filled
