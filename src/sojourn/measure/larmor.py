"""The Larmor clock read from a spinor run (PHYSICS §Larmor): the outgoing
packets' spin ⟨σ_x⟩, ⟨σ_y⟩, ⟨σ_z⟩ per channel and the times τ_y = ⟨σ_y⟩/ω_L,
τ_z = −⟨σ_z⟩/ω_L, τ = √(τ_y² + τ_z²), each beside its packet-averaged
prediction.

A spinor run holds ψ (2, N): spin up (component 0) saw the potential raised by
ħω_L/2 over the clock region, spin down (1) lowered by as much; the spin
starts along +x, so each component carries the packet's amplitude / √2.
`measure_clock` reads one such run in the forward frame; the same spinor as
two scalar runs of `component_scenarios` is read by `measure_spinor_runs`.
"""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from ..config.scenario import Scenario, with_changes
from ..errors import MeasureError, SojournError
from ..model.packets import PacketInfo
from ..model.spin import clock_region
from ..theory.larmor import packet_larmor, spin_vector, times_from_spin
from .frame import ForwardRun, separated

CHANNELS = ("reflection", "transmission")


def clock(scenario: Scenario) -> tuple[tuple[float, float], float]:
    """(region, ω_L) of a scenario's Larmor clock; the region defaults to the
    potential's extent."""
    spec = getattr(scenario, "larmor", None)
    if spec is None:
        raise MeasureError("the scenario has no `larmor` clock")
    region = clock_region(spec.region, scenario.build_potential())
    if region is None:
        raise MeasureError("larmor.region: the potential has no extent to default to; "
                           "give the region")
    return region, float(spec.omega)


def component_scenarios(scenario: Scenario) -> tuple[Scenario, Scenario]:
    """(spin up, spin down): the scenario with a uniform ±ħω_L/2 barrier term over
    the clock region added to its potential (and no clock of its own)."""
    (a, b), omega = clock(scenario)
    terms = scenario.model_dump(mode="json", exclude_none=True)["potential"]
    half = 0.5 * scenario.hbar * omega
    out = []
    for sign in (1.0, -1.0):
        shift = {"barrier": {"start": a, "end": b, "height": sign * half}}
        out.append(with_changes(scenario, {"potential": terms + [shift], "larmor": None}))
    return out[0], out[1]


def outgoing_spin(x, up, down, channel: str, edges: tuple[float, float]):
    """(spin, probability) of one outgoing channel: ⟨σ⟩ of the spinor (up, down)/√2
    over x < edges[0] (reflection) or x > edges[1] (transmission), for incidence
    from the left; `up`, `down` are the two scalar runs' ψ (each of norm 1 at
    t = 0), probability = ∫(|up|² + |down|²)/2 dx there."""
    x, up, down = (np.asarray(v) for v in (x, up, down))
    if not (x.shape == up.shape == down.shape) or x.ndim != 1 or x.size < 2:
        raise MeasureError("x and the two spin components must be 1D arrays of one length")
    if channel not in CHANNELS:
        raise MeasureError(f"channel must be one of {CHANNELS} (got {channel!r})")
    side = x < edges[0] if channel == "reflection" else x > edges[1]
    dx = float(x[1] - x[0])
    prob = float(np.sum(np.abs(up[side]) ** 2 + np.abs(down[side]) ** 2) * dx / 2)
    if not prob > 0:
        return None, 0.0
    return spin_vector(up[side], down[side]), prob


def larmor_entry(spin, omega: float, predicted: Optional[dict],
                 error: Optional[dict] = None) -> dict:
    """The ``"larmor"`` block of one channel for `sojourn delay --json`:
    measured τ_y, τ_z, τ from the spin; predicted = the packet's exact spin at
    this ω_L read the same way (`theory.larmor.packet_larmor`), ``linear`` = the
    ω_L → 0 packet average, ``finite_field`` = predicted − linear (the O(ω_L²)
    departure); error = the caller's numerical error bar (the Richardson
    reruns of `workflows.verify`), None without one (as for the delays)."""
    ty, tz = times_from_spin(spin, omega)
    measured = {"tau_y": ty, "tau_z": tz, "tau": math.hypot(ty, tz)}
    out = {"omega": float(omega), "spin": {"x": spin[0], "y": spin[1], "z": spin[2]}}
    for key, value in measured.items():
        entry = {"measured": value, "predicted": None, "linear": None, "finite_field": None,
                 "deviation": None, "error": None if error is None else error.get(key)}
        if predicted is not None:
            exact, linear = predicted[key + "_exact"], predicted[key]
            entry.update(predicted=exact, linear=linear, finite_field=exact - linear,
                         deviation=value - exact)
        out[key] = entry
    return out


def measure_spinor(x, up, down, edges, scenario: Scenario, packet) -> dict:
    """Per channel the ``"larmor"`` block from final-time components (up, down)
    on grid x; `edges` the potential's extent (channels lie outside it),
    `packet` the run's PacketInfo (predictions with its k₀, σ_k and level)."""
    region, omega = clock(scenario)
    if packet.k0 < 0:
        x, up, down = -np.asarray(x)[::-1], np.asarray(up)[::-1], np.asarray(down)[::-1]
        edges = (-edges[1], -edges[0])
    pred = packet_larmor(scenario.build_potential(), packet.k0, packet.sigma_k, packet.level,
                         hbar=scenario.hbar, omega=omega, region=region)
    out = {}
    for channel in CHANNELS:
        spin, prob = outgoing_spin(x, up, down, channel, edges)
        if spin is None:
            continue
        out[channel] = larmor_entry(spin, omega, pred.get(channel))
        out[channel]["probability"] = prob
    return out


def measure_spinor_runs(scenario: Scenario, up_run, down_run) -> dict:
    """The ``"larmor"`` blocks per channel from the two components as scalar runs
    (run-file readers or MemoryRuns of `component_scenarios(scenario)`), at
    their last snapshot; the channels lie outside the potential's extent."""
    for name, run in (("spin-up run", up_run), ("spin-down run", down_run)):
        if not all(hasattr(run, a) for a in ("x", "times", "psi", "packet")):
            raise MeasureError(f"the {name} must be a run-file reader, not "
                               f"{type(run).__name__}")
    x = np.asarray(up_run.x)
    if not (np.array_equal(x, np.asarray(down_run.x))
            and np.array_equal(np.asarray(up_run.times), np.asarray(down_run.times))):
        raise MeasureError("the two spin components were not run on the same grid and times")
    support = scenario.build_potential().support()
    if support is None:
        raise MeasureError("the potential has no extent: no outgoing channels to read")
    region, _ = clock(scenario)
    edges = (min(support[0], region[0]), max(support[1], region[1]))
    last = len(up_run.times) - 1
    from_run = up_run.packet
    packet = from_run if hasattr(from_run, "k0") else PacketInfo(**from_run)
    return measure_spinor(x, up_run.psi(last), down_run.psi(last), edges, scenario, packet)


def is_spinor(reader) -> bool:
    """Whether a run reader holds a spinor run (ψ with a leading component axis)."""
    axes = tuple(getattr(reader, "axes", ("x",)))
    return len(axes) > 1 and axes[0] == "component"


def measure_clock(run: ForwardRun, stats: dict, scenario: Scenario, packet: PacketInfo,
                  channels=CHANNELS) -> tuple[dict, list]:
    """({channel: "larmor" block}, warnings) of a spinor run in the forward frame
    (`run.psi(i)` of shape (2, N)), each channel read at the last snapshot where
    its outgoing packet has separated from the potential and the clock and lies
    whole inside the box (`frame.separated`, as the centroid method); `packet`
    is the run's own (unmirrored) PacketInfo, `stats` `frame.snapshot_stats(run)`."""
    region, omega = clock(scenario)
    lo, hi = sorted((run.sign * region[0], run.sign * region[1]))
    edges = (min(run.x_r, lo), max(run.x_t, hi))
    out, warnings = {}, []
    try:
        pred = packet_larmor(scenario.build_potential(), packet.k0, packet.sigma_k, packet.level,
                             hbar=scenario.hbar, omega=omega, region=region)
    except SojournError as exc:    # measured all the same, beside no prediction
        pred = {}
        warnings.append(f"no Larmor prediction: {exc}")
    for channel in channels:
        usable = separated(run, stats, channel)
        index = int(np.nonzero(usable)[0][-1]) if usable.any() else len(run.times) - 1
        if not usable.any():
            warnings.append(f"the {channel} packet never lies whole outside the potential and "
                            "the clock region: its Larmor times are read at the last snapshot "
                            "and cannot be trusted")
        psi = run.psi(index)
        if psi.ndim != 2 or psi.shape[0] != 2:
            raise MeasureError("a Larmor clock needs a spinor run (ψ of two components)")
        # each stored component carries 1/√2 of its scalar run's amplitude
        spin, prob = outgoing_spin(run.x, math.sqrt(2) * psi[0], math.sqrt(2) * psi[1],
                                   channel, edges)
        if spin is None:
            continue
        out[channel] = larmor_entry(spin, omega, pred.get(channel))
        out[channel].update(probability=prob, time=float(run.times[index]))
    return out, warnings


def with_larmor(report: dict, blocks: dict) -> dict:
    """A `sojourn delay --json` report with each measured channel's ``"larmor"``
    block added (channels the report has not measured are left as they are)."""
    out = dict(report)
    for channel in CHANNELS:
        if out.get(channel) is not None and channel in blocks:
            out[channel] = dict(out[channel], larmor=blocks[channel])
    return out
