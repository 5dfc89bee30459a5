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
from ..theory.scattering import scatter
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


def mean_normal_wavenumber(potential, info: packets.PacketInfo, hbar: float, mass: float,
                           reference: float) -> float:
    """⟨k_x⟩ over |ψ̃₀(k_x)|²R(k_x) (the band k₀ ± 8σ_k, trapezoid on 1601 points):
    the speed of the filtered mirror image is ħ⟨k_x⟩/m."""
    k0, sk = abs(info.k0), info.sigma_k
    k = np.linspace(max(k0 - 8 * sk, k0 / 100), k0 + 8 * sk, 1601)
    sc = scatter(potential, info.level + (hbar * k) ** 2 / (2 * mass), hbar=hbar,
                 x_r=reference, direction="right" if info.k0 > 0 else "left", dwell=False)
    w = np.exp(-0.5 * ((k - k0) / sk) ** 2) * np.nan_to_num(np.asarray(sc.R, float))
    return float(np.trapezoid(w * k, k) / np.trapezoid(w, k))


def lateral_shift(rf, run: ForwardRun, transverse: packets.PacketInfo, stats: dict,
                  k_mean: float) -> dict:
    """D of the reflected packet in each usable snapshot, and their mean (module note, 2)."""
    y = np.asarray(rf.coordinate("y"), float)
    x = np.asarray(rf.x, float)
    cell = float(x[1] - x[0]) * float(y[1] - y[0])
    sign, x_r, info = run.sign, run.x_r, run.info
    mine = sign * x < x_r     # the incidence side, in the file's own frame
    W = rf.absorber
    inside_y = (float(y[0]), float(y[-1]))
    if W is not None:
        free = y[np.asarray(W, float).min(axis=1) == 0]
        inside_y = (float(free[0]), float(free[-1])) if free.size else inside_y
    usable = separated(run, stats, "reflection")
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
        xm = 2 * x_r - (info.center + vx * t)
        ym = transverse.center + vy * t
        shifts.append((yc - ym) + (vy / vx) * (xc - xm))
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
                           "in y), so the motion along x does not separate: there is no delay "
                           "along the normal or lateral shift to measure")
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
    if report.reflection is not None:
        stats = snapshot_stats(run)
        k_mean = mean_normal_wavenumber(potential, normal, run.hbar, run.mass, rf.reference) \
            if prediction is not None else abs(normal.k0)
        found = lateral_shift(rf, run, transverse, stats, k_mean)
        values, tan = found["values"], found["tan"]
        shift = prediction.reflection.centroid_shift \
            if prediction is not None and prediction.reflection is not None else None
        predicted = None if shift is None else tan * shift
        wigner = prediction.reflection.wigner_delay if prediction is not None and \
            prediction.reflection is not None else None
        measured = float(np.mean(values)) if values.size else None
        if measured is None:
            report.warnings.append("the reflected packet is in no snapshot both separated from "
                                   "the potential and clear of the y absorbers: no lateral shift")
        report.reflection.lateral_shift = {
            "measured": measured, "predicted": predicted,
            "deviation": None if measured is None or predicted is None else measured - predicted,
            "error": None,   # a discretisation bar needs reruns (as on a line)
            "spread": float(np.ptp(values) / 2) if values.size > 1 else None,
            "stationary": None if wigner is None else
            (transverse.k0 / normal.k0) * normal.group_velocity * wigner,
            "snapshots_used": int(values.size)}
    return report


def shift_row(report) -> Optional[dict]:
    """The reflection's lateral shift (None when not measured)."""
    channel = report.reflection
    return None if channel is None else getattr(channel, "lateral_shift", None)
