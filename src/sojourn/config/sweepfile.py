"""Sweep files: one base scenario, dotted key paths with lists of values, one output folder.

A sweep file (YAML, validated like a scenario, errors as ``file:line: key: why``)::

    base: step.yaml                 # a scenario, relative to the sweep file
    vary:                           # dotted key paths into the scenario → values
      packet.energy: [0.2, 0.4, 0.6]
    pairing: product                # product (default: every combination) | zip
    output: results/step-energies   # a folder, relative to the sweep file

Reading one is bounded before anything is expanded: the text at most
`MAX_TEXT` characters, the data (aliases counted as often as they are used)
at most `MAX_ITEMS` values, the points at most `MAX_POINTS`.
"""
from __future__ import annotations

import difflib
import hashlib
import itertools
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Optional

from .scenario import Scenario, format_path, load, model_at, parse_yaml, read_text, with_changes
from .yamlread import expanded_size
from ..errors import SojournError, SweepError, one_line

SWEEP_KEYS = ("base", "vary", "pairing", "output")
PAIRINGS = ("product", "zip")
MAX_TEXT = 1_000_000          # characters of YAML in a sweep file
MAX_ITEMS = 100_000           # values in its data, every use of an alias counted
MAX_POINTS = 10_000           # points in one sweep
MAX_VALUE = 1_000             # values in one varied value (a scenario value is short)


@dataclass(frozen=True)
class Point:
    """One combination of values: its scenario, or the one-line reason it is invalid."""

    index: int
    values: dict                      # dotted path -> value, in the sweep file's order
    scenario: Optional[Scenario]
    error: Optional[str] = None

    @property
    def name(self) -> str:
        return f"point-{self.index:03d}"

    @property
    def fingerprint(self) -> str:
        """Identifies the point's scenario, so that a changed sweep is noticed."""
        text = self.scenario.text if self.scenario is not None else ""
        return hashlib.sha256(text.encode()).hexdigest()[:16]


@dataclass(frozen=True)
class Sweep:
    """A validated sweep: the base scenario, the varied keys and every point."""

    source: str
    base: Scenario
    keys: tuple
    pairing: str
    output: Path
    points: tuple = field(default_factory=tuple)

    @property
    def units(self) -> dict:
        u = self.base.unit_system
        return {"length": u.length, "energy": u.energy, "time": u.time, "mass": u.mass,
                "system": u.name}

    @property
    def inputs(self) -> set:
        """Every file the sweep reads (resolved): the sweep file, the base
        scenario and the files its terms read (e.g. a table's CSV)."""
        found = {Path(self.source), Path(self.base.source)} if self.base.source else \
            {Path(self.source)}
        for term in self.base.terms:
            name = getattr(term, "file", None)
            if isinstance(name, str):
                found.add(Path(name))
        return {p.resolve() for p in found if str(p) and not str(p).startswith("<")}


def load_sweep(path) -> Sweep:
    """A sweep from its YAML file (paths in it are relative to its folder)."""
    path = Path(path)
    try:
        too_big = path.is_file() and path.stat().st_size > 4 * MAX_TEXT   # UTF-8: ≤ 4 bytes each
    except OSError:
        too_big = False
    if too_big:
        raise SweepError(f"{path}:1: the sweep file is {path.stat().st_size:,} bytes; at most "
                         f"{MAX_TEXT:,} characters are read")
    return loads_sweep(read_text(path, "sweep", SweepError), str(path), path.parent)


def loads_sweep(text: str, source: str = "<sweep>", base_dir: Optional[Path] = None) -> Sweep:
    """A sweep from YAML text: the file is checked, then every point's scenario is
    generated and validated (an invalid point is kept, with its error)."""
    base_dir = Path(base_dir) if base_dir is not None else Path(".")
    if len(text) > MAX_TEXT:
        raise SweepError(f"{source}:1: the sweep file has {len(text):,} characters; at most "
                         f"{MAX_TEXT:,} are read (a sweep file lists values, not data)")
    data, lines = parse_yaml(text, source, SweepError, MAX_ITEMS, "values")

    def fail(key_path: tuple, message: str):
        line = next((lines[key_path[:n]] for n in range(len(key_path), -1, -1)
                     if key_path[:n] in lines), 1)
        raise SweepError(f"{source}:{line}: {format_path(key_path)}: {message}")

    if not isinstance(data, dict):
        raise SweepError(f"{source}:1: a sweep file must be a mapping with the keys "
                         f"{', '.join(SWEEP_KEYS)}")
    for key in data:
        if key not in SWEEP_KEYS:
            close = difflib.get_close_matches(str(key), SWEEP_KEYS, n=1)
            fail((key,), "unknown key" + (f"; did you mean '{close[0]}'?" if close else
                                          f"; valid keys: {', '.join(SWEEP_KEYS)}"))
    for key in ("base", "vary", "output"):
        if key not in data:
            fail((), f"required key '{key}' is missing")
    for key in ("base", "output"):
        if not isinstance(data[key], str) or not data[key].strip():
            fail((key,), "must be a path (text), relative to the sweep file (got "
                         f"{_short(data[key])})")
    pairing = data.get("pairing", "product")
    if pairing not in PAIRINGS:
        fail(("pairing",), f"must be one of {' | '.join(PAIRINGS)} (got {_short(pairing)})")

    base_path = Path(data["base"])
    base_path = base_path if base_path.is_absolute() else base_dir / base_path
    if not base_path.is_file():
        fail(("base",), f"no scenario file at {str(base_path)!r}")
    base = load(base_path)
    base_data, _ = parse_yaml(base.text, base.source)

    vary = data["vary"]
    if not isinstance(vary, dict) or not vary:
        fail(("vary",), "must be a mapping of dotted key paths to lists of values, "
                        "e.g. 'packet.energy: [0.1, 0.2]'")
    for key, values in vary.items():
        if not isinstance(key, str):
            fail(("vary", key), f"a key path must be text like 'packet.energy' (got {_short(key)})")
        problem = _path_problem(base_data, key)
        if problem:
            fail(("vary", key), f"{problem} in the scenario {base.source}")
        if not isinstance(values, list) or not values:
            fail(("vary", key), f"must be a non-empty list of values (got {_short(values)})")
        for i, value in enumerate(values):
            if expanded_size(value, MAX_VALUE) > MAX_VALUE:
                fail(("vary", key, i), f"a value with more than {MAX_VALUE:,} items; a "
                                       "scenario value is a number, a text or a short list")
    keys = tuple(vary)
    if pairing == "zip":
        lengths = {k: len(v) for k, v in vary.items()}
        if len(set(lengths.values())) > 1:
            fail(("pairing",), "zip pairs the i-th values of every key, so the lists need equal "
                               "lengths (got " + ", ".join(f"{k}: {n}" for k, n in lengths.items())
                 + ")")
        count = len(next(iter(vary.values())))
    else:
        count = math.prod(len(v) for v in vary.values())
    if count > MAX_POINTS:
        fail(("vary",), f"makes {count:,} points; at most {MAX_POINTS:,} in one sweep")
    combos = zip(*vary.values()) if pairing == "zip" else itertools.product(*vary.values())

    output = Path(data["output"])
    output = output if output.is_absolute() else base_dir / output
    points = tuple(_make_point(i, dict(zip(keys, combo)), base)
                   for i, combo in enumerate(combos))
    return Sweep(source, base, keys, pairing, output, points)


def _short(value) -> str:
    """A value for a message, never longer than a line."""
    return one_line(repr(value), 60) if not isinstance(value, (dict, list)) else \
        f"a {'mapping' if isinstance(value, dict) else 'list'} of {len(value)} item(s)"


def _path_problem(data: Any, dotted: str) -> Optional[str]:
    """Why a dotted path does not name a value of the scenario (None if it does).

    A path exists if the base file gives it, or if it names an optional key of a
    section the scenario has or may have (e.g. ``evolve.dt`` left to its default)."""
    parts = [int(p) if p.isdigit() else p for p in dotted.split(".")]
    if any(p == "" for p in parts):
        return f"'{dotted}' is not a dotted key path"
    node: Any = data
    for depth, part in enumerate(parts):
        here = ".".join(str(p) for p in parts[:depth + 1])
        if isinstance(node, list):
            if not isinstance(part, int) or part >= len(node):
                return (f"'{here}': {'.'.join(map(str, parts[:depth])) or 'this'} is a list of "
                        f"{len(node)} item(s); use an index 0..{len(node) - 1}")
            node = node[part]
        elif isinstance(node, dict):
            if part in node:
                node = node[part]
                continue
            model = model_at(tuple(parts[:depth + 1]))
            known = list(getattr(model, "model_fields", {})) if model is not None else []
            known = [k for k in known if k not in ("source", "text")]
            if part in known:      # an optional key the base leaves to its default
                node = {}
                continue
            options = [k for k in list(node) + known if isinstance(k, str)]
            close = difflib.get_close_matches(str(part), options, n=1)
            prefix = ".".join(map(str, parts[:depth]))
            hint = f"; did you mean '{prefix + '.' if prefix else ''}{close[0]}'?" if close else ""
            return f"no key '{here}'{hint}"
        else:
            return f"'{'.'.join(map(str, parts[:depth]))}' is a single value, not a section"
    if isinstance(node, (dict, list)) and node:
        return f"'{dotted}' is a whole section; vary one of its values"
    return None


def _make_point(index: int, values: dict, base: Scenario) -> Point:
    name = f"point-{index:03d}"
    try:
        scenario = with_changes(base, {**values, "record.output": f"{name}.h5"})
    except SojournError as exc:
        return Point(index, values, None, one_line(exc))
    return Point(index, values, scenario)
