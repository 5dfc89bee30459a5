"""The delay methods, one function each, and their registry `METHODS`.

Every method measures one outgoing channel of a run in the forward frame
against a reference: the exact free evolution of the incident Gaussian — of
its filtered spectrum ψ̃₀·|r| (ψ̃₀·|t|) where the channel does not carry the
whole packet — mirrored at the reference point x_r for reflection
(ψ_ref(x, t) = −ψ_free(2x_r − x, t), an ideal mirror), or of a named
reference run of the same packet without the potential. The filter is the one
the run itself shows (the outgoing spectrum over the incident one); what the
methods share is worked out once per channel in `ChannelContext`.

Conventions: r referenced at x_r, t with the incident wave at x_r and the
transmitted one at x_t (the far edge of the potential), so that the
transmission delay is the entry-to-exit time (PHYSICS §5).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Optional

import numpy as np

from ..model import packets
from .frame import ForwardRun, density, separated, side_stats, snapshot_stats
from .health import LOST_WARN
from .report import MethodResult, Spectrum
from .spectra import (channel_spectrum, incident_amplitude, mean_arrival, outgoing_wavenumber,
                      packet_band, reference_flux, tail_shift)

PASSAGE_GAP = 4.0       # widths between the incident and reflected passages at a detector
HOLE = 1e-2             # P(k) below this share of its packet mean, in a dip: a spectral zero
RELEVANT = 1e-6         # incident weight (per its peak) below which P(k) is not looked at
OVERLAP_WARN = 1e-3     # arrival bias from overlapping passages, per σ/v₀, that calls for a warning
TAIL_WARN = 1e-4        # flux at the end of the run, per its peak, that calls for a warning


@dataclass
class ChannelContext:
    """What the methods of one channel share, worked out once."""

    channel: str            # 'reflection' or 'transmission'
    word: str               # 'reflected' or 'transmitted'
    final: float            # the channel's probability at the end (on its side + absorbed)
    stats: dict             # snapshot_stats of the run
    usable: np.ndarray      # snapshots where the outgoing packet has separated
    k: np.ndarray           # incident wavenumbers across the band
    weight: np.ndarray      # |ψ̃₀(k)|²
    spectrum: Spectrum      # τ(k), P(k) of the outgoing packet at the last usable snapshot
    outgoing: float         # ∫ |C(q)|² dq of that snapshot
    filtered: bool          # the reference is the filtered spectrum
    share: np.ndarray       # P(k) used for the reference (1 when not filtered)
    amplitude: np.ndarray   # outgoing amplitude per incident one for the reference
    reference: Optional[ForwardRun]
    warnings: list

    def warn(self, text: str) -> None:
        self.warnings.append(text)


def channel_context(run: ForwardRun, stats: dict, channel: str, warnings: list,
                    reference: Optional[ForwardRun] = None) -> ChannelContext:
    """The outgoing spectrum at the last snapshot where the packet is separated
    and whole, and the reference filter it implies."""
    info, hbar, m = run.info, run.hbar, run.mass
    side = "left" if channel == "reflection" else "right"
    final = float(run.observables[f"P_{side}"][-1] + run.observables[f"absorbed_{side}"][-1])
    word = "reflected" if channel == "reflection" else "transmitted"
    usable = separated(run, stats, channel)
    k = packet_band(info)
    weight = np.abs(incident_amplitude(k, info)) ** 2
    index = int(np.nonzero(usable)[0][-1]) if usable.any() else len(run.times) - 1
    if not usable.any():
        warnings.append(f"the {word} packet has not separated from the potential (or has "
                        f"reached the box edge or absorber) in any snapshot: no centroid delay, "
                        f"and its spectrum is taken from the last snapshot and cannot be trusted")
    _, outgoing, tau, prob, _ = channel_spectrum(run, run.psi(index), float(run.times[index]),
                                                 channel, k)
    with np.errstate(invalid="ignore"):
        spectrum = Spectrum(k, info.level + (hbar * k) ** 2 / (2 * m), tau, prob, weight,
                            trusted=~spectral_holes(prob, weight))
    # R(k), T(k) lie in [0, 1]: beyond that P is numerical noise (where |ψ̃₀|² is tiny)
    share = np.clip(np.where(np.isfinite(prob), prob, 0.0), 0.0, 1.0)
    packet_p = float(np.trapezoid(weight * share, k) / np.trapezoid(weight, k))
    filtered = abs(1.0 - packet_p) > 1e-4
    if not filtered:
        share = np.ones_like(k)
    if channel == "reflection":
        amplitude = np.sqrt(share)
    else:
        # |t| = √(T k/q): T is a flux ratio, the reference carries amplitudes
        q = outgoing_wavenumber(run, k)
        amplitude = np.sqrt(share * k / np.where(q > 0, q, np.inf))
    if filtered:
        # r(k) passes through a zero with a change of sign, not a kink: |r| would give the
        # reference slow tails in time that a finite run cuts
        amplitude = amplitude * zero_crossings(prob, ~spectrum.trusted)
    return ChannelContext(channel, word, final, stats, usable, k, weight, spectrum,
                          float(np.trapezoid(outgoing, k)), filtered, share, amplitude,
                          reference, warnings)


def spectral_holes(prob, weight) -> np.ndarray:
    """Where P(k) dips, between higher values on both sides, below HOLE of its
    mean over the packet (a zero of r(k) or t(k) inside the band: the phase is
    lost in the numerical error of the amplitude there). Only components with
    |ψ̃₀|² above RELEVANT of its peak are looked at (elsewhere P is noise)."""
    relevant = weight >= RELEVANT * np.max(weight)
    p = np.where(np.isfinite(prob) & relevant, prob, 0.0)
    mean = float(np.sum(weight * p) / np.sum(weight))
    from_left = np.maximum.accumulate(p)
    from_right = np.maximum.accumulate(p[::-1])[::-1]
    dip = p < np.minimum(from_left, from_right)
    return relevant & dip & (p < HOLE * mean)


def zero_crossings(prob, holes) -> np.ndarray:
    """±1 across the band, changing sign at the lowest P(k) of every run of
    `holes` (where a real amplitude passes through zero)."""
    sign = np.ones(len(prob))
    edges = np.flatnonzero(np.diff(np.concatenate(([0], holes.astype(int), [0]))))
    for start, stop in zip(edges[::2], edges[1::2]):
        sign[start + int(np.argmin(prob[start:stop])) + 1:] *= -1
    return sign


# ----------------------------------------------------------------------------------------
# The methods


def centroid(run: ForwardRun, channel: str, ctx: ChannelContext) -> Optional[MethodResult]:
    """The outgoing packet's centroid (on its side of the potential) against the
    reference trajectory, at the latest separated snapshot: components with a
    long delay (near a threshold) leave last, so the centroid nears its limit
    only as ~1/t there; the drift across snapshots is reported."""
    if not ctx.usable.any():
        return None
    info, hbar, m, k = run.info, run.hbar, run.mass, ctx.k
    usable, stats = ctx.usable, ctx.stats
    w = ctx.weight * ctx.share
    if not np.trapezoid(w, k) > 0:
        ctx.warn(f"the {ctx.word} spectrum is empty across the packet's band: no centroid delay")
        return None
    t = run.times[usable]
    if channel == "reflection":
        v_mean = float(np.trapezoid(w * hbar * k / m, k) / np.trapezoid(w, k))
        ref = 2 * run.x_r - info.center - v_mean * t
        delays = (stats["x_out"][usable] - ref) / info.group_velocity
    else:
        q0 = float(outgoing_wavenumber(run, info.k0))
        if q0 <= 0:
            ctx.warn("the transmitted channel is closed at the central energy E₀: no "
                     "transmitted centroid delay (it is measured in units of the outgoing "
                     "group velocity there)")
            return None
        qk = outgoing_wavenumber(run, k)
        vq = float(np.trapezoid(w * hbar * qk / m, k) / np.trapezoid(w, k))
        ratio = float(np.trapezoid(w * qk / k, k) / np.trapezoid(w, k))
        ref = run.x_t + ratio * (info.center - run.x_r) + vq * t
        delays = (ref - stats["x_tr"][usable]) / (hbar * q0 / m)
    if ctx.reference is not None:
        delays = centroid_against_reference_run(run, ctx.reference, stats, usable, channel,
                                                ctx.warnings)
    drift = float(np.ptp(delays)) if len(delays) > 1 else 0.0
    if drift > 1e-3 * max(abs(float(delays[-1])), info.width / info.group_velocity):
        ctx.warn(f"the {ctx.word} centroid delay drifts by {drift:.3g} across the "
                 f"{len(delays)} snapshots used: part of the packet is still leaving (slow "
                 "components near a threshold) or the reference does not match the outgoing "
                 "spectrum; a longer run settles it")
    return MethodResult(float(delays[-1]), snapshots=int(usable.sum()))


def arrival(run: ForwardRun, channel: str, ctx: ChannelContext) -> Optional[MethodResult]:
    """The mean arrival time of the outgoing flux at a detector minus the
    reference's; `error_tail` is the bias from the incident packet's tail
    still crossing a reflection detector after the split, plus the shift the
    flux after the end of the run would bring (exponential continuation of the measured and the reference
    flux; the measured one carrying at least the probability still between
    the potential and the detector at the end)."""
    info, s = run.info, run.samples
    detectors = np.asarray(s["detectors"], dtype=float)
    if channel == "reflection":
        candidates = [i for i, d in enumerate(detectors) if info.center < d < run.x_r]
        pick = min(candidates, key=lambda i: detectors[i]) if candidates else None
    else:
        candidates = [i for i, d in enumerate(detectors) if d > run.x_t]
        pick = max(candidates, key=lambda i: detectors[i]) if candidates else None
    if pick is None:
        ctx.warn(f"no detector on the {ctx.word} side (between the packet's start and the "
                 "potential for reflection, beyond it for transmission): no arrival delay")
        return None
    xd = float(detectors[pick])
    where = xd * run.sign
    ts = np.asarray(s["t"], float)
    flux = s["flux"][:, pick] * (-1 if channel == "reflection" else 1)
    sel = np.ones_like(ts, dtype=bool)
    overlap = 0.0
    if channel == "reflection":
        split = (run.x_r - info.center) / info.group_velocity
        width = float(packets.free_width(info.width, split, run.hbar, run.mass))
        gap = 2 * (run.x_r - xd)
        # the incident probability still before the detector at the split crosses it
        # later, against the reflected flux: a bias of about P·(round trip)/R
        behind = 0.5 * math.erfc((info.center + info.group_velocity * split - xd)
                                 / (math.sqrt(2) * width))
        overlap = behind * gap / info.group_velocity / max(ctx.final, 1e-300)
        scale = info.width / info.group_velocity
        if gap < 2 * PASSAGE_GAP * width or overlap > OVERLAP_WARN * scale:
            ctx.warn(f"the detector at {where:g} is too close to the potential: incident and "
                     f"reflected passages overlap there ({behind:.2g} of the incident packet "
                     f"crosses it after the split, against a reflected {ctx.final:.2g}; "
                     f"arrival bias up to {overlap:.2g}); a detector nearer the packet's start "
                     "separates them")
        sel = ts >= split
    if sel.sum() <= 2:
        ctx.warn(f"fewer than three flux samples after the incident passage at the detector "
                 f"{where:g}: no {ctx.word} arrival delay")
        return None
    tw, fw = ts[sel], flux[sel]
    measured, total = mean_arrival(tw, fw)
    ref_flux = None
    if ctx.reference is not None:
        ref_flux = reference_run_flux(run, ctx.reference, channel, xd, tw, ctx.warnings)
    if ref_flux is None:
        ref_flux = reference_flux(run, channel, xd, tw, ctx.k, ctx.amplitude)
    ref_arrival, _ = mean_arrival(tw, ref_flux)
    if not (math.isfinite(measured) and math.isfinite(ref_arrival)):
        ctx.warn(f"the {ctx.word} flux at the detector {where:g} integrates to zero: "
                 "no arrival delay")
        return None
    # what has not passed the detector by the end: between it and the potential
    between = (run.x > xd) & (run.x < run.x_r) if channel == "reflection" else \
        (run.x > run.x_t) & (run.x < xd)
    last = density(run.psi(len(run.times) - 1))[between]
    missing = float(last.sum() * run.dx)
    own, theirs = tail_shift(tw, fw, missing), tail_shift(tw, ref_flux, 0.0)
    tail = abs(fw[-1]) / max(float(np.max(np.abs(fw))), 1e-300)
    if tail > TAIL_WARN:
        ctx.warn(f"the {ctx.word} flux at the detector {where:g} has not died out by the end "
                 f"of the run ({tail:.2%} of its peak): the arrival delay misses its tail; "
                 "run longer")
    if not math.isfinite(own):
        ctx.warn(f"the {ctx.word} flux at the detector {where:g} still rises at the end of the "
                 "run: the bias of its missing tail cannot be estimated and no error bar "
                 "covers it; run longer")
    elif not math.isfinite(theirs):
        ctx.warn(f"the reference flux at the detector {where:g} has not died out within the "
                 "run: the bias of its missing tail cannot be estimated and no error bar "
                 "covers it")
    bias = own - theirs
    return MethodResult(measured - ref_arrival, probability=total, detector=where,
                        error_tail=abs(bias) + overlap if math.isfinite(bias) else None)


def spectral(run: ForwardRun, channel: str, ctx: ChannelContext) -> Optional[MethodResult]:
    """The phase of the outgoing packet across its band: τ(k) = (dφ/dk)/v(k),
    averaged with the incident weights |ψ̃₀(k)|² dk. Near a zero of r(k) (or
    t(k)) the phase is ill-conditioned: τ there is interpolated from the
    components on either side (the stationary τ is smooth across a simple
    zero on the real k axis) and the share so treated is reported."""
    sp = ctx.spectrum
    with np.errstate(invalid="ignore"):
        good = np.isfinite(sp.delay) & (sp.probability > 1e-10)
    hole = ~sp.trusted & (sp.weight > 0)
    base = good & ~hole
    if not base.any():
        return None
    tau = np.where(good, sp.delay, 0.0)
    if hole.any():
        tau[hole] = np.interp(sp.k[hole], sp.k[base], sp.delay[base])
        share = float(np.sum(sp.weight[hole]) / np.sum(sp.weight))
        if share > 1e-6:
            at = sp.energy[hole][np.argmin(sp.probability[hole])]
            ctx.warn(f"the {ctx.word} spectrum has a zero near E = {at:.4g} (its probability "
                     f"falls below {HOLE:.0%} of its mean over the packet): the phase is "
                     f"ill-conditioned there, so τ across {share:.2%} of the incident weight "
                     "is interpolated from its neighbours in the spectral delay")
    use = good | hole
    return MethodResult(float(np.sum((sp.weight * tau)[use]) / np.sum(sp.weight[use])),
                        probability=ctx.outgoing)


# ----------------------------------------------------------------------------------------
# Against a named reference run


def centroid_against_reference_run(run, ref, stats, usable, channel, warnings):
    """Centroid delays against the free packet of a named reference run (same
    snapshot times), mirrored at x_r for reflection."""
    t = run.times[usable]
    rt = ref.times
    everywhere = np.ones_like(ref.x, bool)
    centres = np.array([side_stats(ref.x, density(psi), ref.dx, everywhere)[1]
                        for _, psi in ref.snapshots()])
    edge = float(np.max(snapshot_stats(ref)["edge"]))
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


def reference_run_flux(run, ref, channel, xd, times, warnings):
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
# The registry


@dataclass(frozen=True)
class Method:
    """One entry of `METHODS`."""

    function: Callable[[ForwardRun, str, ChannelContext], Optional[MethodResult]]
    prediction: str              # the ChannelPrediction field it is compared with
    warnings: tuple              # what it may warn about, in short words


class MethodRegistry(dict):
    """The delay methods by name, in the order reports list them.

    What a method must provide (adding one = one function, one entry here and
    its packet average in theory):

    1. A function `(run: ForwardRun, channel: str, ctx: ChannelContext) ->
       MethodResult | None` for channel 'reflection' or 'transmission', pure
       on the run's arrays: None when it cannot measure (and then a warning
       through `ctx.warn` that says why), never NaN.
    2. `prediction`: the name of the `theory.ChannelPrediction` field its
       delay is set beside (theory computes that packet average).
    3. `warnings`: every doubt it can have about its own number goes through
       `ctx.warn(text)` in plain words; the entry lists them in short words.
       Warnings that belong to no method live in `measure.health`.
    4. An error term it can see (e.g. a cut flux tail) goes into
       `MethodResult.error_tail`; discretisation errors are not its business
       (the Richardson reruns of `workflows.verify` measure them).
    5. No numpy RuntimeWarning may escape it (`np.errstate` where needed).
    """


METHODS = MethodRegistry(
    centroid=Method(centroid, "centroid_delay", ("centroid drifts across the snapshots used",
                                                 "channel closed at E₀", "empty spectrum")),
    arrival=Method(arrival, "flux_delay",
                   ("no detector on the outgoing side", "detector too close to the potential",
                    "too few flux samples", "zero flux", "flux not died out",
                    "tail bias not estimable", "reference run has no matching detector")),
    spectral=Method(spectral, "spectral_delay", ("a zero of the outgoing spectrum in the band",)),
)
