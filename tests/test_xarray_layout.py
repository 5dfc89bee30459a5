"""Files other tools read: xarray's h5netcdf engine opens the run file's groups
with named coordinates and units (netCDF-4 dimension scales), and a sweep's
table.csv reads with pandas."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import xarray as xr

import sojourn
from sojourn.store import RunFile

BASE = {
    "atomic": ("""\
        units: atomic
        grid: {span: [-200.0, 200.0], points: 512}
        potential:
          - step: {at: 0.0, height: 1.0}
        packet: {center: -60.0, width: 10.0, energy: 0.5}
        evolve: {duration: 40.0, precision: single}
        absorber: {width: 40.0}
        record: {every: 10.0}
        measure: {detectors: [-30.0]}
        """, {"length": "bohr", "energy": "hartree", "time": "atomic_unit_of_time"}),
    "lab": ("""\
        units: lab
        mass: 0.067
        grid: {span: [-200.0, 200.0], points: 1024}
        potential:
          - step: {at: 0.0, height: 0.1}
        packet: {center: -60.0, width: 10.0, energy: 0.05}
        evolve: {duration: 200.0}
        record: {every: 50.0}
        """, {"length": "nm", "energy": "eV", "time": "fs"}),
}


@pytest.mark.parametrize("system", sorted(BASE))
def test_each_group_opens_with_coordinates_and_units(write_scenario, tmp_path, system):
    text, u = BASE[system]
    path = sojourn.run(write_scenario(text), tmp_path / "r.h5").path
    with RunFile(path) as rf:
        x, t, psi_last, obs = rf.x, rf.times, rf.psi(-1), rf.observables()
        V, mass = rf.V, rf.attrs["mass"]
    opened = {g: xr.open_dataset(path, group=g, engine="h5netcdf")
              for g in ("snapshots", "potential", "observables", "observables/samples")}
    try:
        snaps = opened["snapshots"]
        assert snaps.psi.dims == ("t", "x") and snaps.psi.dtype.kind == "c"
        assert np.array_equal(snaps.x.values, x) and np.array_equal(snaps.t.values, t)
        assert np.array_equal(snaps.psi.isel(t=-1).values, psi_last)
        assert snaps.psi.attrs["units"] == f"{u['length']}-1/2"
        assert snaps.x.attrs["units"] == u["length"] and snaps.t.attrs["units"] == u["time"]
        pot = opened["potential"]
        assert pot.V.dims == ("x",) and np.array_equal(pot.V.values, V)
        assert pot.V.attrs["units"] == u["energy"]
        o = opened["observables"]
        assert o.norm.dims == ("t",) and np.array_equal(o.t.values, t)
        assert np.array_equal(o.x_mean.values, obs["x_mean"])
        assert o.x_mean.attrs["units"] == u["length"]
        assert opened["observables/samples"].flux.dims == ("t", "detector")
        for ds in opened.values():
            for name, var in ds.variables.items():
                assert var.attrs.get("units") and var.attrs.get("long_name"), name
    finally:
        for ds in opened.values():
            ds.close()
    root = xr.open_dataset(path, group="packet", engine="h5netcdf")
    assert root.attrs["energy"] == pytest.approx(0.5 if system == "atomic" else 0.05)
    root.close()
    assert mass == (1.0 if system == "atomic" else 0.067)


def test_sweep_table_reads_with_pandas(write_scenario, tmp_path):
    write_scenario(BASE["atomic"][0].replace("precision: single", "precision: double")
                   .replace("duration: 40.0", "duration: 120.0"), "base.yaml")
    sweep = write_scenario("""\
        base: base.yaml
        vary:
          packet.energy: [0.4, 0.5]
        output: out
        """, "sweep.yaml")
    rows = sojourn.run_sweep(sweep, workers=1)
    table = pd.read_csv(tmp_path / "out" / "table.csv", comment="#")
    assert len(table) == len(rows) == 2
    assert list(table["packet.energy"]) == [0.4, 0.5]
    assert "warnings" in table.columns and "status" in table.columns
    assert (table["status"] == "complete").all()
