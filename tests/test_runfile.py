"""Run files: layout, no overwriting, interruption and resume, foreign files."""
import hashlib

import h5py
import numpy as np
import pytest

from sojourn.build import build
from sojourn.cli import main
from sojourn.workflows import run as execute
from sojourn.store import FORMAT, RunFile, partial_path
from sojourn.errors import RunFileError
from sojourn.config.scenario import load
from scenarios import small_step


SMALL = small_step({"measure.detectors": [-50.0]})


def digest(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_layout_as_documented(run_scenario):
    setup, path = run_scenario(SMALL)
    with h5py.File(path, "r") as f:
        assert f.attrs["format"] == FORMAT and f.attrs["status"] == "complete"
        assert "scenario" in f.attrs and all(
            isinstance(f[key], h5py.Group) for key in ("provenance", "units", "packet"))
        n = f["grid/x"].shape[0]
        assert n == 512 and f["potential/V"].shape == (n,) and f["potential/absorber"].shape == (n,)
        s = f["snapshots/t"].shape[0]
        assert f["snapshots/psi"].shape == (s, n) and s == setup.snapshots
        assert f["snapshots/t"][-1] == pytest.approx(60.0)
        for name in ("t", "norm", "x_mean", "p_mean", "energy", "P_left", "P_right",
                     "absorbed_left", "absorbed_right"):
            assert f["observables"][name].shape == (s,)
        assert f["observables/samples/flux"].shape[1] == 1
        # generic HDF5 readers see labelled axes
        assert f["snapshots/psi"].dims[1][0].name == "/snapshots/x"
        assert f["snapshots/psi"].dims[0][0].name == "/snapshots/t"
    assert not partial_path(path).exists()


def test_energy_and_norm_recorded(run_scenario):
    setup, path = run_scenario(SMALL)
    with RunFile(path) as rf:
        o = rf.observables()
    # ⟨H⟩ of the Gaussian is ħ²(k₀² + σ_k²)/2m, not E₀ (PHYSICS §2)
    assert o["energy"][0] == pytest.approx(setup.packet.mean_energy, rel=1e-6)
    assert o["norm"][0] == pytest.approx(1.0, abs=1e-12)


def test_existing_result_is_never_overwritten(run_scenario, tmp_path):
    _, path = run_scenario(SMALL)
    before = digest(path)
    setup = build(load(tmp_path / "s.yaml"))
    with pytest.raises(RunFileError, match="never overwritten"):
        execute(setup, path)
    assert digest(path) == before
    code = main(["run", str(tmp_path / "s.yaml"), "-o", str(path), "-q"])
    assert code == 2 and digest(path) == before
    assert main(["run", str(tmp_path / "s.yaml"), "-o", str(path), "-q", "--overwrite"]) == 0


def test_interrupted_run_resumes_to_the_same_state(write_scenario, tmp_path):
    path = write_scenario(SMALL)
    setup = build(load(path))
    whole = execute(setup, tmp_path / "whole.h5")

    def stop_midway(done, total):
        if done > total // 2:
            raise KeyboardInterrupt

    target = tmp_path / "cut.h5"
    with pytest.raises(KeyboardInterrupt):
        execute(setup, target, progress=stop_midway)
    partial = partial_path(target)
    assert partial.exists() and not target.exists()
    with RunFile(partial) as rf:
        assert rf.status == "interrupted" and 1 < len(rf) < setup.snapshots
    with pytest.raises(RunFileError, match="--resume"):
        execute(setup, target)
    resumed = execute(setup, target, resume=True)
    with RunFile(whole) as a, RunFile(resumed) as b:
        assert len(a) == len(b)
        assert np.abs(a.psi(len(a) - 1) - b.psi(len(b) - 1)).max() < 1e-12
        assert np.allclose(a.times, b.times)
        sa, sb = a.samples(), b.samples()
        assert np.allclose(sa["t"], sb["t"]) and np.allclose(sa["flux"], sb["flux"], atol=1e-12)
        assert b.status == "complete"


def test_resume_refuses_another_scenario(write_scenario, tmp_path):
    path = write_scenario(SMALL)
    setup = build(load(path))
    target = tmp_path / "cut.h5"
    with pytest.raises(KeyboardInterrupt):
        execute(setup, target, progress=lambda d, t: (_ for _ in ()).throw(KeyboardInterrupt))
    other = write_scenario(SMALL.replace("energy: 0.5", "energy: 0.4"), "other.yaml")
    with pytest.raises(RunFileError, match="different scenario"):
        execute(build(load(other)), target, resume=True)


@pytest.mark.parametrize("content,expected", [
    (b"not an hdf5 file at all", "not an HDF5 file"),
    (None, "not a sojourn run file"),
])
def test_foreign_files_are_refused(tmp_path, content, expected):
    path = tmp_path / "foreign.h5"
    if content is None:
        with h5py.File(path, "w") as f:
            f["data"] = np.arange(3)
    else:
        path.write_bytes(content)
    with pytest.raises(RunFileError, match=expected):
        RunFile(path)
    assert main(["inspect", str(path)]) == 2


def test_newer_format_version_is_refused(run_scenario):
    _, path = run_scenario(SMALL)
    with h5py.File(path, "r+") as f:
        f.attrs["format_version"] = 99
    with pytest.raises(RunFileError, match="newer than this sojourn understands"):
        RunFile(path)
