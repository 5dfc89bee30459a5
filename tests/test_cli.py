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


# ----------------------------------------------------------------------------------------
# The command line explains itself (nothing runs)


def test_version(capsys):
    from sojourn import __version__
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0 and capsys.readouterr().out.strip() == f"sojourn {__version__}"


def test_debug_is_accepted_anywhere_on_the_line(write_scenario):
    path = write_scenario(BASE.replace("width: 20.0", "width: -3").replace("DT", "0.05"))
    after = subprocess.run([sys.executable, "-m", "sojourn", "run", str(path), "--debug"],
                           capture_output=True, text=True)
    assert "Traceback" in after.stderr and "unrecognized" not in after.stderr


def test_errors_carry_one_prefix(capsys):
    assert main(["run"]) == 2
    assert main(["render", "missing.h5"]) == 2     # an error raised by a command
    for line in capsys.readouterr().err.strip().splitlines():
        assert line.startswith("sojourn: error: ") and line.count("sojourn") == 1, line


def test_values_that_start_with_a_minus_are_values():
    from sojourn.cli import build_parser
    args = build_parser().parse_args(["render", "f.h5", "--xlim", "-100:20"])
    assert args.xlim == "-100:20"
    assert build_parser().parse_args(["theory", "s.yaml", "--energies", "-.5:1:3"]).energies \
        == "-.5:1:3"


def test_help_has_an_example_per_verb_and_describes_every_argument():
    import argparse
    from sojourn.cli import build_parser
    parser = build_parser()
    assert all(action.help for action in parser._actions)
    verbs = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    assert set(verbs.choices) == {"run", "check", "inspect", "demo", "delay", "theory",
                                  "render", "bench", "sweep"}
    for verb, sub in verbs.choices.items():
        assert "example:\n  sojourn " + verb in sub.format_help(), verb
        for action in sub._actions:
            assert action.help, (verb, action.dest)


def test_missing_output_folders_are_created_and_said(write_scenario, tmp_path, capsys):
    path = write_scenario(BASE.replace("DT", "0.05"))
    plot = tmp_path / "new" / "deeper" / "theory.png"
    assert main(["theory", str(path), "--energies", "0.3:0.7:5", "--plot", str(plot)]) == 0
    assert plot.read_bytes()[:4] == b"\x89PNG"
    assert f"created the folder {plot.parent}" in capsys.readouterr().err


def test_an_output_that_would_replace_the_input_is_refused(write_scenario, capsys):
    path = write_scenario(BASE.replace("DT", "0.05"))
    before = path.read_bytes()
    assert main(["run", str(path), "-o", str(path), "--overwrite", "-q"]) == 2
    assert main(["theory", str(path), "--plot", str(path)]) == 2
    assert path.read_bytes() == before
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and all("one of the command's inputs" in line for line in err)


def test_demo_never_replaces_an_earlier_demo_silently(tmp_path, capsys):
    (tmp_path / "demo.h5").write_bytes(b"an earlier demo")
    assert main(["demo", "-o", str(tmp_path), "-q"]) == 2
    assert (tmp_path / "demo.h5").read_bytes() == b"an earlier demo"
    assert not (tmp_path / "demo.yaml").exists()
    assert "--overwrite" in capsys.readouterr().err


def test_progress_bar_counts_steps_shows_simulated_time_and_rates_from_the_resume():
    import io
    from sojourn.cli_support import Bar
    bar = Bar("step", "running", step_time=0.5, time_unit="fs", stream=io.StringIO(),
              disable=False)
    bar(900, 1000)        # the first report of a resumed run: 900 steps were done before
    bar(950, 1000)
    meter = bar.bar.format_dict    # tqdm's rate is (n - initial) / elapsed: only this run's steps
    assert meter["initial"] == 900 and meter["n"] == 950 and meter["unit"] == "step"
    assert "t=475/500 fs" in str(bar.bar)
    bar.close()
