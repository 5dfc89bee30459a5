"""A run held in memory: the engine loop's recorder and a RunReader at once.

`MemoryRun(setup, backend)` takes the snapshots of `engine.loop.evolve` like a
RunWriter does and then reads back exactly as a RunFile of the same run would
(same attributes, dtypes and arrays), so measurement and rendering can work
on a run that never touched the disk. It is also the smallest example of a
storage backend (see store.reader's contract)."""
from __future__ import annotations

from pathlib import Path
from typing import Optional

import numpy as np

from ..errors import RunFileError
from . import layout
from .layout import OBSERVABLES, SAMPLES
from .reader import RunReader
from .writer import self_description


class MemoryRun(RunReader):
    """A run recorded into memory (see the module docstring)."""

    def __init__(self, setup, backend: str = "in memory"):
        if not hasattr(setup, "scenario") or not hasattr(setup, "grid"):
            raise TypeError("MemoryRun needs a built Setup (sojourn.build.build)")
        self.path = Path(f"<in memory: {setup.scenario.name}>")
        self._attrs = {**layout.root_attributes(setup, backend), **self_description(setup)}
        self._x = np.array(setup.grid.x, dtype=float)
        self._V = np.array(setup.V, dtype=float)
        self._axes = tuple(name for name, _ in setup.state_axes)
        self._coordinates = {name: np.array(values, dtype=float)
                             for name, values in setup.state_axes}
        self._W = None if setup.W is None else np.array(setup.W, dtype=float)
        self._dtype = np.dtype(layout.snapshot_dtype(setup))
        self._state_dtype = np.dtype(layout.psi_dtype(setup))
        self._region = tuple(map(float, setup.region)) if setup.region else None
        self._detectors = np.array(setup.detectors, dtype=float)
        self._columns = max(len(setup.detectors), 1)
        self._psi: list = []
        self._t: list = []
        self._obs: dict = {name: [] for name in OBSERVABLES}
        self._samples: dict = {name: [] for name in ("t", "flux") + SAMPLES}
        self._analysis: Optional[dict] = None
        self.resume_state: Optional[dict] = None   # the latest state (a snapshot or checkpoint)

    # -- the recorder ---------------------------------------------------------------------
    def snapshot(self, step: int, t: float, psi: np.ndarray, observables: dict,
                 samples: dict, raw_absorbed: tuple[float, float]) -> None:
        """Keep one recording (ψ stored at the run file's precision)."""
        if self._attrs["status"] == "complete":
            raise RunFileError(f"{self.path}: the run is complete; nothing more is recorded")
        self._psi.append(np.array(psi, dtype=self._dtype, copy=True))
        self._t.append(float(t))
        for name in OBSERVABLES:
            self._obs[name].append(float(observables[name]))
        self._keep_samples(samples)
        kept = self._psi[-1] if self._dtype == self._state_dtype else \
            np.array(psi, dtype=self._state_dtype, copy=True)
        self.resume_state = {"step": int(step), "t": float(t), "psi": kept,
                             "raw_absorbed": tuple(map(float, raw_absorbed))}

    def checkpoint(self, step: int, t: float, psi: np.ndarray, samples: dict,
                   raw_absorbed: tuple[float, float]) -> None:
        """Keep the samples since the last recording and the latest state
        (`resume_state`: what `engine.loop.evolve` continues from)."""
        self._keep_samples(samples)
        self.resume_state = {"step": int(step), "t": float(t), "psi": np.array(psi, copy=True),
                             "raw_absorbed": tuple(map(float, raw_absorbed))}

    def _keep_samples(self, samples: dict) -> None:
        if len(samples["t"]):
            for name in ("t",) + SAMPLES:
                self._samples[name].append(np.asarray(samples[name], dtype=float))
            self._samples["flux"].append(np.asarray(samples["flux"], dtype=float)
                                         .reshape(-1, self._columns))

    def close(self, status: Optional[str] = None) -> None:
        """As a recorder: the run stopped early with `status`. As a reader: nothing to release."""
        if status is not None:
            self._attrs["status"] = status

    def finish(self) -> "MemoryRun":
        self._attrs["status"] = "complete"
        return self

    # -- the reader -----------------------------------------------------------------------
    @property
    def attrs(self) -> dict:
        return dict(self._attrs)

    @property
    def status(self) -> str:
        return str(self._attrs["status"])

    @property
    def x(self) -> np.ndarray:
        return self._x.copy()

    @property
    def V(self) -> np.ndarray:
        return self._V.copy()

    @property
    def axes(self) -> tuple[str, ...]:
        return self._axes

    def coordinate(self, name: str) -> np.ndarray:
        if name == "x" or name not in self._coordinates:
            return super().coordinate(name)
        return self._coordinates[name].copy()

    @property
    def absorber(self) -> Optional[np.ndarray]:
        return None if self._W is None else self._W.copy()

    @property
    def times(self) -> np.ndarray:
        return np.array(self._t, dtype=float)

    def __len__(self) -> int:
        return len(self._psi)

    def psi(self, index: int) -> np.ndarray:
        return self._psi[self._index(index)].copy()

    def observables(self) -> dict:
        out = {"t": self.times}
        out.update({name: np.array(values, dtype=float) for name, values in self._obs.items()})
        return out

    def samples(self) -> dict:
        out = {}
        for name, parts in self._samples.items():
            empty = np.zeros((0, self._columns) if name == "flux" else (0,))
            out[name] = np.concatenate(parts) if parts else empty
        out["detectors"] = self._detectors.copy()
        return out

    @property
    def region(self) -> Optional[tuple[float, float]]:
        return self._region

    def analysis(self) -> Optional[dict]:
        return None if self._analysis is None else dict(self._analysis)

    def save_analysis(self, report: dict) -> None:
        """Keep a measurement with the run (as store.save_analysis does in a file)."""
        if not isinstance(report, dict):
            raise TypeError("save_analysis needs the report as a dict (DelayReport.to_dict())")
        self._analysis = dict(report)
