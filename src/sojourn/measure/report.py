"""What a delay measurement returns: one result per method, one report per
outgoing channel, one report per run; each turns into strict JSON (None, never
NaN) with `to_dict`."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np



def finite_or_none(value) -> Optional[float]:
    """A float for JSON: None for a missing or non-finite number."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


@dataclass
class MethodResult:
    """One measured delay beside its prediction (times in the scenario's unit).

    The error bar `error` is the discretisation estimate (the Richardson
    reruns of `workflows.verify` set it) plus `error_tail`, the bias of the
    part of an outgoing packet the run did not see (a flux tail cut by the end
    of the run; set by the method that can see it). Without the reruns there
    is no error bar (None). The bar does not cover errors of the reference
    itself (a reference run that is not the same packet) or of the model
    (the theory's potential against the run's sampled one).
    """

    delay: Optional[float]
    predicted: Optional[float] = None
    error_tail: Optional[float] = None
    error_discretisation: Optional[float] = None
    probability: Optional[float] = None     # the channel's probability as this method sees it
    detector: Optional[float] = None        # where it was measured (arrival)
    snapshots: int = 0                      # snapshots used (centroid)

    @property
    def error(self) -> Optional[float]:
        if self.error_discretisation is None:
            return None
        return self.error_discretisation + (self.error_tail or 0.0)

    @error.setter
    def error(self, value: Optional[float]) -> None:
        """The discretisation part (what the reruns measure)."""
        self.error_discretisation = value

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
        return {key: finite_or_none(value) for key, value in (
            ("delay", self.delay), ("predicted", self.predicted), ("deviation", self.deviation),
            ("relative", self.relative), ("error", self.error), ("error_tail", self.error_tail),
            ("error_discretisation", self.error_discretisation))}


@dataclass
class Spectrum:
    """τ(E) and R(E) (or T(E)) of one channel from one snapshot, on incident k;
    `trusted` is False where the outgoing amplitude is too small for its phase
    to be measured (near a zero of r(k) or t(k))."""

    k: np.ndarray
    energy: np.ndarray
    delay: np.ndarray
    probability: np.ndarray
    weight: np.ndarray        # incident |ψ̃₀(k)|² (dk weights)
    trusted: Optional[np.ndarray] = None


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
    larmor: Optional[dict] = None       # a spinor run's clock (measure.larmor.larmor_entry)
    sidebands: Optional[list] = None    # a driven run's sideband rows (measure.sidebands)
    lateral_shift: Optional[dict] = None   # in the plane: measured, predicted, deviation, error

    def to_dict(self, dwell: dict) -> dict:
        f = finite_or_none
        out = {
            "probability": f(self.probability),
            "measured": {m: r.to_dict() for m, r in self.measured.items()},
            "theory": {"wigner": f(self.wigner), "packet": f(self.packet),
                       "probability": f(self.predicted_probability)},
            "dwell": {key: (f(v) if isinstance(v, (int, float)) else v) for key, v in dwell.items()},
            "probabilities": {"final": f(self.probability), "flux": f(self.probability_flux),
                              "spectral": f(self.probability_spectral)},
            "reference": "filtered" if self.filtered else "free",
            "detector": f(self.detector), "snapshots_used": self.snapshots_used,
            **({} if self.sidebands is None else {
                "sidebands": [{k: (v if k == "order" else f(v)) for k, v in row.items()}
                              for row in self.sidebands],
                "phase_delays": "undefined for a driven potential (energy is not conserved)"}),
        }
        if self.larmor is not None:
            out["larmor"] = _strict(self.larmor)
        if self.lateral_shift is not None:
            out["lateral_shift"] = _strict(self.lateral_shift)
        return out


def _strict(value):
    """A nested block with every number made JSON-strict (None for NaN)."""
    if isinstance(value, dict):
        return {k: _strict(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_strict(v) for v in value]
    if isinstance(value, (bool, str)) or value is None:
        return value
    return finite_or_none(value)


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
    notes: list = field(default_factory=list)     # facts that cast no doubt (a channel not measured)
    plane: Optional[dict] = None   # a run in the plane: angle (degrees), k_x, k_y, energy_normal
    scattering: Optional[dict] = None   # off one disk or ring: {"angular": measure.angular block}

    def channels(self) -> list:
        return [c for c in (self.reflection, self.transmission) if c is not None]

    def to_dict(self) -> dict:
        return {
            "units": self.units,
            "reflection": self.reflection.to_dict(self.dwell) if self.reflection else None,
            "transmission": self.transmission.to_dict(self.dwell) if self.transmission else None,
            "warnings": list(self.warnings),
            "notes": list(self.notes),
            **({} if self.plane is None else
               {"plane": {key: finite_or_none(v) for key, v in self.plane.items()}}),
            **({} if self.scattering is None else {"scattering": _strict(self.scattering)}),
        }
