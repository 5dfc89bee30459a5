"""Delays measured from a run file, each beside its own stationary-theory
prediction (PHYSICS §5).

Three independent methods per outgoing channel (reflection, and transmission
when a transmitted packet exists):

- centroid: the outgoing packet's centroid, restricted to its side of the
  potential, against the reference trajectory, at the latest snapshot where
  it is separated from the potential and whole inside the box (components
  with a long delay, near a threshold, leave last: the centroid approaches its
  limit only as ~1/t there, and the drift across snapshots is reported);
  predicted by ⟨dφ/dk⟩_w / v₀.
- arrival: the mean arrival time of the outgoing flux at a detector minus the
  reference's; predicted by ⟨τ⟩_w.
- spectral: the momentum amplitude of the outgoing packet divided by the
  incident one, free-flight phase removed, gives τ(E) and R(E) (or T(E))
  across the bandwidth; its mean with incident dk weights is predicted by the
  spectral average.

The reference is the exact free evolution of the incident Gaussian — of its
filtered spectrum ψ̃₀·|r| (ψ̃₀·|t|) where the channel does not carry the whole
packet — mirrored at the reference point x_r for reflection
(ψ_ref(x, t) = −ψ_free(2x_r − x, t), an ideal mirror). The filter |r(k)| is
the one the run itself shows (the outgoing spectrum over the incident one).

Conventions: incidence from the left (a left-moving packet is measured in the
mirrored frame x → −x); r referenced at x_r, t with the incident wave at x_r
and the transmitted one at x_t (the far edge of the potential), so that the
transmission delay is the entry-to-exit time. Everything is in the
scenario's units.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable, Optional

import numpy as np

from ..model import packets
from ..store import RunFile, RunReader
from ..errors import SojournError, RunFileError, MeasureError
from ..theory.averages import packet_prediction

METHODS = ("centroid", "arrival", "spectral")
SEPARATION = 6.0        # widths between the outgoing packet and the potential / box edge
K_SPAN = 8.0            # the packet's band: k₀ ± 8σ_k (as the theory's averages)
ABOVE_TOP_WARN = 1e-3   # share of the packet above the barrier top that calls for a warning
OUT_OF_BAND_WARN = 1e-6  # probability outside the packet's k-band that calls for a warning
LOST_WARN = 1e-6        # probability absorbed or wrapped before the measurement
PASSAGE_GAP = 4.0       # widths between the incident and reflected passages at a detector
CHANNEL_MIN = 1e-6      # outgoing probability below which a channel is not measured




# ----------------------------------------------------------------------------------------
# Results


@dataclass
class MethodResult:
    """One measured delay beside its prediction (times in the scenario's unit)."""

    delay: Optional[float]
    predicted: Optional[float] = None
    error: Optional[float] = None

    @property
    def deviation(self) -> Optional[float]:
        if self.delay is None or self.predicted is None:
            return None
        return self.delay - self.predicted

    @property
    def relative(self) -> Optional[float]:
        d = self.deviation
        if d is None or self.predicted == 0:
            return None
        return d / abs(self.predicted)

    def to_dict(self) -> dict:
        return {"delay": self.delay, "predicted": self.predicted, "deviation": self.deviation,
                "relative": self.relative, "error": self.error}


@dataclass
class Spectrum:
    """τ(E) and R(E) (or T(E)) of one channel from one snapshot, on incident k."""

    k: np.ndarray
    energy: np.ndarray
    delay: np.ndarray
    probability: np.ndarray
    weight: np.ndarray        # incident |ψ̃₀(k)|² (dk weights)


@dataclass
class ChannelReport:
    """What was measured for one outgoing channel ('reflection' or 'transmission')."""

    channel: str
    probability: float                  # final: P on the outgoing side + absorbed there
    probability_flux: Optional[float]   # time-integrated outgoing flux at the detector
    probability_spectral: Optional[float]
    measured: dict                      # method -> MethodResult
    wigner: Optional[float] = None
    packet: Optional[float] = None      # ⟨τ⟩_w, the flux-weighted prediction
    predicted_probability: Optional[float] = None
    filtered: bool = False
    detector: Optional[float] = None
    snapshots_used: int = 0
    spectrum: Optional[Spectrum] = None

    def to_dict(self, dwell: dict) -> dict:
        return {
            "probability": self.probability,
            "measured": {m: r.to_dict() for m, r in self.measured.items()},
            "theory": {"wigner": self.wigner, "packet": self.packet,
                       "probability": self.predicted_probability},
            "dwell": dwell,
            "probabilities": {"final": self.probability, "flux": self.probability_flux,
                              "spectral": self.probability_spectral},
            "reference": "filtered" if self.filtered else "free",
            "detector": self.detector, "snapshots_used": self.snapshots_used,
        }


@dataclass
class DelayReport:
    """Measured delays of a run beside theory, with warnings in plain words."""

    file: str
    units: dict
    reflection: Optional[ChannelReport]
    transmission: Optional[ChannelReport]
    dwell: dict
    warnings: list = field(default_factory=list)
    energy0: Optional[float] = None

    def channels(self) -> list:
        return [c for c in (self.reflection, self.transmission) if c is not None]

    def to_dict(self) -> dict:
        return {
            "units": self.units,
            "reflection": self.reflection.to_dict(self.dwell) if self.reflection else None,
            "transmission": self.transmission.to_dict(self.dwell) if self.transmission else None,
            "warnings": list(self.warnings),
        }


# ----------------------------------------------------------------------------------------
# The run in the forward frame (incidence from the left)


@dataclass
class _Run:
    scenario: object
    x: np.ndarray
    dx: float
    V: np.ndarray
    hbar: float
    mass: float
    info: packets.PacketInfo     # forward: k0 > 0, centre mirrored if needed
    sign: int                    # +1 right-moving, −1 mirrored
    x_r: float
    x_t: float
    inner: tuple                 # the box inside the absorbers
    has_absorber: bool
    level_out: float             # V far on the transmission side
    times: np.ndarray
    samples: dict
    observables: dict
    region: Optional[tuple]
    runfile: RunFile

    def psi(self, index: int) -> np.ndarray:
        psi = self.runfile.psi(index)
        return psi if self.sign > 0 else psi[::-1]

    def snapshots(self):
        for t, psi in self.runfile.snapshots():
            yield t, (psi if self.sign > 0 else psi[::-1])


def _forward(rf: RunFile) -> _Run:
    sc = rf.scenario()
    info = packets.PacketInfo(**rf.packet)
    sign = 1 if info.k0 >= 0 else -1
    potential = sc.build_potential()
    if potential.confining:
        raise MeasureError(f"{rf.path}: the potential confines the packet (a harmonic term): "
                           "there is no incoming or outgoing packet, so no delay to measure")
    x = rf.x
    V = rf.V
    W = rf.absorber
    samples = rf.samples()
    obs = rf.observables()
    support = potential.support()
    levels = potential.levels()
    if sign < 0:
        x, V = -x[::-1], V[::-1]
        W = None if W is None else W[::-1]
        samples["flux"] = -samples["flux"]
        samples["detectors"] = -samples["detectors"]
        support = None if support is None else (-support[1], -support[0])
        levels = levels[::-1]
        obs["P_left"], obs["P_right"] = obs["P_right"], obs["P_left"]
        obs["absorbed_left"], obs["absorbed_right"] = obs["absorbed_right"], obs["absorbed_left"]
        info = replace(info, center=-info.center, k0=-info.k0,
                       group_velocity=-info.group_velocity)
    x_r = sign * rf.reference
    x_t = max(support[1], x_r) if support is not None else x_r
    if W is not None and np.any(W == 0):
        free = x[W == 0]
        inner = (float(free[0]), float(free[-1]))
    else:
        inner = (float(x[0]), float(x[-1]))
    region = rf.region
    return _Run(sc, x, float(x[1] - x[0]), V, float(rf.attrs["hbar"]), float(rf.attrs["mass"]),
                info, sign, x_r, x_t, inner, W is not None, float(levels[1]), rf.times, samples,
                obs, region, rf)


# ----------------------------------------------------------------------------------------
# Pure pieces


def incident_amplitude(k, info: packets.PacketInfo) -> np.ndarray:
    """ψ̃₀(k) = (2π)^(-1/2) ∫ ψ₀ e^{−ikx} dx of the Gaussian of PHYSICS §2:
    (2πσ²)^(-1/4) σ√2 exp(−σ²(k−k₀)²) e^{−i(k−k₀)x₀}."""
    s = info.width
    return ((2 * math.pi * s ** 2) ** -0.25 * s * math.sqrt(2)
            * np.exp(-(s * (k - info.k0)) ** 2 - 1j * (k - info.k0) * info.center))


def momentum_amplitude(x, psi, q, dx) -> tuple[np.ndarray, np.ndarray]:
    """C(q) = (2π)^(-1/2) Σ ψ(x) e^{−iqx} dx at arbitrary q, and dC/dq (exact
    for a resolved packet: the sum is spectrally accurate)."""
    phase = np.exp(-1j * np.outer(q, x))
    c = phase @ psi * (dx / math.sqrt(2 * math.pi))
    dc = phase @ (-1j * x * psi) * (dx / math.sqrt(2 * math.pi))
    return c, dc


def packet_band(info: packets.PacketInfo, points: int = 801) -> np.ndarray:
    """Incident wavenumbers across the band k₀ ± 8σ_k (k > 0)."""
    lo = max(info.k0 - K_SPAN * info.sigma_k, info.k0 / 100)
    return np.linspace(lo, info.k0 + K_SPAN * info.sigma_k, points)


def channel_spectrum(run: _Run, psi, t: float, channel: str, k) -> tuple:
    """(q, |C(q)|² dq/dk, τ(k), P(k)) of the outgoing packet in `channel` at time t.

    Reflection: r(k) = C(−k) e^{−2ikx_r} e^{iE t/ħ} / ψ̃₀(k);
    transmission: t(k) = C(k') (k/k') e^{−ikx_r + ik'x_t} e^{iE t/ħ} / ψ̃₀(k).
    τ = (dφ/dk)/v(k), with the phase derivatives taken analytically.
    """
    hbar, m, info = run.hbar, run.mass, run.info
    a = incident_amplitude(k, info)
    da_phase = -info.center                       # d arg ψ̃₀ / dk
    if channel == "reflection":
        mask = run.x < run.x_r
        q = -k
        dq_dk = -1.0
        offset = -2 * run.x_r
    else:
        mask = run.x > run.x_t
        q2 = k ** 2 - 2 * m * (run.level_out - info.level) / hbar ** 2
        q = np.sqrt(np.maximum(q2, 0.0))
        dq_dk = np.where(q > 0, k / np.where(q > 0, q, 1.0), np.nan)
        offset = None
    c, dc = momentum_amplitude(run.x[mask], psi[mask], q, run.dx)
    with np.errstate(divide="ignore", invalid="ignore"):
        dphase_c = np.imag(dc / c) * dq_dk          # d arg C(q(k)) / dk
        if channel == "reflection":
            dphi = dphase_c + offset + hbar * k * t / m - da_phase
            prob = np.abs(c) ** 2 / np.abs(a) ** 2
        else:
            dphi = dphase_c - run.x_r + run.x_t * dq_dk + hbar * k * t / m - da_phase
            prob = np.abs(c) ** 2 * np.abs(dq_dk) / np.abs(a) ** 2
            prob = np.where(q > 0, prob, 0.0)
        tau = dphi * m / (hbar * k)
    return q, np.abs(c) ** 2 * np.abs(dq_dk), tau, prob


def mean_arrival(t, flux) -> tuple[float, float]:
    """(∫ t J dt / ∫ J dt, ∫ J dt) by the trapezoid rule."""
    total = np.trapezoid(flux, t)
    return float(np.trapezoid(t * flux, t) / total), float(total)


def reference_flux(run: _Run, channel: str, detector: float, times, k, filt) -> np.ndarray:
    """Outgoing flux of the reference at the detector: the free evolution of
    ψ̃₀·filt, mirrored at x_r (reflection) or carried from x_r to x_t with the
    outgoing wavenumber (transmission), with no phase of its own."""
    hbar, m, info = run.hbar, run.mass, run.info
    dk = np.gradient(k)
    b = incident_amplitude(k, info) * filt * dk / math.sqrt(2 * math.pi)
    E = info.level + (hbar * k) ** 2 / (2 * m)
    if channel == "reflection":
        phase = np.exp(1j * k * (2 * run.x_r - detector))
        slope = 1j * k       # derivative along the outgoing direction
    else:
        q = np.sqrt(np.maximum(k ** 2 - 2 * m * (run.level_out - info.level) / hbar ** 2, 0.0))
        phase = np.exp(1j * (k * run.x_r + q * (detector - run.x_t)))
        slope = 1j * q
    out = np.empty(len(times))
    for start in range(0, len(times), 512):
        tt = times[start:start + 512]
        evolve = np.exp(-1j * np.outer(tt, E) / hbar)
        psi = evolve @ (b * phase)
        dpsi = evolve @ (b * phase * slope)
        out[start:start + 512] = hbar / m * np.imag(np.conj(psi) * dpsi)
    return out


# ----------------------------------------------------------------------------------------
# Streaming statistics of the snapshots


def _side_stats(x, density, dx, mask):
    p = float(density[mask].sum() * dx)
    if p <= 0:
        return 0.0, math.nan, math.nan
    mean = float((x[mask] * density[mask]).sum() * dx / p)
    var = float(((x[mask] - mean) ** 2 * density[mask]).sum() * dx / p)
    return p, mean, math.sqrt(max(var, 0.0))


def _snapshot_stats(run: _Run) -> dict:
    left = run.x < run.x_r
    right = run.x > run.x_t
    edge = (run.x < run.x[0] + 0.03 * (run.x[-1] - run.x[0])) | (
        run.x > run.x[-1] - 0.03 * (run.x[-1] - run.x[0]))
    rows = []
    for _, psi in run.snapshots():
        density = np.abs(psi) ** 2
        rows.append(_side_stats(run.x, density, run.dx, left)
                    + _side_stats(run.x, density, run.dx, right)
                    + (float(density.sum() * run.dx), float(density[edge].sum() * run.dx)))
    a = np.array(rows).reshape(-1, 8)
    return {"P_out": a[:, 0], "x_out": a[:, 1], "w_out": a[:, 2], "P_tr": a[:, 3],
            "x_tr": a[:, 4], "w_tr": a[:, 5], "norm": a[:, 6], "edge": a[:, 7]}


def _usable(run: _Run, stats: dict, channel: str) -> np.ndarray:
    """Snapshots where the outgoing packet of `channel` has left the potential
    (by SEPARATION widths, both measured and for the free reference) and lies
    whole inside the box (clear of absorbers and edges)."""
    info, t = run.info, run.times
    width = packets.free_width(info.width, t, run.hbar, run.mass)
    travel = info.center + info.group_velocity * t
    inside = np.maximum(stats["norm"] - stats["P_out"] - stats["P_tr"], 0.0)
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
# Measuring one channel


def _measure_channel(run: _Run, stats: dict, channel: str, warnings: list,
                     reference_run: Optional[_Run] = None) -> Optional[ChannelReport]:
    info, hbar, m = run.info, run.hbar, run.mass
    obs = run.observables
    side = "left" if channel == "reflection" else "right"
    final = float(obs[f"P_{side}"][-1] + obs[f"absorbed_{side}"][-1])
    word = "reflected" if channel == "reflection" else "transmitted"
    usable = _usable(run, stats, channel)
    measured = {}
    k = packet_band(info)
    weight = np.abs(incident_amplitude(k, info)) ** 2
    report = ChannelReport(channel, final, None, None, measured)

    # spectral: the last snapshot where the packet is separated and whole
    index = int(np.nonzero(usable)[0][-1]) if usable.any() else len(run.times) - 1
    if not usable.any():
        warnings.append(f"the {word} packet has not separated from the potential (or has "
                        f"reached the box edge or absorber) in any snapshot; its delays are "
                        f"taken from the last snapshot and cannot be trusted")
    t_spec = float(run.times[index])
    q, outgoing, tau, prob = channel_spectrum(run, run.psi(index), t_spec, channel, k)
    E = info.level + (hbar * k) ** 2 / (2 * m)
    report.spectrum = Spectrum(k, E, tau, prob, weight)
    report.probability_spectral = float(np.trapezoid(outgoing, k))
    good = np.isfinite(tau) & (prob > 1e-10)
    if good.any():
        measured["spectral"] = MethodResult(float(np.sum((weight * tau)[good])
                                                  / np.sum(weight[good])))
    filt_sq = np.where(np.isfinite(prob), prob, 0.0)
    packet_p = float(np.trapezoid(weight * filt_sq, k) / np.trapezoid(weight, k))
    report.filtered = abs(1.0 - packet_p) > 1e-4
    filt = np.sqrt(filt_sq) if report.filtered else np.ones_like(k)
    w = weight * filt ** 2

    # centroid against the reference trajectory of the (filtered) free packet
    if usable.any():
        t = run.times[usable]
        v_mean = float(np.trapezoid(w * hbar * k / m, k) / np.trapezoid(w, k))
        if channel == "reflection":
            ref = 2 * run.x_r - info.center - v_mean * t
            delays = (stats["x_out"][usable] - ref) / info.group_velocity
        else:
            q0 = math.sqrt(max(info.k0 ** 2 - 2 * m * (run.level_out - info.level) / hbar ** 2, 0))
            if q0 > 0:
                qk = np.sqrt(np.maximum(k ** 2 - 2 * m * (run.level_out - info.level) / hbar ** 2,
                                        0.0))
                vq = float(np.trapezoid(w * hbar * qk / m, k) / np.trapezoid(w, k))
                ratio = float(np.trapezoid(w * qk / k, k) / np.trapezoid(w, k))
                ref = run.x_t + ratio * (info.center - run.x_r) + vq * t
                delays = (ref - stats["x_tr"][usable]) / (hbar * q0 / m)
            else:
                delays = None
        if reference_run is not None and delays is not None:
            delays = _centroid_from_reference_run(run, reference_run, stats, usable, channel,
                                                  warnings)
        if delays is not None:
            # the latest usable snapshot: the centroid relation holds once the packet has
            # left, and components with a long delay (near a threshold) leave last
            measured["centroid"] = MethodResult(float(delays[-1]))
            report.snapshots_used = int(usable.sum())
            drift = float(np.ptp(delays)) if len(delays) > 1 else 0.0
            if drift > 1e-3 * max(abs(float(delays[-1])), info.width / info.group_velocity):
                warnings.append(f"the {word} centroid delay drifts by {drift:.3g} across the "
                                f"{len(delays)} snapshots used: part of the packet is still "
                                "leaving (slow components near a threshold) or the reference "
                                "does not match the outgoing spectrum; a longer run settles it")

    # arrival at a detector on the outgoing side
    s = run.samples
    detectors = np.asarray(s["detectors"], dtype=float)
    if channel == "reflection":
        candidates = [i for i, d in enumerate(detectors) if info.center < d < run.x_r]
        pick = min(candidates, key=lambda i: detectors[i]) if candidates else None
    else:
        candidates = [i for i, d in enumerate(detectors) if d > run.x_t]
        pick = max(candidates, key=lambda i: detectors[i]) if candidates else None
    if pick is None:
        warnings.append(f"no detector on the {word} side (between the packet's start and the "
                        f"potential for reflection, beyond it for transmission): no arrival delay")
    elif len(s["t"]) > 2:
        xd = float(detectors[pick])
        report.detector = xd * run.sign
        ts = s["t"]
        flux = s["flux"][:, pick] * (-1 if channel == "reflection" else 1)
        if channel == "reflection":
            split = (run.x_r - info.center) / info.group_velocity
            gap = 2 * (run.x_r - xd)
            if gap < 2 * PASSAGE_GAP * float(packets.free_width(info.width, split, hbar, m)):
                warnings.append(f"the detector at {report.detector:g} is too close to the "
                                "potential: incident and reflected passages overlap there")
            sel = ts >= split
        else:
            sel = np.ones_like(ts, dtype=bool)
        if sel.sum() > 2:
            tw, fw = ts[sel], flux[sel]
            arrival, total = mean_arrival(tw, fw)
            report.probability_flux = total
            if reference_run is not None:
                ref_flux = _reference_run_flux(run, reference_run, channel, xd, tw, warnings)
            else:
                ref_flux = None
            if ref_flux is None:
                ref_flux = reference_flux(run, channel, xd, tw, k, filt)
            ref_arrival, _ = mean_arrival(tw, ref_flux)
            measured["arrival"] = MethodResult(arrival - ref_arrival)
            tail = abs(fw[-1]) / max(np.max(np.abs(fw)), 1e-300)
            if tail > 1e-4:
                warnings.append(f"the {word} flux at the detector {report.detector:g} has not died "
                                f"out by the end of the run ({tail:.2g} of its peak): the arrival "
                                "delay misses its tail; run longer")
    return report


def _centroid_from_reference_run(run, ref, stats, usable, channel, warnings):
    """Centroid delays against the free packet of a named reference run (same
    snapshot times), mirrored at x_r for reflection."""
    t = run.times[usable]
    rt = ref.times
    everywhere = np.ones_like(ref.x, bool)
    centres = np.array([_side_stats(ref.x, np.abs(psi) ** 2, ref.dx, everywhere)[1]
                        for _, psi in ref.snapshots()])
    edge = float(np.max(_snapshot_stats(ref)["edge"]))
    if edge > LOST_WARN:
        warnings.append(f"up to {edge:.2g} of the reference run's packet reached its box edge: "
                        "its centroid wraps around the periodic box and the centroid delay "
                        "against it cannot be trusted")
    if rt[-1] < t[-1] - 1e-9:
        warnings.append("the reference run ends before the measured one; its trajectory is "
                        "extrapolated")
    free = np.interp(t, rt, centres, right=np.nan)
    if np.any(np.isnan(free)):
        slope = (centres[-1] - centres[-2]) / (rt[-1] - rt[-2])
        free = np.where(np.isnan(free), centres[-1] + slope * (t - rt[-1]), free)
    v0 = run.info.group_velocity
    if channel == "reflection":
        return (stats["x_out"][usable] - (2 * run.x_r - free)) / v0
    return (free + run.x_t - run.x_r - stats["x_tr"][usable]) / v0


def _reference_run_flux(run, ref, channel, xd, times, warnings):
    """Outgoing reference flux at the detector from a named reference run: its
    detector at the mirrored position 2x_r − x_d (reflection) or at x_d."""
    want = 2 * run.x_r - xd if channel == "reflection" else xd - run.x_t + run.x_r
    dets = np.asarray(ref.samples["detectors"], dtype=float)
    hit = np.nonzero(np.abs(dets - want) <= 0.5 * ref.dx)[0]
    if not hit.size:
        warnings.append(f"the reference run has no detector at {want * run.sign:g}; the arrival "
                        "reference is the exact free evolution instead")
        return None
    return np.interp(times, ref.samples["t"], ref.samples["flux"][:, hit[0]])


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


def _attach(report: ChannelReport, prediction) -> None:
    if prediction is None:
        return
    table = {"centroid": prediction.centroid_delay, "arrival": prediction.flux_delay,
             "spectral": prediction.spectral_delay}
    for method, result in report.measured.items():
        result.predicted = table[method]
    report.wigner = prediction.wigner_delay
    report.packet = prediction.flux_delay
    report.predicted_probability = prediction.probability


# ----------------------------------------------------------------------------------------
# The public API


def measure_delays(runfile_or_path, reference_run=None) -> DelayReport:
    """Measure the delays of a run file by every method and set each beside
    its own prediction. `reference_run` optionally names a run of the same
    packet without the potential, used instead of the exact free evolution."""
    own = not isinstance(runfile_or_path, RunReader)
    rf = RunFile(runfile_or_path) if own else runfile_or_path
    ref_file = None
    try:
        run = _forward(rf)
        ref = None
        if reference_run is not None:
            ref_file = reference_run if isinstance(reference_run, RunReader) else RunFile(reference_run)
            ref = _forward(ref_file)
        return _measure(run, ref)
    finally:
        if own:
            rf.close()
        if ref_file is not None and not isinstance(reference_run, RunReader):
            ref_file.close()


def _measure(run: _Run, ref: Optional[_Run]) -> DelayReport:
    warnings: list[str] = []
    rf = run.runfile
    if rf.status != "complete":
        warnings.append(f"the run is not complete (status '{rf.status}'): the outgoing packet "
                        "may not have left")
    if len(run.times) < 2:
        raise MeasureError(f"{rf.path}: the run holds fewer than two snapshots; nothing to measure")
    stats = _snapshot_stats(run)
    reflected = float(run.observables["P_left"][-1] + run.observables["absorbed_left"][-1])
    reflection = None
    if reflected > CHANNEL_MIN:
        reflection = _measure_channel(run, stats, "reflection", warnings, ref)
    transmitted = float(run.observables["P_right"][-1] + run.observables["absorbed_right"][-1])
    transmission = None
    if transmitted > CHANNEL_MIN:
        transmission = _measure_channel(run, stats, "transmission", warnings, ref)

    prediction, why = predictions(run.scenario.build_potential(), packets.PacketInfo(**rf.packet),
                                  run.hbar, run.mass, rf.reference, run.region)
    if prediction is None:
        warnings.append(f"no theory prediction: {why}")
    else:
        if reflection is not None:
            _attach(reflection, prediction.reflection)
        if transmission is not None:
            _attach(transmission, prediction.transmission)
            if prediction.transmission is None or prediction.transmission.probability < 1e-8:
                warnings.append(f"{transmitted:.2g} of the probability went through, where "
                                "theory transmits nothing: spurious leakage, most likely from too "
                                "large a time step at a sharp feature")
    dwell = _dwell(run, prediction)
    _health(run, stats, reflection, transmission, warnings)
    return DelayReport(str(rf.path), rf.units, reflection, transmission, dwell, warnings,
                       run.info.energy)


def _dwell(run: _Run, prediction) -> dict:
    s = run.samples
    region = run.region
    if region is None or len(s["t"]) < 2:
        return {"measured": None, "predicted": None, "region": None}
    incident = float(run.observables["norm"][0])
    value = float(np.trapezoid(s["P_region"], s["t"]) / incident)
    predicted = prediction.dwell if prediction is not None else None
    return {"measured": value, "predicted": predicted,
            "deviation": None if predicted is None else value - predicted,
            "region": [float(region[0]), float(region[1])]}


def _health(run: _Run, stats, reflection, transmission, warnings) -> None:
    """Warnings that do not belong to one method."""
    info, hbar, m = run.info, run.hbar, run.mass
    top = float(np.max(run.V))
    if top > info.level:
        k_top = math.sqrt(2 * m * (top - info.level)) / hbar
        share = 0.5 * math.erfc((k_top - info.k0) / (math.sqrt(2) * info.sigma_k))
        if ABOVE_TOP_WARN < share:
            warnings.append(f"{share:.3g} of the packet lies above the barrier top "
                            f"(V = {top:g}): delays near the top are singular; the reference is "
                            "the filtered spectrum")
    # probability lost before the measurement: absorbed, or wrapped through the box edge
    obs = run.observables
    absorbed = obs["absorbed_left"] + obs["absorbed_right"]
    last = 0
    for ch in (reflection, transmission):
        if ch is not None and ch.snapshots_used:
            last = max(last, len(run.times) - 1)
    lost = float(np.max(absorbed)) if len(absorbed) else 0.0
    if lost > LOST_WARN and transmission is None and reflection is not None \
            and reflection.snapshots_used == 0:
        warnings.append(f"{lost:.2g} of the probability was absorbed before it could be measured")
    if not run.has_absorber:
        edge = float(np.max(stats["edge"]))
        if edge > LOST_WARN:
            warnings.append(f"up to {edge:.2g} of the probability reached the box edge: it wraps "
                            "around the periodic box; enlarge the box or add an absorber")
    # probability outside the packet's k-band (spurious high-k components)
    psi = run.psi(len(run.times) - 1)
    spectrum = np.abs(np.fft.fft(psi)) ** 2
    kgrid = np.abs(2 * math.pi * np.fft.fftfreq(len(psi), d=run.dx))
    band = np.abs(kgrid - info.k0) <= K_SPAN * info.sigma_k
    shift = 2 * m * (run.level_out - info.level) / hbar ** 2
    edges = [max(info.k0 - K_SPAN * info.sigma_k, 0.0), info.k0 + K_SPAN * info.sigma_k]
    q_lo, q_hi = (math.sqrt(max(e * e - shift, 0.0)) for e in edges)
    band |= (kgrid >= q_lo) & (kgrid <= q_hi)       # the transmitted wavenumbers
    total = float(spectrum.sum())
    outside = float(spectrum[~band].sum() / total) if total > 0 else 0.0
    if outside > OUT_OF_BAND_WARN:
        warnings.append(f"{outside:.2g} of the final state lies outside the packet's k-band "
                        f"(k₀ ± {K_SPAN:g}σ_k): spurious components, from a time step too large "
                        "for the grid or a packet cut by the box edge")
    try:
        from ..build import build
        phase = build(run.scenario).grid_phase
    except SojournError:
        phase = None
    if phase is not None and phase > math.pi:
        warnings.append(f"the time step is past the grid limit: Δt·(E_max + ΔV)/ħ = {phase:.3g} "
                        "> π; sharp features feed spurious high-k components that bias delays")


# ----------------------------------------------------------------------------------------
# Saving


def save_report(path, report: DelayReport) -> None:
    """Write the report as JSON into the run file's /analysis group (attribute
    'result'); nothing else in the file is touched."""
    import h5py
    try:
        with h5py.File(path, "r+") as f:
            group = f.require_group("analysis")
            group.attrs["result"] = json.dumps(report.to_dict())
    except OSError as exc:
        raise RunFileError(f"{path}: cannot write the analysis into it ({exc})") from None
