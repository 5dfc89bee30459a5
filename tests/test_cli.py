"""The command line: exit codes, one-line errors, the guards before a run."""
import math
import subprocess
import sys

import pytest

from sojourn.build import build
from sojourn.cli import main
from sojourn.guards import time_step_limit
from sojourn.config.scenario import loads

BASE = """\
units: atomic
grid: {span: [-600.0, 600.0], points: 2048}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -200.0, width: 20.0, energy: 0.5}
evolve: {duration: 450.0, dt: DT}
absorber: {width: 80.0}
"""


def limit_for(text):
    s = build(loads(text.replace("DT", "0.01"), "s.yaml"))
    return time_step_limit(s.grid.kinetic_max(1.0, 1.0), 1.0, 1.0)


def test_time_step_guard_refuses_past_the_limit_and_accepts_inside(write_scenario, capsys):
    # source: the split step reproduces energies modulo 2πħ/Δt; require
    # Δt·(E_max + V_max − V_min)/ħ < 2π (PHYSICS §3)
    limit = limit_for(BASE)
    past = build(loads(BASE.replace("DT", f"{1.05 * limit}"), "s.yaml"))
    assert [f.key for f in past.errors()] == ["evolve.dt"]
    assert f"{limit:.4g}" in str(past.errors()[0])
    warned = build(loads(BASE.replace("DT", f"{0.7 * limit}"), "s.yaml"))
    assert not warned.errors() and any(f.key == "evolve.dt" for f in warned.warnings())
    inside = build(loads(BASE.replace("DT", f"{0.4 * limit}"), "s.yaml"))
    assert not inside.errors() and not any(f.key == "evolve.dt" for f in inside.warnings())
    path = write_scenario(BASE.replace("DT", f"{1.05 * limit}"))
    assert main(["run", str(path), "-q"]) == 2
    err = capsys.readouterr().err
    assert "evolve.dt" in err and "largest allowed" in err and "Traceback" not in err


def test_missing_dt_is_chosen_inside_the_limit():
    s = build(loads(BASE.replace("  dt: DT", "").replace(", dt: DT", ""), "s.yaml"))
    assert s.dt_chosen and s.grid_phase < math.pi


def test_under_resolved_grid_is_refused_with_advice(write_scenario, capsys):
    text = BASE.replace("points: 2048", "points: 256").replace("DT", "0.05")
    path = write_scenario(text)
    assert main(["check", str(path)]) == 2
    out = capsys.readouterr().out
    assert "grid resolution too coarse" in out and "points ≥" in out
    assert main(["run", str(path), "-q"]) == 2


def test_packet_outside_the_box_is_refused(write_scenario, capsys):
    path = write_scenario(BASE.replace("center: -200.0", "center: -900.0").replace("DT", "0.05"))
    assert main(["run", str(path), "-q"]) == 2
    assert "packet.center" in capsys.readouterr().err


def test_check_reports_estimates(write_scenario, capsys):
    path = write_scenario(BASE.replace("DT", "0.05"))
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    for word in ("k_max", "E₀", "⟨E⟩", "Δt·(E_max+ΔV)/ħ", "estimated memory", "ok:"):
        assert word in out


def test_bad_scenario_gives_one_line_and_exit_2(write_scenario, capsys):
    path = write_scenario(BASE.replace("width: 20.0", "width: -3").replace("DT", "0.05"))
    assert main(["run", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "s.yaml:5: packet.width: must be > 0" in err[0]


def test_bad_arguments_exit_2(capsys):
    assert main(["run"]) == 2
    assert main(["nonsense-verb"]) == 2
    assert "Traceback" not in capsys.readouterr().err


def test_module_entry_point_and_debug(write_scenario):
    path = write_scenario(BASE.replace("width: 20.0", "width: -3").replace("DT", "0.05"))
    plain = subprocess.run([sys.executable, "-m", "sojourn", "run", str(path)],
                           capture_output=True, text=True)
    assert plain.returncode == 2 and "Traceback" not in plain.stderr
    debug = subprocess.run([sys.executable, "-m", "sojourn", "--debug", "run", str(path)],
                           capture_output=True, text=True)
    assert "Traceback" in debug.stderr


def test_demo_runs_end_to_end(tmp_path, capsys):
    assert main(["demo", "-o", str(tmp_path / "out"), "-q"]) == 0
    assert (tmp_path / "out" / "demo.h5").exists()
