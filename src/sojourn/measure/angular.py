"""Angle-resolved scattering measured off one circular obstacle in the plane
(PHYSICS §Angle-resolved delays): dσ/dθ and the delay τ(θ) per angle bin of a
detector circle, each beside its packet-averaged partial-wave prediction.

The route, with no change to the engine:

1. the scattered wave ψ_sc = ψ − ψ_free at each stored snapshot, ψ_free the
   exact free evolution of the initial packet, on M points of the detector
   circle r = R round the obstacle's centre (ψ by quintic-spline
   interpolation of the snapshot, ψ_free exactly);
2. its angular harmonics c_m(t) (an FFT over the circle) and their energy
   components c_m(E) = ∫dt e^{iEt/ħ} c_m(t) and ∂_E c_m (the trapezoid rule
   on the snapshots: exact for a band-limited signal while 2πħ/Δt exceeds
   the band, `spacing_limit`);
3. outside the obstacle each energy component is outgoing, c_m(E) H_m(kr)/H_m(kR)
   (Hankel functions of the first kind), so the far-field amplitude is
   A(θ, E) = Σ_m c_m(E)/H_m(kR) (−i)^m e^{imθ}: the near field at R (phases
   (4m² − 1)/(8kR), large for m ~ ka at a small R) is removed exactly;
4. per bin, the probability P = (1/π²m)∫dθ∫|A|²dE (the outgoing flux through
   a distant arc, integrated in time), dσ/dθ = P/(Δθ F) with F the free
   packet's fluence through the centre, and the flux-weighted arrival time at
   a distant radius ρ minus the reference (ρ − x₀)⟨m/ħk⟩:
   τ = ħ∫∫Im(A*∂_E A) / ∫∫|A|² + x₀⟨m/ħk⟩ (the ρ terms cancel exactly).

The same is done on a second circle between the obstacle and R; the
difference of the two is each bin's `error` (the detector's consistency:
interpolation, absorber echoes, a truncated time integral; not the grid's
discretisation, which needs reruns).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special
from scipy.ndimage import map_coordinates, spline_filter

from ..errors import MeasureError
from ..model import packets
from ..theory.angular_averages import packet_beam_prediction
from ..theory.obstacles import incident_packet, obstacle_of
from .report import DelayReport

DEFAULT_BINS = 36
K_SPAN = 8.0            # energies k₀ ± 8σ_k (as the predictions)
K_NODES = 241           # Simpson nodes in k
PER_BIN = 8             # Gauss–Legendre angles per bin
M_EXTRA = 16            # harmonics kept beyond k_max·R
TAIL_WARN = 1e-4        # |ψ_sc|² on the circle at the run's end, relative to its peak
SECOND = 0.7            # the second circle's radius, as a share of the way obstacle → R


def ring_radius(scenario, obstacle, grid_x, grid_y, width: float) -> float:
    """`measure.ring`, or by default half-way from the obstacle's edge to the
    nearest absorber; checked to lie between the two."""
    cx, cy = obstacle.center
    free = min(cx - (grid_x[0] + width), (grid_x[-1] - width) - cx,
               cy - (grid_y[0] + width), (grid_y[-1] - width) - cy)
    ring = getattr(scenario.measure, "ring", None)
    R = obstacle.outer + 0.5 * (free - obstacle.outer) if ring is None else float(ring)
    if not (obstacle.outer < R < free):
        raise MeasureError(f"measure.ring: the detector circle r = {R:g} must lie outside the "
                           f"obstacle (r > {obstacle.outer:g}) and inside the absorbers "
                           f"(r < {free:g})")
    return R


def spacing_limit(k_hi: float, hbar: float, mass: float) -> float:
    """The largest snapshot spacing whose time integral keeps the band: πħ/E_hi."""
    return math.pi * hbar / (hbar ** 2 * k_hi ** 2 / (2 * mass))


def _simpson(n: int) -> np.ndarray:
    w = np.ones(n)
    w[1:-1:2], w[2:-1:2] = 4.0, 2.0
    return w / 3.0


def _trapezoid(t: np.ndarray) -> np.ndarray:
    w = np.zeros_like(t)
    d = np.diff(t)
    w[:-1] += d / 2
    w[1:] += d / 2
    return w


def circle_harmonics(rf, center, radius: float, points: int, normal, transverse, hbar, mass):
    """c_m(t) of ψ − ψ_free on the circle, shape (S, points) in FFT order, and
    the peak and final |ψ_sc| on it."""
    x = np.asarray(rf.coordinate("x"), float)
    y = np.asarray(rf.coordinate("y"), float)
    phi = 2 * np.pi * np.arange(points) / points
    px, py = center[0] + radius * np.cos(phi), center[1] + radius * np.sin(phi)
    idx = np.vstack([(py - y[0]) / (y[1] - y[0]), (px - x[0]) / (x[1] - x[0])])
    out = []
    for t, psi in rf.snapshots():
        psi = np.asarray(psi)
        on = (map_coordinates(spline_filter(psi.real, order=5), idx, order=5, prefilter=False)
              + 1j * map_coordinates(spline_filter(psi.imag, order=5), idx, order=5,
                                     prefilter=False))
        free = (packets.free_evolution(px, t, normal, hbar, mass)
                * packets.free_evolution(py, t, transverse, hbar, mass))
        out.append(on - free)
    values = np.array(out)
    size = np.abs(values).max(axis=1)
    return np.fft.fft(values, axis=1) / points, float(size.max()), float(size[-1])


def far_field(c_t, times, radius: float, k: np.ndarray, hbar: float, mass: float, m_keep: int):
    """(m, A_m(k), ∂_E A_m(k)): the far-field harmonics c_m(E)/H_m(kR) and their
    energy derivatives, m = −m_keep … m_keep (module note, 2–3)."""
    points = c_t.shape[1]
    m = np.concatenate([np.arange(0, m_keep + 1), np.arange(-m_keep, 0)])
    c = c_t[:, m % points]                                     # (S, harmonics)
    E = hbar ** 2 * k ** 2 / (2 * mass)
    w = _trapezoid(np.asarray(times, float))
    phase = np.exp(1j * np.outer(E, times) / hbar) * w          # (K, S)
    cE = phase @ c
    cE_dE = (phase * (1j * np.asarray(times) / hbar)) @ c
    H = special.hankel1(m[None, :], (k * radius)[:, None])
    dH = special.h1vp(m[None, :], (k * radius)[:, None]) * (radius * mass / (hbar ** 2 * k))[:, None]
    A = cE / H
    A_E = cE_dE / H - cE * dH / H ** 2
    return m, A, A_E


def bin_values(m, A, A_E, k, edges, x0: float, hbar: float, mass: float):
    """Per bin [edges_i, edges_i+1] (lab angles): probability, flux-weighted
    ħ⟨∂_E arg A⟩ + x₀⟨m/ħk⟩ (module note, 4)."""
    xg, wg = np.polynomial.legendre.leggauss(PER_BIN)
    half = 0.5 * np.diff(edges)
    theta = (0.5 * (edges[1:] + edges[:-1])[:, None] + half[:, None] * xg).ravel()
    basis = ((-1j) ** (m % 4))[:, None] * np.exp(1j * np.outer(m, theta))   # (harmonics, θ)
    amp, amp_E = A @ basis, A_E @ basis                                      # (K, θ)
    dk = (k[-1] - k[0]) / (k.size - 1)
    wE = _simpson(k.size) * dk * hbar ** 2 * k / mass                       # dE = ħ²k/m dk
    flux = wE @ np.abs(amp) ** 2
    phase = wE @ (hbar * np.imag(np.conj(amp) * amp_E))
    slow = (wE * mass / (hbar * k)) @ np.abs(amp) ** 2
    per_bin = lambda v: (v * (half[:, None] * wg).ravel()).reshape(half.size, -1).sum(axis=1)
    P = per_bin(flux) / (math.pi ** 2 * mass)
    weight = per_bin(flux)
    return P, per_bin(phase) / weight + x0 * per_bin(slow) / weight


def fluence_at_center(normal, transverse, center, direction: float, hbar: float,
                      mass: float) -> float:
    """∫ j·n dt of the free packet at the obstacle's centre (n its direction),
    on a fine time grid spanning its passage (Simpson)."""
    speed = hbar * math.hypot(normal.k0, transverse.k0) / mass
    sx, sy = normal.width, transverse.width
    reach = (math.hypot(center[0] - normal.center, center[1] - transverse.center)
             + 12 * max(sx, sy)) / speed * 1.5
    t = np.linspace(0.0, reach, 8001)
    n = (math.cos(direction), math.sin(direction))
    j = np.zeros_like(t)
    for i, (info, at, comp) in enumerate(((normal, center[0], 0), (transverse, center[1], 1))):
        s = 1 + 1j * hbar * t / (2 * mass * info.width ** 2)
        v0 = hbar * info.k0 / mass
        dlog = -(at - info.center - v0 * t) / (2 * info.width ** 2 * s) + 1j * info.k0
        j = j + n[comp] * (hbar / mass) * np.imag(dlog)
    density = (np.abs(packets.free_evolution(np.array([center[0]]), t[:, None], normal, hbar,
                                             mass)[:, 0]) ** 2
               * np.abs(packets.free_evolution(np.array([center[1]]), t[:, None], transverse,
                                               hbar, mass)[:, 0]) ** 2)
    return float(np.sum(_simpson(t.size) * (t[1] - t[0]) * j * density))


def measure_angular(rf) -> dict:
    """The `scattering.angular` block of a run in the plane whose potential is
    one disk or ring, and its warnings: (block, warnings)."""
    scenario = rf.scenario()
    obstacle, why = obstacle_of(scenario.build_potential())
    if obstacle is None:
        raise MeasureError(f"{rf.path}: {why}")
    times = np.asarray(rf.times, float)
    if times.size < 3:
        raise MeasureError(f"{rf.path}: the run holds fewer than three snapshots; the flux "
                           "through the detector circle cannot be integrated in time")
    hbar, mass = float(rf.attrs["hbar"]), float(rf.attrs["mass_internal"])
    inc = incident_packet(scenario, obstacle)
    normal, transverse = packets.in_plane(scenario.packet, hbar, mass, 0.0)
    x, y = np.asarray(rf.coordinate("x"), float), np.asarray(rf.coordinate("y"), float)
    width = scenario.absorber.width if scenario.absorber is not None else 0.0
    R = ring_radius(scenario, obstacle, x, y, width)
    bins = getattr(scenario.measure, "bins", None) or DEFAULT_BINS
    warnings = []
    k_lo = max(inc.k0 - K_SPAN * inc.sigma_k, inc.k0 / 100)
    k_hi = inc.k0 + K_SPAN * inc.sigma_k
    k = np.linspace(k_lo, k_hi, K_NODES)
    gap = float(np.max(np.diff(times)))
    limit = spacing_limit(k_hi, hbar, mass)
    if gap > limit:
        warnings.append(f"record.every: snapshots {gap:.3g} apart are too far apart for the "
                        f"time integral over the detector (at most {limit:.3g} keeps the "
                        "packet's band)")
    edges = inc.direction - np.pi + 2 * np.pi * np.arange(bins + 1) / bins
    results = []
    for radius in (R, obstacle.outer + SECOND * (R - obstacle.outer)):
        m_keep = int(math.ceil(k_hi * radius)) + M_EXTRA
        points = 1 << max(8, int(math.ceil(math.log2(4 * m_keep + 2))))
        c_t, peak, last = circle_harmonics(rf, obstacle.center, radius, points, normal,
                                           transverse, hbar, mass)
        if radius == R and last ** 2 > TAIL_WARN * peak ** 2:
            warnings.append(f"evolve.duration: the scattered density on the detector circle "
                            f"is still {(last / peak) ** 2:.1e} of its peak when the run ends: "
                            "its delays miss the tail")
        m, A, A_E = far_field(c_t, times, radius, k, hbar, mass, m_keep)
        results.append(bin_values(m, A, A_E, k, edges, inc.x0, hbar, mass))
    (P, tau), (P2, tau2) = results
    fluence = fluence_at_center(normal, transverse, obstacle.center, inc.direction, hbar, mass)
    dtheta = np.diff(edges)
    section, section2 = P / (dtheta * fluence), P2 / (dtheta * fluence)
    predicted, predicted_section = bin_prediction(obstacle, inc, edges, hbar, mass)
    centres = 0.5 * (edges[1:] + edges[:-1])
    return {"theta": centres.tolist(), "measured": tau.tolist(), "predicted": predicted.tolist(),
            "error": np.abs(tau - tau2).tolist(), "probability": P.tolist(),
            "cross_section": section.tolist(),
            "predicted_cross_section": predicted_section.tolist(),
            "cross_section_error": np.abs(section - section2).tolist(),
            "ring": R, "bins": int(bins), "fluence": fluence, "direction": inc.direction,
            "probability_scattered": float(P.sum())}, warnings


def bin_prediction(obstacle, inc, edges, hbar: float, mass: float):
    """The beam's packet-averaged τ and dσ/dθ over each bin (lab edges):
    `packet_beam_prediction` at PER_BIN Gauss angles per bin, the delay
    weighted by the cross section."""
    xg, wg = np.polynomial.legendre.leggauss(PER_BIN)
    half = 0.5 * np.diff(edges)
    theta = (0.5 * (edges[1:] + edges[:-1])[:, None] + half[:, None] * xg).ravel()
    beam = packet_beam_prediction(list(obstacle.shells), theta - inc.direction, k0=inc.k0,
                                  sigma_k=inc.sigma_k, sigma_ky=inc.sigma_ky, x0=inc.x0,
                                  y0=inc.y0, hbar=hbar, mass=mass)
    w = (half[:, None] * wg).ravel()
    per_bin = lambda v: (w * v).reshape(half.size, -1).sum(axis=1)
    flux = per_bin(beam.cross_section)
    return per_bin(beam.cross_section * beam.delay) / flux, flux / (2 * half)


def is_obstacle_run(rf) -> bool:
    """True for a run in the plane whose potential is one disk or ring."""
    return "y" in rf.axes and obstacle_of(rf.scenario().build_potential())[0] is not None


def obstacle_report(rf) -> DelayReport:
    """The delay report of a run off one disk or ring: no channels along a
    normal, the `scattering.angular` block, the run's health warnings."""
    if rf.status != "complete":
        status = [f"the run's status is '{rf.status}': it may have ended early"]
    else:
        status = []
    block, warnings = measure_angular(rf)
    notes = ["off a circular obstacle the wave leaves in every direction: the delays are "
             "measured per angle bin of the detector circle (scattering.angular), not along "
             "a normal"]
    spec = rf.scenario().packet
    return DelayReport(str(rf.path), rf.units, None, None, {}, status + warnings,
                       float(spec.energy) if spec.energy is not None else None, notes,
                       scattering={"angular": block})
