"""Shared helpers: scenarios written as YAML text into a temporary folder."""
from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from sojourn.build import build
from sojourn.run import execute
from sojourn.scenario import load


@pytest.fixture
def write_scenario(tmp_path):
    """write_scenario(text, name='s.yaml') -> path of a scenario file in tmp_path."""
    def write(text: str, name: str = "s.yaml") -> Path:
        path = tmp_path / name
        path.write_text(textwrap.dedent(text))
        return path
    return write


@pytest.fixture
def run_scenario(write_scenario, tmp_path):
    """run_scenario(text) -> (setup, run file path): build and run in tmp_path."""
    def run(text: str, name: str = "s.yaml", **kw):
        path = write_scenario(text, name)
        setup = build(load(path))
        out = tmp_path / (Path(name).stem + ".h5")
        return setup, execute(setup, out, **kw)
    return run
