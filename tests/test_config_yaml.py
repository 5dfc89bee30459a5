"""YAML input read as data only: core schema, no explicit tags, size limits,
and every refusal one line naming file and line (exit 2 from the CLI)."""
from __future__ import annotations

import pytest

from sojourn.build import build
from sojourn.cli import main
from sojourn.config.scenario import Scenario, loads, with_changes
from sojourn.errors import ScenarioError

BASE = """\
title: {title}
units: atomic
grid: {{span: [-200.0, 200.0], points: {points}}}
potential:
  - step: {{at: 0.0, height: 1.0}}
packet: {{center: -80.0, width: {width}, energy: 0.5}}
evolve: {{duration: 100.0}}
"""


def scenario_text(title="t", points="1024", width="10.0"):
    return BASE.format(title=title, points=points, width=width)


@pytest.mark.parametrize("title", ["2024-02-30", "2001-13-45", "2024-01-01"])
def test_dates_are_text(title):
    # YAML 1.1 would build datetime objects (and fail on impossible days); a title is text
    assert loads(scenario_text(title=title), "s.yaml").title == title


@pytest.mark.parametrize("change", [dict(points="!!int abc"), dict(width="!!float abc"),
                                    dict(title="!!timestamp nope"), dict(title="!!str 12"),
                                    dict(title="!!python/name:os.system ''")])
def test_explicit_tags_are_refused_in_one_line(change):
    with pytest.raises(ScenarioError, match=r"^s\.yaml:\d+: [\w.\[\]]+: explicit YAML tags") as info:
        loads(scenario_text(**change), "s.yaml")
    assert "\n" not in str(info.value)


def test_a_five_thousand_digit_integer_is_refused():
    with pytest.raises(ScenarioError, match=r"^s\.yaml:3: grid\.points: an integer of more than 400 digits"):
        loads(scenario_text(points="9" * 5000), "s.yaml")


def test_a_lone_surrogate_is_refused():
    with pytest.raises(ScenarioError, match="not valid Unicode"):
        loads(scenario_text(title='"\\ud800"'), "s.yaml")


def test_an_integer_key_in_the_potential_list_is_one_line():
    text = scenario_text().replace("  - step: {at: 0.0, height: 1.0}", "  - 1: {at: 0.0}")
    with pytest.raises(ScenarioError, match=r"^s\.yaml:5: potential\[0\]"):
        loads(text, "s.yaml")


def test_oversized_inputs_are_refused_quickly():
    with pytest.raises(ScenarioError, match="more than 1000000"):
        loads(scenario_text(title="x" * 2_000_000), "s.yaml")
    huge_list = "[" + ", ".join(["1"] * 200_000) + "]"
    with pytest.raises(ScenarioError, match="YAML items"):
        loads(scenario_text(title=huge_list), "s.yaml")


@pytest.mark.parametrize("change", [dict(points="!!int abc"), dict(points="9" * 5000),
                                    dict(title='"\\ud800"')])
def test_the_cli_exits_2_with_one_line(tmp_path, capsys, change):
    path = tmp_path / "s.yaml"
    path.write_text(scenario_text(**change))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_with_changes_keeps_a_default_as_a_default():
    # a scenario built in code and passed through a no-op with_changes used to
    # turn the automatic sampling interval into an explicit sample_steps: 1
    data = dict(title="in code", units="atomic", grid={"span": [-200.0, 200.0], "points": 1024},
                potential=[{"step": {"at": 0.0, "height": 1.0}}],
                packet={"center": -80.0, "width": 10.0, "energy": 0.5},
                evolve={"duration": 100.0})
    scenario = Scenario.model_validate(data)
    same = with_changes(scenario, {})
    assert build(same).sample_steps == build(scenario).sample_steps > 1
    explicit = with_changes(scenario, {"record.sample_steps": 1})
    assert build(explicit).sample_steps == 1


TABLE = """\
units: atomic
grid: {span: [-100.0, 100.0], points: 1024}
potential:
  - step: {at: 0.0, height: 1.0}
  - table: {file: pot.csv}
packet: {center: -50.0, width: 5.0, energy: 0.5}
evolve: {duration: 10.0}
"""


def test_a_bad_table_row_names_line_key_and_row(tmp_path):
    (tmp_path / "pot.csv").write_text("x,V\n0,0\n1,abc\n")
    with pytest.raises(ScenarioError, match=r"s\.yaml:5: potential\[1\]\.table: .*row 3: expected two"):
        loads(TABLE, "s.yaml", tmp_path)


def test_a_huge_table_file_is_refused_before_reading(tmp_path):
    big = tmp_path / "pot.csv"
    with open(big, "wb") as handle:     # a sparse 1 GB file: refused by its size alone
        handle.truncate(1 << 30)
    with pytest.raises(ScenarioError, match=r"s\.yaml:5: potential\[1\]\.table\.file: .* at most 64 MiB"):
        loads(TABLE, "s.yaml", tmp_path)
