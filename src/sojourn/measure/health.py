"""Warnings about a run that belong to no delay method: an unfinished run, a
packet that starts at the potential, probability through where theory
transmits nothing, a packet near the barrier top, probability lost to the
absorber or the box edge, spurious k-components, a time step past the grid
limit. Shares are printed as percentages."""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from ..theory.averages import ABOVE_TOP_WARN, share_above_top as theory_share
from .. import timestep
from ..engine.propagate import SCHEMES
from .frame import K_SPAN, ForwardRun, separated
from .report import ChannelReport

OUT_OF_BAND_WARN = 1e-6  # probability outside the packet's k-band that calls for a warning
LOST_WARN = 1e-6        # probability absorbed or wrapped before the measurement
START_OVERLAP = 1e-6    # probability beyond the reference point at t = 0
CHANNEL_MIN = 1e-6      # outgoing probability below which a channel is not measured
TIME_BIAS_WARN = 1e-3   # the time step's estimated relative bias that calls for a warning


def spurious_share(run: ForwardRun) -> float:
    """The probability the time step's sidebands may carry into a channel
    theory closes (timestep.sideband_share, over the potential x_r … x_t)."""
    return timestep.sideband_share(run.info, run.V, run.dx, (run.x_r, run.x_t), float(run.x[0]),
                                   run.hbar, run.mass, run.dt, _scheme(run).widest)


def _attrs(run: ForwardRun) -> dict:
    """The run file's root attributes ({} for a run held in memory without them)."""
    return getattr(run.states, "attrs", None) or {}


def _scheme(run: ForwardRun):
    """The run's splitting scheme (Strang where the run file does not say)."""
    return SCHEMES.get(str(_attrs(run).get("scheme", "strang")), SCHEMES["strang"])


def channel_floor(run: ForwardRun, closed: bool) -> float:
    """The probability above which a channel is measured: CHANNEL_MIN, or for a
    channel theory closes, at least what the time step's sidebands may carry."""
    return max(CHANNEL_MIN, spurious_share(run)) if closed else CHANNEL_MIN


def starts_at_potential(run: ForwardRun) -> float:
    """Probability beyond the reference point at t = 0 (the packet overlaps the potential)."""
    return float(run.observables["P_right"][0])


def before_measuring(run: ForwardRun, status: str) -> list:
    """Warnings known before any method runs."""
    warnings = []
    if status != "complete":
        warnings.append(f"the run is not complete (status '{status}'): the outgoing packet "
                        "may not have left")
    overlap = starts_at_potential(run)
    if overlap > START_OVERLAP:
        warnings.append(f"{overlap:.2%} of the packet lies at or beyond the reference point "
                        f"{run.x_r * run.sign:g} at t = 0: it overlaps the potential instead of "
                        "arriving at it, so its delays are not scattering delays; start it "
                        "farther away")
    return warnings


def leakage(run: ForwardRun, stats: dict, prediction) -> Optional[str]:
    """Probability that went through where theory transmits nothing, once the
    packet has left the potential (not while it still sits there, nor when it
    started there)."""
    if prediction is None or starts_at_potential(run) > START_OVERLAP:
        return None
    if prediction.transmission is not None and prediction.transmission.probability >= 1e-8:
        return None
    beyond = float(stats["P_tr"][-1] + run.observables["absorbed_right"][-1])
    still = float(stats["norm"][-1] - stats["P_out"][-1] - stats["P_tr"][-1])
    if beyond <= channel_floor(run, True) or still > beyond:
        return None
    return (f"{beyond:.2g} of the probability went through, where theory transmits nothing: "
            "spurious leakage, most likely from too large a time step at a sharp feature")


def share_above_top(run: ForwardRun) -> tuple[float, float]:
    """(share of |ψ̃₀|² above the barrier top, the top); 1 without a top above
    the incidence level."""
    info, top = run.info, float(np.max(run.V))
    return theory_share(top, info.level, info.k0, info.sigma_k, run.hbar, run.mass), top


def after_measuring(run: ForwardRun, stats: dict, reflection: Optional[ChannelReport],
                    transmission: Optional[ChannelReport], shifts=(0.0,),
                    accuracy: Optional[float] = None) -> list:
    """Warnings about the run as a whole, after the channels were measured;
    `shifts` are the energies a drive's sidebands move the band by (n·ħω);
    `accuracy` the requested evolve.accuracy (a time-step bias within it is
    what the run asked for)."""
    warnings = []
    info, hbar, m = run.info, run.hbar, run.mass
    share, top = share_above_top(run)
    if ABOVE_TOP_WARN < share < 1 - ABOVE_TOP_WARN:     # the band straddles the top
        warnings.append(f"{share:.2%} of the packet lies above the barrier top (V = {top:g}), "
                        "the rest below: delays near the top are singular; the reference is "
                        "the filtered spectrum")
    obs = run.observables
    absorbed = obs["absorbed_left"] + obs["absorbed_right"]
    lost = float(np.max(absorbed)) if len(absorbed) else 0.0
    if lost > LOST_WARN and transmission is None and reflection is not None \
            and reflection.snapshots_used == 0:
        warnings.append(f"{lost:.2%} of the probability was absorbed before it could be measured")
    if run.W is None:
        edge = float(np.max(stats["edge"]))
        if edge > LOST_WARN:
            warnings.append(f"up to {edge:.2g} of the probability reached the box edge: it wraps "
                            "around the periodic box; enlarge the box or add an absorber")
    # probability outside the packet's k-band (spurious high-k components), at the latest
    # snapshot where the outgoing packets are clear of the potential and the absorbers: a
    # packet partly absorbed has a spectrum the absorbing ramp has widened
    clear = separated(run, stats, "reflection") | separated(run, stats, "transmission")
    psi = run.psi(int(np.nonzero(clear)[0][-1]) if clear.any() else len(run.times) - 1)
    spectrum = np.abs(np.fft.fft(psi, axis=-1)) ** 2
    spectrum = spectrum.reshape(-1, spectrum.shape[-1]).sum(axis=0)   # spin components add
    kgrid = np.abs(2 * math.pi * np.fft.fftfreq(psi.shape[-1], d=run.dx))
    band = np.abs(kgrid - info.k0) <= K_SPAN * info.sigma_k
    edges = [max(info.k0 - K_SPAN * info.sigma_k, 0.0), info.k0 + K_SPAN * info.sigma_k]
    for gained in shifts:      # each sideband's band, on both sides
        for level in (info.level, run.level_out):
            shift = 2 * m * (level - info.level - gained) / hbar ** 2
            q_lo, q_hi = (math.sqrt(max(e * e - shift, 0.0)) for e in edges)
            band |= (kgrid >= q_lo) & (kgrid <= q_hi)
    # per unit incident probability (Parseval: Σ|ψ̃|² = N Σ|ψ|²), not per unit of what
    # is left: after a long run the little left in the box need not be in the band
    incident = float(run.observables["norm"][0])
    outside = float(spectrum[~band].sum() * run.dx / psi.shape[-1] / incident) if incident > 0 \
        else 0.0
    if outside > OUT_OF_BAND_WARN:
        warnings.append(f"{outside:.2g} of the incident probability lies outside the packet's k-band "
                        f"(k₀ ± {K_SPAN:g}σ_k): spurious components, from a time step too large "
                        "for the grid or a packet cut by the box edge")
    phase = run.grid_phase
    if phase > math.pi:
        h = timestep.sharpness(run.V, run.dx, (run.x_r, run.x_t), float(run.x[0]), 0.0)
        scheme = _scheme(run)
        sunk = ("sideband_sink" in _attrs(run)
                or timestep.sideband_wavenumber(info, run.V, hbar, m, run.dt) >= math.pi / run.dx)
        bias = timestep.time_error(h, run.dt * scheme.widest, hbar, scheme.order, sunk)
        if bias > max(TIME_BIAS_WARN, accuracy or 0.0):
            warnings.append(f"the time step is large for the potential's sharp features: "
                            f"Δt·(E_max + ΔV)/ħ = {phase:.3g} > π, and the spurious high-k "
                            f"components they feed bias delays by about {bias:.1e} (relative)")
    return warnings
