"""Faults at the edges of the run file (each reproduced by a test first): a file
size limit reached at the start or in the middle of a run, symlinks and
foreign files at the `.partial` name, pipes given as run files, a read-only
output folder, and resuming only a consistent file."""
from __future__ import annotations

import os
import resource
import stat
import subprocess
import sys

import h5py
import numpy as np
import pytest

from sojourn.build import build
from sojourn.cli import main
from sojourn.config.scenario import load
from sojourn.errors import RunFileError
from sojourn.store import RunFile, folder_lock, lock_path, partial_path
from sojourn.errors import SweepError
from sojourn.workflows import run as execute

# 2048 points, 61 snapshots of 32 KiB each: about 2 MiB of ψ
RUN = """\
title: faults
units: atomic
grid: {span: [-300.0, 300.0], points: 2048}
potential:
  - barrier: {start: 0.0, end: 2.0, height: 0.6}
packet: {center: -100.0, width: 10.0, energy: 0.5}
evolve: {duration: 120.0, dt: 0.02}
absorber: {width: 50.0}
record: {every: 2.0, compress: COMPRESS}
measure: {detectors: [-50.0, 50.0]}
"""


def run_limited(scenario, out, limit, *extra):
    """`python -m sojourn run` in a child whose files may not grow past `limit` bytes."""
    def cap():
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return subprocess.run([sys.executable, "-m", "sojourn", "run", str(scenario), "-q", "-o",
                           str(out), *extra], preexec_fn=cap, capture_output=True, text=True,
                          timeout=300)


def one_error_line(err: str) -> str:
    """The one error line of a command's stderr (warnings about the scenario aside)."""
    lines = [line for line in err.strip().splitlines()
             if line.strip() and not line.startswith("sojourn: warning:")]
    assert len(lines) == 1 and "Traceback" not in err, err
    return lines[0]


def test_a_disk_too_small_is_found_when_the_run_starts(write_scenario, tmp_path):
    path = write_scenario(RUN.replace("COMPRESS", "false"))
    out = tmp_path / "small.h5"
    done = run_limited(path, out, 512 * 1024)       # a quarter of the snapshots' size
    assert done.returncode == 2, (done.returncode, done.stderr)   # not killed by SIGXFSZ
    line = one_error_line(done.stderr)
    assert "cannot allocate" in line and "limit" in line, line
    assert not out.exists() and not partial_path(out).exists() and not lock_path(out).exists()


def test_a_disk_filling_mid_run_stops_it_keeps_the_commit_and_resumes(write_scenario, tmp_path):
    # compressed ψ chunks are allocated small and grow as they are written, so the
    # limit is reached in the middle of the run
    path = write_scenario(RUN.replace("COMPRESS", "true"))
    setup = build(load(path))
    whole = execute(setup, tmp_path / "whole.h5")
    out = tmp_path / "full.h5"
    done = run_limited(path, out, whole.stat().st_size // 2)
    assert done.returncode == 2, (done.returncode, done.stderr)
    line = one_error_line(done.stderr)
    assert "limit" in line and "--resume" in line, line
    partial = partial_path(out)
    with RunFile(partial) as rf:
        kept = len(rf)
        assert 1 <= kept < setup.snapshots
        assert np.allclose(np.diff(rf.times), setup.record_steps * setup.dt)
        assert all(np.all(np.isfinite(psi)) and np.any(psi != 0) for _, psi in rf.snapshots())
    assert not lock_path(out).exists()
    resumed = subprocess.run([sys.executable, "-m", "sojourn", "run", str(path), "-q", "-o",
                              str(out), "--resume"], capture_output=True, text=True, timeout=300)
    assert resumed.returncode == 0, resumed.stderr
    with RunFile(whole) as a, RunFile(out) as b:
        assert b.status == "complete" and len(a) == len(b) == setup.snapshots
        assert np.array_equal(a.times, b.times)
        for i in range(len(a)):
            assert np.abs(a.psi(i) - b.psi(i)).max() < 1e-12, i
        sa, sb = a.samples(), b.samples()
        assert np.array_equal(sa["t"], sb["t"]) and np.allclose(sa["flux"], sb["flux"], atol=1e-12)


def test_a_write_error_of_any_kind_stops_the_run_in_one_line(write_scenario, tmp_path,
                                                             monkeypatch, capsys):
    # h5py reports some failed writes as RuntimeError, not OSError
    path = write_scenario(RUN.replace("COMPRESS", "false"))
    real = h5py.Dataset.__setitem__
    calls = {"n": 0}

    def failing(self, key, value):
        if self.name == "/snapshots/psi":
            calls["n"] += 1
            if calls["n"] == 3:
                raise RuntimeError("Can't write data (file write failed)")
        return real(self, key, value)

    monkeypatch.setattr(h5py.Dataset, "__setitem__", failing)
    out = tmp_path / "broken.h5"
    assert main(["run", str(path), "-q", "-o", str(out)]) == 2
    line = one_error_line(capsys.readouterr().err)
    assert "file write failed" in line
    monkeypatch.setattr(h5py.Dataset, "__setitem__", real)
    with RunFile(partial_path(out)) as rf:
        assert rf.status == "failed" and len(rf) == 2


def _interrupted(path, out):
    setup = build(load(path))

    def stop(done, total):
        if done > total // 3:
            raise KeyboardInterrupt
    with pytest.raises(KeyboardInterrupt):
        execute(setup, out, progress=stop)
    return setup


@pytest.mark.parametrize("damage,why", [
    (lambda f, n: f["snapshots/t"].__setitem__(n - 1, 0.5 * f["snapshots/t"][n - 2]),
     "times"),
    (lambda f, n: f["snapshots/psi"].__setitem__(n - 1, np.zeros(f["snapshots/psi"].shape[1], complex)),
     "unwritten"),
    (lambda f, n: f["snapshots"].attrs.modify("committed", np.int64(f["snapshots/t"].shape[0] + 5)),
     "commit counter"),
])
def test_resume_refuses_an_inconsistent_file(write_scenario, tmp_path, damage, why):
    path = write_scenario(RUN.replace("COMPRESS", "false"))
    out = tmp_path / "cut.h5"
    setup = _interrupted(path, out)
    with h5py.File(partial_path(out), "r+") as f:
        damage(f, int(f["snapshots"].attrs["committed"]))
    with pytest.raises(RunFileError, match=why) as info:
        execute(setup, out, resume=True)
    assert "\n" not in str(info.value)
    assert not lock_path(out).exists()


def test_a_corrupted_psi_is_detected_on_read(run_scenario):
    _, path = run_scenario(RUN.replace("COMPRESS", "false"))
    with RunFile(path) as rf:
        offset = rf.h5["snapshots/psi"].id.get_chunk_info(3).byte_offset
    with open(path, "r+b") as handle:    # flip bytes inside snapshot 3's data
        handle.seek(offset + 1000)
        byte = handle.read(1)
        handle.seek(offset + 1000)
        handle.write(bytes([byte[0] ^ 0xFF]))
    with RunFile(path) as rf:
        rf.psi(2)
        with pytest.raises(RunFileError, match="checksum"):
            rf.psi(3)


# ---------------------------------------------------------------------------------------
# outputs never written through a symlink; foreign files never taken for a partial run


def test_overwrite_never_writes_through_a_symlink_at_the_partial_name(write_scenario, tmp_path,
                                                                      capsys):
    path = write_scenario(RUN.replace("COMPRESS", "false"))
    important = tmp_path / "important.txt"
    important.write_text("precious")
    out = tmp_path / "l2.h5"
    os.symlink(important, partial_path(out))
    assert main(["run", str(path), "-q", "-o", str(out), "--overwrite"]) == 2
    assert "symbolic link" in one_error_line(capsys.readouterr().err)
    assert important.read_text() == "precious" and os.path.islink(partial_path(out))
    assert main(["run", str(path), "-q", "-o", str(out), "--resume"]) == 2
    assert important.read_text() == "precious"


def test_a_foreign_file_at_the_partial_name_is_not_consumed(write_scenario, tmp_path, capsys):
    path = write_scenario(RUN.replace("COMPRESS", "false"))
    out = tmp_path / "X.h5"
    scenario = partial_path(out)
    scenario.write_text(path.read_text())    # a scenario file named X.h5.partial
    assert main(["run", str(path), "-q", "-o", str(out), "--overwrite"]) == 2
    assert "not a sojourn run file" in one_error_line(capsys.readouterr().err)
    assert scenario.read_text() == path.read_text()


def test_a_symlinked_lock_file_is_refused(write_scenario, tmp_path, capsys):
    path = write_scenario(RUN.replace("COMPRESS", "false"))
    target = tmp_path / "target.txt"
    target.write_text("keep")
    out = tmp_path / "r.h5"
    os.symlink(target, lock_path(out))
    assert main(["run", str(path), "-q", "-o", str(out)]) == 2
    assert "symbolic link" in one_error_line(capsys.readouterr().err)
    assert target.read_text() == "keep"


# ---------------------------------------------------------------------------------------
# pipes and read-only folders


def test_a_fifo_is_refused_at_once(tmp_path, capsys):
    fifo = tmp_path / "pipe.h5"
    os.mkfifo(fifo)
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)
    with pytest.raises(RunFileError, match="not a regular file"):
        RunFile(fifo)
    for argv in (["inspect", str(fifo)], ["delay", str(fifo)],
                 ["render", str(fifo), "--figure", str(tmp_path / "f.png")]):
        assert main(argv) == 2
        assert "not a regular file" in one_error_line(capsys.readouterr().err)


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_a_read_only_output_folder_gives_one_line(write_scenario, tmp_path, capsys):
    path = write_scenario(RUN.replace("COMPRESS", "false"))
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o555)
    try:
        assert main(["run", str(path), "-q", "-o", str(folder / "r.h5")]) == 2
        assert "not writable" in one_error_line(capsys.readouterr().err)
        with pytest.raises(SweepError, match="not writable"):
            with folder_lock(folder):
                pass
    finally:
        folder.chmod(0o755)


def test_a_lock_that_cannot_be_created_is_one_line(tmp_path):
    # the same path as a read-only folder, reachable as root too: the lock's folder is a file
    blocker = tmp_path / "file"
    blocker.write_text("")
    with pytest.raises(RunFileError, match="cannot create the lock file") as info:
        from sojourn.store import WriteLock
        WriteLock(blocker / "r.h5")
    assert "\n" not in str(info.value)
    with pytest.raises(SweepError, match="cannot create the lock file"):
        with folder_lock(blocker):
            pass
