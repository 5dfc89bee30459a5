"""The sampler: sample times, batches, the split of absorbed probability, and
the recorded probabilities on either side of the reference point."""
import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.engine.sampler import Sampler
from scenarios import small_step


CHANGES = {"potential.0": {"barrier": {"start": 0.0, "end": 2.0, "height": 0.6}},
           "evolve.duration": 40.0, "record": None,
           "measure": {"detectors": [-50.0, 60.0, 70.0], "region": [0.0, 2.0]}}
CASE = small_step(CHANGES)


@pytest.fixture(scope="module")
def setup():
    return build(loads(CASE, "case.yaml"))


def test_a_batch_holds_each_sample_once_and_resets(setup):
    sampler = Sampler(setup)
    psi = setup.psi0()
    for step in (4, 8, 12):
        sampler(psi, step)
    batch = sampler.batch()
    assert np.allclose(batch["t"], np.array([4, 8, 12]) * setup.dt)
    assert batch["flux"].shape == (3, 3)
    for name in ("P_region", "norm", "absorbed_left", "absorbed_right"):
        assert batch[name].shape == (3,)
    assert np.allclose(batch["norm"], 1.0, atol=1e-12)
    assert len(sampler.batch()["t"]) == 0


def test_without_detectors_the_flux_column_is_zero():
    setup = build(loads(small_step({**CHANGES, "measure.detectors": []}),
                        "none.yaml"))
    sampler = Sampler(setup)
    sampler.take(setup.psi0(), 0.0)
    assert sampler.batch()["flux"].tolist() == [[0.0]]


def test_absorbed_probability_is_split_in_proportion(setup):
    # the exact total 1 − norm shared in the ratio of the sampled layer integrals
    sampler = Sampler(setup, raw_absorbed=(0.3, 0.1))
    left, right = sampler.split_absorbed(0.8)
    assert left + right == pytest.approx(0.2, abs=1e-15)
    assert left / right == pytest.approx(3.0, rel=1e-12)
    assert Sampler(setup).split_absorbed(0.5) == (0.0, 0.0)


def test_recording_sides_add_up_to_the_norm(setup):
    sampler = Sampler(setup)
    psi = setup.psi0() * 0.9
    values = sampler.recording(psi, setup)
    assert values["norm"] == pytest.approx(0.81, rel=1e-12)
    assert values["P_left"] + values["P_right"] == pytest.approx(values["norm"], rel=1e-12)
    assert values["P_left"] == pytest.approx(0.81, rel=1e-9)   # the packet is far left
    assert values["x_mean"] == pytest.approx(-100.0, abs=1e-9)


def test_the_closing_factor_reaches_the_flux_only(setup):
    psi = setup.psi0()
    phase = np.exp(-0.02j * setup.grid.x)
    plain, closed = Sampler(setup), Sampler(setup, closing=phase)
    plain.take(psi * phase, 0.0)
    closed(psi, 0)
    a, b = plain.batch(), closed.batch()
    assert np.allclose(a["flux"], b["flux"], rtol=1e-12, atol=0)
    assert np.allclose(a["norm"], b["norm"], rtol=1e-12)
