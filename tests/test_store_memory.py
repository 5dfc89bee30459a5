"""The in-memory twin of a run file: the same reader interface, the same arrays,
and measurable by the same code; the reader's commit counter and scenario cache."""
import json

import h5py
import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import load
from sojourn.measure import measure_delays
from sojourn.store import MemoryRun, RunFile, RunReader, partial_path
from sojourn.workflows import run as execute, run_in_memory
from scenarios import small_step


STEP = small_step({"evolve.duration": 250.0, "record.every": 10.0,
                   "measure.region": [0.0, 20.0]})
# attributes that depend on when and where the run was made
VOLATILE = {"created", "finished", "provenance", "status"}


@pytest.fixture
def pair(write_scenario, tmp_path):
    setup = build(load(write_scenario(STEP)))
    return setup, RunFile(execute(setup, tmp_path / "step.h5")), run_in_memory(setup)


def test_memory_run_reads_exactly_like_the_file(pair):
    setup, disk, memory = pair
    with disk:
        assert isinstance(memory, RunReader) and isinstance(disk, RunReader)
        assert memory.status == disk.status == "complete"
        assert len(memory) == len(disk) == setup.snapshots
        for name in ("x", "V", "absorber", "times"):
            a, b = getattr(disk, name), getattr(memory, name)
            assert a.dtype == b.dtype and np.array_equal(a, b), name
        for i in range(len(disk)):
            a, b = disk.psi(i), memory.psi(i)
            assert a.dtype == b.dtype and np.array_equal(a, b), i
        assert np.array_equal(disk.psi(-1), memory.psi(-1))
        for read in ("observables", "samples"):
            a, b = getattr(disk, read)(), getattr(memory, read)()
            assert a.keys() == b.keys(), read
            for key in a:
                assert a[key].shape == b[key].shape and np.array_equal(a[key], b[key]), key
        da, ma = disk.attrs, memory.attrs
        assert set(da) == set(ma)
        for key in set(da) - VOLATILE:
            assert da[key] == ma[key], key
        assert disk.region == memory.region == (0.0, 20.0)
        assert disk.reference == memory.reference and disk.packet == memory.packet
        assert disk.units == memory.units
        assert [t for t, _ in disk.snapshots()] == [t for t, _ in memory.snapshots()]


def test_measure_accepts_the_memory_run(pair):
    _, disk, memory = pair
    with disk:
        from_disk, from_memory = measure_delays(disk).to_dict(), measure_delays(memory).to_dict()
    measured = from_memory["reflection"]["measured"]
    assert measured and all(m["delay"] is not None for m in measured.values()), measured
    from_disk.pop("file", None), from_memory.pop("file", None)
    assert json.dumps(from_disk, sort_keys=True) == json.dumps(from_memory, sort_keys=True)


def test_an_interrupted_memory_run_says_so(write_scenario):
    setup = build(load(write_scenario(STEP)))

    def stop(done, total):
        if done > total // 2:
            raise KeyboardInterrupt

    recorder = MemoryRun(setup)
    from sojourn.engine.loop import evolve
    with pytest.raises(KeyboardInterrupt):
        evolve(setup, recorder, None, stop)
    assert recorder.status == "interrupted" and 1 < len(recorder) < setup.snapshots
    with pytest.raises(IndexError):
        recorder.psi(len(recorder))


def test_readers_trust_only_the_commit_counter(run_scenario):
    setup, path = run_scenario(STEP)
    with h5py.File(path, "r+") as f:
        f["snapshots"].attrs.modify("committed", np.int64(3))
        slot = next(g for g in f["checkpoint"].values() if g.attrs["snapshots"] == len(f["snapshots/t"]))
        slot.attrs.modify("snapshots", np.int64(3))   # as if the last commit covered 3 rows
        samples = int(slot.attrs["samples"])
    with RunFile(path) as rf:
        assert len(rf) == 3 and len(rf.times) == 3
        assert all(len(v) == 3 for v in rf.observables().values())
        assert len(rf.samples()["t"]) == samples
        with pytest.raises(IndexError):
            rf.psi(3)


def test_the_scenario_is_parsed_once(run_scenario):
    _, path = run_scenario(STEP)
    with RunFile(path) as rf:
        assert rf.scenario() is rf.scenario()
        assert rf.scenario().grid.points == 512
