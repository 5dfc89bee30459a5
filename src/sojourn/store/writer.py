"""Writing a run file: NAME.h5.partial while the run goes, renamed to NAME.h5
when it is complete. A result is never overwritten unless asked, and never
through a symbolic link.

The file is written in HDF5's single-writer/multiple-reader mode. Snapshots
are committed in batches (at most COMMIT_SECONDS apart): the new rows and a
checkpoint of the full state go into the spare checkpoint slot, the file is
flushed, and only then the commit counter (/snapshots attrs "committed") is
written and flushed. A crash, a kill or a full disk therefore leaves a file
whose committed part is consistent and resumable.

A checkpoint between recordings (a stop request, or COMMIT_SECONDS of run
without a recording) is a commit too: its samples are appended and its state
goes into the spare slot, whose "snapshots" attribute is invalidated first and
written last, so of two slots at the same commit count the one at the later
step holds the newest complete state.
"""
from __future__ import annotations

import datetime as _dt
import json
import os
import time
from pathlib import Path
from typing import Optional

import h5py
import numpy as np

from ..config.scenario import self_contained, table_digests
from ..errors import RunFileError, one_line
from . import layout
from .layout import OBSERVABLES, SAMPLES, SLOTS
from .files import (HEADROOM, WRITE_ERRORS, close_file, create_exclusively, ignore_file_size_signal,
                    is_run_file, regular_or_absent, room_for)
from .locks import WriteLock
from .paths import partial_path
from .repair import clear_write_flags

COMMIT_SECONDS = 2.0  # the most run time a crash can lose
PSI_BLOCK = 16        # rows a dataset grows by if a run records more than planned


def self_description(setup) -> dict:
    """The root attributes that make a run independent of files outside it:
    `scenario_resolved` (the scenario with every table's data inline, what
    readers parse), `table_digests` (JSON list of each table file's SHA-256,
    checked on resume) and `forced` (the guard findings the run was forced
    past, '' for none; every later command flags them)."""
    return {"scenario_resolved": self_contained(setup.scenario).text or "",
            "table_digests": json.dumps(table_digests(setup.scenario)),
            "forced": "; ".join(str(f) for f in setup.errors())}


def _never_overwritten(final: Path) -> RunFileError:
    return RunFileError(f"{final} exists; a result is never overwritten "
                        "(use --overwrite to replace it, or -o for another name)")


class RunWriter:
    """Writes one run: `open_new` or `open_resume`, then `snapshot(...)` per
    recording and `finish()` (or `close(status)` when the run stops early).
    It is the engine loop's recorder (see engine.loop.evolve)."""

    def __init__(self, handle: h5py.File, final: Path, lock: Optional[WriteLock],
                 committed: layout.Committed):
        self.h5 = handle
        self.lock = lock
        self.final = final
        self.partial = Path(handle.filename)
        self._failing = False
        # dataset handles, looked up once (a lookup costs more than a small write)
        self._counter = handle["snapshots"]
        self._snap = {name: handle["snapshots"][name] for name in ("t", "step", "psi")}
        self._obs = {name: handle["observables"][name] for name in ("t",) + OBSERVABLES}
        self._smp = {name: handle["observables/samples"][name] for name in ("t", "flux") + SAMPLES}
        self._slots = {slot: handle["checkpoint"][slot] for slot in SLOTS}
        self._slot = committed.slot or SLOTS[1]   # the slot holding the committed state
        self._rows = committed.snapshots          # committed snapshot rows
        self._samples = committed.samples
        psi = self._snap["psi"]
        # compressed rows claim their space as they are written; others have it already
        self._growth = psi.dtype.itemsize * int(np.prod(psi.shape[1:])) + 4096 if psi.compression else 0
        self._pending: list = []   # (step, t, observables, samples, raw absorbed)
        self._last_psi = None
        self._committed_at = time.monotonic()

    # -- creation ------------------------------------------------------------------------
    @classmethod
    def open_new(cls, final: Path, setup, backend: str, overwrite: bool = False,
                 compress: bool = False) -> "RunWriter":
        """Start NAME.h5.partial for a new run, its datasets allocated at their final size."""
        final = Path(final)
        partial = partial_path(final)
        if os.path.lexists(final) and not overwrite:
            raise _never_overwritten(final)
        try:
            final.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise RunFileError(f"cannot create the folder {final.parent}: "
                               f"{one_line(exc.strerror or exc, 120)}") from None
        ignore_file_size_signal()
        lock = WriteLock(final)
        try:
            if os.path.lexists(final) and not overwrite:   # finished while we waited
                raise _never_overwritten(final)
            if regular_or_absent(partial) is not None:
                if not overwrite:
                    raise RunFileError(f"{partial} holds an unfinished run; continue it with "
                                       "--resume or start again with --overwrite")
                if not is_run_file(partial):
                    raise RunFileError(f"{partial} is not a sojourn run file, so it is not "
                                       "replaced; move it away, or choose another output with -o")
                partial.unlink()
            size = layout.allocated_bytes(setup, compress)
            short = room_for(final.parent, size + HEADROOM)
            if short:
                raise RunFileError(f"cannot allocate {partial} ({size / 2**20:.1f} MiB): {short}")
            handle = create_exclusively(partial)
            try:
                layout.create(handle, setup, backend, compress)
                handle.attrs.update(self_description(setup))
                handle.swmr_mode = True
            except Exception as exc:     # h5py reports a failed write as any of several
                try:
                    close_file(handle)
                except WRITE_ERRORS:
                    pass
                partial.unlink()
                raise RunFileError(f"cannot allocate {partial} ({size / 2**20:.1f} MiB): "
                                   f"{one_line(exc, 120)}") from None
        except BaseException:
            lock.release()
            raise
        return cls(handle, final, lock, layout.Committed(0, 0, "", setup.grid.points))

    # -- resuming ------------------------------------------------------------------------
    @classmethod
    def open_resume(cls, final: Path, scenario_text: str,
                    digests: Optional[list] = None) -> tuple["RunWriter", dict]:
        """Reopen NAME.h5.partial after a stop; returns the writer and the
        checkpointed state (step, t, psi, raw_absorbed) to continue from.
        `digests` (config.scenario.table_digests of the scenario now) must
        match those the run started with: a run is never continued on a
        table file that changed."""
        final = Path(final)
        partial = partial_path(final)
        if regular_or_absent(partial) is None:
            raise RunFileError(f"nothing to resume: {partial} does not exist")
        ignore_file_size_signal()
        lock = WriteLock(final)
        try:
            try:
                handle = h5py.File(partial, "r+", libver="latest")
            except OSError as exc:
                # a writer killed outright leaves its flags set; we hold the lock, so
                # no run is writing it now
                if "already open for write" not in str(exc) or not clear_write_flags(partial):
                    raise
                handle = h5py.File(partial, "r+", libver="latest")
        except WRITE_ERRORS as exc:
            lock.release()
            raise RunFileError(f"cannot reopen {partial} to resume it: {one_line(exc, 160)}") \
                from None
        except BaseException:
            lock.release()
            raise
        try:
            if handle.attrs.get("format") != layout.FORMAT:
                raise RunFileError(f"{partial} is not a sojourn run file")
            if handle.attrs.get("format_version") != layout.FORMAT_VERSION:
                raise RunFileError(f"{partial} was started by another version of sojourn (run "
                                   f"file format {handle.attrs.get('format_version')}); it cannot "
                                   "be resumed: start again with --overwrite")
            committed = layout.validate(handle, partial)
            if (handle.attrs.get("scenario") or "") != (scenario_text or ""):
                raise RunFileError(f"{partial} was started from a different scenario text; "
                                   "it cannot be resumed with this one")
            if digests is not None and "table_digests" in handle.attrs and \
                    _text(handle.attrs["table_digests"]) != json.dumps(list(digests)):
                raise RunFileError(f"{partial} was started with a table file whose content has "
                                   "changed since (SHA-256 differs); it cannot be resumed: "
                                   "restore the file, or start again with --overwrite")
            if committed.snapshots == 0:
                raise RunFileError(f"{partial} holds no checkpoint yet; start again with --overwrite")
            state = _consistent_state(handle, committed, partial)
            handle.attrs["status"] = "running"
            handle.swmr_mode = True
        except WRITE_ERRORS as exc:
            handle.close()
            lock.release()
            raise RunFileError(f"cannot resume {partial}: {one_line(exc, 160)}") from None
        except BaseException:
            handle.close()
            lock.release()
            raise
        return cls(handle, final, lock, committed), state

    # -- writing -------------------------------------------------------------------------
    def snapshot(self, step: int, t: float, psi: np.ndarray, observables: dict,
                 samples: dict, raw_absorbed: tuple[float, float]) -> None:
        """Write a snapshot's ψ row; its other values and the checkpoint follow at
        the next commit (at most COMMIT_SECONDS later)."""
        row = self._rows + len(self._pending)
        short = self._short_of_room()
        if short:
            self._fail(RunFileError(short), stopped=True)
        try:
            self._ensure_rows(row + 1)
            self._snap["psi"][row] = psi
        except WRITE_ERRORS as exc:
            self._fail(exc)
        self._pending.append((step, t, observables, samples, raw_absorbed))
        self._last_psi = np.array(psi, copy=True)
        if time.monotonic() - self._committed_at >= COMMIT_SECONDS:
            self.commit()

    def checkpoint(self, step: int, t: float, psi: np.ndarray, samples: dict,
                   raw_absorbed: tuple[float, float]) -> None:
        """Commit a state between recordings (the loop's rule 2): the pending
        snapshots, the samples since the last one and ψ at `step` in the spare slot."""
        self.commit((int(step), float(t), psi, tuple(raw_absorbed)), samples)

    def _ensure_rows(self, rows: int) -> None:
        """Grow the snapshot datasets if a run records more snapshots than planned."""
        if rows > self._snap["t"].shape[0]:
            size = rows + PSI_BLOCK
            for dataset in (*self._snap.values(), *self._obs.values()):
                dataset.resize(size, axis=0)

    def commit(self, state: Optional[tuple] = None, extra: Optional[dict] = None) -> None:
        """Write what is pending into its rows and the spare checkpoint slot,
        flush, then advance the commit counter and flush again. `state` (step,
        t, psi, raw absorbed) and its samples `extra` are a checkpoint between
        recordings; without them the slot holds the last snapshot."""
        if not self._pending and state is None:
            return
        try:
            pending = self._pending
            start, stop = self._rows, self._rows + len(pending)
            self._snap["t"][start:stop] = [item[1] for item in pending]
            self._snap["step"][start:stop] = [item[0] for item in pending]
            self._obs["t"][start:stop] = [item[1] for item in pending]
            for name in OBSERVABLES:
                self._obs[name][start:stop] = [item[2][name] for item in pending]
            batches = [item[3] for item in pending if len(item[3]["t"])]
            if extra is not None and len(extra["t"]):
                batches.append(extra)
            samples = self._samples + sum(len(b["t"]) for b in batches)
            if batches and samples > self._smp["t"].shape[0]:   # more than planned
                for dataset in self._smp.values():
                    dataset.resize(samples + 64 * PSI_BLOCK, axis=0)
            for name in ("t", "flux") + SAMPLES:
                if batches:
                    self._smp[name][self._samples:samples] = np.concatenate(
                        [b[name] for b in batches])
            step, t, psi, raw = state if state is not None else (
                pending[-1][0], pending[-1][1], self._last_psi, pending[-1][4])
            spare = SLOTS[1 - SLOTS.index(self._slot)]
            slot = self._slots[spare]
            slot.attrs.modify("snapshots", np.int64(-1))   # not a state until written whole
            self.h5.flush()
            slot["psi"][...] = psi
            for key, value in (("step", np.int64(step)), ("t", float(t)),
                               ("samples", np.int64(samples)),
                               ("absorbed_left", float(raw[0])), ("absorbed_right", float(raw[1]))):
                slot.attrs.modify(key, value)
            self.h5.flush()
            slot.attrs.modify("snapshots", np.int64(stop))
            self.h5.flush()
            if stop != self._rows:
                self._counter.attrs.modify("committed", np.int64(stop))   # the commit itself
                self.h5.flush()
        except WRITE_ERRORS as exc:
            self._fail(exc)
        self._rows, self._samples, self._slot = stop, samples, spare
        self._pending.clear()
        self._committed_at = time.monotonic()

    def _short_of_room(self) -> Optional[str]:
        """Why the next snapshot may not fit (a nearly full disk, a file size
        limit), checked before HDF5 runs into it: a write that fails inside
        HDF5 can leave the file's end unwritten and the file unreadable."""
        try:
            size = os.stat(self.partial).st_size
        except OSError:
            return None
        return room_for(self.partial.parent, HEADROOM + self._growth * (len(self._pending) + 2),
                         size)

    def _fail(self, exc: BaseException, stopped: bool = False):
        """A write failed or would fail (disk full, file too large, ...): keep
        what was committed, mark the file failed if that can still be written,
        close it, and say so in one line."""
        if not self._failing:
            self._failing = True
            try:
                self.close("failed")
            except (*WRITE_ERRORS, RunFileError):
                pass
        what = "stopped writing" if stopped else "writing"
        raise RunFileError(f"{what} {self.partial} ({'' if stopped else 'failed: '}"
                           f"{one_line(exc, 160)}); what was committed before is kept (resume it "
                           "with --resume once there is room)") from None

    def close(self, status: str) -> None:
        """Commit what is pending and close with a status (interrupted, failed);
        the .partial file stays."""
        try:
            if self.h5.id.valid:
                try:
                    self.commit()
                finally:
                    try:
                        self.h5.attrs["status"] = status
                        self.h5.flush()
                    finally:
                        close_file(self.h5, self)
        finally:
            if self.lock is not None:
                self.lock.release()
                self.lock = None

    def finish(self) -> Path:
        """Mark complete, close, and rename NAME.h5.partial → NAME.h5."""
        self.commit()
        try:
            for datasets, rows in (((*self._snap.values(), *self._obs.values()), self._rows),
                                   (self._smp.values(), self._samples)):
                for dataset in datasets:    # fewer recordings or samples than planned
                    if dataset.shape[0] != rows:
                        dataset.resize(rows, axis=0)
            self.h5.attrs["status"] = "complete"
            self.h5.attrs["finished"] = _dt.datetime.now(_dt.timezone.utc).isoformat()
            close_file(self.h5, self)
            os.replace(self.partial, self.final)
        except WRITE_ERRORS as exc:
            self._fail(exc)
        if self.lock is not None:
            self.lock.release()
            self.lock = None
        return self.final


def _text(value) -> str:
    return value.decode("utf-8", "replace") if isinstance(value, bytes) else str(value)


def _consistent_state(f: h5py.File, committed: layout.Committed, path: Path) -> dict:
    """The checkpointed state of a partial file, after checking that its
    committed part is consistent (snapshots in time order at their steps, the
    checkpoint at or after the last of them but before the next recording,
    samples up to it); refuses a file that is not."""
    n, m = committed.snapshots, committed.samples
    slot = f["checkpoint"][committed.slot]

    def refuse(why: str):
        raise RunFileError(f"{path} fails its consistency check ({why}); it cannot be "
                           "resumed: start again with --overwrite")

    try:
        dt = float(f.attrs["dt"])
        t, steps = f["snapshots/t"][:n], f["snapshots/step"][:n]
        if steps[0] != 0 or t[0] != 0 or np.any(np.diff(steps) <= 0) or np.any(np.diff(t) <= 0):
            refuse("snapshot times do not increase from 0")
        if not np.allclose(t, steps * dt, rtol=1e-12, atol=0) or \
                not np.array_equal(f["observables/t"][:n], t):
            refuse("snapshot times do not match their steps")
        at, at_t = int(slot.attrs["step"]), float(slot.attrs["t"])
        if not (steps[-1] <= at < steps[-1] + int(f.attrs["record_steps"])) or \
                not np.isclose(at_t, at * dt, rtol=1e-12, atol=0) or (at == steps[-1]
                                                                     and at_t != t[-1]):
            refuse("the checkpoint is not between the last committed snapshot and the next")
        ts = f["observables/samples/t"][:m]
        if m < 1 or np.any(np.diff(ts) <= 0) or ts[-1] > at_t:
            refuse("the samples are not in time order up to the checkpoint")
        psi = slot["psi"][...]
        last = f["snapshots/psi"][n - 1]
    except WRITE_ERRORS as exc:
        refuse(f"unreadable data: {one_line(exc, 80)}")
    if not (np.all(np.isfinite(psi)) and np.all(np.isfinite(last)) and np.any(last != 0)):
        refuse("the checkpoint or the last snapshot holds unwritten or non-finite values")
    return {"step": int(slot.attrs["step"]), "t": float(slot.attrs["t"]), "psi": psi,
            "raw_absorbed": (float(slot.attrs["absorbed_left"]),
                             float(slot.attrs["absorbed_right"]))}
