"""The Python API: the few names `import sojourn` gives (see the package docstring).

Each function accepts what a user naturally has at hand (a path, a dict, YAML
text, a Scenario, a Run) and returns what the matching command prints as JSON,
as an object: `delay` the report of `sojourn delay --json`, `theory_table` the
table of `sojourn theory --json`, `run_sweep` the rows of a sweep's table.
`Run` wraps one run (a file on disk or a run held in memory) with read-only
properties; ψ and |ψ|² are read lazily, only the rows asked for.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import Callable, Optional, Union

import numpy as np
import xarray as xr
import yaml
from tqdm import tqdm
from xarray.backends import BackendArray
from xarray.core import indexing

from .build import build
from .config.scenario import Scenario, load as load_file, loads, validate
from .errors import ScenarioError, SojournError
from .measure import DelayReport, measure_delays
from .store import MemoryRun, RunFile, RunReader
from .store.conventions import LABELS, udunits
from .sweep import load_sweep, run_sweep as _run_sweep
from .theory.tables import parse_energies, theory_table as _theory_table
from . import workflows

PathLike = Union[str, os.PathLike]


class Snapshots:
    """ψ (or |ψ|²) of a run as a lazy (t, x) array — (t, component, x) for ψ of a
    spinor run, whose density is summed over the components: indexing reads
    only the rows asked (`psi[i]`, `psi[-1]`, `psi[::5]`, `psi[[0, 3]]`,
    `psi[:, a:b]`); `np.asarray(psi)` reads them all."""

    def __init__(self, reader: RunReader, density: bool = False):
        self._reader, self._density = reader, density
        single = "single" in (reader.attrs.get("precision"),   # as store.layout.snapshot_dtype
                              reader.attrs.get("snapshot_precision"))
        self.dtype = np.dtype(("f4" if single else "f8") if density else
                              ("c8" if single else "c16"))
        axes = tuple(reader.axes)
        # a spinor's density adds its components: the component axis leaves the view
        self._spin_axis = (axes.index("component") - len(axes)) if "component" in axes else None
        self.axes = tuple(a for a in axes if not (density and a == "component"))

    @property
    def shape(self) -> tuple[int, ...]:
        """(S, N) on a line; (S, *axes) for ψ on more axes ((S, Ny, Nx) in the plane,
        (S, 2, N) for a spinor's ψ)."""
        return (len(self._reader),) + tuple(len(self._reader.coordinate(a)) for a in self.axes)

    @property
    def ndim(self) -> int:
        return 1 + len(self.axes)

    def __len__(self) -> int:
        return len(self._reader)

    def __getitem__(self, key):
        rows, columns = (key[0], key[1:]) if isinstance(key, tuple) else (key, ())
        if len(columns) > len(self.axes):
            raise IndexError(f"snapshots are (t, {', '.join(self.axes)}): "
                             f"{len(columns) + 1} indices given")
        if isinstance(rows, (int, np.integer)):
            values = self._reader.psi(int(rows))
        else:
            indices = np.arange(len(self))[rows]   # slices, lists, masks; checks bounds
            values = self._reader.psi_rows(np.atleast_1d(indices))
            columns = (slice(None),) + columns
        if self._density:
            values = np.abs(values) ** 2
            if self._spin_axis is not None:     # the spin components' densities add
                values = values.sum(axis=self._spin_axis)
        return values[columns] if columns else values

    def __array__(self, dtype=None, copy=None):
        values = self[:]
        return values if dtype is None else values.astype(dtype)

    def __iter__(self):
        for i in range(len(self)):
            yield self[i]

    def __repr__(self) -> str:
        what = "density" if self._density else "psi"
        return (f"<sojourn {what}: {self.shape[0]} snapshots × "
                f"{' × '.join(map(str, self.shape[1:]))} points, lazy>")


class Run:
    """One run, read-only, all properties: `x`, `t`, `V`, `absorber`, `psi`,
    `density`, `observables`, `samples`, `scenario`, `analysis`, `units`, `path`,
    `status`; `to_xarray()`; `close()` or use it in a `with` block. A run file
    stays open until closed; a lazy xarray view reads from it until then."""

    def __init__(self, reader: RunReader):
        if not isinstance(reader, RunReader):
            raise TypeError(f"Run wraps a run reader (RunFile or MemoryRun), not "
                            f"{type(reader).__name__}; use sojourn.open(path)")
        self.reader = reader

    # -- arrays ------------------------------------------------------------------------
    @property
    def x(self) -> np.ndarray:
        """Grid positions (N,), in units["length"]."""
        return self.reader.x

    @property
    def t(self) -> np.ndarray:
        """Snapshot times (S,), in units["time"]."""
        return self.reader.times

    @property
    def V(self) -> np.ndarray:
        """The potential on the grid (N,), (2, N) for a spinor run (spin up, down), in units["energy"]."""
        return self.reader.V

    @property
    def absorber(self) -> Optional[np.ndarray]:
        """The absorbing potential W (N,) (the run adds −iW), or None."""
        return self.reader.absorber

    @property
    def psi(self) -> Snapshots:
        """ψ(t, x), lazy (see Snapshots), in length^-1/2."""
        return Snapshots(self.reader)

    @property
    def density(self) -> Snapshots:
        """|ψ(t, x)|², lazy, in length^-1."""
        return Snapshots(self.reader, density=True)

    @property
    def observables(self) -> dict:
        """{"t", "norm", "x_mean", "p_mean", "energy", "P_left", ...}: (S,) arrays at the snapshots."""
        return self.reader.observables()

    @property
    def samples(self) -> dict:
        """The finer samples between snapshots: {"t", "norm", ..., "flux" (M, D), "detectors"}."""
        return self.reader.samples()

    # -- description -------------------------------------------------------------------
    @property
    def scenario(self) -> Scenario:
        return self.reader.scenario()

    @property
    def analysis(self) -> Optional[dict]:
        """The delay analysis saved with the run (`sojourn delay --save`), or None."""
        return self.reader.analysis()

    @property
    def units(self) -> dict:
        """The unit system: {"name", "length", "energy", "time", "mass", "hbar", "electron_mass"}."""
        return self.reader.units

    @property
    def path(self) -> Path:
        return self.reader.path

    @property
    def status(self) -> str:
        """running, interrupted, failed or complete."""
        return self.reader.status

    # -- views and life ----------------------------------------------------------------
    def to_xarray(self):
        """An xarray.Dataset with dimensions t and ψ's axes (x; y, x in the plane;
        component, x for a spinor): coordinates on each; data psi and density
        (a spinor's summed over its components), lazily indexed (rows read when asked, no dask needed), V and
        absorber (x), the observables (t); `units` and `long_name` on each, as
        in the run file."""
        return _dataset(self)

    def close(self) -> None:
        self.reader.close()

    def __enter__(self) -> "Run":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __len__(self) -> int:
        return len(self.reader)

    def __repr__(self) -> str:
        return (f"<sojourn.Run {self.path} ({self.status}): {len(self)} snapshots × "
                f"{len(self.reader.x)} points, units {self.units.get('name', '?')}>")


def labels(units: dict) -> dict:
    """name -> {"long_name", "units"} for the Run's arrays (as in the run file)."""
    u = udunits(units)
    out = {name: {"long_name": long_name, "units": u[kind]}
           for name, (long_name, kind) in LABELS.items()}
    out["density"] = {"long_name": "probability density", "units": u["density"]}
    return out


class _LazyRows(BackendArray):
    """ψ or |ψ|² for xarray's lazy indexing: a selection reads only its rows."""

    def __init__(self, snapshots: Snapshots):
        self.snapshots, self.shape, self.dtype = snapshots, snapshots.shape, snapshots.dtype

    def __getitem__(self, key):
        return indexing.explicit_indexing_adapter(key, self.shape, indexing.IndexingSupport.OUTER,
                                                  lambda k: np.asarray(self.snapshots[k]))


def _dataset(run: Run):
    label = labels(run.units)
    axes = tuple(run.reader.axes)   # ("x",) on a line, ("y", "x") in the plane, ("component", "x")
    coords = {"t": ("t", run.t, label["t"]),
              **{name: (name, run.reader.coordinate(name), label.get(name, label["x"]))
                 for name in axes}}
    data = {name: (("t",) + view.axes, indexing.LazilyIndexedArray(_LazyRows(view)), label[name])
            for name, view in (("psi", run.psi), ("density", run.density))}
    data["V"] = (axes, run.V, label["V"])
    if run.absorber is not None:
        data["absorber"] = (axes[len(axes) - np.ndim(run.absorber):], run.absorber,
                            label["absorber"])
    for name, values in run.observables.items():
        if name != "t":
            data[name] = ("t", values, label[name])
    attrs = {"title": str(run.reader.attrs.get("title", "")), "status": run.status,
             "source": str(run.path), "unit_system": str(run.units.get("name", "")),
             "hbar": float(run.reader.attrs["hbar"]), "mass": float(run.reader.attrs["mass"]),
             "mass_units": "electron masses", "scenario": str(run.reader.attrs.get("scenario", ""))}
    return xr.Dataset({k: xr.Variable(*v) for k, v in data.items()},
                      coords={k: xr.Variable(*v) for k, v in coords.items()}, attrs=attrs)


# -- functions ---------------------------------------------------------------------------

def open(path: PathLike) -> Run:   # noqa: A001 (the API's name, fixed by design)
    """Open a run file (complete or partial) for reading: a Run."""
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"sojourn.open needs a path to a run file, not {type(path).__name__}")
    return Run(RunFile(path))


def load(source: Union[PathLike, dict, Scenario]) -> Scenario:
    """A validated Scenario from a YAML file (a Path, or a str without a newline),
    YAML text (a str with a newline), or a dict (a scenario built in code; relative
    paths resolve against the working directory). Errors are one line, naming
    the source, line and key (ScenarioError)."""
    if isinstance(source, Scenario):
        return source
    if isinstance(source, dict):
        return validate(source, "<dict>", None, Path.cwd(), yaml.safe_dump(source, sort_keys=False))
    if isinstance(source, str) and "\n" in source:
        return loads(source, "<text>", Path.cwd())
    if isinstance(source, (str, os.PathLike)):
        return load_file(source)
    raise TypeError(f"sojourn.load needs a path, YAML text, a dict or a Scenario, not "
                    f"{type(source).__name__}")


def run(scenario, output: Optional[PathLike] = None, *, overwrite: bool = False,
        progress: Union[bool, Callable[[int, int], None]] = False, force: bool = False) -> Run:
    """Run a scenario (anything `load` takes): into memory when `output` is None,
    otherwise into that run file (never replaced unless `overwrite`), opened for
    reading. The guards' errors refuse the run (SojournError) unless `force` and
    forceable. `progress`: True for a bar, or a callable(done, total)."""
    sc = load(scenario)
    setup = build(sc)
    errors = [f for f in setup.errors() if not (force and f.forceable)]
    if errors:
        raise SojournError(errors[0].located(sc.source or "scenario")
                           + (" (force=True overrides this)" if errors[0].forceable else ""))
    bar, close = _progress(progress, setup.steps)
    try:
        if output is None:
            return Run(workflows.run_in_memory(setup, bar))
        return open(workflows.run(setup, Path(output), overwrite=overwrite, progress=bar))
    finally:
        close()


def _progress(progress, total):
    if callable(progress):
        return progress, lambda: None
    if not progress:
        return None, lambda: None
    bar = tqdm(total=total, unit="step", desc="running")

    def update(done, _total):
        bar.update(done - bar.n)
    return update, bar.close


def delay(run: Union[Run, RunReader, PathLike], reference: Union[Run, PathLike, None] = None
          ) -> DelayReport:
    """The delays of a run by every method beside their predictions: the report
    `sojourn delay --json` prints (`.to_dict()`). `reference`: a run of the same
    packet without the potential, instead of the exact free evolution."""
    unwrap = (lambda r: r.reader if isinstance(r, Run) else r)
    return measure_delays(unwrap(run), reference_run=unwrap(reference))


def theory_table(scenario, energies=None) -> dict:
    """Stationary-state theory of a scenario (anything `load` takes): R, T,
    phases and phase delays per energy and the packet averages — the table of
    `sojourn theory --json`. `energies`: an array, "A:B:N", or None for the
    packet's band."""
    if isinstance(energies, str):
        energies = parse_energies(energies)
    elif energies is not None:
        energies = np.atleast_1d(np.asarray(energies, dtype=float))
        if energies.ndim != 1 or not len(energies) or not np.all(np.isfinite(energies)):
            raise ScenarioError("theory_table: energies must be finite numbers")
    return _theory_table(load(scenario), energies)


def run_sweep(path: PathLike, workers: Optional[int] = None) -> list:
    """Run a sweep file (as `sojourn sweep`): every point not already done, the
    table written into the sweep's output folder; returns the table's rows
    (dicts, as in table.json)."""
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"run_sweep needs the path of a sweep file, not {type(path).__name__}")
    return _run_sweep(load_sweep(path), workers).rows


__all__ = ["Run", "Snapshots", "delay", "load", "open", "run", "run_sweep", "theory_table"]
