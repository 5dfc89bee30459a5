"""What the pictures need from a run file, read once (no snapshots), in the
scenario's units; the one place in render that opens run files."""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np

from ..errors import RenderError, SojournError
from ..model.packets import PacketInfo
from ..store import RunFile


@dataclass
class RunFacts:
    """What the overlays need from a run file, in the scenario's units."""

    title: str
    units: dict
    hbar: float
    mass: float
    packet: PacketInfo
    reference: float
    x: np.ndarray
    V: np.ndarray
    inner: tuple[float, float]      # the box without its absorbing layers
    times: np.ndarray
    analysis: Optional[dict] = None
    scenario: object = field(default=None, repr=False)
    potential: object = field(default=None, repr=False)
    scattering: bool = True     # a moving packet and an open potential: a mirror applies
    absorber: Optional[np.ndarray] = None
    dt: float = 0.0
    scheme: str = "strang"
    single: bool = False
    far_edge: float = 0.0          # where the potential ends on the transmission side
    components: Optional[np.ndarray] = None   # a spinor run's V per component (2, N); V is their mean
    clock: Optional[tuple] = None  # a spinor run's Larmor clock: ((start, end), ω_L)
    sink: Optional[tuple] = None   # the run's sideband sink (k_start, k_full, rate), if any


def run_facts(run: RunFile) -> RunFacts:
    """Gather the run's numbers (no snapshots are read)."""
    attrs = run.attrs
    x = run.x
    W = run.absorber
    free = x if W is None or not np.any(W == 0) else x[W == 0]
    info = PacketInfo(**run.packet)
    try:
        scenario = run.scenario()
        title = scenario.title
        potential = scenario.build_potential()
        confining = potential.confining
    except SojournError:
        scenario, potential, confining = None, None, False
        title = str(attrs.get("title", ""))
    support = potential.support() if potential is not None else None
    edge = run.reference if support is None else (support[1] if info.k0 >= 0 else support[0])
    V = run.V
    components, clock = (V, _clock(scenario, potential)) if V.ndim > 1 else (None, None)
    return RunFacts(title=str(title or attrs.get("title", "")), units=run.units,
                    hbar=float(attrs["hbar"]), mass=float(attrs["mass_internal"]),
                    packet=info, reference=run.reference, x=x,
                    V=V if components is None else V.mean(axis=0),
                    inner=(float(free[0]), float(free[-1])), times=run.times,
                    analysis=run.analysis(), scenario=scenario, potential=potential,
                    scattering=not confining and info.k0 != 0, absorber=W,
                    dt=float(attrs.get("dt", 0.0)), scheme=str(attrs.get("scheme", "strang")),
                    single=str(attrs.get("precision", "double")) == "single",
                    far_edge=float(edge), components=components, clock=clock,
                    sink=tuple(json.loads(attrs["sideband_sink"])) if "sideband_sink" in attrs
                    else None)


def _clock(scenario, potential):
    """((start, end), ω_L) of a spinor run's clock (None when its scenario cannot say)."""
    spec = getattr(scenario, "larmor", None)
    if spec is None or potential is None:
        return None
    region = spec.region if spec.region is not None else potential.support()
    return None if region is None else ((float(region[0]), float(region[1])), float(spec.omega))


def open_run(path) -> RunFile:
    """The run file, if it holds at least one snapshot."""
    run = RunFile(path)
    if len(run) == 0:
        run.close()
        raise RenderError(f"{path}: the run file holds no snapshots yet")
    return run


def window(facts: RunFacts, xlim, default=None) -> tuple[float, float]:
    """The x-range asked for (checked against the box), else `default`, else the
    box inside the absorbers."""
    lo, hi = xlim if xlim is not None else (default or facts.inner)
    if hi <= facts.x[0] or lo >= facts.x[-1]:
        raise RenderError(f"--xlim {lo:g}:{hi:g} lies outside the box "
                          f"[{facts.x[0]:g}, {facts.x[-1]:g}]")
    return float(lo), float(hi)


def time_format(times: np.ndarray) -> str:
    """A format with enough digits to tell successive times apart."""
    step = float(np.min(np.diff(times))) if len(times) > 1 else 1.0
    digits = max(0, min(6, int(math.ceil(-math.log10(step))) + 1)) if step > 0 else 2
    return f"{{:.{digits}f}}"


def channels(analysis: Optional[dict]) -> list[tuple[str, dict]]:
    """The saved analysis's channels that hold measured delays."""
    out = []
    for name in ("reflection", "transmission"):
        part = analysis.get(name) if isinstance(analysis, dict) else None
        if isinstance(part, dict) and isinstance(part.get("measured"), dict) and part["measured"]:
            out.append((name, part))
    return out
