"""Fuzzing the scenario loader and the guards: generated and mutated scenario
files either load (and build, or are refused by a guard) or fail with our own
error, in one line that names the file, the line and the key.

The short profile runs always; `pytest -m slow` runs the long one (thousands).
"""
from __future__ import annotations

import copy
import math
import re
from pathlib import Path

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sojourn.build import build
from sojourn.model.potentials import TERMS
from sojourn.config.scenario import Scenario, loads, with_changes
from sojourn.errors import ScenarioError, SojournError

CONFIGS = Path(__file__).resolve().parents[1] / "configs"
DEMO = Path(__file__).resolve().parents[1] / "src" / "sojourn" / "data" / "demo.yaml"

# every term kind once, so that mutations reach each term's keys
ALL_TERMS = """\
title: every term
units: atomic
grid: {span: [-400.0, 400.0], points: 1024}
potential:
  - step: {at: 0.0, height: 0.2}
  - barrier: {start: 10.0, end: 12.0, height: 0.3}
  - well: {start: 20.0, end: 24.0, depth: 0.1}
  - gaussian: {center: 40.0, height: 0.1, width: 2.0}
  - smooth_step: {at: 50.0, height: 0.05, width: 1.0}
  - sech2: {center: 60.0, height: -0.1, width: 3.0}
  - delta_like: {at: 70.0, strength: 0.2}
  - ramp: {start: 80.0, end: 90.0, height: 0.05}
  - expression: "0.05*exp(-((x-100)/5)**2)"
packet: {center: -150.0, width: 15.0, energy: 0.6, direction: right}
evolve: {duration: 300.0, dt: 0.05, scheme: yoshida4, precision: single}
absorber: {width: 60.0, strength: 0.5}
record: {every: 5.0, compress: true, sample_steps: 2}
measure: {reference: 0.0, detectors: [-75.0, 200.0], region: [0.0, 120.0]}
"""

VALID = [t for t in (p.read_text() for p in sorted(CONFIGS.glob("*.yaml")))
         if "grid" in (yaml.safe_load(t) or {})] + [DEMO.read_text(), ALL_TERMS]   # not sweeps
VALID_DATA = [yaml.safe_load(t) for t in VALID]

SHORT = settings(max_examples=60, deadline=None, database=None, derandomize=True,
                 suppress_health_check=list(HealthCheck))
LONG = settings(max_examples=2000, deadline=None, database=None,
                suppress_health_check=list(HealthCheck))

# values that break naive code: wrong types, non-finite floats, huge numbers,
# empty things, unicode, long strings, deep nesting
HOSTILE_VALUES = [
    None, "", "abc", "ｘ", "\u202e\u0000", "é" * 5000, -1, 0, 1, -0.0, 1e-320, 1e308, -1e308,
    math.nan, math.inf, -math.inf, 10 ** 40, -(10 ** 40), 2 ** 63, True, False, [], {}, [1, 2, 3],
    [math.nan, 1.0], {"a": 1}, [[[[[[1.0]]]]]], {"step": {"at": 0}}, "1e999", ".nan",
    "0x1F", "1_000", [-1e308, 1e308], [5.0, -5.0], 3.5, 16, 2 ** 40,
]
TYPO_KEYS = ["titel", "unit", "grdi", "spam", "pionts", "potental", "packt", "centre", "widht",
             "enrgy", "wavenumbr", "evolv", "duratoin", "schem", "absorbr", "recrod", "evry",
             "measur", "detector", "regoin", "ｇｒｉｄ", "__class__", "", "0"]
NUMBER_LITERALS = [".nan", ".NaN", ".inf", "-.inf", "+.inf", "1e999", "1.0e999", "-1.0e400",
                   "0x7fffffffffffffffffff", "1_0", "0o17", "~", "null", "1e-999", "9" * 400]
YAML_NOISE = list(":[]{}-&*!|>#'\"%@`,?\t\n ") + ["!!python/object:os.system", "&a", "*a",
                                                 "<<: *a", "---", "...", "\ufeff", "\x00"]


def _paths(data, prefix=()):
    """Every key path in nested data."""
    yield prefix
    if isinstance(data, dict):
        for key, value in data.items():
            yield from _paths(value, prefix + (key,))
    elif isinstance(data, list):
        for i, value in enumerate(data):
            yield from _paths(value, prefix + (i,))


def _copy(data):
    return copy.deepcopy(data)


def _mutate(data, path, action, value, key):
    """Apply one structural mutation at path; return the new data."""
    data = _copy(data)
    if not path:
        return value if action == "replace" else data
    parent = data
    for part in path[:-1]:
        parent = parent[part]
    last = path[-1]
    if action == "replace":
        parent[last] = value
    elif action == "delete":
        del parent[last]
    elif action == "add" and isinstance(parent, dict):
        parent[key] = value
    elif action == "rename" and isinstance(parent, dict):
        parent[key] = parent.pop(last)
    elif action == "wrap":
        parent[last] = [parent[last]]
    elif action == "nest":
        parent[last] = {str(key) or "k": parent[last]}
    return data


@st.composite
def mutated_data(draw):
    data = draw(st.sampled_from(VALID_DATA))
    for _ in range(draw(st.integers(1, 3))):
        paths = list(_paths(data))
        path = draw(st.sampled_from(paths))
        action = draw(st.sampled_from(["replace", "replace", "delete", "add", "rename", "wrap",
                                       "nest"]))
        value = draw(st.one_of(st.sampled_from(HOSTILE_VALUES),
                               st.floats(allow_nan=True, allow_infinity=True),
                               st.integers(), st.text(max_size=20)))
        key = draw(st.one_of(st.sampled_from(TYPO_KEYS), st.text(max_size=8)))
        data = _mutate(data, path, action, value, key)
    return data


@st.composite
def mutated_text(draw):
    text = draw(st.sampled_from(VALID))
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["number", "noise", "cut", "dup", "swap", "indent"]))
        lines = text.splitlines(keepends=True)
        if kind == "number":
            numbers = list(re.finditer(r"-?\d+\.?\d*", text))
            if numbers:
                m = draw(st.sampled_from(numbers))
                text = text[:m.start()] + draw(st.sampled_from(NUMBER_LITERALS)) + text[m.end():]
        elif kind == "noise":
            at = draw(st.integers(0, len(text)))
            text = text[:at] + draw(st.sampled_from(YAML_NOISE)) + text[at:]
        elif kind == "cut":
            a = draw(st.integers(0, len(text)))
            text = text[:a] + text[a + draw(st.integers(0, 40)):]
        elif kind == "dup" and lines:
            i = draw(st.integers(0, len(lines) - 1))
            text = "".join(lines[:i + 1] + lines[i:])
        elif kind == "swap" and len(lines) > 1:
            i = draw(st.integers(0, len(lines) - 2))
            lines[i], lines[i + 1] = lines[i + 1], lines[i]
            text = "".join(lines)
        elif kind == "indent" and lines:
            i = draw(st.integers(0, len(lines) - 1))
            lines[i] = draw(st.sampled_from(["  ", "\t", " "])) + lines[i]
            text = "".join(lines)
    return text


LOCATED = re.compile(r"^s\.yaml:\d+: ")


def check_outcome(text: str, tmp_path) -> None:
    """The property: a Scenario that builds (or is refused by a finding), or our
    own error in one line that names the file and line (and the key, when the
    text is a YAML mapping)."""
    try:
        scenario = loads(text, "s.yaml", tmp_path)
    except ScenarioError as exc:
        message = str(exc)
        assert "\n" not in message and LOCATED.match(message), message
        assert len(message) < 600, message
        try:
            data = yaml.safe_load(text)
        except Exception:   # noqa: BLE001 - only asking whether it is YAML at all
            return
        if isinstance(data, dict) and "refers to itself" not in message:
            where = message.split(": ", 2)[1]
            keys = {str(k) for k in data} | {repr(k) for k in data} | set(Scenario.model_fields)
            assert where == "(top level)" or any(where.startswith(k) for k in keys), message
        return
    # it loaded: every number is finite, and the guards judge it without crashing
    for value in _numbers(scenario.model_dump(warnings=False)):
        assert math.isfinite(value), value
    if (scenario.grid.total_points or 1 << 15) <= 1 << 14:   # auto: build chooses (unbounded here)
        try:
            setup = build(scenario)
        except SojournError as exc:
            assert "\n" not in str(exc)
            return
        for finding in setup.findings:
            assert finding.level in ("error", "warning", "info") and "\n" not in str(finding)


def _numbers(data):
    if isinstance(data, bool):
        return
    if isinstance(data, float):   # (whole numbers are exact, however large)
        yield data
    elif isinstance(data, dict):
        for v in data.values():
            yield from _numbers(v)
    elif isinstance(data, (list, tuple)):
        for v in data:
            yield from _numbers(v)


def test_the_valid_examples_load_and_build(tmp_path):
    for text in VALID:
        setup = build(loads(text, "s.yaml", tmp_path))
        assert not setup.errors(), setup.errors()


@SHORT
@given(data=mutated_data())
def test_mutated_structure(data, tmp_path_factory):
    text = yaml.safe_dump(data, allow_unicode=True, sort_keys=False)
    check_outcome(text, tmp_path_factory.mktemp("f"))


@SHORT
@given(text=mutated_text())
def test_mutated_text(text, tmp_path_factory):
    check_outcome(text, tmp_path_factory.mktemp("f"))


@SHORT
@given(text=st.text(max_size=300))
def test_arbitrary_text(text, tmp_path_factory):
    check_outcome(text, tmp_path_factory.mktemp("f"))


@pytest.mark.slow
@LONG
@given(data=mutated_data())
def test_mutated_structure_long(data, tmp_path_factory):
    text = yaml.safe_dump(data, allow_unicode=True, sort_keys=False)
    check_outcome(text, tmp_path_factory.mktemp("f"))


@pytest.mark.slow
@LONG
@given(text=mutated_text())
def test_mutated_text_long(text, tmp_path_factory):
    check_outcome(text, tmp_path_factory.mktemp("f"))


@pytest.mark.parametrize("literal", [".nan", ".NaN", ".inf", "-.inf", "1.0e999"])
@pytest.mark.parametrize("key,old", [
    ("mass", "mass: 0.067"), ("packet.width", "width: 20.0"), ("packet.energy", "energy: 0.08"),
    ("packet.center", "center: -250.0"), ("evolve.duration", "duration: auto"),
    ("absorber.width", "width: 80.0"), ("record.every", "every: 10.0"),
    ("measure.reference", "reference: 0.0"), ("potential[0].step.height", "height: 0.25"),
])
def test_non_finite_numbers_are_refused_naming_the_key(key, old, literal):
    text = (CONFIGS / "step.yaml").read_text()
    target = old.split(":")[0] + ": " + literal
    if key == "absorber.width":   # 'width:' occurs twice: the absorber's comes second
        head, tail = text.rsplit(old, 1)
        text = head + target + tail
    else:
        text = text.replace(old, target, 1)
    with pytest.raises(ScenarioError, match=re.escape(key) + r": must be a finite number"):
        loads(text, "s.yaml")


@pytest.mark.parametrize("old,new,key", [
    ("span: [-700.0, 300.0]", "span: [-700.0, .inf]", "grid.span"),
    ("span: [-700.0, 300.0]", "span: [-1.0e308, 1.0e308]", "grid.span"),
    ("detectors: [-125.0]", "detectors: [.nan]", "measure.detectors[0]"),
])
def test_non_finite_lists_are_refused(old, new, key):
    text = (CONFIGS / "step.yaml").read_text().replace(old, new)
    with pytest.raises(ScenarioError, match=re.escape(key)):
        loads(text, "s.yaml")


def test_self_referring_and_exponential_aliases_are_cheap():
    with pytest.raises(ScenarioError, match="refers to itself"):
        loads("a: &a [*a]\n", "s.yaml")
    # "billion laughs": 10 levels of ten-fold aliases would be 10^10 items if expanded
    levels = ["&l0 [1, 1, 1, 1, 1, 1, 1, 1, 1, 1]"]
    for i in range(1, 11):
        levels.append(f"&l{i} [" + ", ".join([f"*l{i - 1}"] * 10) + "]")
    text = "units: atomic\ntitle: [" + ", ".join(levels) + "]\n"
    with pytest.raises(ScenarioError, match="s.yaml:1: the file expands to more than") as info:
        loads(text, "s.yaml")
    assert len(str(info.value)) < 300


def test_a_key_given_twice_is_refused():
    text = (CONFIGS / "step.yaml").read_text().replace("  energy: 0.08", "  energy: 0.08\n  energy: 0.5")
    with pytest.raises(ScenarioError, match=r"s.yaml:\d+: packet.energy: key given twice"):
        loads(text, "s.yaml")


def test_code_tags_are_refused_without_running(tmp_path):
    marker = tmp_path / "ran"
    text = f"!!python/object/apply:os.system ['touch {marker}']\n"
    with pytest.raises(ScenarioError, match="explicit YAML tags"):
        loads(text, "s.yaml")
    assert not marker.exists()


@pytest.mark.parametrize("change", [
    {"grid.points": 2 ** 40}, {"packet.width": math.nan}, {"grid.span": [1.0, -1.0]},
    {"packet.energy": "fast"}, {"potential.0.step.height": math.inf}, {"evolve.scheme": "euler"},
])
def test_with_changes_validates_again(change):
    base = loads((CONFIGS / "step.yaml").read_text(), "s.yaml")
    key = next(iter(change))
    try:
        changed = with_changes(base, change)
    except ScenarioError as exc:
        assert "\n" not in str(exc)
        return
    assert key == "grid.points" and changed.grid.points == 2 ** 40   # refused later, by build


@pytest.mark.parametrize("old,new", [("width: 20.0", "width: 1.0e+300"),
                                     ("width: 20.0", "width: 1.0e-300"),
                                     ("energy: 0.5", "energy: 1.0e+300"),
                                     ("mass: 1.0", "mass: 1.0e-300")])
def test_extreme_but_finite_numbers_are_judged_without_crashing(old, new):
    # found by the long profile: products of such numbers overflowed inside build
    text = (CONFIGS / "barrier.yaml").read_text()
    text = text.replace(old, new) if old in text else text + new + "\n"
    check_outcome(text, CONFIGS)
