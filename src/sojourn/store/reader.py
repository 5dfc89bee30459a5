"""Reading a run: one interface (RunReader) for a run file and its in-memory twin.

RunReader's contract — what a storage backend provides (RunFile and
store.memory.MemoryRun are the two):

1. `attrs` — the root attributes of store.layout.ROOT_ATTRS as a dict (numbers
   as numbers; "mass" in electron masses, "mass_internal" in the units' energy·time²/
   length²) and the layout.STRUCTURED entries (units, packet, provenance) as JSON
   text; `status` — running, interrupted, failed or complete.
2. `x`, `V` — the grid (N,) and the potential on ψ's axes (N,) — (C, N) for a
   spinor, one potential per component; `absorber` — (N,) or None; `axes` — the
   names of ψ's axes after t, outermost first, x last (("x",) for a scalar run;
   ("y", "x") in the plane: ψ, V and the absorber (Ny, Nx)); `coordinate(name)` —
   the values of one of those axes (the base gives x; a backend with more axes
   gives them all).
3. `len(reader)` — the committed snapshots; `times` — their (len,) times;
   `psi(i)` — snapshot i as a complex array on ψ's axes (`axes`; (N,) for a scalar
   run in one dimension; negative i counts from the end);
   nothing past the commit is ever returned.
4. `observables()` — {"t", *layout.OBSERVABLES: (len,) arrays};
   `samples()` — {"t", "flux" (M, D), *layout.SAMPLES: (M,) arrays, "detectors"}.
5. `region` — the measure region (a, b) or None; `analysis()` — the saved
   analysis dict or None; `path` — where it lives (a label for an in-memory run).
6. `close()`, and use as a context manager.
The base class derives the rest (units, packet, reference, scenario(), snapshots(),
psi_rows(indices): several snapshots at once; a backend may read them in one go).
"""
from __future__ import annotations

import json
import os
import stat
from abc import ABC, abstractmethod
from functools import cached_property
from pathlib import Path
from typing import Iterator, Optional

import h5py
import numpy as np

from ..config.scenario import loads as load_scenario_text
from ..errors import RunFileError, one_line
from . import layout
from .layout import OBSERVABLES, SAMPLES


class RunReader(ABC):
    """Read access to one run (see the module docstring for the contract)."""

    path: Path

    # -- what a backend provides --------------------------------------------------------
    @property
    @abstractmethod
    def attrs(self) -> dict: ...

    @property
    @abstractmethod
    def status(self) -> str: ...

    @property
    @abstractmethod
    def x(self) -> np.ndarray: ...

    @property
    @abstractmethod
    def V(self) -> np.ndarray: ...

    @property
    @abstractmethod
    def absorber(self) -> Optional[np.ndarray]: ...

    @property
    @abstractmethod
    def times(self) -> np.ndarray: ...

    @abstractmethod
    def __len__(self) -> int: ...

    @abstractmethod
    def psi(self, index: int) -> np.ndarray: ...

    @abstractmethod
    def observables(self) -> dict: ...

    @abstractmethod
    def samples(self) -> dict: ...

    @property
    @abstractmethod
    def region(self) -> Optional[tuple[float, float]]: ...

    @abstractmethod
    def analysis(self) -> Optional[dict]: ...

    def close(self) -> None:
        pass

    # -- derived ------------------------------------------------------------------------
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    @property
    def axes(self) -> tuple[str, ...]:
        return ("x",)

    def coordinate(self, name: str) -> np.ndarray:
        """The values along one of ψ's axes (`axes`)."""
        if name == "x":
            return self.x
        raise KeyError(f"{self.path}: ψ has no axis {name!r} (its axes: {' '.join(self.axes)})")

    @property
    def units(self) -> dict:
        return json.loads(self.attrs["units"])

    @property
    def packet(self) -> dict:
        return json.loads(self.attrs["packet"])

    @property
    def reference(self) -> float:
        return float(self.attrs["reference"])

    def scenario(self):
        """The Scenario the run was made from, its tables' data read from the
        file itself (older files: paths resolve as they did then); parsed once
        and kept."""
        if getattr(self, "_scenario", None) is None:
            attrs = self.attrs
            source = str(attrs.get("scenario_source") or Path(str(self.path)).with_suffix(".yaml"))
            # the self-contained text (tables inline) when the file has it: a table
            # file changed since the run must not change what is read
            text = attrs.get("scenario_resolved") or attrs["scenario"]
            self._scenario = load_scenario_text(str(text), source, Path(source).parent)
        return self._scenario

    def psi_rows(self, indices) -> np.ndarray:
        """Snapshots `indices` (committed, non-negative) as a (len, N) array."""
        rows = [self.psi(self._index(int(i))) for i in indices]
        return np.stack(rows) if rows else np.zeros((0, len(self.x)), complex)

    def snapshots(self) -> Iterator[tuple[float, np.ndarray]]:
        """Iterate (t, ψ) one snapshot at a time."""
        times = self.times
        for i in range(len(self)):
            yield float(times[i]), self.psi(i)

    def _index(self, index: int) -> int:
        n = len(self)
        i = index + n if index < 0 else index
        if not 0 <= i < n:
            raise IndexError(f"snapshot {index} of {n}")
        return i


def _open_hdf5(path: Path) -> h5py.File:
    # a finished file is opened plainly, so that HDF5 checks its length (a
    # truncated copy is refused here); a .partial one may still be growing (SWMR)
    modes = ({"swmr": True}, {}) if path.name.endswith(".partial") else ({},)
    error = None
    for mode in modes:
        try:
            return h5py.File(path, "r", **mode)
        except (OSError, RuntimeError) as exc:
            error = error or exc
    kind = "not an HDF5 file" if not h5py.is_hdf5(path) else \
        "a damaged or truncated HDF5 file, or one another program is writing"
    raise RunFileError(f"{path}: cannot read it as a run file ({kind}: {one_line(error, 160)})")


class RunFile(RunReader):
    """A run file (complete or partial) on disk. Its layout is checked once, on
    open; only what the commit counter covers is read, one snapshot at a time,
    so files larger than memory can be processed."""

    def __init__(self, path):
        self.path = Path(path)
        try:
            info = os.stat(self.path)
        except FileNotFoundError:
            raise RunFileError(f"{self.path}: no such file") from None
        except OSError as exc:
            raise RunFileError(f"{self.path}: cannot read it ({one_line(exc.strerror or exc)})") \
                from None
        if stat.S_ISDIR(info.st_mode):
            raise RunFileError(f"{self.path}: a folder, not a run file")
        if not stat.S_ISREG(info.st_mode):
            raise RunFileError(f"{self.path}: not a regular file (a pipe or device), not a run file")
        self.h5 = _open_hdf5(self.path)
        try:
            attrs = self.h5.attrs
            if attrs.get("format") != layout.FORMAT:
                raise RunFileError(f"{self.path}: an HDF5 file, but not a sojourn run file "
                                   f"(no format='{layout.FORMAT}')")
            try:
                version = int(np.asarray(attrs.get("format_version", 0)).reshape(()))
            except (TypeError, ValueError):
                raise RunFileError(f"{self.path}: damaged run file (format_version is not a "
                                   "number)") from None
            if version > layout.FORMAT_VERSION:
                raise RunFileError(f"{self.path}: run file format version {version} is newer "
                                   f"than this sojourn understands ({layout.FORMAT_VERSION}); "
                                   "upgrade sojourn")
            if version < 1:
                raise RunFileError(f"{self.path}: damaged run file (format version {version})")
            self.version = version
            self.committed = layout.validate(self.h5, self.path, version)
        except (OSError, RuntimeError, KeyError, TypeError, ValueError) as exc:
            self.h5.close()
            raise RunFileError(f"{self.path}: damaged run file ({one_line(exc, 120)})") from None
        except BaseException:
            self.h5.close()
            raise

    def close(self) -> None:
        if self.h5.id.valid:
            self.h5.close()

    def _read(self, name: str, rows=None) -> np.ndarray:
        """A dataset (its first `rows` rows), with a damaged one refused in one line."""
        try:
            dataset = self.h5[name]
            return dataset[...] if rows is None else dataset[:rows]
        except (OSError, RuntimeError) as exc:
            raise RunFileError(f"{self.path}: /{name} cannot be read; the file is damaged "
                               f"({one_line(exc, 100)})") from None

    @cached_property
    def attrs(self) -> dict:
        """The root attributes in the contract's form, whatever the format version:
        STRUCTURED entries as JSON text, "mass" in electron masses, "mass_internal"."""
        out = {key: (value.decode("utf-8", "replace") if isinstance(value, bytes) else value)
               for key, value in self.h5.attrs.items()}
        if self.version >= 3:
            out.update({key: json.dumps(layout.read_structured(self.h5, key))
                        for key in layout.STRUCTURED})
        else:   # versions 1, 2 kept the internal mass under "mass"
            out["mass_internal"] = out["mass"]
            out["mass"] = float(out["mass"]) / float(json.loads(out["units"])["electron_mass"])
        return out

    @property
    def status(self) -> str:
        return str(self.attrs.get("status", "unknown"))

    @property
    def points(self) -> int:
        return self.committed.points

    @property
    def x(self) -> np.ndarray:
        return self._read("grid/x")

    @property
    def axes(self) -> tuple[str, ...]:
        return layout.state_axes(self.h5, self.path, int(self.attrs["format_version"]))

    def coordinate(self, name: str) -> np.ndarray:
        if name == "x" or name not in self.axes:
            return super().coordinate(name)
        return self._read(f"snapshots/{name}")

    @property
    def V(self) -> np.ndarray:
        return self._read("potential/V")

    @property
    def absorber(self) -> Optional[np.ndarray]:
        return self._read("potential/absorber") if "absorber" in self.h5["potential"] else None

    @property
    def times(self) -> np.ndarray:
        return self._read("snapshots/t", len(self))

    def __len__(self) -> int:
        """Committed snapshots (the commit counter)."""
        return self.committed.snapshots

    def psi(self, index: int) -> np.ndarray:
        i = self._index(index)
        try:
            return self.h5["snapshots/psi"][i]
        except (OSError, RuntimeError) as exc:
            raise RunFileError(f"{self.path}: snapshot {i} fails its checksum or cannot be read; "
                               f"the file is damaged ({one_line(exc, 80)})") from None

    def psi_rows(self, indices) -> np.ndarray:
        """Only the rows asked are read: one strided hyperslab for evenly spaced
        rows (a slice), otherwise the distinct rows in increasing order."""
        rows = np.asarray([self._index(int(i)) for i in indices], dtype=np.int64)
        dataset = self.h5["snapshots/psi"]
        if len(rows) == 0:
            return np.zeros((0, *dataset.shape[1:]), dataset.dtype)
        step = int(rows[1] - rows[0]) if len(rows) > 1 else 1
        try:
            if step != 0 and np.array_equal(np.diff(rows), np.full(len(rows) - 1, step)):
                first, last = (rows[0], rows[-1]) if step > 0 else (rows[-1], rows[0])
                block = dataset[first:last + 1:abs(step)]
                return block if step > 0 else block[::-1]
            distinct, back = np.unique(rows, return_inverse=True)
            return dataset[distinct.tolist()][back]
        except (OSError, RuntimeError) as exc:
            raise RunFileError(f"{self.path}: snapshots {rows[0]}..{rows[-1]} fail their "
                               f"checksum or cannot be read; the file is damaged "
                               f"({one_line(exc, 80)})") from None

    def observables(self) -> dict:
        return {name: self._read(f"observables/{name}", len(self)) for name in ("t",) + OBSERVABLES}

    def samples(self) -> dict:
        m = self.committed.samples
        out = {name: self._read(f"observables/samples/{name}", m) for name in ("t", "flux") + SAMPLES}
        out["detectors"] = np.array(self.h5["observables/samples"].attrs["detectors"], dtype=float)
        return out

    @property
    def region(self) -> Optional[tuple[float, float]]:
        region = self.h5["observables"].attrs.get("region")
        return None if region is None or np.any(np.isnan(region)) else tuple(map(float, region))

    def analysis(self) -> Optional[dict]:
        """The saved delay analysis (JSON in /analysis), if any."""
        if "analysis" in self.h5 and "result" in self.h5["analysis"].attrs:
            try:
                return json.loads(self.h5["analysis"].attrs["result"])
            except (TypeError, ValueError):
                raise RunFileError(f"{self.path}: damaged run file (/analysis is not valid "
                                   "JSON)") from None
        return None
