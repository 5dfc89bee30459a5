"""Robustness: hostile formulas, resource guards, foreign and damaged files,
two writers at once, numerical faults, failing writes. Every bad input ends in
one of our own errors (a SojournError) with a one-line message, exit code 2."""
from __future__ import annotations

import os
import shutil
import time
import tracemalloc
from pathlib import Path

import h5py
import numpy as np
import pytest
import yaml

from sojourn import guards as build_module
from sojourn.model import expression as expression
from sojourn.engine import propagate as propagate
from sojourn.build import build
from sojourn.cli import main
from sojourn.workflows import run as execute
from sojourn.errors import NonFinite
from sojourn.store import RunFile, RunWriter, lock_path, partial_path
from sojourn.errors import RunFileError
from sojourn.config.scenario import loads
from sojourn.errors import ScenarioError, SojournError

SMALL = """\
title: small step
units: atomic
grid: {span: [-300.0, 300.0], points: 512}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -100.0, width: 10.0, energy: 0.5}
evolve: {duration: 40.0, dt: 0.05}
absorber: {width: 50.0}
record: {every: 5.0}
measure: {detectors: [-50.0]}
"""

# ---------------------------------------------------------------------------------------
# 2. the expression sandbox under attack

MARKER_ENV = "SOJOURN_HOSTILE_RAN"


def hostile_formulas(marker: Path) -> list:
    """Formulas that would leave a trace (a file, an environment variable) if any
    part of them ran, and others that try to exhaust time, memory or the parser."""
    m = str(marker)
    return [
        f"__import__('os').system('touch {m}')",
        f"open('{m}', 'w').write('x')",
        f"__import__('os').environ.__setitem__('{MARKER_ENV}', '1')",
        "().__class__.__bases__[0].__subclasses__()",
        "x.__class__", "x.real.__class__.__mro__", "sin.__globals__", "exp.__code__",
        "(lambda: 1)()", "lambda x: x", f"[open('{m}','w') for _ in (1,)]",
        "{k: 1 for k in (1,)}", f"{{open('{m}','w')}}", "(y := 3)", f"(open('{m}','w'), 1)[1]",
        "f'{x}'", f"f'{{open(\"{m}\",\"w\")}}'", "sin(*[x])", "sin(**{'x': x})", "sin(x=x)",
        "x if x else 1", "not x", "x and 1", "x or 1", "x % 2", "x // 2", "x @ x", "x << 2",
        "~x", "x[0]", "x[::-1]", "'abc'", "b'abc'", "None", "True + x", "...", "1j * x",
        "eval('1')", "exec('1')", "getattr(x, 'real')", "globals()", "vars()", "breakpoint()",
        "print(x)", "input()", "compile('1','','eval')", "np.sin(x)", "numpy.sin(x)",
        "sin(x).real", "x.sum()", "minimum(x, 0, x)", "sin(x, x)", "where(x)",
        "clip(x, 0, 1, x)", "heaviside(x, 0.5, x)", "exp(" * 50 + "x" + ")" * 50,
        "-" * 3000 + "x", "+".join(["x"] * 600), "*".join(["x"] * 600), "x" * 5000,
        "1" * 4000, "(" * 200 + "x" + ")" * 200, "x" + " " * (10 ** 6), "a" * (10 ** 6),
        "9**9**9", "10.0**400", "1e999", "-1e999", "1e308*10", "1/0", "0/0", "log(0)",
        "exp(1000)", "2**99999", "99999999999999999999" * 20, "х + 1",   # Cyrillic х
        "ℯ + x", "sin(x); import os", "x\n import os", "x # comment\nimport os", "\x00",
        "import os", "del x", "x = 1", "assert x", "yield x", "await x", "async def f(): pass",
        "sin(" + ", ".join(["x"] * 300) + ")", "maximum(" + ", ".join(["x"] * 300) + ")",
        "__builtins__", "__import__", "_", "x.__dict__", "[x]", "(x, x)", "{x}",
        "{'a': x}", "x.T", "x is x", "x in x", "x == x", "x != x", "1 < x < 2",
    ]


def test_hostile_formulas_are_refused_quickly_and_nothing_runs(tmp_path, monkeypatch):
    marker = tmp_path / "marker"
    monkeypatch.delenv(MARKER_ENV, raising=False)
    corpus = hostile_formulas(marker)
    grid = np.linspace(-10.0, 10.0, 257)
    slowest = 0.0
    for formula in corpus:
        start = time.perf_counter()
        with pytest.raises(expression.ExpressionError) as info:
            expression.evaluate(expression.parse(formula), grid)
        slowest = max(slowest, time.perf_counter() - start)
        assert "\n" not in str(info.value) and len(str(info.value)) < 400, formula[:60]
    # a safety bound, not a benchmark: a refusal never takes seconds
    assert slowest < 1.0
    assert not marker.exists() and MARKER_ENV not in os.environ
    assert len(corpus) >= 100


def test_hostile_formulas_in_a_scenario_name_the_key(tmp_path):
    marker = tmp_path / "marker"
    for formula in hostile_formulas(marker)[:20]:
        term = yaml.safe_dump({"expression": formula}, default_flow_style=True, width=10 ** 7)
        text = SMALL.replace("  - step: {at: 0.0, height: 1.0}", "  - " + term.strip())
        with pytest.raises(ScenarioError) as info:
            loads(text, "s.yaml")
        assert str(info.value).startswith("s.yaml:5: potential[0]"), str(info.value)
    assert not marker.exists()


def test_evaluation_leaves_the_grid_untouched():
    x = np.linspace(-1.0, 1.0, 9)
    before = x.copy()
    expression.evaluate(expression.parse("minimum(x*0, 5) + maximum(x, 0)"), x)
    assert np.array_equal(x, before)


def test_the_worst_accepted_formula_is_bounded_on_a_large_grid():
    # close to MAX_NODES parts and MAX_DEPTH levels, every part an array operation
    # (balanced sums keep it within MAX_DEPTH; parentheses stay within their limit)
    term = "x*x*x*x*x*x*x*x*x*0.5-x/3+x**2"
    quarter = "+".join([term] * 4)
    formula = "tanh(" + "+".join(f"({quarter})" for _ in range(2)) + ")"
    tree = expression.parse(formula)
    nodes = sum(1 for _ in __import__("ast").walk(tree))
    assert nodes > expression.MAX_NODES * 0.75
    x = np.linspace(-50.0, 50.0, 1 << 20)
    tracemalloc.start()
    values = expression.evaluate(tree, x)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert values.shape == x.shape and np.all(np.isfinite(values))
    # memory stays a small multiple of the grid (depth × N), not nodes × N
    assert peak < 2 * expression.MAX_DEPTH * x.nbytes


@pytest.mark.parametrize("formula,where", [("log(x)", "x = -300"), ("1/(x - 10)", "x = 10"),
                                           ("sqrt(x)", "x = -300")])
def test_non_finite_formula_values_stop_the_run_naming_the_x(write_scenario, capsys, formula,
                                                              where):
    # x = 10 lies on the grid: -300 + 512 * 600/512·k hits 10 only if dx divides 310
    text = SMALL.replace("  - step: {at: 0.0, height: 1.0}", f"  - expression: \"{formula}\"")
    text = text.replace("points: 512", "points: 600")   # dx = 1: x = 10 is a grid point
    path = write_scenario(text)
    setup = build(loads(path.read_text(), str(path)))
    assert [f.key for f in setup.errors()] == ["potential"]
    assert main(["run", str(path), "-q", "-o", str(path.with_suffix(".h5"))]) == 2
    err = capsys.readouterr().err
    assert "potential: V is not finite" in err and where in err and "Traceback" not in err
    assert not path.with_suffix(".h5").exists()


def test_nan_in_a_table_is_refused_at_load(write_scenario, tmp_path):
    (tmp_path / "profile.csv").write_text("x,V\n-10,0\n0,nan\n10,0\n")
    path = write_scenario(SMALL.replace("  - step: {at: 0.0, height: 1.0}",
                                        "  - table: {file: profile.csv}"))
    assert main(["check", str(path)]) == 2
    with pytest.raises(ScenarioError, match="not finite"):
        loads(path.read_text(), str(path), tmp_path)
    (tmp_path / "profile.csv").write_text("x,V\n-10,0\n0,inf\n10,0\n")
    with pytest.raises(ScenarioError, match="not finite"):
        loads(path.read_text(), str(path), tmp_path)


# ---------------------------------------------------------------------------------------
# 3. resource guards


def test_a_grid_larger_than_memory_is_refused_before_any_allocation(write_scenario, capsys):
    path = write_scenario(SMALL.replace("points: 512", f"points: {2 ** 40}"))
    tracemalloc.start()
    with pytest.raises(ScenarioError) as info:
        build(loads(path.read_text(), str(path)))
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 50 * 2 ** 20   # the request was 2^40 points × 8 copies × 16 bytes
    message = str(info.value)
    assert "grid.points" in message and "1099511627776 points" in message and "TiB" in message
    for verb in (["run", str(path), "-q"], ["check", str(path)]):
        assert main(verb) == 2
        err = capsys.readouterr().err
        assert "grid.points" in err and "TiB" in err and "Traceback" not in err


def test_a_terabyte_of_snapshots_is_refused(write_scenario, capsys):
    # 2^16 points × 16 B = 1 MiB a snapshot; over 10^6 snapshots is over 1 TiB
    # (dt = 2.7e-5, the grid rule's step here: 1.5 million steps, each recorded)
    text = SMALL.replace("points: 512", "points: 65536").replace(
        "evolve: {duration: 40.0, dt: 0.05}", "evolve: {duration: 40.0, dt: 2.7e-5}").replace(
        "record: {every: 5.0}", "record: {every: 1.0e-9}")
    path = write_scenario(text)
    setup = build(loads(text, str(path)))
    error = next(f for f in setup.errors() if f.key == "record.every")
    assert "TiB" in error.message and "snapshots of 65536 points" in error.message
    assert setup.snapshots > 10 ** 6
    assert main(["check", str(path)]) == 2
    assert "record.every" in capsys.readouterr().out
    assert main(["run", str(path), "-q"]) == 2
    assert "record.every" in capsys.readouterr().err


def test_free_disk_space_is_checked_before_a_run(write_scenario, monkeypatch, capsys, tmp_path):
    path = write_scenario(SMALL)
    real = shutil.disk_usage

    def tiny(p):
        return real(p)._replace(free=1000)

    monkeypatch.setattr(build_module.shutil, "disk_usage", tiny)
    out = tmp_path / "r.h5"
    assert main(["run", str(path), "-q", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "record.every" in err and "1e+03 B free" in err
    assert not out.exists() and not partial_path(out).exists()


def test_a_run_that_could_never_finish_is_refused(write_scenario, capsys):
    path = write_scenario(SMALL.replace("evolve: {duration: 40.0, dt: 0.05}",
                                        "evolve: {duration: 1.0e+12, dt: 0.05}"))
    with pytest.raises(ScenarioError, match=r"evolve.dt: .* 2e\+13 steps, more than 1e\+12"):
        build(loads(path.read_text(), str(path)))
    assert main(["check", str(path)]) == 2
    assert "evolve.dt" in capsys.readouterr().err


# ---------------------------------------------------------------------------------------
# 5. foreign and damaged files


def _complete_run(run_scenario):
    return run_scenario(SMALL)[1]


def damaged_files(run_scenario, tmp_path) -> dict:
    good = _complete_run(run_scenario)
    files = {}
    half = tmp_path / "half.h5"
    data = good.read_bytes()
    half.write_bytes(data[: len(data) // 2])
    files["truncated"] = half
    text = tmp_path / "text.h5"
    text.write_text("x,V\n0,1\n")
    files["not HDF5"] = text
    empty = tmp_path / "empty.h5"
    empty.write_bytes(b"")
    files["empty"] = empty
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as f:
        f["grid/x"] = np.arange(4.0)
        f.attrs["format"] = "somebody.else"
    files["another kind"] = other
    newer = tmp_path / "newer.h5"
    shutil.copy(good, newer)
    with h5py.File(newer, "r+") as f:
        f.attrs["format_version"] = 99
    files["newer"] = newer
    missing = tmp_path / "missing.h5"
    shutil.copy(good, missing)
    with h5py.File(missing, "r+") as f:
        del f["snapshots/psi"]
    files["missing dataset"] = missing
    folder = tmp_path / "folder.h5"
    folder.mkdir()
    files["a folder"] = folder
    files["absent"] = tmp_path / "absent.h5"
    return files


def test_damaged_and_foreign_files_get_a_clear_error(run_scenario, tmp_path, capsys):
    files = damaged_files(run_scenario, tmp_path)
    for what, path in files.items():
        with pytest.raises(RunFileError) as info:
            RunFile(path).close()
            print("opened:", what)
        assert "\n" not in str(info.value) and str(path) in str(info.value), what
        for argv in (["inspect", str(path)], ["delay", str(path)],
                     ["render", str(path), "--figure", str(tmp_path / "f.png")],
                     ["render", str(path), "-o", str(tmp_path / "m.gif")]):
            code = main(argv)
            err = capsys.readouterr().err
            assert code == 2, (what, argv, err)
            assert "Traceback" not in err and len(err.strip().splitlines()) == 1, (what, err)


# ---------------------------------------------------------------------------------------
# 6. two writers of one output


def test_a_second_writer_of_the_same_output_is_refused(write_scenario, tmp_path):
    setup = build(loads(write_scenario(SMALL).read_text(), "s.yaml"))
    out = tmp_path / "r.h5"
    first = RunWriter.open_new(out, setup, "test")
    try:
        for overwrite in (False, True):
            with pytest.raises(RunFileError, match="another run is writing"):
                RunWriter.open_new(out, setup, "test", overwrite=overwrite)
        with pytest.raises(RunFileError, match="another run is writing"):
            RunWriter.open_resume(out, setup.scenario.text)
        with pytest.raises(RunFileError, match="another run is writing"):
            execute(setup, out, overwrite=True)
    finally:
        first.close("interrupted")
    assert not lock_path(out).exists()
    with RunFile(partial_path(out)) as rf:   # the first writer's file, intact
        assert rf.status == "interrupted" and rf.attrs["title"] == "small step"
    assert execute(setup, out, overwrite=True).exists()   # the lock is free again


def test_a_second_sweep_on_the_same_folder_is_refused(tmp_path):
    from sojourn import sweep
    with sweep.folder_lock(tmp_path):
        with pytest.raises(sweep.SweepError, match="another sweep is running"):
            with sweep.folder_lock(tmp_path):
                pass
    with sweep.folder_lock(tmp_path):   # released
        pass


# ---------------------------------------------------------------------------------------
# 4 (in process) and 7: failing writes and a ψ that stops being finite


def test_a_failing_write_stops_the_run_and_keeps_what_was_written(write_scenario, tmp_path,
                                                                   monkeypatch, capsys):
    path = write_scenario(SMALL)
    setup = build(loads(path.read_text(), str(path)))
    out = tmp_path / "full.h5"
    real = h5py.Dataset.__setitem__
    calls = {"n": 0}

    def disk_full(self, key, value):
        if self.name == "/snapshots/psi":
            calls["n"] += 1
            if calls["n"] == 5:
                raise OSError(28, "No space left on device")
        return real(self, key, value)

    monkeypatch.setattr(h5py.Dataset, "__setitem__", disk_full)
    with pytest.raises(RunFileError, match="No space left on device") as info:
        execute(setup, out)
    assert "kept" in str(info.value) and "\n" not in str(info.value)
    monkeypatch.setattr(h5py.Dataset, "__setitem__", real)
    with RunFile(partial_path(out)) as rf:
        assert rf.status == "failed"
        assert len(rf) == 4   # the four snapshots written before the failing fifth
        assert np.all(np.isfinite(rf.psi(3))) and abs(np.vdot(rf.psi(0), rf.psi(0))) > 0
    assert not lock_path(out).exists()


def test_a_non_finite_psi_fails_cleanly_and_keeps_the_file(write_scenario, tmp_path,
                                                           monkeypatch, capsys):
    path = write_scenario(SMALL)
    real = propagate.Propagator.advance
    calls = {"n": 0}

    def poisoned(self, *args, **kwargs):
        result = real(self, *args, **kwargs)
        calls["n"] += 1
        if calls["n"] == 3:
            self.psi[len(self.psi) // 3] = np.nan
        return result

    monkeypatch.setattr(propagate.Propagator, "advance", poisoned)
    out = tmp_path / "nan.h5"
    assert issubclass(NonFinite, SojournError)
    assert main(["run", str(path), "-q", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    errors = [line for line in err.splitlines() if "error" in line]
    assert len(errors) == 1 and "ψ became non-finite at t = 15" in errors[0]
    assert "Traceback" not in err
    with RunFile(partial_path(out)) as rf:
        assert rf.status == "failed" and len(rf) == 3   # t = 0, 5, 10: the good ones
        assert all(np.all(np.isfinite(psi)) for _, psi in rf.snapshots())


def test_an_energy_past_the_grid_nyquist_limit_is_refused(write_scenario, capsys):
    # k0 = sqrt(2 m E)/ħ = sqrt(2·200) = 20 > k_max = π/dx = π·512/600 ≈ 2.7
    path = write_scenario(SMALL.replace("energy: 0.5", "energy: 200.0"))
    setup = build(loads(path.read_text(), str(path)))
    assert setup.packet.k0 > setup.grid.k_max
    assert [f.key for f in setup.errors()][0] == "grid.points"
    assert main(["run", str(path), "-q"]) == 2
    assert "grid resolution too coarse" in capsys.readouterr().err


def test_the_superblock_checksum_matches_hdf5s_own(run_scenario):
    # reference: the HDF5 library's checksum (Jenkins lookup3) in files it wrote
    from sojourn.store.repair import clear_write_flags, lookup3
    path = _complete_run(run_scenario)
    head = path.read_bytes()[:48]
    assert head[8] in (2, 3) and head[9] == 8
    assert lookup3(head[:44]) == int.from_bytes(head[44:48], "little")
    assert clear_write_flags(path)
    with RunFile(path) as rf:
        assert rf.status == "complete"
    foreign = path.with_name("text.h5")
    foreign.write_bytes(b"plain text, not HDF5 at all, long enough for a superblock" * 2)
    before = foreign.read_bytes()
    assert not clear_write_flags(foreign) and foreign.read_bytes() == before


# found by the long fuzzing profile (tests/test_fuzz_*.py, pytest -m slow)
def test_a_nul_character_in_an_argument_is_a_one_line_error(capsys):
    assert main(["run", "\x00"]) == 2
    err = capsys.readouterr().err
    assert "NUL" in err and "Traceback" not in err and err.count("\n") == 1


def test_a_refused_integer_names_its_key(tmp_path, capsys):
    path = tmp_path / "s.yaml"
    path.write_text("units: atomic\nlarmor:\n  omega: 001\n")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"{path}:3: larmor.omega: '001' is not a plain integer" in err
