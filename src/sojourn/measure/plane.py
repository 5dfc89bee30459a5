"""Measuring a run in the plane (PHYSICS §9).

On a potential of x alone the problem separates: a packet ψ₀ = φ(x)·χ(y)
stays a product, φ scattering as on a line at the normal wavenumber k_x and
χ moving freely along y. So

1. the delays along the normal are the line's: the snapshots are projected
   on the free transverse packet, φ(x, t) = Σ_y ψ(x, y, t) χ*(y, t) dy, and
   the line's methods measure that run beside the line's theory at k_x (the
   detectors' fluxes through the lines x = const and the strip probabilities
   are already the line's);
2. the reflected packet's trajectory is shifted along the interface against
   the ideal mirror image by the lateral shift
   D = (y_c − y_m) + (v_y/v̄_x)(x_c − x_m), (x_c, y_c) its centroid and
   (x_m, y_m) the mirror image's, measured in the snapshots where the packet
   has separated (the line's criterion) and lies clear of the y absorbers;
   its packet average is D = (v_y/v̄_x)·⟨∂φ_r/∂k_x⟩_w, w = |ψ̃₀(k_x)|²R(k_x),
   v̄_x = ħ⟨k_x⟩_w/m (the filtered mirror image's speed).

A potential with a shape of the plane does not separate: its runs have no
delay report here (angle-resolved delays are a measurement of their own).
"""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from ..errors import MeasureError
from ..model import packets
from ..theory.oblique import mean_wavenumber
from .frame import ForwardRun, predictions, separated, snapshot_stats
from .report import DelayReport

SEPARATION_Y = 6.0    # widths between the reflected packet and the y absorbers (as along x)


class Projected:
    """The snapshots of a run in the plane projected on the free transverse
    packet χ(y, t): a line's states (`psi(i)`, `snapshots()`)."""

    def __init__(self, rf, transverse: packets.PacketInfo, hbar: float, mass: float):
        self.rf, self.transverse, self.hbar, self.mass = rf, transverse, hbar, mass
        self.y = np.asarray(rf.coordinate("y"), float)
        self.dy = float(self.y[1] - self.y[0])
        self.times = rf.times

    def _project(self, t: float, psi: np.ndarray) -> np.ndarray:
        chi = packets.free_evolution(self.y, t, self.transverse, self.hbar, self.mass)
        return (chi.conj() @ psi) * self.dy

    def psi(self, index: int) -> np.ndarray:
        return self._project(float(self.times[index]), self.rf.psi(index))

    def snapshots(self):
        for t, psi in self.rf.snapshots():
            yield t, self._project(t, psi)


def transverse_packet(scenario, normal: packets.PacketInfo) -> packets.PacketInfo:
    """The packet's motion along y, from the scenario (as build made it)."""
    return packets.in_plane(scenario.packet, scenario.hbar, scenario.particle_mass,
                            normal.level)[1]


def normal_run(rf, potential, transverse: packets.PacketInfo) -> ForwardRun:
    """The run along the normal x as a line's ForwardRun (module note, 1)."""
    attrs = rf.attrs
    hbar, mass = attrs["hbar"], attrs["mass_internal"]
    V = np.asarray(rf.V, float)
    W = rf.absorber
    row = None if W is None else np.asarray(W, float)[int(np.argmin(np.sum(W, axis=1)))]
    observables = dict(rf.observables())
    # the recorded ⟨H⟩ holds the free transverse motion's ħ²(k_y² + σ_ky²)/2m too
    observables["energy"] = np.asarray(observables["energy"]) - (transverse.mean_energy
                                                                 - transverse.level)
    return ForwardRun.build(
        x=rf.x, V=V[V.shape[0] // 2], W=row, times=rf.times, samples=rf.samples(),
        observables=observables, packet=packets.PacketInfo(**rf.packet), hbar=hbar, mass=mass,
        dt=attrs["dt"], reference=rf.reference, region=rf.region, support=potential.support(),
        levels=potential.levels(), states=Projected(rf, transverse, hbar, mass))


def lateral_shift(rf, run: ForwardRun, transverse: packets.PacketInfo, stats: dict,
                  k_mean: float, channel: str = "reflection") -> dict:
    """D of the outgoing packet in each usable snapshot (module note, 2): against
    the mirror image at x_r for reflection, against the free packet moved on by
    x_t − x_r for transmission (the line's references, §5), both moving at
    ħ⟨k_x⟩/m. Positive D: further along +y·sign(k_y) than the reference ray."""
    y = np.asarray(rf.coordinate("y"), float)
    x = np.asarray(rf.x, float)
    cell = float(x[1] - x[0]) * float(y[1] - y[0])
    sign, info = run.sign, run.info
    reflected = channel == "reflection"
    mine = sign * x < run.x_r if reflected else sign * x > run.x_t   # the file's own frame
    W = rf.absorber
    inside_y = (float(y[0]), float(y[-1]))
    if W is not None:
        free = y[np.asarray(W, float).min(axis=1) == 0]
        inside_y = (float(free[0]), float(free[-1])) if free.size else inside_y
    usable = separated(run, stats, channel)
    vx = hbar_over_m(rf) * k_mean
    vy = transverse.group_velocity
    shifts, times = [], []
    for i in np.nonzero(usable)[0]:
        t = float(rf.times[i])
        density = np.abs(rf.psi(int(i))) ** 2
        part = density[:, mine]
        p = float(part.sum() * cell)
        if not p > 0:
            continue
        xc = sign * float((part.sum(axis=0) @ x[mine]) * cell / p)   # forward frame
        rows = part.sum(axis=1) * cell / p
        yc = float(rows @ y)
        wy = math.sqrt(max(float(rows @ (y - yc) ** 2), 0.0))
        if not (inside_y[0] + SEPARATION_Y * wy <= yc <= inside_y[1] - SEPARATION_Y * wy):
            continue
        ym = transverse.center + vy * t
        if reflected:
            xm = 2 * run.x_r - (info.center + vx * t)
            shifts.append((yc - ym) + (vy / vx) * (xc - xm))
        else:
            xm = info.center + (run.x_t - run.x_r) + vx * t
            shifts.append((yc - ym) - (vy / vx) * (xc - xm))
        times.append(t)
    return {"values": np.array(shifts), "times": np.array(times), "tan": vy / vx}


def hbar_over_m(rf) -> float:
    return float(rf.attrs["hbar"]) / float(rf.attrs["mass_internal"])


def measure_plane(rf, measure_run) -> DelayReport:
    """The delay report of a run in the plane: the line's report along the
    normal (from `measure_run`, the line's chain) with the reflected packet's
    lateral shift beside its packet average, and the packet's angle."""
    scenario = rf.scenario()
    potential = scenario.build_potential()
    if not potential.along_x:
        raise MeasureError(f"{rf.path}: the potential has a shape of the plane (or a formula "
                           "in y, or a term along y), so the motion along x does not separate: "
                           "there is no delay along the normal or lateral shift to measure")
    normal = packets.PacketInfo(**rf.packet)
    transverse = transverse_packet(scenario, normal)
    run = normal_run(rf, potential, transverse)
    if len(run.times) < 2:
        raise MeasureError(f"{rf.path}: the run holds fewer than two snapshots; nothing to measure")
    prediction, why = predictions(potential, normal, run.hbar, run.mass, rf.reference, run.region)
    report = measure_run(run, None, prediction, why, path=str(rf.path), units=rf.units,
                         status=rf.status)
    angle = math.degrees(math.atan2(transverse.k0, normal.k0))
    report.plane = {"angle": angle, "k_x": normal.k0, "k_y": transverse.k0,
                    "energy_normal": normal.energy}
    levels = potential.levels()
    for channel in ("reflection", "transmission"):
        found = getattr(report, channel)
        if found is None:
            continue
        if channel == "transmission" and levels[0] != levels[1]:
            report.notes.append("no lateral shift for the transmitted packet: the levels on "
                                "the two sides differ (a refracted ray; not measured yet)")
            continue
        found.lateral_shift = _shift_entry(rf, run, transverse, normal, prediction, potential,
                                           found, report.warnings)
    return report


def measured_wavenumber(report) -> float:
    """⟨k_x⟩ of the channel's filtered reference as the line's methods use it:
    |ψ̃₀|² times the run's own P(k) where the channel is filtered (a reference
    speed off by δv moves the reference by δv·t: it must be the run's)."""
    sp = report.spectrum
    share = np.clip(np.nan_to_num(np.asarray(sp.probability, float)), 0.0, 1.0) \
        if report.filtered else np.ones_like(sp.k)
    w = sp.weight * share
    return float(np.trapezoid(w * sp.k, sp.k) / np.trapezoid(w, sp.k))


def _shift_entry(rf, run, transverse, normal, prediction, potential, report,
                 warnings) -> dict:
    """The lateral-shift entry of one channel: measured, predicted, deviation,
    error (None without reruns), spread, stationary, snapshots_used. The
    measurement's reference moves at the run's ⟨k_x⟩, the prediction's at theory's."""
    channel = report.channel
    predicted_channel = None if prediction is None else getattr(prediction, channel)
    found = lateral_shift(rf, run, transverse, snapshot_stats(run), measured_wavenumber(report),
                          channel)
    values = found["values"]
    shift = None if predicted_channel is None else predicted_channel.centroid_shift
    k_mean = mean_wavenumber(potential, normal, run.hbar, run.mass, rf.reference,
                             channel) if predicted_channel is not None else abs(normal.k0)
    predicted = None if shift is None else \
        transverse.group_velocity / (hbar_over_m(rf) * k_mean) * shift
    wigner = None if predicted_channel is None else predicted_channel.wigner_delay
    measured = float(np.mean(values)) if values.size else None
    if measured is None:
        warnings.append(f"the {channel} packet is in no snapshot both separated from the "
                        "potential and clear of the y absorbers: no lateral shift")
    return {"measured": measured, "predicted": predicted,
            "deviation": None if measured is None or predicted is None else measured - predicted,
            "error": None,   # a discretisation bar needs reruns (as on a line)
            "spread": float(np.ptp(values) / 2) if values.size > 1 else None,
            "stationary": None if wigner is None else
            (transverse.k0 / normal.k0) * normal.group_velocity * wigner,
            "snapshots_used": int(values.size)}


def shift_row(report) -> Optional[dict]:
    """The reflection's lateral shift (None when not measured)."""
    channel = report.reflection
    return None if channel is None else getattr(channel, "lateral_shift", None)
