"""The conventions that let other tools read a run file: netCDF-4 dimension
scales (a group's coordinates live in that group), UDUNITS-style `units` and a
`long_name` on every dataset, and structured metadata as groups of attributes
rather than JSON text."""
from __future__ import annotations

import json

import h5py
import numpy as np

STRUCTURED = ("units", "packet", "provenance")   # groups of attributes (JSON text before 3)
# dataset (by its name in a group) -> (long_name, unit kind; see `udunits`)
LABELS = {
    "x": ("position", "length"), "y": ("position along y", "length"), "t": ("time", "time"),
    "component": ("spinor component (0: spin up along z, 1: spin down)", "1"),
    "step": ("time step number", "1"),
    "V": ("potential energy", "energy"), "absorber": ("absorbing potential (−i W)", "energy"),
    "psi": ("wave function", "psi"), "norm": ("total probability", "1"),
    "x_mean": ("mean position", "length"), "p_mean": ("mean momentum", "momentum"),
    "energy": ("mean energy", "energy"), "P_left": ("probability left of the potential", "1"),
    "P_right": ("probability right of the potential", "1"),
    "P_region": ("probability in the measure region", "1"),
    "absorbed_left": ("probability absorbed at the left edge", "1"),
    "absorbed_right": ("probability absorbed at the right edge", "1"),
    "flux": ("probability current at the detector", "rate"),
    "detector": ("detector position", "length"),
}


def udunits(units: dict) -> dict:
    """UDUNITS-style unit strings of a unit system ({"length", "energy", ...}), as
    the datasets' `units` attributes give them. Atomic units are spelt with the
    CODATA names bohr, hartree and atomic_unit_of_time."""
    length, energy = units["length"], units["energy"]
    time = "atomic_unit_of_time" if units["time"] == "hbar/E_h" else units["time"]
    return {"length": length, "energy": energy, "time": time, "1": "1",
            "psi": f"{length}-1/2", "density": f"{length}-1", "rate": f"{time}-1",
            "momentum": f"{energy} {time} {length}-1"}



def _attr_value(value):
    """A value HDF5 can hold as an attribute (None becomes empty text)."""
    return "" if value is None else value


def write_structured(f: h5py.File, attrs: dict) -> None:
    """The STRUCTURED entries (JSON text in `attrs`) as groups of attributes."""
    for key in STRUCTURED:
        group = f.create_group(key, track_order=True)
        group.attrs.update({k: _attr_value(v) for k, v in json.loads(attrs[key]).items()})


def read_structured(f: h5py.File, key: str) -> dict:
    """A STRUCTURED group's attributes as plain Python values."""
    out = {}
    for k, v in f[key].attrs.items():
        v = v.decode("utf-8", "replace") if isinstance(v, bytes) else v
        out[k] = v.item() if isinstance(v, np.generic) else v
    return out


def label(dataset, units: dict) -> None:
    long_name, kind = LABELS[dataset.name.rsplit("/", 1)[-1]]
    dataset.attrs.update({"long_name": long_name, "units": units[kind]})


def scale(group, name, data, units):
    """A dimension scale `name` in `group` (netCDF-4: a coordinate variable)."""
    scale = group.create_dataset(name, data=data)
    label(scale, units)
    scale.make_scale(name)
    return scale


def attach(dataset, units, *scales) -> None:
    label(dataset, units)
    for axis, scale in enumerate(scales):
        dataset.dims[axis].attach_scale(scale)
