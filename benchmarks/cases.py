"""A reflection-delay case for run_all.py's scheme, precision and snapshot parts.

A Gaussian packet (ħ = m = 1, σ = 20, E₀ = 0.2 V₀) is totally reflected by a
unit step at x = 0. Its reflection delay is measured two ways, each against its
own packet-averaged prediction (PHYSICS §5):
- centroid: the reflected packet's centroid against the mirror image of the
  free packet, divided by v₀; predicted ⟨dφ/dk⟩/v₀;
- flux arrival: the mean arrival time of the reflected flux at a detector minus
  that of the free packet at the mirror point; predicted ⟨(dφ/dk)/v(k)⟩;
with weights |ψ̃₀(k)|² dk and the published step phase r = −e^{2iδ},
δ = arctan√(E/(V₀−E)) (Cohen-Tannoudji, Diu, Laloë, Complement H_I; Griffiths
2nd ed., Problem 2.34), whose dφ/dk = 2/κ, κ = √(2(V₀ − E)).

Geometry (chosen so that the incident and reflected passages are separated at
the detector by more than 12 temporal widths, and the whole slow tail has passed
it by the end): start at −260, detector at −130, box [−700, 60], t = 1000.
"""
from __future__ import annotations

import math
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import integrate

from sojourn.model import packets
from sojourn.build import build
from sojourn.workflows import run as execute
from sojourn.store import RunFile
from sojourn.config.scenario import loads

V0, SIGMA, E0 = 1.0, 20.0, 0.2
K0 = math.sqrt(2 * E0)
SIGMA_K = 1 / (2 * SIGMA)
START, DETECTOR, REFERENCE = -260.0, -130.0, 0.0
BOX = (-700.0, 60.0)
DURATION = 1000.0
INFO = packets.PacketInfo(center=START, width=SIGMA, k0=K0, sigma_k=SIGMA_K, energy=E0,
                          mean_energy=(K0 ** 2 + SIGMA_K ** 2) / 2, group_velocity=K0,
                          level=0.0)


def predictions() -> dict:
    """Packet-averaged reflection delays by quadrature over the Gaussian spectrum."""
    def weight(k):
        return math.exp(-((k - K0) ** 2) / (2 * SIGMA_K ** 2))

    def dphi_dk(k):
        return 2 / math.sqrt(2 * V0 - k * k)

    lo, hi = K0 - 14 * SIGMA_K, K0 + 14 * SIGMA_K
    norm = integrate.quad(weight, lo, hi, epsabs=0, epsrel=1e-13)[0]
    centroid = integrate.quad(lambda k: weight(k) * dphi_dk(k), lo, hi, epsabs=0,
                              epsrel=1e-13)[0] / norm / K0
    arrival = integrate.quad(lambda k: weight(k) * dphi_dk(k) / k, lo, hi, epsabs=0,
                             epsrel=1e-13)[0] / norm
    return {"centroid": centroid, "arrival": arrival,
            "wigner": 1 / math.sqrt(E0 * (V0 - E0))}


def grid_span(points: int) -> tuple[float, float]:
    """A box of about BOX with the step midway between two grid points."""
    dx = (BOX[1] - BOX[0]) / points
    left = -(round(-BOX[0] / dx) + 0.5) * dx
    return left, left + points * dx


def centroid_delay(x: np.ndarray, psi: np.ndarray, t: float) -> float:
    """(centroid of the part left of the step − mirror image of the free centroid)/v₀."""
    left = x < REFERENCE
    density = np.abs(psi[left]) ** 2
    centre = float(np.dot(x[left], density) / density.sum())
    mirror = 2 * REFERENCE - (START + K0 * t)
    return (centre - mirror) / K0


def free_flux(position: float, t: np.ndarray) -> np.ndarray:
    """Exact flux of the free incident packet at a position, at times t (ħ = m = 1)."""
    s = 1 + 1j * t / (2 * SIGMA ** 2)
    psi = packets.free_evolution(np.array([position]), t, INFO, 1.0, 1.0)
    slope = psi * (-(position - START - K0 * t) / (2 * SIGMA ** 2 * s) + 1j * K0)
    return (np.conj(psi) * slope).imag


def arrival_delay(t: np.ndarray, flux: np.ndarray, detector: float) -> float:
    """Mean arrival time of the reflected flux at `detector` minus the free
    packet's at the mirror point, both by the trapezoid rule on the same times."""
    t_in = (detector - START) / K0
    t_out = (2 * REFERENCE - detector - START) / K0
    after = t > (t_in + t_out) / 2
    ts, js = t[after], flux[after]
    reflected = np.trapezoid(ts * js, ts) / np.trapezoid(js, ts)
    jf = free_flux(2 * REFERENCE - detector, ts)
    free = np.trapezoid(ts * jf, ts) / np.trapezoid(jf, ts)
    return float(reflected - free)


@dataclass
class Outcome:
    """One solver run: its settings, wall time and both delays."""

    solver: str
    points: int
    dt: float
    seconds: float
    centroid: float
    arrival: float
    note: str = ""

    def errors(self, reference: dict) -> tuple[float, float]:
        return (abs(self.centroid / reference["centroid"] - 1),
                abs(self.arrival / reference["arrival"] - 1))


SCENARIO = """\
title: Reflection delay benchmark (unit step, E0 = 0.2 V0)
units: atomic
grid: {{span: [{left!r}, {right!r}], points: {points}}}
potential:
  - step: {{at: 0.0, height: 1.0}}
packet: {{center: {start}, width: {sigma}, energy: {energy}}}
evolve: {{duration: {duration}, dt: {dt!r}, scheme: {scheme}, precision: {precision}}}
record: {{every: {every}, compress: {compress}}}
measure: {{detectors: [{detector}], reference: 0.0}}
"""


def sojourn_scenario(points: int, dt: float, scheme: str = "strang", precision: str = "double",
                     every: float = DURATION / 10, compress: bool = False):
    left, right = grid_span(points)
    text = SCENARIO.format(left=left, right=right, points=points, start=START, sigma=SIGMA,
                           energy=E0, duration=DURATION, dt=dt, scheme=scheme,
                           precision=precision, every=every, compress=str(compress).lower(),
                           detector=DETECTOR)
    return loads(text, "delay-benchmark.yaml")


def phase_dt(points: int, phase: float) -> float:
    """The Δt with Δt·(E_max + V₀)/ħ = phase on this grid (PHYSICS §3)."""
    left, right = grid_span(points)
    e_max = (math.pi * points / (right - left)) ** 2 / 2
    return phase / (e_max + V0)


def run_sojourn(points: int, dt: float, scheme: str = "strang",
                precision: str = "double") -> Outcome:
    """A full `sojourn run` (build, propagate with sampling, write the run file),
    timed, then both delays measured from the run file."""
    scenario = sojourn_scenario(points, dt, scheme, precision)
    with tempfile.TemporaryDirectory() as folder:
        start = time.perf_counter()
        setup = build(scenario)
        path = execute(setup, Path(folder) / "run.h5")
        seconds = time.perf_counter() - start
        with RunFile(path) as rf:
            samples = rf.samples()
            x, psi, t_last = rf.x, rf.psi(len(rf) - 1), float(rf.times[-1])
    return Outcome(f"sojourn {scheme} {precision}", points, dt, seconds,
                   centroid_delay(x, psi, t_last),
                   arrival_delay(samples["t"], samples["flux"][:, 0], DETECTOR))
