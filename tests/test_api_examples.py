"""The shipped example script runs as a user would run it."""
from __future__ import annotations

import runpy
import tempfile
from pathlib import Path

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def test_quickstart_runs(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))   # the figure goes there
    namespace = runpy.run_path(str(EXAMPLES / "quickstart.py"), run_name="__main__")
    out = capsys.readouterr().out
    assert "reflection spectral" in out and "wrote" in out
    figure = Path(out.rsplit("wrote ", 1)[1].strip())
    assert figure.is_file() and figure.stat().st_size > 1000
    # the measured spectral delay is near the step's phase delay ħ/√(E(V0−E)) = 2
    # at E0 = V0/2 (Wigner, Phys. Rev. 98, 145 (1955)); the coarse grid and the
    # packet average (τ is flat at its minimum here) keep it within 1 per cent
    delay = namespace["report"].reflection.measured["spectral"].delay
    assert abs(delay - 2.0) < 0.02
