"""Packet-averaged predictions of stationary theory, one per measuring method
(PHYSICS §5), on a Potential, the run's own PacketInfo and numbers."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np
from scipy.special import ndtr

from ..errors import TheoryError
from ..model.packets import PacketInfo
from ..model.potentials import Potential
from .layers import check_scattering, layers_from_potential
from .scattering import DEFAULT_TOL, check_positive, check_region, reference_points, scatter

K_SPAN_AVERAGES = 8.0      # packet averages: k0 ± 8 σ_k (|ψ̃|² falls to 1e-14)
ABOVE_TOP_WARN = 1e-3      # warn when between this share and 1 − it lies above the top
REFLECTION_MIN = 1e-14     # a packet R below this (relative) is no reflected packet
TRANSMISSION_MIN = 1e-300  # a packet T below this is no transmitted packet
HOLE_DEPTH = 0.05          # a minimum of R below this share of its band maximum is a hole
HOLE_WEIGHT = 1e-3         # ... where |ψ̃₀(k)|² is above this share of its peak
FAINT = 1e-6               # an outgoing share below this is too faint to measure in a run


def _number(v):
    """A float for JSON: None where missing or not finite; other values unchanged."""
    if isinstance(v, (bool, str, dict, list, tuple)) or v is None:
        return v
    try:
        f = float(v)
    except (TypeError, ValueError):
        return v
    return f if math.isfinite(f) else None


@dataclass(frozen=True)
class ChannelPrediction:
    """What each measuring method should find for one outgoing channel
    (times in the scenario's time unit, lengths in its length unit).

    probability : packet R or T, ∫ w dk over ∫ |ψ̃₀|² dk.
    centroid_shift : ⟨dφ/dk'⟩_w, the lag of the outgoing centroid behind the
        free evolution of the filtered spectrum (length).
    centroid_delay : centroid_shift / v₀' (v₀' the outgoing group velocity at k₀).
    flux_delay : ⟨τ⟩_w = ⟨ħ dφ/dE⟩_w, the mean flux-arrival delay.
    spectral_delay : mean of τ(E) over the incident spectrum |ψ̃₀(k)|² dk.
    wigner_delay : τ at the central energy E₀ (None if undefined there).
    """

    channel: str
    probability: float
    centroid_shift: Optional[float]
    centroid_delay: Optional[float]
    flux_delay: Optional[float]
    spectral_delay: Optional[float]
    wigner_delay: Optional[float]

    def as_dict(self) -> dict:
        """JSON-ready: every missing or non-finite number is None."""
        return {key: _number(v) for key, v in self.__dict__.items()}


@dataclass(frozen=True)
class PacketPrediction:
    """Packet-averaged stationary-theory predictions (PHYSICS §5).

    Weights in dk over the packet's own wavenumber k (E = V(centre) +
    ħ²k²/2m, the level and k₀ the run used): |ψ̃₀(k)|² (Gaussian, centre |k₀|,
    rms σ_k = 1/(2σ)), times R(k) for the reflected and
    T(k) = (k'/k)|t|² for the transmitted channel. The transmitted weight is
    the outgoing |ψ̃_T(k')|² dk' rewritten in dk (k dk = k' dk'). The k-integral
    is split at every channel threshold inside it, and the (V₀−E)^(−1/2)
    behaviour of the delays there is removed by k = k_th ∓ u². Delays refer to
    the free evolution of the filtered spectrum ψ̃₀·|r| (or ψ̃₀·|t|), which is
    what a measurement should use as its reference. The k-integrals run over
    [max(k₀ − 8σ_k, k₀/100), k₀ + 8σ_k] (and above the incidence-side level);
    the incident weight outside it
    (including k ≤ 0, which never reaches the potential) is ``excluded_weight``
    and is left out of every average. ``dwell`` is None when no region is given.
    """

    k0: float
    sigma_k: float
    energy0: float
    mean_energy: float
    reflection: Optional[ChannelPrediction]
    transmission: Optional[ChannelPrediction]
    dwell: Optional[float]
    share_above_top: float
    barrier_top: float
    excluded_weight: float
    k_range: tuple[float, float]
    reference_points: dict
    warnings: tuple[str, ...] = field(default=())

    def as_dict(self) -> dict:
        """JSON-ready: every missing or non-finite number is None."""
        out = {key: _number(v) for key, v in self.__dict__.items()}
        out["reference_points"] = {key: _number(v) for key, v in self.reference_points.items()}
        out["reflection"] = self.reflection.as_dict() if self.reflection else None
        out["transmission"] = self.transmission.as_dict() if self.transmission else None
        out["k_range"] = [_number(v) for v in self.k_range]
        out["warnings"] = list(self.warnings)
        return out


def _tanh_sinh(a: float, b: float, level: int):
    """Nodes and weights of tanh-sinh quadrature on [a, b] (endpoint singularities allowed)."""
    h = 2.0 ** (-level)
    t = np.arange(-int(3.2 / h), int(3.2 / h) + 1) * h
    u = 0.5 * np.pi * np.sinh(t)
    w = 0.5 * np.pi * np.cosh(t) / np.cosh(u) ** 2
    # distance from the nearer end, computed without cancellation
    gap = np.exp(-np.abs(u)) / np.cosh(u)          # = 1 − |tanh u|
    half = 0.5 * (b - a)
    x = np.where(t < 0, a + half * gap, b - half * gap)
    keep = (gap > 0) & (x > a) & (x < b)
    return x[keep], (w * h * half)[keep]


def share_above_top(top: float, level: float, k0: float, sigma_k: float, hbar: float,
                    mass: float) -> float:
    """Share of the packet's |ψ̃₀(k)|² (centre |k₀|, rms σ_k) whose energy
    level + ħ²k²/2m lies above `top`: ½ erfc((k_top − |k₀|)/(√2 σ_k))."""
    if top <= level:
        return 1.0
    k_top = math.sqrt(2 * mass * (top - level)) / hbar
    return 0.5 * math.erfc((k_top - abs(k0)) / (math.sqrt(2) * sigma_k))


def _barrier_top(potential: Potential, hbar: float, level: float) -> float:
    support = potential.support()
    left, right = potential.levels()
    if support is None:
        return float(max(level, left, right))
    xs = np.linspace(support[0], support[1], 20001)
    top = float(max(np.max(potential(xs)), left, right))
    if potential.piecewise_constant:
        top = float(max(np.max(layers_from_potential(potential, hbar).levels), top))
    return top


def _segment(a: float, b: float, lev: int, at_a: Optional[float], at_b: Optional[float],
             E_of, hbar: float, mass: float):
    """Nodes (k, E) and dk-weights on [a, b]. An end that is a channel threshold
    (its energy given as at_a / at_b) is reached by k = k_th ± u², so the
    (E_th − E)^(−1/2) of the delays becomes a smooth integrand in u; E is then
    computed as E_th ± ħ²u²(2k_th ± u²)/2m (no cancellation) and kept at least a
    few ulps away from E_th, where the amplitudes are singular."""
    if at_a is not None and at_b is not None:
        mid = 0.5 * (a + b)
        parts = [_segment(a, mid, lev, at_a, None, E_of, hbar, mass),
                 _segment(mid, b, lev, None, at_b, E_of, hbar, mass)]
        return tuple(np.concatenate(p) for p in zip(*parts))
    if at_a is None and at_b is None:
        k, w = _tanh_sinh(a, b, lev)
        return k, E_of(k), w
    if at_a is not None:
        k_th, E_th, s = a, at_a, 1.0
    else:
        k_th, E_th, s = b, at_b, -1.0
    u, w = _tanh_sinh(0.0, math.sqrt(b - a), lev)
    c = hbar ** 2 / (2 * mass)
    u_min = math.sqrt(64 * np.finfo(float).eps * max(abs(E_th), c * k_th ** 2) / (c * 2 * k_th))
    u = np.maximum(u, u_min)
    k = k_th + s * u ** 2
    E = E_th + s * c * u ** 2 * (2 * k_th + s * u ** 2)
    return k, E, w * 2 * u


HOLE_TOL = 1e-6


def _reflection_holes(potential, hbar, reference, direction, E_of, k, weight):
    """Energies inside the band where R(k) has a deep interior minimum (a zero of
    r, e.g. qa = nπ above a barrier, or a transmission resonance): there the
    reflected spectral phase is ill-conditioned."""
    # finding a dip needs R to a few digits, not the averages' 1e-10 (a turning point
    # inside a sliced piece converges slowly)
    sc = scatter(potential, E_of(k), hbar=hbar, x_r=reference, direction=direction,
                 dwell=False, tol=HOLE_TOL)
    R = sc.R
    inner = np.nonzero((R[1:-1] < R[:-2]) & (R[1:-1] < R[2:]))[0] + 1
    deep = [i for i in inner if R[i] < HOLE_DEPTH * R.max() and weight[i] > HOLE_WEIGHT]
    return [(float(sc.energy[i]), float(R[i])) for i in deep]


def packet_prediction(potential: Potential, packet: PacketInfo, *, hbar: float, mass: float,
                      reference: Optional[float] = None,
                      region: Optional[tuple[float, float]] = None,
                      tol: float = 1e-9) -> PacketPrediction:
    """Packet-averaged predictions for a packet scattered by `potential`: one
    per measuring method.

    `packet` is the run's own PacketInfo: its signed k₀ gives the direction,
    its ``level`` (V at the centre, as the run computed it) and k₀ give the
    energies E(k) = level + ħ²k²/2m. `reference` is x_r (default: the
    support's edge on the incidence side), `region` the dwell region (no
    dwell prediction without one).

    Centroid: ⟨dφ/dk⟩_w / v₀; flux arrival: ⟨τ⟩_w = ⟨(dφ/dk)/v(k)⟩_w; spectral:
    the mean of τ(E) with incident dk weights; plus packet R and T, the packet
    dwell time ⟨τ_D⟩ (= ∫P_region dt per unit incident probability), the share
    of |ψ̃₀|² above the barrier top (max V) and the Wigner delays at E₀. See
    `PacketPrediction` for the weights and the k-range. Integrals use tanh-sinh
    quadrature split at the channel thresholds and refined until the averages
    change by less than `tol` (relative).
    """
    if not isinstance(packet, PacketInfo):
        raise TheoryError(f"packet must be a PacketInfo (got {type(packet).__name__})")
    check_positive(hbar=hbar, mass=mass, sigma_k=packet.sigma_k, tol=tol)
    if not (math.isfinite(packet.k0) and packet.k0 != 0 and math.isfinite(packet.level)):
        raise TheoryError(f"the packet's wavenumber must be finite and nonzero and its level "
                          f"finite (got k0 = {packet.k0!r}, level = {packet.level!r})")
    if reference is not None and not math.isfinite(reference):
        raise TheoryError(f"the reference point must be a finite number (got {reference!r})")
    if region is not None:
        region = check_region(region)
    check_scattering(potential)
    direction = "right" if packet.k0 > 0 else "left"
    k0, sk, level = abs(packet.k0), packet.sigma_k, packet.level
    m = mass
    left, right = potential.levels()
    inc, far = (left, right) if direction == "right" else (right, left)
    c = hbar ** 2 / (2 * m)
    k_lo = max(k0 - K_SPAN_AVERAGES * sk, k0 / 100)
    k_hi = k0 + K_SPAN_AVERAGES * sk
    thresholds = {}                     # k_th -> E_th: where a channel opens
    if inc > level:
        k_inc = math.sqrt((inc - level) / c)
        if k_inc >= k_hi:
            raise TheoryError(f"the packet's band (energies up to {level + c * k_hi ** 2:g}) "
                              f"lies below the level {inc:g} on the incidence side: it has "
                              "no incident wave there")
        if k_inc >= k_lo:
            k_lo = k_inc
            thresholds[k_inc] = inc
    if far > level:
        k_far = math.sqrt((far - level) / c)
        if k_lo < k_far < k_hi:
            thresholds[k_far] = far
    cuts = sorted({k_lo, k_hi, *thresholds})

    def E_of(k):
        return level + c * k ** 2

    def density(k):
        return np.exp(-0.5 * ((k - k0) / sk) ** 2) / (math.sqrt(2 * math.pi) * sk)

    def averages(lev):
        parts = [_segment(a, b, lev, thresholds.get(a), thresholds.get(b), E_of, hbar, m)
                 for a, b in zip(cuts[:-1], cuts[1:])]
        k, E, w = (np.concatenate(p) for p in zip(*parts))
        w = w * density(k)
        sc = scatter(potential, E, hbar=hbar, x_r=reference, direction=direction,
                     tol=max(tol * 0.1, DEFAULT_TOL), dwell=region is not None,
                     dwell_region=region)
        kp, kin, opn = sc.k_out, sc.k_in, sc.open
        with np.errstate(divide="ignore", invalid="ignore"):
            flux_r = hbar * np.imag(np.conj(sc.r) * sc.dr_dE)             # R·τ_R
            flux_t = np.where(opn, kp.real / kin * hbar * np.imag(np.conj(sc.t) * sc.dt_dE), 0.0)
            tau_r = np.where(np.abs(sc.r) > 0, hbar * np.imag(sc.dr_dE / sc.r), 0.0)
            tau_t = np.where(opn, hbar * np.imag(sc.dt_dE / sc.t), 0.0)
        vk = 2 * c * k / hbar          # dE/dk / ħ: dφ/dk = τ·vk
        vkp = np.where(opn, hbar * kp.real / m, 0.0)
        sums = dict(
            Z=np.sum(w), R=np.sum(w * sc.R), T=np.sum(w * sc.T),
            shift_r=np.sum(w * flux_r * vk), flux_r=np.sum(w * flux_r),
            shift_t=np.sum(w * flux_t * vkp), flux_t=np.sum(w * flux_t),
            spec_r=np.sum(w * tau_r), spec_t=np.sum(w * tau_t), Zt=np.sum(w * opn),
            dwell=np.sum(w * sc.dwell) if region is not None else 0.0,
        )
        return {key: float(v) for key, v in sums.items()}

    lev = 3
    prev = averages(lev)
    while True:
        lev += 1
        cur = averages(lev)
        change = max(abs(cur[key] - prev[key]) / max(abs(cur[key]), 1e-300)
                     for key in cur if abs(cur[key]) > 1e-14 * max(cur["Z"], 1e-300))
        if change <= tol or lev >= 9:
            break
        prev = cur
    s = cur
    Z = s["Z"]
    E0 = packet.energy
    warnings = []
    at_E0 = None
    if E0 > inc:
        at_E0 = scatter(potential, [E0], hbar=hbar, x_r=reference, direction=direction,
                        dwell=False)
    v0 = 2 * c * k0 / hbar
    refl = trans = None
    if s["R"] > REFLECTION_MIN * Z:
        wig = float(at_E0.delay_reflection[0]) if at_E0 is not None else math.nan
        refl = ChannelPrediction(
            "reflection", s["R"] / Z, s["shift_r"] / s["R"], s["shift_r"] / s["R"] / v0,
            s["flux_r"] / s["R"], s["spec_r"] / Z, wig if math.isfinite(wig) else None)
    elif s["Zt"] > 0:
        warnings.append(f"the packet's reflection probability {s['R'] / Z:.2g} is below "
                        f"{REFLECTION_MIN:g}: no reflection prediction")
    if s["T"] > TRANSMISSION_MIN:
        open0 = at_E0 is not None and bool(at_E0.open[0])
        kp0 = at_E0.k_out[0].real if open0 else math.nan
        shift = s["shift_t"] / s["T"]
        wig = float(at_E0.delay_transmission[0]) if open0 else math.nan
        trans = ChannelPrediction(
            "transmission", s["T"] / Z, shift, shift / (hbar * kp0 / m) if open0 else None,
            s["flux_t"] / s["T"], s["spec_t"] / s["Zt"] if s["Zt"] > 0 else None,
            wig if math.isfinite(wig) else None)
        if trans.probability < FAINT:
            warnings.append(f"the packet's transmission probability {trans.probability:.2g} "
                            f"is below {FAINT:g} (an opaque barrier): a run cannot measure the "
                            "transmitted packet; its predictions are theory only")
    elif s["Zt"] > 0:
        warnings.append(f"the transmission channel is open but the packet's transmission "
                        f"probability ({s['T'] / Z:.2g}) is below {TRANSMISSION_MIN:g} (an "
                        "opaque barrier): no transmission prediction")
    if refl is not None:
        kk = np.linspace(cuts[0], cuts[-1], 801)[1:-1]
        wk = np.exp(-0.5 * ((kk - k0) / sk) ** 2)
        for E_hole, R_hole in _reflection_holes(potential, hbar, reference, direction, E_of,
                                                kk, wk):
            warnings.append(f"R falls to {R_hole:.2g} at E = {E_hole:.6g} inside the packet's "
                            "band (a zero of r): the reflected spectral phase is "
                            "ill-conditioned there")
    top = _barrier_top(potential, hbar, level)
    share = share_above_top(top, level, k0, sk, hbar, m)
    excluded = float(ndtr((k_lo - k0) / sk) + ndtr(-(k_hi - k0) / sk))
    if k0 / sk < 6:
        warnings.append(f"k0/sigma_k = {k0 / sk:.3g} < 6: the packet has content near k = 0, "
                        f"where the delays diverge; averages drop k < {k_lo:.3g}")
    if (ABOVE_TOP_WARN < share < 1 - ABOVE_TOP_WARN and potential.deltas() == []
            and top > level):
        warnings.append(f"{100 * share:.3g}% of the packet lies above the barrier top "
                        f"V = {top:g}: compare with the filtered reference (ψ̃₀·|r| or ψ̃₀·|t|)")
    x_r, x_t = reference_points(potential, reference, None, direction)
    return PacketPrediction(
        k0=k0, sigma_k=sk, energy0=E0, mean_energy=packet.mean_energy,
        reflection=refl, transmission=trans,
        dwell=s["dwell"] / Z if region is not None else None, share_above_top=share,
        barrier_top=top, excluded_weight=excluded, k_range=(k_lo, k_hi),
        reference_points={"x_r": x_r, "x_t": x_t}, warnings=tuple(warnings))
