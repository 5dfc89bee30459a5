"""ψ with more axes than x (a spinor's leading component axis) in the run file:
written, validated on open, read back, and named for other tools."""
from __future__ import annotations

import dataclasses

import h5py
import numpy as np
import pytest

from scenarios import TINY_STEP, scenario_text
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.errors import RunFileError
from sojourn.store.layout import OBSERVABLES, SAMPLES
from sojourn.store.reader import RunFile
from sojourn.store.writer import RunWriter


def _spinor_setup():
    setup = build(loads(scenario_text(TINY_STEP), source="spinor.yaml"))
    V = np.stack([setup.V + 0.01, setup.V - 0.01])
    return dataclasses.replace(setup, V=V)


def _write(path, setup, rows=2):
    writer = RunWriter.open_new(path, setup, "numpy")
    psi = setup.psi0()
    values = {name: 0.0 for name in OBSERVABLES}
    values["norm"] = 1.0
    for row in range(rows):
        step = row * setup.record_steps
        samples = {"t": np.array([step * setup.dt]), "flux": np.zeros((1, 1)),
                   **{name: np.zeros(1) for name in SAMPLES}}
        writer.snapshot(step, step * setup.dt, psi * (row + 1), values, samples, (0.0, 0.0))
    writer.finish()
    return psi


def test_spinor_state_round_trips_with_named_axes(tmp_path):
    setup = _spinor_setup()
    assert setup.state_shape == (2, setup.grid.points)
    psi = setup.psi0()
    # each component carries the packet's amplitude / √2: the spinor has norm 1
    # (a spin along +x; common practice, no source)
    assert np.sum(np.abs(psi) ** 2) * setup.grid.dx == pytest.approx(1.0, rel=1e-9)
    psi = _write(tmp_path / "spinor.h5", setup)
    with RunFile(tmp_path / "spinor.h5") as run:
        assert run.axes == ("component", "x")
        assert run.V.shape == (2, setup.grid.points)
        assert len(run) == 2
        np.testing.assert_array_equal(run.psi(1), 2 * psi.astype(run.psi(1).dtype))
        assert run.psi_rows([0, 1]).shape == (2, 2, setup.grid.points)
    with h5py.File(tmp_path / "spinor.h5", "r") as f:
        names = [f["snapshots/psi"].dims[i][0].name.rsplit("/", 1)[-1] for i in range(3)]
        assert names == ["t", "component", "x"]
        assert f["potential/V"].dims[0][0].name == "/potential/component"


def test_axes_that_do_not_match_psi_are_refused(tmp_path):
    _write(tmp_path / "spinor.h5", _spinor_setup())
    with h5py.File(tmp_path / "spinor.h5", "r+") as f:
        f["snapshots"].attrs["axes"] = "x"
    with pytest.raises(RunFileError, match="not 1-dimensional"):
        RunFile(tmp_path / "spinor.h5")


def test_other_tools_see_the_component_dimension(tmp_path):
    xr = pytest.importorskip("xarray")
    pytest.importorskip("h5netcdf")
    setup = _spinor_setup()
    _write(tmp_path / "spinor.h5", setup)
    with xr.open_dataset(tmp_path / "spinor.h5", group="snapshots", engine="h5netcdf") as ds:
        assert ds["psi"].dims == ("t", "component", "x")
        assert ds["psi"].shape == (2, 2, setup.grid.points)
