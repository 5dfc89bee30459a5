"""The commit protocol: the counter is the commit (a writer stopped between
the checkpoint and the counter leaves the previous commit in force), the two
checkpoint slots alternate, and a saved analysis is strict JSON."""
from __future__ import annotations

import json

import h5py
import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import load
from sojourn.errors import RunFileError
from sojourn.store import RunFile, partial_path, save_analysis
from sojourn.store import writer as writer_module
from sojourn.workflows import run as execute
from scenarios import tiny_step


SMALL = tiny_step({"title": "commit", "evolve.duration": 40.0})


def test_a_stop_before_the_counter_keeps_the_previous_commit(write_scenario, tmp_path,
                                                            monkeypatch):
    setup = build(load(write_scenario(SMALL)))
    monkeypatch.setattr(writer_module, "COMMIT_SECONDS", 0.0)   # commit at every snapshot
    out = tmp_path / "cut.h5"
    real = h5py.AttributeManager.modify
    seen = {"n": 0}

    def stop_at_the_fourth_counter(self, name, value):
        if name == "committed":
            seen["n"] += 1
            if seen["n"] >= 4:   # and at the close that follows: as if killed
                raise KeyboardInterrupt   # after rows and checkpoint, before the counter
        return real(self, name, value)

    monkeypatch.setattr(h5py.AttributeManager, "modify", stop_at_the_fourth_counter)
    with pytest.raises(KeyboardInterrupt):
        execute(setup, out)
    monkeypatch.setattr(h5py.AttributeManager, "modify", real)
    with RunFile(partial_path(out)) as rf:
        assert len(rf) == 3                         # the fourth snapshot is not committed
        assert np.allclose(rf.times, [0.0, 5.0, 10.0])
        slots = {name: dict(g.attrs) for name, g in rf.h5["checkpoint"].items()}
        assert sorted(int(s["snapshots"]) for s in slots.values()) == [3, 4]
    resumed = execute(setup, out, resume=True)
    whole = execute(setup, tmp_path / "whole.h5")
    with RunFile(whole) as a, RunFile(resumed) as b:
        assert len(a) == len(b) == setup.snapshots
        assert np.abs(a.psi(-1) - b.psi(-1)).max() < 1e-12
        assert np.array_equal(a.samples()["t"], b.samples()["t"])


def test_the_complete_file_holds_exactly_its_rows(run_scenario):
    setup, path = run_scenario(SMALL)
    with h5py.File(path, "r") as f:
        assert int(f["snapshots"].attrs["committed"]) == setup.snapshots
        assert f["snapshots/psi"].fletcher32 and f["snapshots/psi"].shape[0] == setup.snapshots
        rows = f["observables/samples/t"].shape[0]
    with RunFile(path) as rf:
        assert len(rf.samples()["t"]) == rows
        assert np.all(np.diff(rf.samples()["t"]) > 0)


def test_save_analysis_writes_strict_json_into_the_file(run_scenario, tmp_path):
    _, path = run_scenario(SMALL)
    save_analysis(path, {"reflection": {"delay": float("nan"), "probability": 0.5}})
    with h5py.File(path, "r") as f:
        text = f["analysis"].attrs["result"]
    assert json.loads(text) == {"reflection": {"delay": None, "probability": 0.5}}
    assert "NaN" not in text
    with RunFile(path) as rf:
        assert rf.analysis()["reflection"]["probability"] == 0.5
    with pytest.raises(TypeError):
        save_analysis(path, "not a dict")
    text_file = tmp_path / "notes.h5"
    text_file.write_text("mine")
    with pytest.raises(RunFileError):
        save_analysis(text_file, {})
    assert text_file.read_text() == "mine"


def as_format_2(path):
    """Rewrite a run file into format 2's layout (units, packet and provenance as
    JSON text in root attributes, the internal mass under "mass", no scales in
    /potential, /snapshots and /observables/samples)."""
    with h5py.File(path, "r+") as f:
        f.attrs["format_version"] = 2
        for key in ("units", "packet", "provenance"):
            f.attrs[key] = json.dumps({k: (v.item() if hasattr(v, "item") else v)
                                       for k, v in f[key].attrs.items()})
            del f[key]
        f.attrs["mass"] = f.attrs["mass_internal"]
        del f.attrs["mass_internal"]
        for name in ("potential/x", "snapshots/x", "observables/samples/detector"):
            del f[name]


def _as_format_1(path):
    """Rewrite a run file into format 1's layout (rows grown as written, one
    checkpoint state with its numbers in a vector, no commit counter)."""
    as_format_2(path)
    with h5py.File(path, "r+") as f:
        f.attrs["format_version"] = 1
        del f.attrs["finished"]
        del f["snapshots"].attrs["committed"]
        psi = f["snapshots/psi"][...]
        del f["snapshots/psi"]
        f["snapshots/psi"] = np.concatenate([psi, np.zeros((2, psi.shape[1]), psi.dtype)])
        state = f["checkpoint/a/psi"][...]
        del f["checkpoint"]
        f["checkpoint/psi"] = state
        f["checkpoint/info"] = np.zeros(6)


def test_a_format_1_file_stays_readable(run_scenario, tmp_path):
    setup, path = run_scenario(SMALL)
    with RunFile(path) as rf:
        times, last, samples = rf.times, rf.psi(-1), rf.samples()
    _as_format_1(path)
    with RunFile(path) as rf:
        assert len(rf) == setup.snapshots       # the two extra ψ rows are not snapshots
        assert np.array_equal(rf.times, times) and np.array_equal(rf.psi(-1), last)
        assert np.array_equal(rf.samples()["flux"], samples["flux"])


def test_a_format_2_file_reads_with_the_same_attributes(run_scenario):
    setup, path = run_scenario(SMALL)
    with RunFile(path) as rf:
        attrs, units, packet = rf.attrs, rf.units, rf.packet
    as_format_2(path)
    with RunFile(path) as rf:
        assert rf.units == units and rf.packet == packet
        assert rf.attrs["mass"] == pytest.approx(attrs["mass"], rel=1e-15)
        assert rf.attrs["mass_internal"] == attrs["mass_internal"] == setup.mass
