"""Scenario files: YAML (safe loader only) → a validated, immutable Scenario.

Every error is a ScenarioError whose message names the file, the line, the key
path and what was expected, e.g.
``step.yaml:12: packet.width: must be > 0 (got -3)``.
"""
from __future__ import annotations

import difflib
import functools
import reprlib
from pathlib import Path
from typing import Annotated, Any, Literal, Optional, Union

import yaml
from pydantic import (BaseModel, BeforeValidator, Discriminator, Field, Tag, ValidationError,
                      create_model)

from ..model import potentials as pot
from ..model.units import UnitSystem, get as get_units
from ..errors import ScenarioError
from .dimensions import dimension_problem
from .specs import (AbsorberSpec, EvolveSpec, GridSpec, LarmorSpec, MeasureSpec, PacketSpec,
                    RecordSpec, _Strict)
from .yamlread import format_path, parse_yaml, read_text



def _term_kind(value: Any) -> Optional[str]:
    if isinstance(value, BaseModel):   # serialising: the item model's one field is its kind
        return next(iter(type(value).model_fields))
    if isinstance(value, dict) and len(value) == 1:
        key = next(iter(value))
        return key if key in pot.TERMS else None
    return None


def _formula_to_term(value):
    return {"formula": value} if isinstance(value, str) else value


def _item_model(kind: str, cls: type[pot.Term]):
    """A one-key mapping {kind: parameters}; an expression may be a bare formula."""
    field = Annotated[cls, BeforeValidator(_formula_to_term)] if kind == "expression" else cls
    model = create_model(f"{cls.__name__}Item", __base__=_Strict, **{kind: (field, ...)})
    return Annotated[model, Tag(kind)]


TermItem = Annotated[Union[tuple(_item_model(k, c) for k, c in pot.TERMS.items())],
                     Discriminator(_term_kind)]


class Scenario(_Strict):
    """A validated scenario. Numbers are in the scenario's own units."""

    title: str = "untitled scenario"
    units: Literal["lab", "atomic"] = "atomic"
    mass: float = Field(default=1.0, gt=0)
    grid: GridSpec
    potential: list[TermItem] = []
    packet: PacketSpec
    evolve: EvolveSpec
    absorber: Optional[AbsorberSpec] = None
    record: RecordSpec = RecordSpec()
    measure: MeasureSpec = MeasureSpec()
    larmor: Optional[LarmorSpec] = None

    # Filled in by load(): where it came from, for messages and relative paths.
    source: Optional[str] = Field(default=None, exclude=True)
    text: Optional[str] = Field(default=None, exclude=True)

    @property
    def unit_system(self) -> UnitSystem:
        return get_units(self.units)

    @property
    def hbar(self) -> float:
        return self.unit_system.hbar

    @property
    def particle_mass(self) -> float:
        """The mass in the scenario's units (energy·time²/length²)."""
        return self.mass * self.unit_system.electron_mass

    @property
    def terms(self) -> list[pot.Term]:
        return [getattr(item, next(iter(type(item).model_fields))) for item in self.potential]

    def build_potential(self) -> pot.Potential:
        """The potential along x (in the plane: the terms that depend on x alone;
        a shape or a formula in y makes it `Potential.along_x` False). With
        grid.points: auto it samples at the potential's own default until build
        has chosen the points."""
        return pot.Potential(self.terms, mass=self.particle_mass, span=self.grid.x_span,
                             spacing=None if self.grid.points == "auto" else self.grid.dx / 4)

    @property
    def dimensions(self) -> int:
        """1 on a line, 2 in the plane (the shape of `grid` decides)."""
        return self.grid.dimensions

    def line_of(self, dotted: str) -> Optional[int]:
        """The line of a dotted key (e.g. 'packet.width') in the scenario's text, if known."""
        if not self.text or not dotted:
            return None
        lines = _key_lines(self.text, self.source or "<scenario>")
        loc = tuple(int(p) if p.isdigit() else p for p in dotted.split("."))
        for n in range(len(loc), 0, -1):
            if loc[:n] in lines:
                return lines[loc[:n]]
        return None

    @property
    def name(self) -> str:
        return Path(self.source).stem if self.source else "scenario"


@functools.lru_cache(maxsize=32)
def _key_lines(text: str, source: str) -> dict:
    return parse_yaml(text, source)[1]


def _clean_loc(loc: tuple, data: Any) -> tuple:
    """Drop pydantic's union tags and wrapper names so that loc follows the YAML."""
    out, node = [], data
    parts = list(loc)
    i = 0
    while i < len(parts):
        part = parts[i]
        if isinstance(node, dict) and part in node:
            out.append(part)
            node = node[part]
        elif isinstance(node, list) and isinstance(part, int) and part < len(node):
            out.append(part)
            node = node[part]
        elif isinstance(node, (dict, list)) or node is None:
            # a tag or model name pydantic inserted, or a key that is missing
            if not (isinstance(part, str) and (part in pot.TERMS or part[:1].isupper()
                                               or part in ("str", "function-after"))):
                out.append(part)
                node = None
        i += 1
    return tuple(out)


def _line_for(loc: tuple, lines: dict) -> int:
    for n in range(len(loc), -1, -1):
        if loc[:n] in lines:
            return lines[loc[:n]]
    return 1


def model_at(loc: tuple):
    """The pydantic model class that owns the last key of loc (for suggestions)."""
    model: Any = Scenario
    for part in loc[:-1]:
        if isinstance(part, int) or model is None:
            continue
        if model is Scenario and part == "potential":
            model = "potential"
            continue
        if model == "potential":
            model = pot.TERMS.get(part)
            continue
        field = model.model_fields.get(part)
        if field is None:
            return None
        ann = field.annotation
        model = next((a for a in getattr(ann, "__args__", (ann,))
                      if isinstance(a, type) and issubclass(a, BaseModel)), None)
    return model


_REPR = reprlib.Repr()
_REPR.maxstring, _REPR.maxother, _REPR.maxlevel, _REPR.maxlist, _REPR.maxdict = 60, 60, 2, 4, 4


def _short(value) -> str:
    """A value as the message shows it: a string quoted, anything long cut short."""
    return _REPR.repr(value)


def _describe(error: dict, loc: tuple) -> str:
    kind, ctx = error["type"], error.get("ctx") or {}
    got = error.get("input")
    shown = _short(got)
    if kind == "extra_forbidden":
        model = model_at(loc)
        valid = list(model.model_fields) if model is not None else []
        valid = [v for v in valid if v not in ("source", "text")]
        close = difflib.get_close_matches(str(loc[-1]), valid, n=1)
        hint = f"; did you mean '{close[0]}'?" if close else (
            f"; valid keys: {', '.join(valid)}" if valid else "")
        return f"unknown key{hint}"
    if kind == "missing":
        return "required key is missing"
    if kind == "union_tag_invalid" or kind == "union_tag_not_found":
        names = ", ".join(pot.TERMS)
        if isinstance(got, dict) and len(got) == 1:
            close = difflib.get_close_matches(str(next(iter(got))), list(pot.TERMS), n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            return f"unknown potential term {_short(next(iter(got)))}{hint} (known: {names})"
        return f"each potential term is a one-key mapping like 'step: {{...}}' (known: {names})"
    if kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
        op = {"greater_than": ">", "greater_than_equal": ">=", "less_than": "<",
              "less_than_equal": "<="}[kind]
        bound = next(iter(ctx.values()), "")
        return f"must be {op} {bound} (got {shown})"
    if kind == "literal_error":
        return f"must be one of {ctx.get('expected', '')} (got {shown})"
    if kind == "finite_number":
        return f"must be a finite number (got {shown})"
    if kind in ("float_parsing", "float_type", "int_parsing", "int_type", "int_from_float"):
        what = "a whole number" if kind.startswith("int") else "a number"
        return f"must be {what} (got {shown})"
    if kind in ("model_type", "model_attributes_type", "dict_type"):
        return f"must be a mapping of keys (got {shown})"
    if kind in ("list_type", "tuple_type"):
        return f"must be a list (got {shown})"
    if kind in ("too_short", "too_long"):
        return f"wrong number of items (got {shown})"
    if kind == "string_type":
        return f"must be text (got {shown})"
    if kind == "bool_type" or kind == "bool_parsing":
        return f"must be true or false (got {shown})"
    message = error.get("msg", "invalid value")
    return message.removeprefix("Value error, ").removeprefix("Assertion failed, ")


def validate(data: Any, source: str = "<scenario>", lines: Optional[dict] = None,
             base_dir: Optional[Path] = None, text: Optional[str] = None) -> Scenario:
    """Plain data → Scenario, or a ScenarioError naming file, line and key."""
    lines = lines or {}
    if not isinstance(data, dict):
        raise ScenarioError(f"{source}:1: a scenario must be a mapping of keys "
                            f"(title, units, grid, potential, packet, evolve, ...)")
    for own in ("source", "text"):   # filled in by the loader, not scenario keys
        if own in data:
            raise ScenarioError(f"{source}:{_line_for((own,), lines)}: {own}: unknown key; "
                                "did you mean 'title'?")
    context = {"base_dir": str(base_dir or Path("."))}
    try:
        scenario = Scenario.model_validate({**data, "source": source, "text": text}, context=context)
    except ValidationError as exc:
        errors = exc.errors()
        # a misspelt key shows up as "missing" and "unknown": name the unknown one
        error = next((e for e in errors if e["type"] == "extra_forbidden"), errors[0])
        loc = _clean_loc(tuple(error["loc"]), data)
        raise ScenarioError(f"{source}:{_line_for(loc, lines)}: {format_path(loc)}: "
                            f"{_describe(error, loc)}") from None
    except (ValueError, TypeError, OSError) as exc:   # raised while reading a table file
        raise ScenarioError(f"{source}:1: {exc}") from None
    problem = dimension_problem(scenario)
    if problem is not None:
        loc, message = problem
        raise ScenarioError(f"{source}:{_line_for(loc, lines)}: {format_path(loc)}: {message}")
    return scenario


def loads(text: str, source: str = "<scenario>", base_dir: Optional[Path] = None) -> Scenario:
    """Scenario from YAML text."""
    data, lines = parse_yaml(text, source)
    return validate(data, source, lines, base_dir, text)


def load(path) -> Scenario:
    """Scenario from a YAML file; relative paths in it resolve against its folder."""
    path = Path(path)
    return loads(read_text(path), str(path), path.parent)


def with_changes(scenario: Scenario, changes: dict) -> Scenario:
    """A copy of a scenario with dotted-path values replaced, validated again
    (used by sweeps and convergence checks)."""
    data, lines = parse_yaml(scenario.text, scenario.source or "<scenario>") if scenario.text \
        else (scenario.model_dump(mode="json", exclude_none=True), {})
    for dotted, value in changes.items():
        set_path(data, dotted, value)
    base = Path(scenario.source).parent if scenario.source else None
    return validate(data, scenario.source or "<scenario>", lines, base,
                    yaml.safe_dump(data, sort_keys=False))


def set_path(data: dict, dotted: str, value: Any) -> None:
    """Set data[a][b][c] = value for 'a.b.c' (list indexes as numbers: potential.0.step.height)."""
    parts = [int(p) if p.isdigit() else p for p in dotted.split(".")]
    node = data
    for part in parts[:-1]:
        if isinstance(node, dict):
            node = node.setdefault(part, {})
        elif isinstance(node, list) and isinstance(part, int) and part < len(node):
            node = node[part]
        else:
            raise KeyError(dotted)
    if isinstance(node, list) and isinstance(parts[-1], int) and parts[-1] < len(node):
        node[parts[-1]] = value
    elif isinstance(node, dict):
        node[parts[-1]] = value
    else:
        raise KeyError(dotted)


def self_contained(scenario: Scenario) -> Scenario:
    """The same scenario with every table's data written inline (with the digest
    of the file it came from): what a run file stores, so that reading the run
    never depends on a file that may since have changed."""
    if not any(isinstance(t, pot.Table) and t.file is not None for t in scenario.terms):
        return scenario
    data, _ = parse_yaml(scenario.text, scenario.source or "<scenario>") if scenario.text \
        else (scenario.model_dump(mode="json", exclude_none=True), {})
    for item, term in zip(data.get("potential") or [], scenario.terms):
        if isinstance(term, pot.Table) and term.file is not None:
            item["table"] = term.inline()
    return validate(data, scenario.source or "<scenario>", {}, None,
                    yaml.safe_dump(data, sort_keys=False))


def table_digests(scenario: Scenario) -> list:
    """The SHA-256 of each table's source, in term order ('' for inline data without one)."""
    return [t.digest for t in scenario.terms if isinstance(t, pot.Table)]
