"""The time step a run's measurements need (PHYSICS §3, "Time step and the populated band").

Pure functions on numbers and arrays. The split step reproduces energies only
modulo 2πħ/Δt: a packet of energy E is coupled by the kicks to the channels at
E + 2πnħ/Δt (the sidebands of the stroboscopic map). They are open wherever the
grid holds them (Δt·(E_max + ΔV)/ħ > 2π), and a sharp feature of V — a jump of
height h couples with strength h at every wavenumber — feeds them with a
probability that grows as (hΔt/ħ)². Three consequences, measured in
benchmarks/dt_scan.py:
1. the packet's own band must not alias: Δt·(E_top + ΔV)/ħ < 2π (E_top the
   band's largest kinetic energy) — the guard's hard limit;
2. fast sideband components cross the detectors and swamp the flux: the
   detectors read the state filtered to the band (`flux_band`), which is
   exact for the band and blind to the sidebands;
3. the sidebands' waves, fast enough to pass the absorbing layers, wrap round
   the box and return to the jump, where their interference with the packet
   biased delays by up to RESONANT_COEFFICIENT·x⁴ (x = h_eff·Δt/ħ, h_eff the
   sharpness of V, `sharpness`), changing sign within 0.1 % of Δt: the sink
   (`sideband_sink`, a damping rate in k far above the band, free of cost in
   the kinetic factor) takes them out first, and what is left is smooth in
   Δt — SUNK_COEFFICIENT·x² for Strang, FOURTH_ORDER_COEFFICIENT·x⁴ for
   Yoshida-4 (`time_error`). The default Δt keeps this below
   DEFAULT_TIME_ERROR, and never goes below the old grid rule."""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

BAND_WIDTHS = 8.0          # the populated band: |k₀| ± 8σ_k (|ψ̃₀|² below e^-32 beyond)
GRID_PHASE = math.pi / 2   # the grid rule: Δt·(E_max + ΔV)/ħ = π/2 (no sideband on the grid)
BAND_PHASE = math.pi / 4   # the band rule: Δt·(E_top + ΔV)/ħ ≤ π/4 (in-band splitting error)
LEAK_COEFFICIENT = 2.0     # without the sink, relative delay bias ≲ 2·(h_eff Δt/ħ)²: a fine scan in
                           # Δt on the unit step (N = 16384) spread by 2·(hΔt)² at Δt ≈ 0.01 ...
RESONANT_COEFFICIENT = 2e4  # ... and by (hΔt)⁴ further up: ±2.6e-3 at Δt ≈ 0.02, changing sign
                           # within 0.1 % of Δt (the sidebands' waves interfere with the packet:
                           # their phase ∝ 1/Δt); the bias bound is the larger of the two
SUNK_COEFFICIENT = 0.5     # with the sink, Strang: smooth, −0.37·x² on the unit step (Δt 0.016–0.04,
                           # N = 8192) and −0.10…−0.14·x² on the barrier (h_eff = 2, Δt 0.02–0.03)
FOURTH_ORDER_COEFFICIENT = 1.0  # with the sink, Yoshida-4 (x of its widest sub-step, 1.70·Δt):
                           # +0.4…+0.7·x⁴ on the barrier (x = 0.17–0.34), far less on the unit step
SIDEBAND_SHARE = 0.3       # probability the sidebands carry off ≈ 0.3·(h_eff Δt/ħ)² at most (Δt the
                           # widest sub-step; the unit step with the sink: 0.33–0.34 for Strang at
                           # Δt 0.02–0.04, 0.23 for Yoshida-4 at Δt 0.08, from the norm lost)
DEFAULT_TIME_ERROR = 1e-4  # the default Δt aims at this relative bias from the sidebands
FILTER_ROOM = 1.5          # the filter needs k_stop ≥ 1.5·k_pass
SINK_START = 0.5           # the sink starts at half the first sideband's wavenumber ...
SINK_CROSSINGS = 40.0      # ... and takes a sideband's amplitude down by e^-40 per box crossing


def band_top(info, V_min: float, hbar: float, mass: float) -> float:
    """The largest local wavenumber of the populated band: |k₀| + 8σ_k where V
    is lowest (a drop below the packet's level speeds it up)."""
    k = abs(info.k0) + BAND_WIDTHS * info.sigma_k
    drop = max(info.level - V_min, 0.0)
    return math.sqrt(k * k + 2 * mass * drop / hbar ** 2)


def band_energy_range(info, V: np.ndarray, hbar: float, mass: float) -> float:
    """E_top + ΔV: the band's largest kinetic energy plus the range of V."""
    k = band_top(info, float(np.min(V)), hbar, mass)
    return (hbar * k) ** 2 / (2 * mass) + float(np.ptp(V))


def sideband_wavenumber(info, V: np.ndarray, hbar: float, mass: float, dt: float) -> float:
    """The smallest local wavenumber a first sideband can have anywhere on the
    grid: kinetic energy (bottom of the band) + 2πħ/Δt − (V_max − level); 0 if closed."""
    k_low = max(abs(info.k0) - BAND_WIDTHS * info.sigma_k, 0.0)
    kinetic = (hbar * k_low) ** 2 / (2 * mass) + 2 * math.pi * hbar / dt \
        - (float(np.max(V)) - info.level)
    return math.sqrt(2 * mass * kinetic) / hbar if kinetic > 0 else 0.0


def flux_band(grid, info, V, hbar, mass, dt) -> Optional[tuple[float, float]]:
    """(k_pass, k_stop) of the detectors' filter: pass the band, stop below the
    first sideband. None where no sideband fits on the grid (nothing to filter)
    or there is no room between band and sideband."""
    k_pass = band_top(info, float(np.min(V)), hbar, mass)
    k_side = sideband_wavenumber(info, V, hbar, mass, dt)
    if k_side >= grid.k_max:
        return None    # no sideband fits on the grid: the plain stencils see no spurious band
    k_stop = k_side
    if not k_stop >= FILTER_ROOM * k_pass:
        return None
    return (k_pass, k_stop)


def sharpness(V: np.ndarray, dx: float, support, x_left: float, q_min: float) -> float:
    """h_eff: the largest |Σ_j (V_{j+1} − V_j) e^{−iqx_j}| over |q| ≥ q_min — the
    height of a jump that would couple as strongly at those wavenumbers (a jump
    of height h gives h at every q; a feature smooth on the scale 1/q_min nearly
    0). Taken over the potential's support (± 2 cells), so the periodic wrap of
    the box edges, where no packet is, does not count."""
    if support is None:
        return 0.0
    V = np.asarray(V)
    V = V.reshape(-1, V.shape[-1]).mean(axis=0)   # a spinor's components V ± ħω_L/2: their mean
    i0 = max(int(math.floor((support[0] - x_left) / dx)) - 2, 0)
    i1 = min(int(math.ceil((support[1] - x_left) / dx)) + 3, len(V))
    steps = np.diff(V[i0:i1])
    if steps.size == 0 or not np.any(steps):
        return 0.0
    n = 1 << max(int(math.ceil(math.log2(max(4 * steps.size, 64)))), 6)
    spectrum = np.abs(np.fft.rfft(steps, n))
    q = 2 * math.pi * np.fft.rfftfreq(n, d=dx)
    above = spectrum[q >= q_min]
    return float(above.max()) if above.size else 0.0


def _terms(order: int, sunk: bool) -> tuple[tuple[float, int], ...]:
    """(coefficient, power of x) of the error bound: its largest term counts.
    The probability the sidebands take from the packet (SIDEBAND_SHARE·x²,
    which the channels' probabilities lose) is one of them."""
    if not sunk:
        return (LEAK_COEFFICIENT, 2), (RESONANT_COEFFICIENT, 4)
    delays = (FOURTH_ORDER_COEFFICIENT, 4) if order >= 4 else (SUNK_COEFFICIENT, 2)
    return delays, (SIDEBAND_SHARE, 2)


def time_error(h_eff: float, dt: float, hbar: float, order: int = 2,
               sunk: bool = True) -> float:
    """The estimated relative error of delays and probabilities at a (sub-)step
    Δt, x = h_eff·Δt/ħ: with the sink, SUNK_COEFFICIENT·x² (second order) or
    FOURTH_ORDER_COEFFICIENT·x⁴ (fourth) on the delays, and the SIDEBAND_SHARE·x²
    the sidebands take; without it the larger of LEAK_COEFFICIENT·x² and
    RESONANT_COEFFICIENT·x⁴."""
    x = h_eff * dt / hbar
    return max(c * x ** p for c, p in _terms(order, sunk))


def largest_dt(h_eff: float, target: float, hbar: float, order: int = 2,
               sunk: bool = True) -> float:
    """The largest (sub-)step with time_error ≤ target (inf for a potential
    without features)."""
    if h_eff <= 0:
        return math.inf
    x = min((target / c) ** (1.0 / p) for c, p in _terms(order, sunk))
    return x * hbar / h_eff


def grid_rule(kinetic_max: float, v_range: float, hbar: float) -> float:
    """The grid rule's Δt: no sideband fits on the grid."""
    return GRID_PHASE * hbar / (kinetic_max + v_range)


def bias(grid, info, V, support, hbar, mass, dt, order: int = 2,
         sunk: bool = True) -> float:
    """The estimated relative delay bias a (sub-)step Δt causes (`time_error`
    with h_eff over all wavenumbers). At a jump it is the sidebands' bias (and
    below the grid limit the jump's near field at the grid's top wavenumbers,
    benchmarks/dt_scan.py); for a smooth feature the same form bounds the
    in-band splitting error (the smooth step of configs/smooth_step.yaml gave
    0.012·(hΔt/ħ)²: the bound is conservative). `sunk`: the run has a sink,
    or no sideband fits on its grid (`sinks`)."""
    return time_error(sharpness(V, grid.dx, support, grid.left, 0.0), dt, hbar, order, sunk)


def band_rule(info, V, hbar, mass, order: int = 2) -> float:
    """The band rule's Δt, scaled to the scheme's order (a fourth-order scheme
    takes twice the band phase)."""
    return BAND_PHASE * (2.0 if order >= 4 else 1.0) * hbar / band_energy_range(
        info, V, hbar, mass)


def choose(grid, info, V, support, hbar, mass, target: float = DEFAULT_TIME_ERROR,
           order: int = 2, widest: float = 1.0, sinkable: bool = True) -> tuple[float, float]:
    """(Δt, estimated relative bias) for a target: the largest Δt whose bias
    (`bias`, at the scheme's widest sub-step widest·Δt) stays below `target`,
    capped by the band rule, and never below the grid rule (the old default,
    whose bias is below the grid's own Δx² error wherever the grid rule is the
    larger; on a resolved grid it keeps the band's phase below π/2 too).
    `sinkable`: the run may have a sink (not a driven potential)."""
    safe_dt = grid_rule(grid.kinetic_max(hbar, mass), float(np.ptp(V)), hbar)
    h = sharpness(V, grid.dx, support, grid.left, 0.0)
    cap = band_rule(info, V, hbar, mass, order)
    dt = max(safe_dt, min(cap, largest_dt(h, target, hbar, order, sinkable) / widest))
    sunk = sinks(grid, info, V, hbar, mass, dt, sinkable)
    if not sunk:    # the sink's room is gone at this Δt: the bound without it
        dt = max(safe_dt, min(cap, largest_dt(h, target, hbar, order, False) / widest))
    return dt, time_error(h, dt * widest, hbar, order, sunk)


def sideband_share(info, V, dx, support, x_left, hbar, mass, dt, widest: float = 1.0) -> float:
    """The probability the time step's sidebands may carry off (0 where none
    fits on a grid of spacing dx): what a channel theory closes may receive."""
    if support is None or sideband_wavenumber(info, V, hbar, mass, dt) >= math.pi / dx:
        return 0.0
    h = sharpness(V, dx, support, x_left, 0.0)
    return SIDEBAND_SHARE * (h * widest * dt / hbar) ** 2


def sinks(grid, info, V, hbar, mass, dt, sinkable: bool = True) -> bool:
    """Whether the run's sidebands are harmless: none fits on the grid, or the
    sink takes them (there is room for it above the band)."""
    if sideband_wavenumber(info, V, hbar, mass, dt) >= grid.k_max:
        return True
    return sinkable and flux_band(grid, info, V, hbar, mass, dt) is not None


def sideband_sink(grid, info, V, hbar, mass, dt) -> Optional[tuple[float, float, float]]:
    """(k_start, k_full, rate) of the sink (`sink_rates`): zero on the band and
    up to SINK_START·k_side, rising smoothly to `rate` at the first sideband's
    wavenumber k_side. The sidebands a sharp jump feeds at every step then die
    before they wrap round the box and return to the jump. The band is
    untouched, and the near field of a jump that far above the band is tiny:
    moving the sink's start from 0.25 to 0.85·k_side changed the unit step's
    delays by < 2e-6 (benchmarks/dt_scan.py). None where no sideband fits."""
    band = flux_band(grid, info, V, hbar, mass, dt)
    if band is None:
        return None
    k_side = band[1]
    return (max(SINK_START * k_side, FILTER_ROOM * band[0]), k_side,
            SINK_CROSSINGS * hbar * k_side / mass / grid.length)


def sink_rates(k: np.ndarray, sink: tuple[float, float, float]) -> np.ndarray:
    """γ(k) ≥ 0 of a sink (k_start, k_full, rate): 0 below k_start, sin² up to
    `rate` at k_full and beyond; the propagator damps by e^{−γΔt} per step."""
    k_start, k_full, rate = sink
    width = max(k_full - k_start, 1e-12 * k_full)   # k_start = k_full: a sharp edge
    ramp = np.clip((np.abs(k) - k_start) / width, 0.0, 1.0)
    return rate * np.sin(0.5 * math.pi * ramp) ** 2
