"""Fuzzing the command line and the sweep file: any argument list ends with
exit code 0 or 2 (never 1, an unexpected exception) and no traceback; any
mutated sweep file loads or fails with our own error in one line."""
from __future__ import annotations

import math

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sojourn.cli import main
from sojourn.errors import ScenarioError
from scenarios import tiny_step


SHORT = settings(max_examples=80, deadline=None, database=None, derandomize=True,
                 suppress_health_check=list(HealthCheck))
LONG = settings(max_examples=1500, deadline=None, database=None,
                suppress_health_check=list(HealthCheck))

TINY = tiny_step({"title": "tiny", "grid.points": 512, "packet.width": 8.0,
                  "evolve.duration": 10.0, "measure": None})


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cli")
    scenario = folder / "tiny.yaml"
    scenario.write_text(TINY)
    bad = folder / "bad.yaml"
    bad.write_text(TINY.replace("width: 8.0", "width: .nan"))
    run = folder / "tiny.h5"
    assert main(["run", str(scenario), "-q", "-o", str(run)]) == 0
    junk = folder / "junk.h5"
    junk.write_bytes(b"\x89HDF\r\n\x1a\n" + b"\0" * 100)
    sweep = folder / "sweep.yaml"
    sweep.write_text(f"base: tiny.yaml\nvary:\n  packet.energy: [0.4, 0.6]\noutput: swept\n")
    return {"scenario": scenario, "bad": bad, "run": run, "junk": junk, "sweep": sweep,
            "folder": folder}


VERBS = ["run", "check", "theory", "delay", "inspect", "render", "sweep", "bench", "nonsense", ""]
OPTIONS = ["-o", "--output", "--overwrite", "--resume", "--force", "-q", "--json", "--csv",
           "--energies", "--plot", "--figure", "--size", "--fps", "--style", "--xlim",
           "--curves", "--log", "--dpi", "--workers", "--scheduler", "--save", "--verify",
           "--reference-run", "--debugx", "-x", "--"]
VALUES = ["0", "-1", "nan", "inf", "1e999", "0:1:0", "1:0:5", "a:b:c", "-1:2:3", "0.1:0.9:5",
          "0.1:0.9:100000000000", "10x10", "0x0", "99999x99999", "abc", "density,bogus",
          "5:-5", "nan:1", "", " ", "é", "\x00", "talk-dark", "out.xyz", "out.png", "out.gif"]


@st.composite
def command_lines(draw, files):
    verb = draw(st.sampled_from(VERBS))
    target = draw(st.sampled_from(["scenario", "bad", "run", "junk", "sweep", "missing",
                                   "folder", "text"]))
    path = {"missing": str(files["folder"] / "absent.yaml"),
            "text": draw(st.text(max_size=10))}.get(target)
    path = str(files[target]) if path is None else path
    argv = [verb, path] if verb else [path]
    for _ in range(draw(st.integers(0, 4))):
        argv.append(draw(st.sampled_from(OPTIONS)))
        if draw(st.booleans()):
            value = draw(st.sampled_from(VALUES))
            if value.startswith("out."):
                value = str(files["folder"] / value)
            argv.append(value)
    return argv


# verbs that would start long work even with good arguments are left out of the
# generated lines where they could (sweep runs processes; run writes; render encodes)
def _harmless(argv) -> bool:
    if argv and argv[0] == "bench":
        return False
    if argv and argv[0] == "sweep" and "--help" not in argv:
        return False
    return True


def check_command(argv, capsys, files) -> None:
    if not _harmless(argv):
        return
    if argv[:1] == ["run"]:   # a run, if it happens, writes into the test folder only
        argv = argv + ["-o", str(files["folder"] / "fuzz-run.h5"), "--overwrite"]
    if argv[:1] == ["render"]:
        argv = argv + ["--size", "64x48"]   # keep accidental movies tiny
    try:
        code = main(argv)
    except SystemExit as exc:   # --help
        code = exc.code
    err = capsys.readouterr().err
    assert code in (0, 2), (argv, err)
    assert "Traceback" not in err, (argv, err)


def test_command_lines(files, capsys):
    @SHORT
    @given(argv=command_lines(files))
    def inner(argv):
        check_command(argv, capsys, files)
    inner()


@pytest.mark.slow
def test_command_lines_long(files, capsys):
    @LONG
    @given(argv=command_lines(files))
    def inner(argv):
        check_command(argv, capsys, files)
    inner()


SWEEP_VALUES = [None, "", "x", [], {}, [1, 2], [math.nan], [math.inf], "product", "zip",
                "diagonal", {"packet.energy": []}, {"packet.energy": [0.3, math.nan]},
                {"packet.nope": [1]}, {"": [1]}, {"grid.points": [16, 2 ** 40]},
                {"potential.7.step.height": [1.0]}, {"packet.energy": "0.3"}, 10 ** 30,
                "../../../etc", "/", "tiny.yaml", "absent.yaml", {"a": {"b": 1}}]


@st.composite
def sweep_texts(draw):
    data = {"base": "tiny.yaml", "vary": {"packet.energy": [0.4, 0.6]}, "pairing": "product",
            "output": "swept"}
    for _ in range(draw(st.integers(1, 3))):
        key = draw(st.sampled_from(list(data) + ["bsae", "varry", "extra"]))
        action = draw(st.sampled_from(["replace", "delete"]))
        if action == "delete":
            data.pop(key, None)
        else:
            data[key] = draw(st.one_of(st.sampled_from(SWEEP_VALUES), st.floats(),
                                       st.text(max_size=8)))
    return yaml.safe_dump(data, allow_unicode=True)


def check_sweep(text, folder) -> None:
    from sojourn.sweep import loads_sweep
    try:
        sweep = loads_sweep(text, "w.yaml", folder)
    except ScenarioError as exc:
        assert "\n" not in str(exc) and str(exc).startswith(("w.yaml:", str(folder))), str(exc)
        return
    for point in sweep.points:   # an invalid point carries its one-line reason
        assert point.scenario is not None or (point.error and "\n" not in point.error)


def test_sweep_files(files):
    @SHORT
    @given(text=sweep_texts())
    def inner(text):
        check_sweep(text, files["folder"])
    inner()


@pytest.mark.slow
def test_sweep_files_long(files):
    @LONG
    @given(text=sweep_texts())
    def inner(text):
        check_sweep(text, files["folder"])
    inner()
