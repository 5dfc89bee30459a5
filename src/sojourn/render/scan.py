"""One pass over a run's snapshots before drawing: where the probability goes
(the largest |ψ|² at each grid point, for the x-range and fixed axes), the
reflected and transmitted parts' centroids and probabilities per snapshot,
and from them the delay the pictures mark with their ruler."""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np

from ..store import RunFile
from .facts import RunFacts
from .overlays import (centroid_delay, incident_bounds, mirror_reference, phase_delay,
                       reference_trajectory, side_centroid, transmitted_bounds, turning_time)

CHANNEL_MIN = 1e-6      # far-side probability below which no transmitted channel is drawn
CLEAR_WIDTHS = 4.0      # widths of travel after the turning time before a centroid means a delay


@dataclass
class Scan:
    """What a pass over the snapshots found (arrays per grid point or per snapshot)."""

    peak: np.ndarray              # max |ψ|² per grid point
    reference_peak: np.ndarray    # max of the mirror's |ψ_ref|² per grid point
    times: np.ndarray
    reflected: np.ndarray         # probability on the incident side, per snapshot
    reflected_centroid: np.ndarray
    transmitted: np.ndarray       # probability on the far side, per snapshot
    transmitted_centroid: np.ndarray
    usable: np.ndarray            # snapshots where the reflected centroid means a delay

    @property
    def has_transmission(self) -> bool:
        """A far-side part that lasts (not a tail still leaving the potential)."""
        after = np.nonzero(self.usable if self.usable.any() else np.ones_like(self.usable))[0]
        values = self.transmitted[after]
        late = values[len(values) // 2:]
        return bool(values.max() > CHANNEL_MIN and late.max() > 1e-2 * values.max())


def scan_run(run: RunFile, facts: RunFacts) -> Scan:
    """Read the snapshots once, one at a time."""
    x, n = facts.x, len(facts.times)
    dx = float(x[1] - x[0])
    peak, ref_peak = np.zeros_like(x), np.zeros_like(x)
    prob = np.zeros((2, n))
    cent = np.full((2, n), np.nan)
    near = incident_bounds(facts.inner, facts.reference, facts.packet)
    far = transmitted_bounds(facts.inner, facts.reference, facts.packet)
    for i, (t, psi) in enumerate(run.snapshots()):
        density = psi.real ** 2 + psi.imag ** 2
        np.maximum(peak, density, out=peak)
        if facts.scattering:
            ref = mirror_reference(x, t, facts.packet, facts.reference, facts.hbar, facts.mass)
            np.maximum(ref_peak, ref.real ** 2 + ref.imag ** 2, out=ref_peak)
            prob[0, i], cent[0, i] = side_centroid(x, density, dx, near)
            prob[1, i], cent[1, i] = side_centroid(x, density, dx, far)
        else:
            prob[0, i], cent[0, i] = side_centroid(x, density, dx, facts.inner)
    usable = np.zeros(n, bool)
    if facts.scattering:
        info = facts.packet
        clear = turning_time(info, facts.reference) + CLEAR_WIDTHS * info.width / abs(
            info.group_velocity)
        after = facts.times >= clear
        if after.any():
            usable = after & (prob[0] >= (1 - 1e-3) * prob[0][after].max()) & (prob[0] > 1e-3)
    return Scan(peak, ref_peak, facts.times, prob[0], cent[0], prob[1], cent[1], usable)


def channel_gain(scan: Scan) -> float:
    """The power of ten nearest to P_reflected/P_transmitted, which brings a small
    transmitted part to within √10 of the reflected one's scale (1 when it is
    not small or not there)."""
    if not scan.has_transmission:
        return 1.0
    after = scan.usable if scan.usable.any() else np.ones_like(scan.usable)
    p_t = float(np.median(scan.transmitted[after]))
    p_r = float(np.median(scan.reflected[after]))
    if not (0 < p_t < 0.1 * p_r):
        return 1.0
    return 10.0 ** round(math.log10(p_r / p_t))


def run_delay(scan: Scan, facts: RunFacts) -> Optional[float]:
    """The reflected delay from the run's own centroids at the last usable
    snapshot (None when there is none)."""
    if not scan.usable.any():
        return None
    i = int(np.nonzero(scan.usable)[0][-1])
    x_ref = reference_trajectory(scan.times[i], facts.packet, facts.reference)
    return float(centroid_delay(scan.reflected_centroid[i], x_ref, facts.packet))


@dataclass(frozen=True)
class Ruler:
    """The delay a picture marks: the value, where it comes from, the theory's."""

    delay: float
    source: str                   # 'saved analysis' or 'run centroids'
    theory: Optional[float]
    theory_kind: str              # 'packet average' or 'phase delay at E₀'

    def label(self, unit: str, sep: str = ", ") -> str:
        """'τ = 5.67 fs, theory 5.67 fs' (packet average), or the phase delay named."""
        text = f"τ = {self.delay:.3g} {unit}"
        if self.theory is not None and math.isfinite(self.theory):
            name = "theory" if self.theory_kind == "packet average" else self.theory_kind
            text += f"{sep}{name} {self.theory:.3g} {unit}"
        return text


def saved_ruler(facts: RunFacts, channel: str) -> Optional[Ruler]:
    """The channel's centroid delay and its prediction from the saved analysis
    (`sojourn delay --save`), or None when none was saved."""
    part = (facts.analysis or {}).get(channel) if isinstance(facts.analysis, dict) else None
    centroid = ((part or {}).get("measured") or {}).get("centroid") if isinstance(part, dict) \
        else None
    if not (isinstance(centroid, dict) and isinstance(centroid.get("delay"), (int, float))):
        return None
    predicted = centroid.get("predicted")
    return Ruler(float(centroid["delay"]), "saved analysis",
                 float(predicted) if isinstance(predicted, (int, float)) else None,
                 "packet average")


def reflection_ruler(scan: Scan, facts: RunFacts) -> Optional[Ruler]:
    """The centroid delay from the saved analysis (`sojourn delay --save`) with its
    prediction, else from the run's centroids beside the phase delay at E₀."""
    saved = saved_ruler(facts, "reflection")
    if saved is not None:
        return saved
    tau = run_delay(scan, facts)
    if tau is None:
        return None
    wigner = phase_delay(facts, np.array([facts.packet.energy])).get("reflection")
    return Ruler(tau, "run centroids", None if wigner is None else float(wigner[0]),
                 "phase delay at E₀")
