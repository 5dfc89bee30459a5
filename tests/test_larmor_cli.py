"""`sojourn theory` with a Larmor clock, and bad clock keys refused."""
import json
import subprocess
import sys
from pathlib import Path

import numpy as np

CONFIG = Path(__file__).resolve().parents[1] / "configs" / "larmor_clock.yaml"


def sojourn(*args):
    return subprocess.run([sys.executable, "-m", "sojourn", *map(str, args)],
                          capture_output=True, text=True)


def test_theory_json_has_larmor_times_obeying_the_dwell_identity():
    out = sojourn("theory", CONFIG, "--json", "--energies", "0.2:0.9:8")
    assert out.returncode == 0, out.stderr
    table = json.loads(out.stdout)
    arr = {k: np.array(table[k], dtype=float) for k in
           ("R", "T", "dwell", "tau_y_transmission", "tau_y_reflection", "tau_z_transmission")}
    # T·τ_y^T + R·τ_y^R = τ_D, region = the barrier (Büttiker, Phys. Rev. B 27, 6178 (1983))
    assert np.allclose(arr["T"] * arr["tau_y_transmission"] + arr["R"] * arr["tau_y_reflection"],
                       arr["dwell"], rtol=1e-10)
    assert table["larmor_region"] == [0.0, 2.0]
    tr = table["larmor_packet"]["transmission"]
    # the packet's own τ_z lies near the opaque-barrier value m·a/(ħκ) = 2/1 (κ = 1 at
    # E₀ = V₀/2; Büttiker & Landauer, Phys. Rev. Lett. 49, 1739 (1982)), a few % below
    assert 1.8 < tr["tau_z"] < 2.0
    text = sojourn("theory", CONFIG, "--energies", "0.4:0.6:3")
    assert "Larmor clock on [0, 2]" in text.stdout and "tauy_T" in text.stdout


def test_bad_larmor_keys_are_one_line_errors(write_scenario):
    text = CONFIG.read_text().replace("omega: 0.001", "omega: -1.0")
    bad = write_scenario(text)
    out = sojourn("theory", bad)
    assert out.returncode == 2
    assert "larmor.omega" in out.stderr and "Traceback" not in out.stderr
    line = [i for i, s in enumerate(text.splitlines(), 1) if "omega:" in s][0]
    assert f":{line}" in out.stderr
    text = CONFIG.read_text().replace("region: [0.0, 2.0]", "region: [2.0, 0.0]")
    out = sojourn("theory", write_scenario(text, "b.yaml"))
    assert out.returncode == 2 and "larmor.region" in out.stderr


def test_theory_plot_draws_the_clocks(tmp_path):
    out = sojourn("theory", CONFIG, "--plot", tmp_path / "clocks.png", "--energies", "0.2:0.9:30")
    assert out.returncode == 0, out.stderr
    assert (tmp_path / "clocks.png").stat().st_size > 10_000
