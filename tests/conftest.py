"""Shared helpers: scenarios written as YAML text into a temporary folder.

The checkout's own src/ is tested (pytest's pythonpath, and PYTHONPATH for the
`python -m sojourn` subprocesses), and FFT wisdom goes to a temporary cache,
never to the user's home."""
from __future__ import annotations

import os
import tempfile
import textwrap
from pathlib import Path

import pytest

SRC = str(Path(__file__).resolve().parents[1] / "src")
os.environ["PYTHONPATH"] = os.pathsep.join(p for p in (SRC, os.environ.get("PYTHONPATH")) if p)
os.environ["XDG_CACHE_HOME"] = tempfile.mkdtemp(prefix="sojourn-test-cache-")

from sojourn.build import build
from sojourn.workflows import run as execute
from sojourn.config.scenario import load


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
