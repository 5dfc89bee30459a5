"""The run file's layout, written down once: what the writer creates and what
every reader checks on open (README.md describes it for people).

    /                  attributes ROOT_ATTRS (the scenario text, numbers of the run;
                       "mass" in electron masses as the scenario gives it, "mass_internal"
                       in energy·time²/length²)
    /units, /packet, /provenance   groups whose attributes are the unit system, the packet's
                       numbers (PACKET_KEYS) and where the run was made (STRUCTURED)
    /grid/x            (N,) float, strictly increasing
    /potential/x, V    (N,) float, V on ψ's axes (below); /potential/absorber (N,) float
                       when there is one
    /snapshots/x, t, step, psi  (N,), (S,), (S,), (S, *A) complex (single with record.precision:
                       single, root attr "snapshot_precision"; root attr "sideband_sink": [k_start, k_full,
                       rate] of the damping in k a run with sidebands had) — S rows allocated at the
                       start; attrs "committed": how many rows hold committed snapshots, and
                       "axes": ψ's axes after t, space-separated names, outermost first
                       ("x"; "component x" for a spinor); each is a scale in /snapshots and
                       in /potential, x the last (N points)
    /observables/NAME  (S,) float for NAME in ("t",) + OBSERVABLES; attrs region, reference
    /observables/samples/t, NAME, flux, detector   (M,), (M,), (M, D), (D,): the samples
                       between snapshots (M rows allocated at the start); attrs detectors
                       (D or 0 positions; `detector` holds NaN when there are none)

Files other tools read (netCDF-4 dimension-scale conventions): every group's
datasets are attached to dimension scales that live in that group (x, t,
detector; x is copied into /potential and /snapshots), so that
`xarray.open_dataset(path, group="snapshots", engine="h5netcdf")` opens with
named coordinates; every dataset has `units` (UDUNITS-style, see `udunits`)
and `long_name` attributes. ψ is HDF5's compound complex (fields r, i), which
h5netcdf reads as complex. Rows past the commit counters hold the fill value.
    /checkpoint/a, /checkpoint/b   two slots, each psi (*A) complex and attrs
                       step, t, snapshots, samples, absorbed_left, absorbed_right

Every dataset is allocated at its final size when the run starts (its fill
written), so a disk too small is found then and the file barely grows during
the run (compressed ψ aside). A commit writes the new rows and the spare checkpoint slot, flushes, then
writes /snapshots attrs "committed" LAST and flushes again. The committed state
is the slot whose "snapshots" equals that counter (of two, the one at the later
step: a checkpoint between recordings); its "samples" says how many samples
are committed. Rows past the counters are never read.
"""
from __future__ import annotations

import datetime as _dt
import json
import os
import platform
import sys
from dataclasses import dataclass

import h5py
import numpy as np
import scipy

from .. import __version__
from ..errors import RunFileError
from .conventions import (STRUCTURED, attach as _attach, label as _label, read_structured,
                          scale as _scale, udunits, write_structured)

FORMAT = "sojourn.run"
FORMAT_VERSION = 3     # 3: dimension scales per group, units/long_name, structured groups
OBSERVABLES = ("norm", "x_mean", "p_mean", "energy", "P_left", "P_right", "P_region",
               "absorbed_left", "absorbed_right")
SAMPLES = ("norm", "P_region", "absorbed_left", "absorbed_right")
SLOTS = ("a", "b")
SLOT_ATTRS = {"step": "int", "t": "float", "snapshots": "int", "samples": "int",
              "absorbed_left": "float", "absorbed_right": "float"}
# attribute -> kind: str, int, float (finite), json (an object)
ROOT_ATTRS = {
    "format": "str", "format_version": "int", "sojourn_version": "str", "status": "str",
    "created": "str", "finished": "str", "scenario": "str", "scenario_source": "str",
    "title": "str", "dt": "float", "steps": "int",
    "record_steps": "int", "sample_steps": "int", "scheme": "str", "precision": "str",
    "hbar": "float", "mass": "float", "mass_internal": "float", "reference": "float",
}
UNIT_KEYS = ("name", "length", "energy", "time", "mass")
PACKET_KEYS = ("center", "width", "k0", "sigma_k", "energy", "mean_energy", "group_velocity",
               "level")
# dataset -> (dtype kind, shape in symbols); N grid points, S snapshot rows, M sample rows,
# D detector columns
DATASETS = {
    "grid/x": ("f", ("N",)), "potential/V": ("f", ("N",)),
    "snapshots/t": ("f", ("S",)), "snapshots/step": ("i", ("S",)),
    **{f"observables/{name}": ("f", ("S",)) for name in ("t",) + OBSERVABLES},
    **{f"observables/samples/{name}": ("f", ("M",)) for name in ("t",) + SAMPLES},
    "observables/samples/flux": ("f", ("M", "D")),
    "potential/x": ("f", ("N",)), "snapshots/x": ("f", ("N",)),
    "observables/samples/detector": ("f", ("D",)),
}
OPTIONAL = {"potential/absorber": ("f", ("N",))}
SMALL = ("grid/x", "potential/V", "potential/absorber")   # checked finite on open
SCALES = ("potential/x", "snapshots/x", "observables/samples/detector")   # new in version 3
def provenance(backend: str) -> dict:
    cpu = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo") as handle:
            cpu = next(line.split(":", 1)[1].strip() for line in handle
                       if line.startswith("model name"))
    except (OSError, StopIteration):
        pass
    return {"python": sys.version.split()[0], "numpy": np.__version__, "scipy": scipy.__version__,
            "h5py": h5py.__version__, "hdf5": h5py.version.hdf5_version, "fft": backend,
            "cpu": cpu, "cores": os.cpu_count(), "platform": platform.platform()}


def root_attributes(setup, backend: str) -> dict:
    """The root attributes of a new run (the in-memory twin uses the same)."""
    sc = setup.scenario
    return {
        "format": FORMAT, "format_version": FORMAT_VERSION, "sojourn_version": __version__,
        "status": "running", "created": _dt.datetime.now(_dt.timezone.utc).isoformat(),
        "finished": "", "scenario": sc.text or "", "scenario_source": sc.source or "",
        "title": sc.title, "units": json.dumps(sc.unit_system.as_dict()),
        "provenance": json.dumps(provenance(backend)),
        "dt": float(setup.dt), "steps": int(setup.steps), "record_steps": int(setup.record_steps),
        "sample_steps": int(setup.sample_steps), "scheme": sc.evolve.scheme,
        "precision": sc.evolve.precision, "hbar": float(setup.hbar), "mass": float(sc.mass),
        "mass_internal": float(setup.mass), "reference": float(setup.reference), "packet": json.dumps(setup.packet.__dict__),
        # snapshots stored below the state's precision (record.precision): said only then
        **({"snapshot_precision": "single"} if snapshot_dtype(setup) != psi_dtype(setup) else {}),
        # the sideband sink (k_start, k_full, rate; timestep.sideband_sink): said only with one
        **({"sideband_sink": json.dumps(list(setup.sink))} if setup.sink is not None else {}),
    }


def state_datasets(axes: tuple[str, ...]) -> dict:
    """The datasets on ψ's axes (names, outermost first; x is the last, N points)."""
    symbols = tuple("N" if name == "x" else name for name in axes)
    return {"snapshots/psi": ("c", ("S",) + symbols), "potential/V": ("f", symbols),
            **{f"checkpoint/{slot}/psi": ("c", symbols) for slot in SLOTS}}


def grid_symbols(axes: tuple[str, ...]) -> tuple[str, ...]:
    """The symbols of the grid's own axes among ψ's (a component axis is not one):
    ("N",) on a line, ("y", "N") in the plane."""
    return ("y", "N") if "y" in axes else ("N",)


def psi_dtype(setup) -> str:
    """The state's type (the run computes and checkpoints in it)."""
    return "c8" if setup.scenario.evolve.precision == "single" else "c16"


def snapshot_dtype(setup) -> str:
    """The snapshots' type: single where evolve or record asks for it."""
    single = "single" in (setup.scenario.evolve.precision, setup.scenario.record.precision)
    return "c8" if single else "c16"


def _early() -> h5py.h5p.PropDCID:
    """Storage allocated when the dataset is created: a disk too small fails now."""
    dcpl = h5py.h5p.create(h5py.h5p.DATASET_CREATE)
    dcpl.set_alloc_time(h5py.h5d.ALLOC_TIME_EARLY)
    return dcpl


def _rows(group, name, rows, tail=(), dtype="f8"):
    """A dataset of `rows` rows, allocated now, extendible along its first axis,
    checksummed (fletcher32) so that damaged data is refused on read."""
    chunk = max(1, min(rows, 4096 // max(1, int(np.prod(tail)))))
    return group.create_dataset(name, shape=(rows, *tail), maxshape=(None, *tail),
                                chunks=(chunk, *tail), dtype=dtype, fletcher32=True,
                                dcpl=_early())


def sample_rows(setup) -> int:
    """The samples a run takes: t = 0 and every `sample_steps` steps."""
    return setup.steps // setup.sample_steps + 1


def allocated_bytes(setup, compress: bool) -> int:
    """The bytes `create` allocates (ψ rows not counted when compressed: they
    are allocated as they are written)."""
    n, rows, item = setup.grid.points, setup.snapshots, np.dtype(psi_dtype(setup)).itemsize
    state = int(np.prod(setup.state_shape))
    columns = len(SAMPLES) + 1 + max(len(setup.detectors), 1)
    row_item = np.dtype(snapshot_dtype(setup)).itemsize
    return ((0 if compress else rows * state * row_item) + rows * (len(OBSERVABLES) + 3) * 8
            + sample_rows(setup) * columns * 8 + 3 * n * 8 + state * 8 + 2 * state * item)


def create(f: h5py.File, setup, backend: str, compress: bool) -> None:
    """Write the layout of a new run into an empty file (S rows allocated)."""
    sc = setup.scenario
    u = udunits(sc.unit_system.as_dict())
    attrs = root_attributes(setup, backend)
    f.attrs.update({k: v for k, v in attrs.items() if k not in STRUCTURED})
    write_structured(f, attrs)
    rows, state, names = setup.snapshots, setup.state_shape, [a for a, _ in setup.state_axes]
    grid = f.create_group("grid")
    for name, values in setup.grid.axes:
        _scale(grid, name, values, u)
    grid["x"].attrs["dx"] = setup.grid.dx
    pot = f.create_group("potential")
    paxes = [_scale(pot, name, values, u) for name, values in setup.state_axes]
    _attach(pot.create_dataset("V", data=setup.V), u, *paxes)
    pot.attrs["description"] = setup.potential.describe()
    if setup.W is not None:
        _attach(pot.create_dataset("absorber", data=setup.W), u,
                *paxes[len(paxes) - np.ndim(setup.W):])
    snaps = f.create_group("snapshots")
    saxes = [_scale(snaps, name, values, u) for name, values in setup.state_axes]
    t = _rows(snaps, "t", rows)
    _label(t, u)
    t.make_scale("t")
    _attach(_rows(snaps, "step", rows, dtype="i8"), u, t)
    psi = snaps.create_dataset(
        "psi", shape=(rows, *state), maxshape=(None, *state), chunks=(1, *state),
        dtype=snapshot_dtype(setup), fletcher32=True, dcpl=_early(),
        **({"compression": "gzip", "compression_opts": 1, "shuffle": True} if compress else {}))
    _attach(psi, u, t, *saxes)
    snaps.attrs["committed"] = np.int64(0)
    snaps.attrs["axes"] = " ".join(names)
    obs = f.create_group("observables")
    ot = _rows(obs, "t", rows)
    _label(ot, u)
    ot.make_scale("t")
    for name in OBSERVABLES:
        _attach(_rows(obs, name, rows), u, ot)
    obs.attrs["region"] = np.array(setup.region if setup.region else (np.nan, np.nan), float)
    obs.attrs["reference"] = float(setup.reference)
    samples = obs.create_group("samples")
    m = sample_rows(setup)
    st = _rows(samples, "t", m)
    _label(st, u)
    st.make_scale("t")
    for name in SAMPLES:
        _attach(_rows(samples, name, m), u, st)
    columns = max(len(setup.detectors), 1)
    detector = _scale(samples, "detector", np.array(setup.detectors, dtype=float)
                      if setup.detectors else np.full(1, np.nan), u)
    _attach(_rows(samples, "flux", m, (columns,)), u, st, detector)
    samples.attrs["detectors"] = np.array(setup.detectors, dtype=float)
    ck = f.create_group("checkpoint")
    for slot in SLOTS:
        g = ck.create_group(slot)
        g.create_dataset("psi", shape=state, dtype=psi_dtype(setup), fletcher32=True, chunks=state)
        for key, kind in SLOT_ATTRS.items():
            g.attrs[key] = np.int64(-1) if kind == "int" else -1.0


@dataclass(frozen=True)
class Committed:
    """What a reader may trust: committed snapshots and samples, and the
    checkpoint slot holding the state at the last committed snapshot."""

    snapshots: int
    samples: int
    slot: str        # "" before the first commit
    points: int


def _fail(path, what: str):
    raise RunFileError(f"{path}: damaged run file ({what})")


def _attr(node, key, kind, path, where):
    if key not in node.attrs:
        _fail(path, f"attribute {where}{key} is missing")
    value = node.attrs[key]
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    if kind in ("str", "json"):
        if not isinstance(value, str):
            _fail(path, f"attribute {where}{key} is not text")
        if kind == "json":
            try:
                value = json.loads(value)
            except ValueError:
                _fail(path, f"attribute {where}{key} is not valid JSON")
            if not isinstance(value, dict):
                _fail(path, f"attribute {where}{key} is not a JSON object")
        return value
    array = np.asarray(value)
    if array.shape not in ((), (1,)) or array.dtype.kind not in ("iu" if kind == "int" else "iuf"):
        _fail(path, f"attribute {where}{key} is not one {'integer' if kind == 'int' else 'number'}")
    number = array.reshape(()).item()
    if kind == "float" and not np.isfinite(number):
        _fail(path, f"attribute {where}{key} is not finite")
    return number


def _datasets(version: int) -> dict:
    """The required datasets of a format version. Versions 1 and 2 (read only)
    had no scales in /potential, /snapshots and /observables/samples; version 1
    grew its rows as it went: ψ may hold a few rows past the others, and its
    checkpoint was one state, not two slots."""
    if version >= 3:
        return DATASETS
    out = {k: v for k, v in DATASETS.items() if k not in SCALES}
    if version >= 2:
        return out
    return {k: v for k, v in out.items() if not k.startswith("checkpoint/")}


def state_axes(f: h5py.File, path, version: int) -> tuple[str, ...]:
    """ψ's axes after t as the file names them ("x" before they were named)."""
    text = f["snapshots"].attrs.get("axes", "x") if isinstance(f.get("snapshots"), h5py.Group) \
        else "x"
    text = text.decode("utf-8", "replace") if isinstance(text, bytes) else text
    names = tuple(str(text).split())
    if not names or names[-1] != "x" or len(set(names)) != len(names) or any(
            not name.isidentifier() or name in ("t", "step", "psi", "V", "absorber", "S", "N")
            for name in names):
        _fail(path, f"attribute /snapshots/axes {text!r} does not name ψ's axes ending in x")
    extra = names[:-1]
    if extra and version < 3:
        _fail(path, "ψ with more axes than x needs format 3")
    return names


def root_kinds(version: int) -> dict:
    """The root attributes of a format version, name -> kind."""
    if version >= 3:
        return ROOT_ATTRS
    kinds = {k: v for k, v in ROOT_ATTRS.items() if k != "mass_internal"
             and (version >= 2 or k != "finished")}
    return {**kinds, **{key: "json" for key in STRUCTURED}}


def structured(f: h5py.File, path, version: int) -> dict:
    """The STRUCTURED entries as dicts: groups of attributes from version 3, JSON before."""
    if version < 3:
        return {key: _attr(f, key, "json", path, "/") for key in STRUCTURED}
    out = {}
    for key in STRUCTURED:
        if not isinstance(f.get(key), h5py.Group):
            _fail(path, f"group /{key} is missing")
        out[key] = read_structured(f, key)
    return out


def validate(f: h5py.File, path, version: int = FORMAT_VERSION) -> Committed:
    """Check the file against the layout above; raise RunFileError naming the
    first thing missing or wrong. Returns what is committed."""
    attrs = {key: _attr(f, key, kind, path, "/") for key, kind in root_kinds(version).items()}
    attrs.update(structured(f, path, version))
    for key in ("dt", "hbar", "mass") + (("mass_internal",) if version >= 3 else ()):
        if attrs[key] <= 0:
            _fail(path, f"attribute /{key} is not positive")
    for key in ("steps", "record_steps", "sample_steps"):
        if attrs[key] < (0 if key == "steps" else 1):
            _fail(path, f"attribute /{key} is out of range")
    for key in ("length", "energy", "time"):
        if not isinstance(attrs["units"].get(key), str):
            _fail(path, f"attribute /units has no '{key}'")
    if version >= 3 and not all(isinstance(attrs["units"].get(k), (int, float))
                                and attrs["units"][k] > 0 for k in ("hbar", "electron_mass")):
        _fail(path, "attribute /units has no positive 'hbar' and 'electron_mass'")
    packet = attrs["packet"]
    for key in PACKET_KEYS:
        if not isinstance(packet.get(key), (int, float)) or not np.isfinite(packet[key]):
            _fail(path, f"attribute /packet has no finite '{key}'")
    sizes: dict = {}
    axes = state_axes(f, path, version)
    wanted = {**_datasets(version), **state_datasets(axes),
              **{k: (v[0], grid_symbols(axes)) for k, v in OPTIONAL.items() if k in f}}
    if version < 2:   # version 1 grew ψ's rows as it went and had one checkpoint state
        wanted = {k: v for k, v in wanted.items() if not k.startswith("checkpoint/")}
        wanted["snapshots/psi"] = ("c", ("P", "N"))
    if version >= 3:
        wanted.update({f"{group}/{name}": ("f", (name,)) for name in axes[:-1]
                       for group in ("snapshots", "potential")})
    for name, (kind, shape) in wanted.items():
        node = f.get(name)
        if not isinstance(node, h5py.Dataset):
            _fail(path, f"dataset /{name} is missing")
        if node.dtype.kind not in ("iu" if kind == "i" else kind):
            _fail(path, f"dataset /{name} has type {node.dtype}, not {kind}")
        if len(node.shape) != len(shape):
            _fail(path, f"dataset /{name} has shape {node.shape}, not {len(shape)}-dimensional")
        for symbol, size in zip(shape, node.shape):
            if sizes.setdefault(symbol, size) != size:
                _fail(path, f"dataset /{name} has shape {node.shape}; {symbol} = {sizes[symbol]} "
                            "elsewhere")
    if sizes["N"] < 2:
        _fail(path, "fewer than two grid points")
    for name in SMALL:
        if name in f and not np.all(np.isfinite(f[name][...])):
            _fail(path, f"dataset /{name} holds non-finite values")
    if not np.all(np.diff(f["grid/x"][...]) > 0):
        _fail(path, "dataset /grid/x is not increasing")
    region = _array_attr(f["observables"], "region", 2, path, allow_nan=True)
    _attr(f["observables"], "reference", "float", path, "/observables/")
    detectors = _array_attr(f["observables/samples"], "detectors", None, path)
    if len(detectors) not in (0, sizes["D"]) or (len(detectors) == 0 and sizes["D"] != 1):
        _fail(path, "attribute /observables/samples/detectors does not match the flux columns")
    del region
    if version < 2:   # committed: what has its observables; a crash could leave extra ψ rows
        if sizes["P"] < sizes["S"]:
            _fail(path, "fewer ψ rows than snapshot times")
        return Committed(sizes["S"], sizes["M"], "", sizes["N"])
    committed = _attr(f["snapshots"], "committed", "int", path, "/snapshots/")
    if not 0 <= committed <= sizes["S"]:
        _fail(path, f"/snapshots commit counter {committed} outside 0..{sizes['S']}")
    slots = {}
    for slot in SLOTS:
        g = f[f"checkpoint/{slot}"]
        slots[slot] = {key: _attr(g, key, kind, path, f"/checkpoint/{slot}/")
                       for key, kind in SLOT_ATTRS.items()}
    current = [s for s, values in slots.items() if values["snapshots"] == committed]
    if committed == 0:
        return Committed(0, 0, "", sizes["N"])
    if len(current) == 2:   # a checkpoint between recordings: the later state is the newer
        current = [max(current, key=lambda s: (slots[s]["step"], slots[s]["samples"]))]
    if len(current) != 1:
        _fail(path, f"no checkpoint slot matches the commit counter {committed}")
    samples = slots[current[0]]["samples"]
    if not 0 <= samples <= sizes["M"]:
        _fail(path, f"checkpoint sample count {samples} outside 0..{sizes['M']}")
    return Committed(int(committed), int(samples), current[0], sizes["N"])


def _array_attr(node, key, length, path, allow_nan=False) -> np.ndarray:
    where = f"{node.name.rstrip('/')}/{key}"
    if key not in node.attrs:
        _fail(path, f"attribute {where} is missing")
    value = np.asarray(node.attrs[key])
    if value.dtype.kind not in "iuf" or value.ndim != 1 or (length and len(value) != length):
        _fail(path, f"attribute {where} is not a list of {length or 'some'} numbers")
    if not allow_nan and not np.all(np.isfinite(value)):
        _fail(path, f"attribute {where} is not finite")
    return value.astype(float)
