"""Every shipped example (configs/ and the built-in demo) is trustworthy: `check`
finds nothing to warn about in its own settings, and its delays carry no
warning (a warning is how sojourn says a number cannot be trusted). The full
runs of the heavier examples are slow-marked; the default suite checks every
scenario and runs the quick ones in full."""
from pathlib import Path

import pytest

from sojourn.build import build
from sojourn.config.scenario import load
from sojourn.measure.delays import measure_delays
from sojourn.workflows import run_in_memory

ROOT = Path(__file__).resolve().parents[1]
SCATTERING = ["configs/step.yaml", "configs/barrier.yaml", "configs/smooth_step.yaml",
              "configs/double_barrier.yaml", "configs/step_small.yaml",
              "configs/larmor_clock.yaml", "src/sojourn/data/demo.yaml",
              "configs/oblique_step.yaml"]
# driven_barrier measures sidebands, not delays: tests/physics/test_sidebands_measure.py;
# the double slit scatters off a shape of the plane: no delays along a normal (it is a movie)
# disk_scattering measures per direction off its obstacle: tests/test_angular.py
SHIPPED = SCATTERING + ["configs/harmonic.yaml", "configs/driven_barrier.yaml",
                        "configs/double_slit.yaml", "configs/disk_scattering.yaml"]
QUICK = ["src/sojourn/data/demo.yaml", "configs/step.yaml", "configs/step_small.yaml",
         "configs/barrier.yaml", "configs/larmor_clock.yaml"]     # a few seconds each here


def test_every_shipped_scenario_is_listed():
    found = {str(p.relative_to(ROOT)) for p in (ROOT / "configs").glob("*.yaml")
             if not p.name.startswith("sweep_")}
    assert found | {"src/sojourn/data/demo.yaml"} == set(SHIPPED)


@pytest.mark.parametrize("name", SHIPPED)
def test_check_finds_nothing_to_warn_about(name):
    setup = build(load(ROOT / name))
    assert [str(f) for f in setup.findings if f.level in ("warning", "error")] == []


def _assert_trusted(name):
    setup = build(load(ROOT / name))
    report = measure_delays(run_in_memory(setup))
    assert report.warnings == []
    for channel in report.channels():
        for method in ("centroid", "arrival", "spectral"):
            result = channel.measured.get(method)
            assert result is not None, (channel.channel, method)
            # beside its own packet prediction: 2% covers the grids' Δx² error at the
            # jumps of these examples (measured: below 1% for all but the double barrier)
            assert result.delay == pytest.approx(result.predicted, rel=2e-2), (
                channel.channel, method)


@pytest.mark.parametrize("name", QUICK)
def test_quick_examples_give_trusted_delays(name):
    _assert_trusted(name)


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(set(SCATTERING) - set(QUICK)))
def test_heavier_examples_give_trusted_delays(name):
    _assert_trusted(name)
