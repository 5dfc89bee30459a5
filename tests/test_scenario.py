"""Scenario loading: every error names file, line, key path and what was expected."""
import pytest

from sojourn.config.scenario import load, loads, with_changes
from sojourn.errors import ScenarioError

GOOD = """\
title: test step
units: atomic
grid:
  span: [-600.0, 600.0]
  points: 2048
potential:
  - step: {at: 0.0, height: 1.0}
packet:
  center: -200.0
  width: 20.0
  energy: 0.5
evolve:
  duration: 100.0
  dt: 0.02
"""


def error_for(text, source="s.yaml"):
    with pytest.raises(ScenarioError) as info:
        loads(text, source)
    message = str(info.value)
    assert "\n" not in message, "errors are one line"
    return message


def test_good_scenario_loads():
    s = loads(GOOD, "s.yaml")
    assert s.grid.points == 2048 and s.terms[0].height == 1.0
    assert s.hbar == 1.0 and s.particle_mass == 1.0


@pytest.mark.parametrize("old,new,expected", [
    ("width: 20.0", "width: -3", "s.yaml:10: packet.width: must be > 0"),
    ("width: 20.0", "widht: 20.0", "s.yaml:10: packet.widht: unknown key; did you mean 'width'?"),
    ("- step:", "- stepp:", "s.yaml:7: potential[0]: unknown potential term 'stepp'; did you mean 'step'?"),
    ("height: 1.0", "height: high", "s.yaml:7: potential[0].step.height: must be a number (got 'high')"),
    ("units: atomic", "units: si", "s.yaml:2: units: must be one of"),
    ("points: 2048", "points: 20.5", "s.yaml:5: grid.points: must be a whole number"),
    ("points: 2048", "points: 4", "s.yaml:5: grid.points: must be >= 16"),
    ("span: [-600.0, 600.0]", "span: [600, -600]", "s.yaml:4: grid.span: right end must exceed left end"),
    ("  energy: 0.5", "  energy: 0.5\n  wavenumber: 1.0", "packet: give exactly one of energy or wavenumber"),
    ("  duration: 100.0\n", "", "evolve.duration: required key is missing"),
    ("duration: 100.0", "duration: soon",
     "s.yaml:13: evolve.duration: must be a time (a number > 0) or 'auto' (got 'soon')"),
    ("  dt: 0.02", "  dt: 0.02\n  scheme: euler", "s.yaml:15: evolve.scheme: must be one of"),
    ("- step: {at: 0.0, height: 1.0}", "- barrier: {start: 2, end: 1, height: 1}",
     "potential[0].barrier.end: must be greater than start"),
    ("- step: {at: 0.0, height: 1.0}", "- 3", "potential[0]: each potential term is a one-key mapping"),
    ("- step: {at: 0.0, height: 1.0}", "- expression: \"x.__class__\"", "potential[0].expression: "),
    ("grid:", "gird:", "s.yaml:3: gird: unknown key; did you mean 'grid'?"),
])
def test_error_paths(old, new, expected):
    text = GOOD.replace(old, new)
    assert text != GOOD
    assert error_for(text).startswith(expected) or expected in error_for(text)


def test_yaml_syntax_error_gives_its_line():
    message = error_for(GOOD.replace("points: 2048", "points: [2048"))
    assert message.startswith("s.yaml:") and "not valid YAML" in message


def test_top_level_must_be_mapping():
    assert "must be a mapping" in error_for("- 1\n- 2\n")


def test_yaml_tags_cannot_construct_objects():
    # the safe loader refuses Python object tags: nothing a scenario says can run code
    message = error_for("!!python/object/apply:os.system ['echo hi']\n")
    assert message.startswith("s.yaml:1:") and "explicit YAML tags" in message


def test_missing_file(tmp_path):
    with pytest.raises(ScenarioError, match="cannot read the scenario file"):
        load(tmp_path / "nope.yaml")


def test_table_path_resolves_against_scenario_folder(tmp_path):
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "profile.csv").write_text("x,V\n-10,0\n0,1\n10,0\n")
    text = GOOD.replace("- step: {at: 0.0, height: 1.0}", "- table: {file: profile.csv}")
    path = tmp_path / "sub" / "s.yaml"
    path.write_text(text)
    s = load(path)
    assert s.terms[0].point([0.0])[0] == pytest.approx(1.0)


def test_table_with_nan_is_refused(tmp_path):
    (tmp_path / "bad.csv").write_text("x,V\n-10,0\n0,nan\n10,0\n")
    path = tmp_path / "s.yaml"
    path.write_text(GOOD.replace("- step: {at: 0.0, height: 1.0}", "- table: {file: bad.csv}"))
    with pytest.raises(ScenarioError, match="not finite"):
        load(path)


def test_missing_table_file_names_key(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(GOOD.replace("- step: {at: 0.0, height: 1.0}", "- table: {file: none.csv}"))
    with pytest.raises(ScenarioError, match=r"s.yaml:7: potential\[0\].table.file: no such file"):
        load(path)


def test_with_changes_validates_again():
    s = loads(GOOD, "s.yaml")
    assert with_changes(s, {"packet.energy": 0.2}).packet.energy == 0.2
    assert with_changes(s, {"potential.0.step.height": 2.0}).terms[0].height == 2.0
    with pytest.raises(ScenarioError, match="packet.energy: must be > 0"):
        with_changes(s, {"packet.energy": -1.0})


@pytest.mark.parametrize("key", ["text", "source"])
def test_loader_fields_are_not_scenario_keys(key):
    # the loader fills these in itself; a scenario that sets them is refused, not overridden
    assert f"s.yaml:1: {key}: unknown key" in error_for(f"{key}: something\n" + GOOD)
