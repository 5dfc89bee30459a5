"""Scenario → Setup: the time step, the recording and sampling combs, and the
default detectors and region, against the definitions they must meet."""
import math

import pytest

from sojourn.build import _largest_divisor, build
from sojourn.config.scenario import loads
from sojourn.guards import time_step_limit

BASE = """\
units: atomic
grid: {{span: [-400.0, 400.0], points: 2048}}
potential:
  - {potential}
packet: {{center: -150.0, width: 15.0, energy: {energy}}}
evolve: {{duration: {duration}}}
absorber: {{width: 60.0}}
{record}
"""


def make(potential="barrier: {start: 0.0, end: 2.0, height: 0.6}", energy=0.5,
         duration=300.0, record=""):
    return build(loads(BASE.format(potential=potential, energy=energy, duration=duration,
                                   record=record), "b.yaml"))


def test_default_time_step_is_inside_the_grid_limit():
    # split-operator phase limit Δt·(ħ²k_max²/2m + ΔV)/ħ < 2π (PHYSICS §3), with
    # k_max = π/Δx the grid's Nyquist wavenumber
    s = make()
    dx = 800.0 / 2048
    limit = 2 * math.pi / ((math.pi / dx) ** 2 / 2 + 0.6)
    assert s.dt_chosen and s.dt < limit / 2
    assert s.dt == pytest.approx(time_step_limit(s.grid.kinetic_max(1.0, 1.0), 0.6, 1.0) / 4,
                                 rel=1e-3)
    assert s.steps * s.dt == pytest.approx(300.0, rel=1e-14)   # ends exactly at the duration
    assert s.grid_phase < math.pi


def test_a_given_time_step_is_kept_or_shrunk_by_less_than_a_step():
    s = build(loads(BASE.format(potential="step: {at: 0.0, height: 1.0}", energy=0.5,
                                duration=10.0, record="").replace(
        "evolve: {duration: 10.0}", "evolve: {duration: 10.0, dt: 0.03}"), "d.yaml"))
    assert not s.dt_chosen and s.steps == 334 and s.dt == pytest.approx(10.0 / 334)


@pytest.mark.parametrize("record", ["", "record: {every: 7.3}", "record: {every: 5.0, sample_steps: 7}",
                                    "record: {sample_steps: 1000}"])
def test_sampling_comb_passes_through_every_recording(record):
    s = make(record=record)
    assert 1 <= s.sample_steps <= s.record_steps <= s.steps
    assert s.record_steps % s.sample_steps == 0
    if "every" not in record:
        assert s.record_steps == round(s.steps / 100)   # 100 recordings by default


def test_explicit_sample_steps_against_the_default():
    explicit = make(record="record: {every: 5.0, sample_steps: 10}")
    # the largest divisor of the recording interval not above the asked 10
    expected = max(d for d in range(1, 11) if explicit.record_steps % d == 0)
    assert explicit.sample_steps == expected
    default = make(record="record: {every: 5.0}")
    # 50 samples per temporal width σ/v of the passage (v = ħk₀/m = 1 here)
    wanted = int(15.0 / 1.0 / 50 / default.dt)
    assert default.sample_steps == max(d for d in range(1, wanted + 1)
                                       if default.record_steps % d == 0)


def test_largest_divisor_against_brute_force():
    for n in (1, 2, 12, 97, 360, 1001):
        for at_most in (1, 5, 13, 400):
            assert _largest_divisor(n, at_most) == max(d for d in range(1, min(n, at_most) + 1)
                                                       if n % d == 0)
    assert _largest_divisor(999_999_999_989, 10) == 1   # a prime near 1e12, by √n trials


def test_a_tiny_duration_with_a_long_record_interval_builds():
    # once an endless count-down of sample_steps; one step, one recording interval
    s = make(duration=1.0e-12, record="record: {every: 7.0}")
    assert s.steps == 1 and s.record_steps == 1 and s.sample_steps == 1
    assert s.dt == pytest.approx(1.0e-12) and s.snapshots == 2


def test_default_detectors_lie_between_packet_and_potential_and_beyond_it():
    s = make()
    reference = 0.0                       # the barrier's left edge
    assert s.reference == reference
    left, right = s.detectors
    assert -150.0 < left < reference and left == pytest.approx((-150.0 + reference) / 2)
    assert 2.0 < right < 400.0 - 60.0     # past the barrier, inside the absorber's edge
    moving_left = build(loads(BASE.format(
        potential="barrier: {start: 0.0, end: 2.0, height: 0.6}", energy=0.5, duration=300.0,
        record="").replace("center: -150.0", "center: 150.0").replace(
        "energy: 0.5}", "energy: 0.5, direction: left}"), "l.yaml"))
    assert moving_left.reference == 2.0
    first, second = moving_left.detectors
    assert 2.0 < first < 150.0 and -340.0 < second < 0.0


def test_default_region_is_the_support_or_reaches_the_absorber_beyond_a_closed_step():
    assert make().region == (0.0, 2.0)
    # below a step whose height is above the whole band (E₀ = 0.3, σ_k = 1/30):
    # the evanescent tail beyond it counts, up to the absorbing layer
    closed = make(potential="step: {at: 0.0, height: 1.0}", energy=0.3)
    assert closed.region == (0.0, 400.0 - 60.0)
    open_step = make(potential="step: {at: 0.0, height: 0.2}", energy=0.5)
    assert open_step.region[1] < 400.0 - 60.0


def test_explicit_measure_settings_are_kept():
    text = BASE.format(potential="barrier: {start: 0.0, end: 2.0, height: 0.6}", energy=0.5,
                       duration=300.0, record="") + \
        "measure: {reference: 1.0, detectors: [-20.0], region: [-1.0, 3.0]}\n"
    s = build(loads(text, "m.yaml"))
    assert (s.reference, s.detectors, s.region) == (1.0, [-20.0], (-1.0, 3.0))


def test_a_prime_record_interval_does_not_make_every_step_a_sample():
    # the automatic sampling aims at 50 samples per passage time; a record interval of a
    # prime number of steps has no divisor near it, so the recordings move to a whole
    # number of samples apart instead (still about record.every)
    def with_dt(record=""):
        return build(loads(BASE.format(potential="step: {at: 0.0, height: 1.0}", energy=0.5,
                                       duration=40.0, record=record).replace(
            "evolve: {duration: 40.0}", "evolve: {duration: 40.0, dt: 0.004}"), "d.yaml"))
    aim = with_dt().sample_steps
    assert aim >= 40
    prime = next(n for n in range(5 * aim + 1, 10 * aim) if all(n % d for d in range(2, n)))
    s = with_dt(f"record: {{every: {prime * 0.004!r}}}")
    assert s.sample_steps >= aim / 4 and s.record_steps % s.sample_steps == 0
    assert abs(s.record_steps - prime) <= s.sample_steps / 2 + 1
