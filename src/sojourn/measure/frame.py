"""The run in the forward frame: incidence from the left.

A left-moving packet is measured in the mirrored frame x → −x, so every
method is written once. `ForwardRun.build` takes arrays and plain numbers;
`ForwardRun.from_runfile` reads them from a run file (or any reader with the
same attributes). Also here: per-snapshot statistics of the two sides, the
snapshots where an outgoing packet has separated, and `predictions`, the one
call into theory.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Optional

import numpy as np

from ..errors import MeasureError, SojournError
from ..model import packets
from ..theory.averages import K_SPAN_AVERAGES, packet_prediction

SEPARATION = 6.0        # widths between the outgoing packet and the potential / box edge
K_SPAN = K_SPAN_AVERAGES  # the packet's band: k₀ ± 8σ_k, as the theory's averages


@dataclass
class ForwardRun:
    """A run seen with the packet coming from the left (arrays already mirrored
    when it moves left; `sign` = −1 then). Lengths, times and energies are in
    the scenario's units. `states` reads snapshot ψ: anything with `psi(i)` and
    `snapshots()` yielding (t, ψ), in the file's own frame."""

    x: np.ndarray
    dx: float
    V: np.ndarray
    W: Optional[np.ndarray]      # absorber profile, None without one
    hbar: float
    mass: float
    dt: float
    info: packets.PacketInfo     # forward: k0 > 0, centre mirrored if needed
    sign: int                    # +1 right-moving, −1 mirrored
    x_r: float                   # reference point (entry)
    x_t: float                   # far edge of the potential (exit)
    inner: tuple                 # the box inside the absorbers
    level_out: float             # V far on the transmission side
    times: np.ndarray
    samples: dict
    observables: dict
    region: Optional[tuple]
    states: object

    @classmethod
    def build(cls, *, x, V, W, times, samples, observables, packet: packets.PacketInfo,
              hbar: float, mass: float, dt: float, reference: float, region, support,
              levels, states) -> "ForwardRun":
        """The forward frame from a run's arrays (as recorded) and numbers;
        `support` is the potential's (start, end) or None, `levels` its
        (left, right) levels far out."""
        x, V = np.asarray(x, float), np.asarray(V, float)
        if x.ndim != 1 or len(x) < 2 or V.shape[-1:] != x.shape or V.ndim > 2:
            raise MeasureError("the run's grid and potential must be 1D arrays of one length "
                               "(V with at most a leading spin-component axis)")
        sign = 1 if packet.k0 >= 0 else -1
        samples, obs = dict(samples), dict(observables)
        info = packet
        if sign < 0:
            x, V = -x[::-1], V[..., ::-1]
            W = None if W is None else W[::-1]
            samples["flux"] = -samples["flux"]
            samples["detectors"] = -np.asarray(samples["detectors"], float)
            support = None if support is None else (-support[1], -support[0])
            levels = levels[::-1]
            obs["P_left"], obs["P_right"] = obs["P_right"], obs["P_left"]
            obs["absorbed_left"], obs["absorbed_right"] = obs["absorbed_right"], obs["absorbed_left"]
            info = replace(info, center=-info.center, k0=-info.k0,
                           group_velocity=-info.group_velocity)
        x_r = sign * float(reference)
        x_t = max(support[1], x_r) if support is not None else x_r
        if W is not None and np.any(W == 0):
            free = x[W == 0]
            inner = (float(free[0]), float(free[-1]))
        else:
            inner = (float(x[0]), float(x[-1]))
        return cls(x, float(x[1] - x[0]), V, W, float(hbar), float(mass), float(dt), info, sign,
                   x_r, float(x_t), inner, float(levels[1]), np.asarray(times, float), samples,
                   obs, region, states)

    @classmethod
    def from_runfile(cls, rf, potential) -> "ForwardRun":
        """The forward frame of a run file; `potential` is the scenario's
        (for its support and levels; a confining one is refused)."""
        if potential.confining:
            raise MeasureError(f"{rf.path}: the potential confines the packet (a harmonic term): "
                               "there is no incoming or outgoing packet, so no delay to measure")
        attrs = rf.attrs
        return cls.build(x=rf.x, V=rf.V, W=rf.absorber, times=rf.times, samples=rf.samples(),
                         observables=rf.observables(),
                         packet=packets.PacketInfo(**rf.packet), hbar=attrs["hbar"],
                         mass=attrs["mass_internal"], dt=attrs["dt"], reference=rf.reference,
                         region=rf.region, support=potential.support(),
                         levels=potential.levels(), states=rf)

    @property
    def grid_phase(self) -> float:
        """Δt·(E_max + ΔV)/ħ with E_max = ħ²(π/Δx)²/2m: below π the split-operator
        step resolves every grid wavenumber."""
        e_max = (self.hbar * math.pi / self.dx) ** 2 / (2 * self.mass)
        return self.dt * (e_max + float(np.ptp(self.V))) / self.hbar

    def psi(self, index: int) -> np.ndarray:
        psi = self.states.psi(index)
        return psi if self.sign > 0 else psi[..., ::-1]

    def snapshots(self):
        for t, psi in self.states.snapshots():
            yield t, (psi if self.sign > 0 else psi[..., ::-1])


# ----------------------------------------------------------------------------------------
# Per-snapshot statistics of the two sides


def density(psi) -> np.ndarray:
    """|ψ|² on the grid, summed over a leading spin-component axis: what a detector
    blind to spin sees (PHYSICS §Larmor: the ordinary delays of a spinor run)."""
    rho = np.abs(psi) ** 2
    return rho if rho.ndim == 1 else rho.reshape(-1, rho.shape[-1]).sum(axis=0)


def side_stats(x, density, dx, mask) -> tuple[float, float, float]:
    """(probability, mean, rms width) of `density` where `mask` holds (NaN if empty)."""
    p = float(density[mask].sum() * dx)
    if p <= 0:
        return 0.0, math.nan, math.nan
    mean = float((x[mask] * density[mask]).sum() * dx / p)
    var = float(((x[mask] - mean) ** 2 * density[mask]).sum() * dx / p)
    return p, mean, math.sqrt(max(var, 0.0))


def snapshot_stats(run: ForwardRun) -> dict:
    """Arrays over the snapshots: P, centroid and width left of x_r ('out') and
    right of x_t ('tr'), the norm, and the probability near the box edges."""
    left = run.x < run.x_r
    right = run.x > run.x_t
    edge = (run.x < run.x[0] + 0.03 * (run.x[-1] - run.x[0])) | (
        run.x > run.x[-1] - 0.03 * (run.x[-1] - run.x[0]))
    rows = []
    for _, psi in run.snapshots():
        rho = density(psi)
        rows.append(side_stats(run.x, rho, run.dx, left)
                    + side_stats(run.x, rho, run.dx, right)
                    + (float(rho.sum() * run.dx), float(rho[edge].sum() * run.dx)))
    a = np.array(rows).reshape(-1, 8)
    return {"P_out": a[:, 0], "x_out": a[:, 1], "w_out": a[:, 2], "P_tr": a[:, 3],
            "x_tr": a[:, 4], "w_tr": a[:, 5], "norm": a[:, 6], "edge": a[:, 7]}


def separated(run: ForwardRun, stats: dict, channel: str) -> np.ndarray:
    """Snapshots where the outgoing packet of `channel` has left the potential
    (by SEPARATION widths, both measured and for the free reference) and lies
    whole inside the box (clear of absorbers and edges)."""
    info, t = run.info, run.times
    width = packets.free_width(info.width, t, run.hbar, run.mass)
    travel = info.center + info.group_velocity * t
    inside = np.maximum(stats["norm"] - stats["P_out"] - stats["P_tr"], 0.0)
    with np.errstate(invalid="ignore"):
        if channel == "reflection":
            p, mean, w = stats["P_out"], stats["x_out"], stats["w_out"]
            ref = 2 * run.x_r - travel
            ok = ((run.x_r - ref >= SEPARATION * width) & (run.x_r - mean >= SEPARATION * w)
                  & (mean - SEPARATION * w >= run.inner[0]))
        else:
            p, mean, w = stats["P_tr"], stats["x_tr"], stats["w_tr"]
            ref = travel + run.x_t - run.x_r
            ok = ((ref - run.x_t >= SEPARATION * width) & (mean - run.x_t >= SEPARATION * w)
                  & (mean + SEPARATION * w <= run.inner[1]))
    ok &= (p > 0) & np.isfinite(mean) & (inside <= 1e-6 * np.maximum(p, 1e-300) + 1e-12)
    return ok


# ----------------------------------------------------------------------------------------
# Theory side


def predictions(potential, packet: packets.PacketInfo, hbar: float, mass: float,
                reference: float, region):
    """The theory's packet-averaged predictions for the run's own packet,
    reference point and dwell region (None, and the reason, if theory cannot
    treat it)."""
    try:
        return packet_prediction(potential, packet, hbar=hbar, mass=mass,
                                 reference=float(reference), region=region), None
    except SojournError as exc:
        return None, str(exc)
