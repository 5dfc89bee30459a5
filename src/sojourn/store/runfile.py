"""The run file: one self-describing HDF5 file per run (layout in README.md).

The writer works on NAME.h5.partial in HDF5's single-writer/multiple-reader
mode, flushes at every snapshot together with a checkpoint of the full state,
and renames to NAME.h5 when the run is complete. A result is never
overwritten unless asked.
"""
from __future__ import annotations

import datetime as _dt
import fcntl
import json
import os
import platform
import sys
import time
from pathlib import Path
from typing import Optional

import h5py
import numpy as np

from .. import __version__
from ..config.scenario import loads as load_scenario_text
from ..errors import RunFileError, one_line

FORMAT = "sojourn.run"
FORMAT_VERSION = 1
OBSERVABLES = ("norm", "x_mean", "p_mean", "energy", "P_left", "P_right", "P_region",
               "absorbed_left", "absorbed_right")
SAMPLES = ("norm", "P_region", "absorbed_left", "absorbed_right")
COMMIT_SECONDS = 2.0  # the most run time a crash can lose
PSI_BLOCK = 16        # ψ rows the snapshot dataset grows by at a time





def partial_path(path: Path) -> Path:
    return path.with_name(path.name + ".partial")


def lock_path(path: Path) -> Path:
    return path.with_name(path.name + ".lock")


_M32 = 0xFFFFFFFF


def _rot(x: int, k: int) -> int:
    return ((x << k) | (x >> (32 - k))) & _M32


def lookup3(data: bytes, initval: int = 0) -> int:
    """Bob Jenkins' lookup3 hashlittle, the checksum HDF5 puts on its metadata."""
    length = len(data)
    a = b = c = (0xDEADBEEF + length + initval) & _M32
    i = 0
    while length > 12:
        a = (a + int.from_bytes(data[i:i + 4], "little")) & _M32
        b = (b + int.from_bytes(data[i + 4:i + 8], "little")) & _M32
        c = (c + int.from_bytes(data[i + 8:i + 12], "little")) & _M32
        a = ((a - c) & _M32) ^ _rot(c, 4)   # mix
        c = (c + b) & _M32
        b = ((b - a) & _M32) ^ _rot(a, 6)
        a = (a + c) & _M32
        c = ((c - b) & _M32) ^ _rot(b, 8)
        b = (b + a) & _M32
        a = ((a - c) & _M32) ^ _rot(c, 16)
        c = (c + b) & _M32
        b = ((b - a) & _M32) ^ _rot(a, 19)
        a = (a + c) & _M32
        c = ((c - b) & _M32) ^ _rot(b, 4)
        b = (b + a) & _M32
        length -= 12
        i += 12
    if length == 0:
        return c
    tail = data[i:].ljust(12, b"\0")
    a = (a + int.from_bytes(tail[0:4], "little")) & _M32
    b = (b + int.from_bytes(tail[4:8], "little")) & _M32
    c = (c + int.from_bytes(tail[8:12], "little")) & _M32
    c = ((c ^ b) - _rot(b, 14)) & _M32   # final
    a = ((a ^ c) - _rot(c, 11)) & _M32
    b = ((b ^ a) - _rot(a, 25)) & _M32
    c = ((c ^ b) - _rot(b, 16)) & _M32
    a = ((a ^ c) - _rot(c, 4)) & _M32
    b = ((b ^ a) - _rot(a, 14)) & _M32
    c = ((c ^ b) - _rot(b, 24)) & _M32
    return c


def clear_write_flags(path: Path) -> bool:
    """Clear the 'open for writing' flags that a killed SWMR writer leaves in the
    HDF5 superblock (version 2/3 at offset 0), so the file can be reopened to
    resume. The superblock's checksum is verified before and rewritten after;
    anything unexpected leaves the file untouched (returns False)."""
    with open(path, "r+b") as handle:
        head = handle.read(64)
        if head[:8] != b"\x89HDF\r\n\x1a\n" or len(head) < 12 or head[8] not in (2, 3):
            return False
        size = 12 + 4 * head[9] + 4
        if len(head) < size:
            return False
        body, stored = head[:size - 4], int.from_bytes(head[size - 4:size], "little")
        if lookup3(body) != stored:
            return False
        body = body[:11] + b"\0" + body[12:]
        handle.seek(0)
        handle.write(body + lookup3(body).to_bytes(4, "little"))
    return True


class WriteLock:
    """An exclusive lock (fcntl.flock on NAME.h5.lock) held while a run writes
    NAME.h5: a second writer of the same output is refused, not interleaved."""

    def __init__(self, final: Path):
        self.path = lock_path(final)
        while True:
            handle = open(self.path, "a+")
            try:
                fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                handle.close()
                raise RunFileError(f"another run is writing {final} (it holds {self.path}); "
                                   "wait for it to finish, or choose another output with -o") \
                    from None
            try:   # the holder before us may have removed the file: lock the one on disk
                same = os.fstat(handle.fileno()).st_ino == os.stat(self.path).st_ino
            except FileNotFoundError:
                same = False
            if same:
                self.handle = handle
                return
            handle.close()

    def release(self) -> None:
        if self.handle is not None and not self.handle.closed:
            try:
                os.unlink(self.path)
            except FileNotFoundError:
                pass
            self.handle.close()   # closing releases the lock
        self.handle = None


def provenance(backend: str) -> dict:
    import scipy
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


def _resizable(group, name, shape_tail=(), dtype="f8"):
    """An empty dataset that grows along its first axis."""
    rows = max(1, 4096 // max(1, int(np.prod(shape_tail))))
    return group.create_dataset(name, shape=(0, *shape_tail), maxshape=(None, *shape_tail),
                                chunks=(rows, *shape_tail), dtype=dtype)


def _append(dataset, values) -> None:
    values = np.asarray(values)
    if values.ndim < len(dataset.shape):
        values = values[None]
    n = dataset.shape[0]
    dataset.resize(n + len(values), axis=0)
    dataset[n:] = values


class RunWriter:
    """Writes one run. Use `open_new` or `open_resume`, then `snapshot(...)`
    per recording and `finish()` (or `close(status)` on interruption)."""

    def __init__(self, handle: h5py.File, final: Path, lock: Optional[WriteLock] = None):
        self.h5 = handle
        self.lock = lock
        self._failing = False
        self.final = final
        self.partial = Path(handle.filename)
        # dataset handles, looked up once (a lookup costs more than a small write)
        self._snap = {name: handle["snapshots"][name] for name in ("t", "step", "psi")}
        self._obs = {name: handle["observables"][name] for name in ("t",) + OBSERVABLES}
        self._smp = {name: handle["observables/samples"][name] for name in ("t", "flux") + SAMPLES}
        self._ck_psi, self._ck_info = handle["checkpoint/psi"], handle["checkpoint/info"]
        self._pending: list = []      # (step, t, psi copy, observables, samples, raw absorbed)
        self._psi_rows = self._snap["t"].shape[0]   # ψ rows holding snapshots
        self._committed = time.monotonic()

    # -- creation ------------------------------------------------------------------------
    @classmethod
    def open_new(cls, final: Path, setup, backend: str, overwrite: bool = False,
                 compress: bool = False) -> "RunWriter":
        final = Path(final)
        partial = partial_path(final)
        if final.exists() and not overwrite:
            raise RunFileError(f"{final} exists; a result is never overwritten "
                               "(use --overwrite to replace it, or -o for another name)")
        try:
            final.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise RunFileError(f"cannot create the folder {final.parent}: {exc}") from None
        lock = WriteLock(final)
        try:
            if final.exists() and not overwrite:   # finished while we waited for the lock
                raise RunFileError(f"{final} exists; a result is never overwritten "
                                   "(use --overwrite to replace it, or -o for another name)")
            if partial.exists() and not overwrite:
                raise RunFileError(f"{partial} holds an unfinished run; continue it with "
                                   "--resume or start again with --overwrite")
            try:
                handle = h5py.File(partial, "w", libver="latest")
            except (OSError, BlockingIOError) as exc:
                raise RunFileError(f"cannot create {partial}: {one_line(exc, 160)}") from None
            try:
                cls._layout(handle, setup, backend, compress)
                handle.swmr_mode = True
            except Exception:
                handle.close()
                raise
        except BaseException:
            lock.release()
            raise
        return cls(handle, final, lock)

    @staticmethod
    def _layout(f: h5py.File, s, backend: str, compress: bool) -> None:
        sc = s.scenario
        units = sc.unit_system.as_dict()
        f.attrs.update({
            "format": FORMAT, "format_version": FORMAT_VERSION, "sojourn_version": __version__,
            "status": "running", "created": _dt.datetime.now(_dt.timezone.utc).isoformat(),
            "scenario": sc.text or "", "scenario_source": sc.source or "",
            "title": sc.title, "units": json.dumps(units),
            "provenance": json.dumps(provenance(backend)),
            "dt": s.dt, "steps": s.steps, "record_steps": s.record_steps,
            "sample_steps": s.sample_steps, "scheme": sc.evolve.scheme,
            "precision": sc.evolve.precision, "hbar": s.hbar, "mass": s.mass,
            "reference": s.reference, "packet": json.dumps(s.packet.__dict__),
        })
        n = s.grid.points
        grid = f.create_group("grid")
        x = grid.create_dataset("x", data=s.grid.x)
        x.attrs.update({"units": sc.unit_system.length, "dx": s.grid.dx})
        x.make_scale("x")
        pot = f.create_group("potential")
        pot.create_dataset("V", data=s.V).attrs["units"] = sc.unit_system.energy
        pot["V"].dims[0].attach_scale(x)
        pot.attrs["description"] = s.potential.describe()
        if s.W is not None:
            pot.create_dataset("absorber", data=s.W).attrs["units"] = sc.unit_system.energy
            pot["absorber"].dims[0].attach_scale(x)
        snaps = f.create_group("snapshots")
        t = _resizable(snaps, "t")
        t.attrs["units"] = sc.unit_system.time
        t.make_scale("t")
        _resizable(snaps, "step", dtype="i8")
        dtype = "c8" if sc.evolve.precision == "single" else "c16"
        psi = snaps.create_dataset("psi", shape=(0, n), maxshape=(None, n), chunks=(1, n),
                                   dtype=dtype, **({"compression": "gzip", "compression_opts": 1,
                                                    "shuffle": True} if compress else {}))
        psi.dims[0].attach_scale(t)
        psi.dims[1].attach_scale(x)
        obs = f.create_group("observables")
        ot = _resizable(obs, "t")
        ot.attrs["units"] = sc.unit_system.time
        for name in OBSERVABLES:
            _resizable(obs, name)
        obs.attrs["region"] = np.array(s.region if s.region else (np.nan, np.nan))
        obs.attrs["reference"] = s.reference
        samples = obs.create_group("samples")
        _resizable(samples, "t").attrs["units"] = sc.unit_system.time
        for name in SAMPLES:
            _resizable(samples, name)
        nd = max(len(s.detectors), 1)
        _resizable(samples, "flux", (nd,))
        samples.attrs["detectors"] = np.array(s.detectors, dtype=float)
        ck = f.create_group("checkpoint")
        ck.create_dataset("psi", shape=(n,), dtype=dtype)
        # step, t, snapshots written, samples written, raw absorbed left, raw absorbed right
        ck.create_dataset("info", shape=(6,), dtype="f8", data=np.full(6, -1.0))

    # -- resuming ------------------------------------------------------------------------
    @classmethod
    def open_resume(cls, final: Path, scenario_text: str) -> tuple["RunWriter", dict]:
        final = Path(final)
        partial = partial_path(final)
        if not partial.exists():
            raise RunFileError(f"nothing to resume: {partial} does not exist")
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
        except OSError as exc:
            lock.release()
            raise RunFileError(f"cannot reopen {partial} to resume it: {one_line(exc, 160)}") from None
        try:
            if handle.attrs.get("format") != FORMAT:
                raise RunFileError(f"{partial} is not a sojourn run file")
            if (handle.attrs.get("scenario") or "") != (scenario_text or ""):
                raise RunFileError(f"{partial} was started from a different scenario text; "
                                   "it cannot be resumed with this one")
            info = handle["checkpoint/info"][...]
            if info[0] < 0:
                raise RunFileError(f"{partial} holds no checkpoint yet; start again with --overwrite")
            step, t, n_snap, n_samp, raw_l, raw_r = info
            state = {"step": int(step), "t": float(t), "psi": handle["checkpoint/psi"][...],
                     "raw_absorbed": (float(raw_l), float(raw_r))}
            # drop anything written after the checkpoint
            for name in ("t", "step", "psi"):
                handle["snapshots"][name].resize(int(n_snap), axis=0)
            for name in ("t",) + OBSERVABLES:
                handle["observables"][name].resize(int(n_snap), axis=0)
            for name in ("t", "flux") + SAMPLES:
                handle["observables/samples"][name].resize(int(n_samp), axis=0)
            handle.attrs["status"] = "running"
            handle.swmr_mode = True
        except BaseException:
            handle.close()
            lock.release()
            raise
        return cls(handle, final, lock), state

    # -- writing -------------------------------------------------------------------------
    def snapshot(self, step: int, t: float, psi: np.ndarray, observables: dict,
                 samples: dict, raw_absorbed: tuple[float, float]) -> None:
        """Append a snapshot; its observables, the samples since the last one and
        the checkpoint follow at the next commit (at most COMMIT_SECONDS later)."""
        try:
            rows = self._snap["psi"]
            if self._psi_rows >= rows.shape[0]:   # grow in blocks: a resize costs a write
                rows.resize(self._psi_rows + PSI_BLOCK, axis=0)
            rows[self._psi_rows] = psi
            self._psi_rows += 1
        except OSError as exc:
            self._fail(exc)
        self._pending.append((step, t, psi.copy(), observables, samples, raw_absorbed))
        if time.monotonic() - self._committed >= COMMIT_SECONDS:
            self.commit()

    def commit(self) -> None:
        """Write what is pending and the checkpoint, and flush: after this, the
        file on disk is a consistent, resumable run up to the last snapshot."""
        if not self._pending:
            return
        try:
            pending = self._pending
            _append(self._snap["t"], [item[1] for item in pending])
            _append(self._snap["step"], [item[0] for item in pending])
            _append(self._obs["t"], [item[1] for item in pending])
            for name in OBSERVABLES:
                _append(self._obs[name], [item[3][name] for item in pending])
            batches = [item[4] for item in pending if len(item[4]["t"])]
            if batches:
                for name in ("t", "flux") + SAMPLES:
                    _append(self._smp[name], np.concatenate([b[name] for b in batches]))
            step, t, psi, _, _, raw = self._pending[-1]
            self._ck_psi[...] = psi
            self._ck_info[...] = [step, t, self._obs["t"].shape[0], self._smp["t"].shape[0],
                                  raw[0], raw[1]]
            self.h5.flush()
        except OSError as exc:
            self._fail(exc)
        self._pending.clear()
        self._committed = time.monotonic()

    def _fail(self, exc: OSError):
        """A write failed (disk full, ...): keep what can still be written, mark the
        file failed, close it, and say so."""
        if not self._failing:
            self._failing = True
            try:
                self.close("failed")
            except (OSError, RunFileError):
                pass
        raise RunFileError(f"writing {self.partial} failed ({one_line(exc, 160)}); what was written before "
                           "is kept, with status 'failed'") from None

    def close(self, status: str) -> None:
        """Close with a status (interrupted, failed); the .partial file stays."""
        try:
            if self.h5.id.valid:
                try:
                    self.commit()
                    self._trim()
                finally:
                    try:
                        self.h5.attrs["status"] = status
                        self.h5.flush()
                    finally:
                        self.h5.close()
        finally:
            if self.lock is not None:
                self.lock.release()

    def _trim(self) -> None:
        """Drop the unused rows of the last ψ block."""
        self._snap["psi"].resize(self._snap["t"].shape[0], axis=0)

    def finish(self) -> Path:
        """Mark complete, close, and rename NAME.h5.partial → NAME.h5."""
        self.commit()
        self._trim()
        self.h5.attrs["status"] = "complete"
        self.h5.attrs["finished"] = _dt.datetime.now(_dt.timezone.utc).isoformat()
        self.h5.close()
        os.replace(self.partial, self.final)
        if self.lock is not None:
            self.lock.release()
        return self.final


class RunFile:
    """Read access to a run file (complete or partial). Snapshots are read one
    at a time, so files larger than memory can be processed."""

    def __init__(self, path):
        self.path = Path(path)
        if not self.path.exists():
            raise RunFileError(f"{self.path}: no such file")
        if self.path.is_dir():
            raise RunFileError(f"{self.path}: a folder, not a run file")
        # a finished file is opened plainly, so that HDF5 checks its length (a
        # truncated copy is refused here); a .partial one may still be growing (SWMR)
        modes = ({"swmr": True}, {}) if self.path.name.endswith(".partial") else ({},)
        error = None
        for mode in modes:
            try:
                self.h5 = h5py.File(self.path, "r", **mode)
                break
            except OSError as exc:
                error = error or exc
        else:
            kind = "not an HDF5 file" if not h5py.is_hdf5(self.path) else \
                "a damaged or truncated HDF5 file, or one another program is writing"
            raise RunFileError(f"{self.path}: cannot read it as a run file ({kind}: "
                               f"{one_line(error, 160)})")
        attrs = self.h5.attrs
        if attrs.get("format") != FORMAT:
            self.h5.close()
            raise RunFileError(f"{self.path}: an HDF5 file, but not a sojourn run file "
                               "(no format='sojourn.run')")
        version = int(attrs.get("format_version", 0))
        if version > FORMAT_VERSION:
            self.h5.close()
            raise RunFileError(f"{self.path}: run file format version {version} is newer than "
                               f"this sojourn understands ({FORMAT_VERSION}); upgrade sojourn")
        try:
            for name in ("grid/x", "potential/V", "snapshots/t", "snapshots/psi", "observables/t"):
                self.h5[name]
        except KeyError as exc:
            self.h5.close()
            raise RunFileError(f"{self.path}: damaged run file (missing {exc})") from None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self) -> None:
        if self.h5.id.valid:
            self.h5.close()

    @property
    def attrs(self) -> dict:
        return dict(self.h5.attrs)

    @property
    def status(self) -> str:
        return str(self.h5.attrs.get("status", "unknown"))

    @property
    def units(self) -> dict:
        return json.loads(self.h5.attrs["units"])

    @property
    def packet(self) -> dict:
        return json.loads(self.h5.attrs["packet"])

    def scenario(self):
        """The Scenario the run was made from (paths resolve as they did then)."""
        source = str(self.h5.attrs.get("scenario_source") or self.path.with_suffix(".yaml"))
        base = Path(source).parent
        return load_scenario_text(str(self.h5.attrs["scenario"]), source, base)

    @property
    def x(self) -> np.ndarray:
        return self.h5["grid/x"][...]

    @property
    def V(self) -> np.ndarray:
        return self.h5["potential/V"][...]

    @property
    def absorber(self) -> Optional[np.ndarray]:
        return self.h5["potential/absorber"][...] if "absorber" in self.h5["potential"] else None

    @property
    def times(self) -> np.ndarray:
        return self.h5["snapshots/t"][: len(self)]

    def __len__(self) -> int:
        """Snapshots with their observables (a crashed run may hold a few more psi)."""
        return min(self.h5["snapshots/t"].shape[0], self.h5["observables/t"].shape[0])

    def psi(self, index: int) -> np.ndarray:
        return self.h5["snapshots/psi"][index]

    def snapshots(self):
        """Iterate (t, ψ) one snapshot at a time."""
        t = self.h5["snapshots/t"]
        psi = self.h5["snapshots/psi"]
        for i in range(len(self)):
            yield float(t[i]), psi[i]

    def observables(self) -> dict:
        g = self.h5["observables"]
        return {name: g[name][...] for name in ("t",) + OBSERVABLES}

    def samples(self) -> dict:
        g = self.h5["observables/samples"]
        out = {name: g[name][...] for name in ("t", "flux") + SAMPLES}
        out["detectors"] = np.array(g.attrs["detectors"])
        return out

    @property
    def region(self) -> Optional[tuple[float, float]]:
        region = self.h5["observables"].attrs.get("region")
        return None if region is None or np.any(np.isnan(region)) else tuple(map(float, region))

    @property
    def reference(self) -> float:
        return float(self.h5.attrs["reference"])

    def analysis(self) -> Optional[dict]:
        """The saved delay analysis (JSON in /analysis), if any."""
        if "analysis" in self.h5 and "result" in self.h5["analysis"].attrs:
            return json.loads(self.h5["analysis"].attrs["result"])
        return None
