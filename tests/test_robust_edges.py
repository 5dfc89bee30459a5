"""Edges of the command line that once escaped the one-line contract: render
options that no encoder or axis can take, and numpy's RuntimeWarnings for
extreme-but-valid numbers (a source line on stderr is never shown to a user)."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from sojourn import cli
from sojourn.errors import RenderError
from sojourn.render.options import parse_fps, parse_xlim

CONFIGS = Path(__file__).resolve().parents[1] / "configs"


@pytest.mark.parametrize("text", ["-1e-300:1e-300", "1e12:1.0000000000001e12"])
def test_an_xlim_too_narrow_to_draw_is_refused(text):
    with pytest.raises(RenderError, match="too narrow"):
        parse_xlim(text)
    assert parse_xlim("-300:100") == (-300.0, 100.0)
    assert parse_xlim("-1e-6:1e-6") == (-1e-6, 1e-6)   # small lengths are fine in their units


@pytest.mark.parametrize("value", [1e-9, 0.5, 0.0, -3.0, 241.0, float("nan"), float("inf"), "x"])
def test_a_frame_rate_outside_what_an_encoder_takes_is_refused(value):
    with pytest.raises(RenderError, match="--fps"):
        parse_fps(value)
    assert parse_fps(30) == 30.0 and parse_fps("1") == 1.0 and parse_fps(240.0) == 240.0


@pytest.mark.parametrize("argv", [["--xlim=-1e-300:1e-300", "--figure", "f.png"],
                                  ["--fps", "1e-9", "-o", "m.gif"]])
def test_render_gives_one_line_and_exit_2(run_scenario, tmp_path, capsys, argv, monkeypatch):
    _, path = run_scenario((CONFIGS / "step.yaml").read_text())
    monkeypatch.chdir(tmp_path)
    capsys.readouterr()
    assert cli.main(["render", str(path), *argv]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("sojourn: error:"), err
    assert not list(tmp_path.glob("m.gif")) and not list(tmp_path.glob("f.png"))


# found by tests/test_fuzz_scenario.py's long profile: products of such numbers
# overflowed inside the guards (model/packets.free_width) and numpy said so on stderr
EXTREMES = [("width: 20.0", "width: 1.0e+300"), ("width: 20.0", "width: 1.0e-300"),
            ("energy: 0.5", "energy: 1.0e+300"), ("mass: 1.0", "mass: 1.0e-300")]


@pytest.mark.parametrize("old,new", EXTREMES)
def test_extreme_numbers_never_show_a_runtime_warning(tmp_path, old, new):
    text = (CONFIGS / "barrier.yaml").read_text()
    path = tmp_path / "x.yaml"
    path.write_text(text.replace(old, new) if old in text else text + new + "\n")
    for verb in (["check"], ["run", "-q", "-o", str(tmp_path / "x.h5")]):
        # -W error turns any RuntimeWarning into an exception: exit 1, 'failed: RuntimeWarning'
        done = subprocess.run([sys.executable, "-W", "error::RuntimeWarning", "-m", "sojourn",
                               verb[0], str(path), *verb[1:]],
                              capture_output=True, text=True, timeout=300)
        assert "RuntimeWarning" not in done.stderr, done.stderr
        assert done.returncode in (0, 2), done.stderr
