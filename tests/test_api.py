"""The Python API against the command line's JSON (the same numbers), and the
laziness of Run.psi: a selection reads only the snapshot rows it asks for."""
from __future__ import annotations

import json
import math
import subprocess
import sys
import textwrap

import h5py
import numpy as np
import pytest

import sojourn

# the unit step at E0 = V0/2 (atomic units), coarse: a few seconds
STEP = """\
    units: atomic
    grid: {span: [-200.0, 200.0], points: 512}
    potential:
      - step: {at: 0.0, height: 1.0}
    packet: {center: -60.0, width: 10.0, energy: 0.5}
    evolve: {duration: 120.0}
    absorber: {width: 40.0}
    record: {every: 10.0}
    """


def cli(*args) -> dict:
    out = subprocess.run([sys.executable, "-m", "sojourn", *map(str, args)], capture_output=True,
                         text=True, check=True)
    return json.loads(out.stdout)


def test_the_surface_is_small_and_documented():
    assert set(sojourn.__all__) >= {"open", "load", "run", "delay", "theory_table", "run_sweep",
                                    "Run", "__version__"}
    for name in sojourn.__all__:
        assert name == "__version__" or getattr(sojourn, name).__doc__, name
    assert "open" in dir(sojourn)


def test_api_gives_the_numbers_the_cli_prints(write_scenario, tmp_path):
    path = write_scenario(STEP)
    with sojourn.run(path, tmp_path / "r.h5") as run:
        report = sojourn.delay(run).to_dict()
    assert report == cli("delay", "--json", tmp_path / "r.h5")
    table = sojourn.theory_table(path, "0.2:0.8:7")
    assert table == cli("theory", "--json", "--energies", "0.2:0.8:7", path)
    # the step's reflection delay ħ/√(E(V0−E)) (Wigner, Phys. Rev. 98, 145 (1955))
    for e, tau in zip(table["energy"], table["delay_reflection"]):
        assert tau == pytest.approx(1 / math.sqrt(e * (1 - e)), rel=1e-9)


def test_in_memory_and_on_disk_agree(write_scenario, tmp_path):
    path = write_scenario(STEP)
    memory, disk = sojourn.run(path), sojourn.run(path, tmp_path / "r.h5")
    with disk:
        assert memory.path.name.startswith("<in memory")
        assert np.array_equal(memory.psi[-1], disk.psi[-1])
        assert np.array_equal(memory.x, disk.x) and np.array_equal(memory.t, disk.t)
        assert memory.observables.keys() == disk.observables.keys()
        assert sojourn.delay(memory).to_dict()["reflection"] == \
            sojourn.delay(disk).to_dict()["reflection"]


def test_a_dict_builds_a_scenario_and_a_wrong_one_says_which_key(write_scenario):
    import yaml
    data = yaml.safe_load(textwrap.dedent(STEP))
    assert sojourn.load(data).packet.energy == 0.5
    data["packet"]["enrgy"] = data["packet"].pop("energy")
    with pytest.raises(sojourn.api.ScenarioError) as info:
        sojourn.load(data)
    assert "packet.enrgy" in str(info.value) and "\n" not in str(info.value)
    with pytest.raises(TypeError):
        sojourn.load(42)
    with pytest.raises(TypeError):
        sojourn.open(42)


@pytest.fixture(scope="module")
def disk_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lazy")
    (folder / "s.yaml").write_text(textwrap.dedent(STEP))
    return sojourn.run(folder / "s.yaml", folder / "r.h5")


def rows_read(monkeypatch, run, select):
    """The ψ rows HDF5 is asked for while `select(run)` runs."""
    asked = []
    original = h5py.Dataset.__getitem__

    def counting(self, key):
        if self.name == "/snapshots/psi":
            rows = key[0] if isinstance(key, tuple) else key
            asked.extend(np.atleast_1d(np.arange(self.shape[0])[rows]).tolist())
        return original(self, key)
    monkeypatch.setattr(h5py.Dataset, "__getitem__", counting)
    value = select(run)
    monkeypatch.undo()
    return sorted(asked), value


@pytest.mark.parametrize("select, rows", [
    (lambda r: r.psi[3], [3]), (lambda r: r.psi[-1], [12]), (lambda r: r.psi[2:9:3], [2, 5, 8]),
    (lambda r: r.psi[::-4], [0, 4, 8, 12]), (lambda r: r.psi[[7, 1]], [1, 7]),
    (lambda r: r.density[-2:, 10:20], [11, 12]),
    (lambda r: r.to_xarray().psi.isel(t=5).values, [5]),
    (lambda r: r.to_xarray().density.sel(t=slice(25, 45)).values, [3, 4])])
def test_a_selection_reads_only_its_rows(disk_run, monkeypatch, select, rows):
    asked, value = rows_read(monkeypatch, disk_run, select)
    assert asked == rows
    full = np.stack([disk_run.reader.psi(i) for i in range(len(disk_run))])
    expected = {3: full[3], 12: full[-1]}
    if len(rows) == 1 and rows[0] in expected and value.ndim == 1 and value.dtype.kind == "c":
        assert np.array_equal(value, expected[rows[0]])


def test_slices_match_numpy_on_the_whole_array(disk_run):
    full = np.stack([disk_run.reader.psi(i) for i in range(len(disk_run))])
    for key in (np.s_[::-4], np.s_[2:9:3], np.s_[:, 5:50:7], np.s_[-3], np.s_[[7, 1], 3],
                np.s_[1:4, -5:]):
        assert np.array_equal(disk_run.psi[key], full[key]), key
        assert np.allclose(disk_run.density[key], np.abs(full[key]) ** 2), key
    assert np.asarray(disk_run.psi).shape == full.shape
    with pytest.raises(IndexError):
        disk_run.psi[len(disk_run)]


def test_run_properties_in_lab_units(write_scenario):
    lab = STEP.replace("units: atomic", "units: lab\n    mass: 0.067") \
        .replace("energy: 0.5}", "energy: 0.05}").replace("height: 1.0", "height: 0.1") \
        .replace("duration: 120.0", "duration: 400.0").replace("every: 10.0", "every: 40.0") \
        .replace("points: 512", "points: 1024")
    run = sojourn.run(write_scenario(lab))
    assert run.units["length"] == "nm" and run.units["time"] == "fs"
    assert run.reader.attrs["mass"] == 0.067   # electron masses, as the scenario gives it
    assert run.status == "complete" and run.scenario.mass == 0.067
    dx = run.x[1] - run.x[0]
    assert np.sum(run.density[0]) * dx == pytest.approx(1.0, abs=1e-9)
    ds = run.to_xarray()
    assert ds.psi.attrs["units"] == "nm-1/2" and ds.t.attrs["units"] == "fs"
    assert ds.density.attrs["units"] == "nm-1" and ds.V.attrs["long_name"] == "potential energy"
