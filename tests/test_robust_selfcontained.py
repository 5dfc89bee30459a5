"""A run file describes itself: a table's data is stored in it and read from
there (editing the CSV afterwards changes nothing a later command reports), a
run is never resumed on a changed table, and a run forced past its guards says
so in every later command."""
from __future__ import annotations

import json

import pytest

from sojourn import cli
from sojourn.build import build
from sojourn.config.scenario import load
from sojourn.store import RunFile, partial_path
from sojourn.workflows import run as execute

TABLE = """\
units: atomic
grid: {span: [-300.0, 100.0], points: 2048}
potential:
  - table: {file: pot.csv}
packet: {center: -120.0, width: 15.0, energy: 0.5}
evolve: {duration: 160.0, dt: 0.02}
record: {every: 20.0}
measure: {detectors: [-60.0], reference: 0.0}
"""
STEP = "x,V\n-1000,0\n0,0\n1,1\n1000,1\n"
HIGHER = "x,V\n-1000,0\n0,0\n1,3\n1000,3\n"


def delay_json(path, capsys):
    capsys.readouterr()
    assert cli.main(["delay", str(path), "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def run_then_edit(tmp_path):
    (tmp_path / "pot.csv").write_text(STEP)
    (tmp_path / "s.yaml").write_text(TABLE)
    out = tmp_path / "s.h5"
    assert cli.main(["run", str(tmp_path / "s.yaml"), "-q", "-o", str(out)]) == 0
    return out


def test_editing_the_table_after_a_run_changes_nothing_read_from_it(tmp_path):
    out = run_then_edit(tmp_path)
    with RunFile(out) as rf:
        before = rf.scenario().build_potential().on_grid(rf.x, float(rf.x[1] - rf.x[0]))
    (tmp_path / "pot.csv").write_text(HIGHER)   # a step three times as high
    with RunFile(out) as rf:
        stored = rf.scenario().terms[0]
        assert stored.levels() == (0.0, 1.0)   # the run's potential, not the file's now
        assert (rf.scenario().build_potential().on_grid(rf.x, float(rf.x[1] - rf.x[0])) == before).all()
        assert rf.attrs["table_digests"] == json.dumps([stored.digest]) and stored.digest
    # the check is not vacuous: a fresh scenario read now sees the higher step
    assert load(tmp_path / "s.yaml").terms[0].levels() == (0.0, 3.0)


def test_editing_the_table_after_a_run_changes_no_delay_prediction(tmp_path, capsys):
    out = run_then_edit(tmp_path)
    before = delay_json(out, capsys)
    predicted = [m["predicted"] for ch in ("reflection", "transmission") if before.get(ch)
                 for m in before[ch]["measured"].values()]
    assert predicted and all(v is not None for v in predicted)   # the comparison is not vacuous
    (tmp_path / "pot.csv").write_text(HIGHER)
    assert delay_json(out, capsys) == before


def test_resume_refuses_a_table_that_changed_during_the_run(tmp_path, capsys):
    (tmp_path / "pot.csv").write_text(STEP)
    (tmp_path / "s.yaml").write_text(TABLE)
    out = tmp_path / "s.h5"
    calls = {"n": 0}

    def stop():
        calls["n"] += 1
        return calls["n"] > 3

    with pytest.raises(KeyboardInterrupt):
        execute(build(load(tmp_path / "s.yaml")), out, stop=stop)
    assert partial_path(out).exists()
    (tmp_path / "pot.csv").write_text(HIGHER)
    capsys.readouterr()
    assert cli.main(["run", str(tmp_path / "s.yaml"), "-q", "-o", str(out), "--resume"]) == 2
    errors = [line for line in capsys.readouterr().err.splitlines() if "error" in line]
    assert len(errors) == 1 and "table file whose content has changed" in errors[0], errors
    # the file put back as it was: the resume goes through to a complete run
    (tmp_path / "pot.csv").write_text(STEP)
    assert cli.main(["run", str(tmp_path / "s.yaml"), "-q", "-o", str(out), "--resume"]) == 0
    with RunFile(out) as rf:
        assert rf.status == "complete"


FORCED = """\
units: atomic
grid: {span: [-300.0, 100.0], points: 2048}
potential:
  - step: {at: 0.0, height: 1.0}
packet: {center: -120.0, width: 15.0, energy: 0.5}
evolve: {duration: 40.0, dt: 0.3}
record: {every: 20.0}
measure: {detectors: [-60.0], reference: 0.0}
"""


def test_a_forced_run_is_flagged_by_every_later_command(write_scenario, tmp_path, capsys):
    path = write_scenario(FORCED)
    out = tmp_path / "f.h5"
    assert cli.main(["run", str(path), "-q", "-o", str(out)]) == 2   # past the time-step limit
    assert cli.main(["run", str(path), "-q", "-o", str(out), "--force"]) == 0
    with RunFile(out) as rf:
        assert "evolve.dt" in rf.attrs["forced"]
    for argv in (["inspect", str(out)], ["delay", str(out)],
                 ["render", str(out), "--figure", str(tmp_path / "f.png")]):
        capsys.readouterr()
        cli.main(argv)
        err = capsys.readouterr().err
        flagged = [line for line in err.splitlines() if "this run was forced past:" in line]
        assert len(flagged) == 1 and "evolve.dt" in flagged[0], (argv, err)
    # an ordinary run is not flagged
    ok = tmp_path / "ok.h5"
    assert cli.main(["run", str(write_scenario(FORCED.replace("dt: 0.3", "dt: 0.02"), "ok.yaml")),
                     "-q", "-o", str(ok)]) == 0
    capsys.readouterr()
    cli.main(["inspect", str(ok)])
    assert "forced" not in capsys.readouterr().err
