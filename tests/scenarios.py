"""Small test scenarios built from one base, so a test states only what it changes.

    small_step({"evolve.duration": 250.0, "measure.region": [0.0, 20.0]})

returns the YAML text of the unit step (ħ = m = V₀ = 1, E₀ = V₀/2) on a
coarse box, with the dotted keys replaced (None deletes a key). Settings of
our own, chosen to run in a fraction of a second.
"""
from __future__ import annotations

import copy

import yaml

SMALL_STEP = {
    "title": "small step",
    "units": "atomic",
    "grid": {"span": [-300.0, 300.0], "points": 512},
    "potential": [{"step": {"at": 0.0, "height": 1.0}}],
    "packet": {"center": -100.0, "width": 10.0, "energy": 0.5},
    "evolve": {"duration": 60.0, "dt": 0.05},
    "absorber": {"width": 50.0},
    "record": {"every": 5.0},
    "measure": {"detectors": [-50.0]},
}

# the same on a smaller box: for tests that only need a valid run file
TINY_STEP = {**SMALL_STEP, "grid": {"span": [-200.0, 200.0], "points": 256},
             "packet": {"center": -60.0, "width": 10.0, "energy": 0.5},
             "evolve": {"duration": 20.0, "dt": 0.05}, "absorber": {"width": 40.0},
             "measure": {"detectors": [-30.0]}}


def scenario_text(base: dict, changes: dict | None = None) -> str:
    """YAML of `base` with dotted keys replaced ('potential.0.step.height'); None deletes."""
    data = copy.deepcopy(base)
    for dotted, value in (changes or {}).items():
        *parents, last = [int(p) if p.isdigit() else p for p in dotted.split(".")]
        node = data
        for part in parents:
            node = node[part] if isinstance(node, list) else node.setdefault(part, {})
        if value is None:
            node.pop(last, None)
        else:
            node[last] = value
    return yaml.safe_dump(data, sort_keys=False)


def small_step(changes: dict | None = None) -> str:
    return scenario_text(SMALL_STEP, changes)


def tiny_step(changes: dict | None = None) -> str:
    return scenario_text(TINY_STEP, changes)
