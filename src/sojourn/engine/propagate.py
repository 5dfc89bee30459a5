"""Split-operator propagation (PHYSICS §3).

One Strang step is  K(½) · F⁻¹ D F · K(½)  with the kick K(c) = exp(-i(V - iW)cΔt/ħ)
and the drift D = exp(-iħk²Δt/2m). A scheme is a list of drift weights
(strang: [1]; yoshida4: the triple jump [w₁, w₀, w₁]); consecutive kicks are
fused, so between recordings a step costs its FFTs and one multiply per FFT
pair. The state is only split back into a true ψ(t) where a recording is made.

Sampling between recordings (detector flux, region probability) is done on the
state after a drift and before the next kick: the kick is a pure phase outside
the absorber, so |ψ|² and the local current are unaffected by it.
"""
from __future__ import annotations

import math
from typing import Callable, Optional

import numpy as np

from .fft import FFTPair

_CBRT2 = 2 ** (1 / 3)
SCHEMES = {
    "strang": (1.0,),
    "yoshida4": (1 / (2 - _CBRT2), -_CBRT2 / (2 - _CBRT2), 1 / (2 - _CBRT2)),
}
ORDER = {"strang": 2, "yoshida4": 4}


class Propagator:
    """Advances ψ on a grid with a split-operator scheme, in place.

    Parameters
    ----------
    grid : Grid
    V : real potential on the grid
    hbar, mass : in the scenario's units
    dt : time step
    scheme : 'strang' or 'yoshida4'
    absorber : W(x) ≥ 0 on the grid, or None
    single : compute in complex64 instead of complex128
    """

    def __init__(self, grid, V, hbar: float, mass: float, dt: float, scheme: str = "strang",
                 absorber: Optional[np.ndarray] = None, single: bool = False,
                 threads: Optional[int] = None):
        self.grid, self.dt, self.scheme = grid, dt, scheme
        self.hbar, self.mass = hbar, mass
        dtype = np.complex64 if single else np.complex128
        self.fft = FFTPair(grid.points, dtype=dtype, threads=threads)
        self.buffer = self.fft.buffer
        weights = SCHEMES[scheme]
        n = grid.points
        W = np.zeros(n) if absorber is None else np.asarray(absorber, dtype=float)
        self.absorber = None if absorber is None else W
        potential = np.asarray(V, dtype=float) - 1j * W

        def kick(c):
            return np.exp(-1j * potential * (c * dt / hbar)).astype(dtype)

        def drift(c):
            phase = np.exp(-1j * hbar * grid.k ** 2 * (c * dt) / (2 * mass)) / n
            return phase.astype(dtype)

        self._first = kick(weights[0] / 2)          # opens a stretch of steps
        self._last = kick(weights[-1] / 2)          # closes it
        self._between = kick((weights[-1] + weights[0]) / 2)  # fuses two steps
        self._inner = [kick((a + b) / 2) for a, b in zip(weights[:-1], weights[1:])]
        distinct = {c: drift(c) for c in set(weights)}
        self._drifts = [distinct[c] for c in weights]

    @property
    def psi(self) -> np.ndarray:
        """The state buffer (a true ψ(t) between calls to advance)."""
        return self.buffer

    def set_state(self, psi: np.ndarray) -> None:
        self.buffer[:] = psi

    def advance(self, steps: int, sample_every: int = 0,
                sampler: Optional[Callable[[np.ndarray, int], None]] = None) -> None:
        """Advance by `steps` steps. If given, sampler(buffer, k) is called after
        step k (1-based) for every k divisible by sample_every, before the kick
        that follows (see the module note).

        The steps between two samples run as one stretch of fused kicks, so the
        Python work per step is the FFT calls and the in-place multiplies."""
        if steps <= 0:
            return
        if sampler is None or sample_every <= 0:
            sampler, sample_every = None, steps + 1
        buf, between = self.buffer, self._between
        np.multiply(buf, self._first, out=buf)
        done = 0
        while done < steps:
            stretch = min(sample_every - done % sample_every, steps - done)
            self._stretch(stretch)
            done += stretch
            if sampler is not None and done % sample_every == 0:
                sampler(buf, done)
            if done < steps:
                np.multiply(buf, between, out=buf)
        np.multiply(buf, self._last, out=buf)

    def _stretch(self, count: int) -> None:
        """`count` steps that start after an opening kick and end after the last
        drift (the closing kick is the caller's)."""
        buf, fwd, bwd, mul = self.buffer, self.fft.forward, self.fft.backward, np.multiply
        between = self._between
        if len(self._drifts) == 1:  # strang: FFT, drift, FFT, kick
            drift = self._drifts[0]
            for _ in range(count - 1):
                fwd()
                mul(buf, drift, out=buf)
                bwd()
                mul(buf, between, out=buf)
            fwd()
            mul(buf, drift, out=buf)
            bwd()
            return
        subs = list(zip(self._drifts[:-1], self._inner))
        last_drift = self._drifts[-1]
        for n in range(count):
            for drift, kick in subs:
                fwd()
                mul(buf, drift, out=buf)
                bwd()
                mul(buf, kick, out=buf)
            fwd()
            mul(buf, last_drift, out=buf)
            bwd()
            if n < count - 1:
                mul(buf, between, out=buf)
