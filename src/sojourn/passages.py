"""The packet's passages: its band's stationary scattering, where the default
detectors go, and how long `duration: auto` runs — pure functions on numbers
that build reads (and the auto-duration tests check against stationary theory)."""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np

from .errors import SojournError
from .model import packets
from .guards import Finding
from .theory.scattering import scatter


PASSAGE_GAP = 4.0      # widths between incident and outgoing passages at a detector (as measure)
OVERLAP_AIM = 1e-4     # incident tail still crossing the detector after the split, times the
                       # round trip over R, per passage time σ/v₀: a tenth of measure's warning
BAND = 4.0             # the band k₀ ± 4σ_k whose every component auto durations wait for
CLEAR = 6.0            # initial widths behind the centre the slowest component starts
RELEVANT = 1e-6        # a channel's probability below which its component is not waited for
SEPARATION = 6.0       # widths between an outgoing packet and the potential / box edge (as measure)
HELD = 1e-7            # probability the potential may still hold at the end of an auto run


@dataclass(frozen=True)
class Band:
    """The packet's band k₀ ± 4σ_k in the forward frame (incidence from the
    left) with the stationary R, T, τ_R, τ_T and the outgoing wavenumber q of
    each component: what detector placement and automatic durations read."""

    k: np.ndarray
    weight: np.ndarray
    R: np.ndarray
    T: np.ndarray
    tau_R: np.ndarray
    tau_T: np.ndarray
    q: np.ndarray
    x_t: float

    @property
    def mean_R(self) -> float:
        return float(np.sum(self.weight * self.R) / np.sum(self.weight))


def packet_band(potential, info, hbar, mass, reference) -> Optional[Band]:
    """The band's stationary scattering data (None where theory cannot say:
    a trap, no potential, a band reaching k ≤ 0)."""
    if potential.confining or potential.support() is None:
        return None
    k0 = abs(info.k0)
    k = k0 + info.sigma_k * np.linspace(-BAND, BAND, 41)
    k = k[k > 0.2 * k0]
    direction = "right" if info.k0 >= 0 else "left"
    try:
        sc = scatter(potential, info.level + (hbar * k) ** 2 / (2 * mass), hbar=hbar,
                     x_r=reference, direction=direction, dwell=False)
    except (SojournError, ValueError, FloatingPointError):
        return None
    with np.errstate(invalid="ignore", divide="ignore"):
        q = np.where(np.abs(np.imag(sc.k_out)) > 0, 0.0, np.abs(np.real(sc.k_out)))
        out = Band(k, np.exp(-0.5 * ((k - k0) / info.sigma_k) ** 2), np.nan_to_num(sc.R),
                   np.nan_to_num(sc.T), np.asarray(sc.delay_reflection, float),
                   np.asarray(sc.delay_transmission, float), q,
                   float(sc.x_t) * (1 if info.k0 >= 0 else -1))
    return out


def _split_width(info, hbar, mass, reference):
    split = abs(reference - info.center) / max(abs(info.group_velocity), 1e-300)
    return float(packets.free_width(info.width, split, hbar, mass))


def reflection_gap(info, hbar, mass, reference, reflected: float) -> float:
    """The distance from the reference point at which a detector sees the
    incident and reflected passages apart: ≥ PASSAGE_GAP widths at the split,
    and the incident tail still crossing it after the split biasing the arrival
    by less than OVERLAP_AIM passage times (weaker reflections need more)."""
    width = _split_width(info, hbar, mass, reference)
    distance = PASSAGE_GAP * width
    aim = OVERLAP_AIM * info.width * max(reflected, 1e-12)
    while distance < 40 * width and \
            0.5 * math.erfc(distance / (math.sqrt(2) * width)) * 2 * distance > aim:
        distance += 0.25 * width
    return distance


def default_detectors(potential, packet, grid, reference, absorber_width, band, hbar, mass):
    """One detector between the packet's start and the reference point (half-way,
    or nearer the start where the passages would overlap there), and, if
    anything can be transmitted, one at the same distance beyond the potential."""
    support = potential.support()
    inner_left = grid.left + absorber_width
    inner_right = grid.right - absorber_width
    sign = 1 if packet.k0 >= 0 else -1
    gap = abs(reference - packet.center)
    distance = gap / 2
    if band is not None:    # a packet that scatters: move the detector to where passages part
        distance = max(distance, reflection_gap(packet, hbar, mass, reference, band.mean_R))
    distance = min(distance, gap - 0.5 * packet.width)   # still after the packet's start
    out = [reference - sign * distance]
    if support is None:
        return out
    if packet.k0 >= 0 and potential.levels()[1] < packet.energy + 10 * abs(packet.energy):
        right_edge = support[1]
        out.append(min(right_edge + gap / 2, (right_edge + inner_right) / 2))
    elif packet.k0 < 0:
        left_edge = support[0]
        out.append(max(left_edge - gap / 2, (left_edge + inner_left) / 2))
    return out


def _clear_time(info, hbar, mass, x0, xr, target, start) -> float:
    """When the central outgoing packet is 5σ(t) past its detector (σ(t) the free
    width): the guards' own test of a duration, met here too."""
    v0 = abs(info.group_velocity)
    travel = (xr - x0) + abs(target - start)
    t = travel / v0
    for _ in range(50):
        t = (travel + 5 * float(packets.free_width(info.width, t, hbar, mass))) / v0
    return 1.01 * t


def _separation_width(info, hbar, mass, tau, incoming, speed) -> float:
    """σ(t) when the central outgoing packet is SEPARATION widths past the potential."""
    t = incoming / abs(info.group_velocity) + max(tau, 0.0)
    for _ in range(50):
        t = incoming / abs(info.group_velocity) + max(tau, 0.0) + SEPARATION * float(
            packets.free_width(info.width, t, hbar, mass)) / max(speed, 1e-300)
    return float(packets.free_width(info.width, t, hbar, mass))


def hold_time(band: Band) -> float:
    """How long the potential may still hold probability after the passages:
    what it holds leaks out at least as fast as e^(−2t/τ_max) (a resonance of
    width Γ holds it for ħ/Γ = τ_max/2, and τ_max = 2ħ/Γ); the spread of τ
    across the band stands for τ_max (a passage merely shifted in time holds
    nothing). Wait until less than HELD is left."""
    spread = 0.0
    for tau, prob in ((band.tau_R, band.R), (band.tau_T, band.T)):
        # a delay that varies across the band marks a stored (resonant) packet; a
        # constant one is a shifted passage, which holds nothing once it has passed
        taus = tau[(prob >= RELEVANT) & np.isfinite(tau)]
        spread = max(spread, float(np.ptp(taus)) if taus.size else 0.0)
    return 0.5 * spread * math.log(1 / HELD)


def auto_duration(info, band: Band, hbar, mass, reference, detectors, inner):
    """(duration, refusal or None) for `duration: auto`: the latest time at which
    a component of the band k₀ ± 4σ_k, starting CLEAR initial widths σ₀ behind
    the centre and delayed by its stationary τ(E), reaches its channel's detector (the reference point / the far
    edge where there is none), over the channels the component feeds. The cap
    is the time the slowest such component needs to reach the inner box edge;
    beyond it the box is too small, and the refusal says what edge would do."""
    s = 1 if info.k0 >= 0 else -1
    x0, xr, xt = s * info.center, s * reference, band.x_t
    near, far = sorted((s * inner[0], s * inner[1]))
    dets = [s * d for d in detectors]
    d_r = min((d for d in dets if x0 < d < xr), default=xr)
    d_t = max((d for d in dets if d > xt), default=xt)
    v = hbar * band.k / mass
    vq = hbar * band.q / mass
    needed, cap, reach = 0.0, 0.0, None
    hold = hold_time(band)
    for channel, prob, tau, speed, start, target, edge in (
            ("reflection", band.R, band.tau_R, v, xr, d_r, near),
            ("transmission", band.T, band.tau_T, vq, xt, d_t, far)):
        use = (prob >= RELEVANT) & np.isfinite(tau) & (speed > 0)
        if not use.any():
            continue
        # the component's share of the packet starts up to CLEAR σ₀ behind the centre; its
        # spreading in time is the spread of speeds across the band itself
        t_in = (xr - x0 + CLEAR * info.width) / v[use] + np.maximum(tau[use], 0.0)
        t = t_in + abs(target - start) / speed[use]
        slow = int(np.argmax(t))
        needed = max(needed, float(t[slow]), _clear_time(info, hbar, mass, x0, xr, target, start))
        room = abs(edge - start)
        # measured whole: the packet SEPARATION widths from the potential and from the edge
        # (the channel's mean component: its weight |ψ̃₀|² times its probability)
        w = band.weight[use] * prob[use]
        width = _separation_width(info, hbar, mass, float(np.sum(w * tau[use]) / np.sum(w)),
                                  xr - x0, float(np.sum(w * speed[use]) / np.sum(w)))
        if room < 2 * SEPARATION * width:
            past = 2 * SEPARATION * width - room
            reach = (channel, s * (edge - past if channel == "reflection" else edge + past),
                     f"separate from the potential whole ({2 * SEPARATION:g} widths, "
                     f"{2 * SEPARATION * width:.4g}, of room beyond it; the box has {room:.4g})")
            continue
        cap_here = float(t_in[slow] + room / speed[use][slow]) + hold_time(band)
        cap = max(cap, cap_here)
        if t[slow] > cap_here:
            past = (t[slow] - t_in[slow]) * speed[use][slow] - room
            reach = (channel, s * (edge - past if channel == "reflection" else edge + past),
                     f"clear its detector (it needs t ≈ {needed:.4g}, the box allows "
                     f"{cap:.4g})")
    if needed <= 0:
        return None, "no outgoing channel carries the packet (R and T both below 1e-6)"
    needed += hold
    if reach is not None:
        channel, edge, what = reach
        return max(cap, needed), (f"auto: the {channel} packet cannot {what} inside the box; "
                                  f"a box whose inner part (inside the absorbers) reaches "
                                  f"x = {edge:.4g} would do")
    return needed, None


def resolve_auto(scenario, potential, info, band, reference, detectors, inner, findings):
    """The duration for `duration: auto`, with an error finding where there is none."""
    if potential.confining or band is None:
        why = ("the potential confines the packet" if potential.confining else
               "there is no potential to scatter from, or its band cannot be solved")
        findings.append(Finding("error", "evolve.duration",
                                f"auto: {why}, so there is no outgoing packet to wait for; "
                                "give the duration as a number"))
        return 1.0   # any finite span: the finding refuses the run
    duration, refusal = auto_duration(info, band, scenario.hbar, scenario.particle_mass,
                                      reference, detectors, inner)
    if refusal is not None:
        findings.append(Finding("error", "evolve.duration", refusal))
    if duration is None:
        duration = 2 * abs(reference - info.center) / max(abs(info.group_velocity), 1e-300)
    findings.append(Finding("info", "evolve.duration",
                            f"auto: duration {duration:.6g} {scenario.unit_system.time} (every "
                            f"outgoing component of k₀ ± {BAND:g}σ_k, from {CLEAR:g} widths behind "
                            "the centre, past its detector)"))
    return duration
