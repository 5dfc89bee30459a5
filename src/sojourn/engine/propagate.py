"""Split-operator propagation (PHYSICS §3).

One Strang step is  K(½) · F⁻¹ D F · K(½)  with the kick K(c) = exp(-i(V - iW)cΔt/ħ)
and the drift D = exp(-iħ|k|²Δt/2m). A scheme is a list of drift weights
(strang: [1]; yoshida4: the triple jump [w₁, w₀, w₁]); consecutive kicks are
fused, so between recordings a step costs its FFTs and one multiply per FFT
pair. The state is only split back into a true ψ(t) where `advance` returns.

Sampling between recordings is done on the state after a drift and before the
closing kick (`Propagator.closing_kick` turns it into ψ(t)): outside the
absorber that kick is a pure phase, so |ψ|² is unaffected, but its gradient
is not — the sampler applies it on the detectors' stencil nodes.

Nothing here assumes one axis: the kinetic factor is built from the grid's
|k|² (`grid.k_squared`) on the grid's shape and the FFTs run over all its axes.

A driven potential V(x) + Σ_j f_j(t)·S_j(x) (+ formulas in t) is a `TimeDependence`:
each kick then also carries exp(−i Σ c f_j(t_s) S_j Δt/ħ) with t_s the midpoint
of the sub-step the kick belongs to (a fused kick sums its two halves at their
own times), so Strang stays second and the triple jump fourth order. Without
one nothing is added per step.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Optional

import numpy as np

from .fft import FFTPair


@dataclass(frozen=True)
class Scheme:
    """A splitting scheme: a symmetric composition of Strang steps.

    An entry of `SCHEMES` must provide (checked when the module is imported):

    1. ``drifts``: the drift weights w_1..w_s (finite, at least one); one step
       is Π_j K(w_j/2) D(w_j) K(w_j/2), each kick and drift over w_j·Δt.
    2. Σ w_j = 1, so that one step advances the time by Δt.
    3. The weights read the same both ways (symmetric, hence time-reversible):
       the fused kick between two steps is then K((w_s + w_1)/2) and the order
       is even.
    4. ``order``: the global order p of the error in Δt (error ∝ Δt^p), as
       tests/physics/test_propagation.py observes it; Richardson error bars read it.

    Sources: Strang splitting (Feit, Fleck & Steiger, J. Comput. Phys. 47, 412
    (1982)); the triple jump (H. Yoshida, Phys. Lett. A 150, 262 (1990)).
    """

    drifts: tuple[float, ...]
    order: int

    @property
    def widest(self) -> float:
        """The largest |w_j|: the kicks of a step see sub-steps up to widest·Δt."""
        return max(abs(w) for w in self.drifts)


@dataclass(frozen=True)
class TimeDependence:
    """What a driven potential adds to V at time t: Σ_j f_j(t)·S_j over the
    slice where S_j ≠ 0 (``parts``: (f_j, slice, S_j on it)) plus full-grid
    formulas (``fields``: t → array, zero at t = 0)."""

    parts: tuple = ()
    fields: tuple = ()

    @classmethod
    def of_potential(cls, potential, x: np.ndarray, dx: float) -> "TimeDependence":
        """The drives of a `Potential` on grid points x (spacing dx): each driven
        term's `Drive.value` on its cell shares S, and each formula in t as its
        change since t = 0 (its t = 0 values are in the static V)."""
        parts = []
        for drive, S in potential.drive_profiles(x, dx):
            nz = np.nonzero(S)[0]
            if nz.size:
                where = slice(int(nz[0]), int(nz[-1]) + 1)
                parts.append((drive.value, where, S[where].copy()))
        fields = []
        for term in potential.time_formulas():
            start = term.at_time(x, 0.0)
            fields.append(lambda t, term=term, start=start: term.at_time(x, t) - start)
        return cls(tuple(parts), tuple(fields))

    def __call__(self, t: float, shape) -> np.ndarray:
        """The added potential on the grid at time t (for observers: a movie frame)."""
        out = np.zeros(shape)
        for f, where, S in self.parts:
            out[where] += f(t) * S
        for field in self.fields:
            out += field(t)
        return out


def _split_part(f, where, S, dims):
    """(f, slice of cells with S = 1 or None, index of the other cells, their S):
    a drive on an interval costs one multiply inside it and an exp on its edges."""
    S = np.asarray(S, dtype=float)
    if dims != 1 or S.ndim != 1 or not isinstance(where, slice):
        return f, None, where, S
    start = where.start or 0
    ones = np.nonzero(S == 1.0)[0]
    if ones.size and ones[-1] - ones[0] + 1 == ones.size:     # contiguous: an interval
        full = slice(start + int(ones[0]), start + int(ones[-1]) + 1)
        rest = np.nonzero(S != 1.0)[0]
        return f, full, start + rest, S[rest]
    return f, None, where, S


def _check_scheme(name: str, scheme: Scheme) -> Scheme:
    w = scheme.drifts
    if not w or not all(math.isfinite(c) for c in w):
        raise ValueError(f"scheme {name!r}: drift weights must be finite and at least one")
    if abs(sum(w) - 1) > 1e-12:
        raise ValueError(f"scheme {name!r}: drift weights sum to {sum(w)!r}, not 1")
    if any(abs(a - b) > 1e-15 for a, b in zip(w, reversed(w))):
        raise ValueError(f"scheme {name!r}: drift weights must read the same both ways")
    if scheme.order < 2 or scheme.order % 2:
        raise ValueError(f"scheme {name!r}: the order of a symmetric scheme is even and ≥ 2")
    return scheme


_CBRT2 = 2 ** (1 / 3)
# the registry of schemes by name; each entry follows the rules in `Scheme`
SCHEMES: dict[str, Scheme] = {
    name: _check_scheme(name, s) for name, s in {
        "strang": Scheme((1.0,), 2),
        "yoshida4": Scheme((1 / (2 - _CBRT2), -_CBRT2 / (2 - _CBRT2), 1 / (2 - _CBRT2)), 4),
    }.items()}
ORDER = {name: s.order for name, s in SCHEMES.items()}  # name -> order, for readers of the order only

# between two checks of a stop request, about this many point-steps (0.01-0.1 s here)
CHECK_POINT_STEPS = 1 << 21


def _known(name: str) -> Scheme:
    if name not in SCHEMES:
        raise ValueError(f"unknown scheme {name!r}; known schemes: {', '.join(SCHEMES)}")
    return SCHEMES[name]


def _positive(name: str, value) -> float:
    value = float(value)
    if not (math.isfinite(value) and value > 0):
        raise ValueError(f"{name} must be finite and > 0 (got {value!r})")
    return value


def _on_grid(name: str, values, shape) -> np.ndarray:
    values = np.asarray(values, dtype=float)
    if values.shape != tuple(shape):
        raise ValueError(f"{name} has shape {values.shape}; the grid's is {tuple(shape)}")
    if not np.all(np.isfinite(values)):
        raise ValueError(f"{name} is not finite everywhere on the grid")
    return values


class Propagator:
    """Advances ψ on a grid with a split-operator scheme, in place.

    Parameters
    ----------
    grid : Grid (anything with ``shape``, ``k_squared``)
    V : real potential on the grid's shape, or with a leading component axis
        (C, *grid.shape): C independent components, each kicked by its own
        potential and drifted alike (a spinor in a field along z); ψ then has
        that shape too
    hbar, mass : in the scenario's units
    dt : time step (> 0)
    scheme : a name in SCHEMES
    absorber : W(x) ≥ 0 on the grid's shape (shared by all components), or None
    single : compute in complex64 instead of complex128
    drive : a `TimeDependence` (a driven potential), or None (static: no work
        per step beyond the FFTs and multiplies)

    State: ``step`` (steps taken since t = 0), ``time`` (= step·dt), ``status``:
    'empty' (no state yet), 'ready' (``psi`` is the true ψ(time)), 'stopped'
    (``advance`` returned early on a stop request; ``psi`` is the true ψ(time)),
    'interrupted' or 'failed' (an exception escaped ``advance``; ``psi`` is
    not a true state).
    """

    def __init__(self, grid, V, hbar: float, mass: float, dt: float, scheme: str = "strang",
                 absorber: Optional[np.ndarray] = None, single: bool = False,
                 threads: Optional[int] = None, drive: Optional[TimeDependence] = None,
                 sink: Optional[np.ndarray] = None):
        weights = _known(scheme).drifts
        if drive is not None and not isinstance(drive, TimeDependence):
            raise ValueError(f"drive must be a TimeDependence or None (got {type(drive).__name__})")
        self.drive = drive if drive is not None and (drive.parts or drive.fields) else None
        self._parts = [_split_part(*part, len(grid.shape) if hasattr(grid, "shape") else 1)
                       for part in (self.drive.parts if self.drive else ())]
        self._weights = weights
        self._starts = [sum(weights[:j]) for j in range(len(weights))]
        self.hbar, self.mass = _positive("hbar", hbar), _positive("mass", mass)
        self.dt = _positive("dt", dt)
        space = tuple(grid.shape)
        V = np.asarray(V, dtype=float)
        lead = V.shape[:1] if V.ndim == len(space) + 1 else ()
        shape = lead + space
        potential = _on_grid("V", V, shape)
        W = None if absorber is None else _on_grid("the absorber W", absorber, space)
        if W is not None and np.any(W < 0):
            raise ValueError("the absorber W must be ≥ 0 (it removes probability)")
        G = None if sink is None else _on_grid("the sideband sink", sink, tuple(grid.k_squared.shape))
        if G is not None and np.any(G < 0):
            raise ValueError("the sideband sink must be ≥ 0 (it removes probability)")
        self.grid, self.scheme, self.absorber, self.sink = grid, scheme, W, G
        dtype = np.complex64 if single else np.complex128
        self.fft = FFTPair(shape, dtype=dtype, threads=threads,
                           axes=tuple(range(len(lead), len(shape))))
        self.buffer = self.fft.buffer
        self.step, self.status = 0, "empty"
        points = math.prod(space)
        U = potential if W is None else potential - 1j * W

        def kick(c):
            return np.exp(-1j * U * (c * dt / hbar)).astype(dtype)

        def drift(c):
            phase = -1j * hbar * grid.k_squared * (c * dt) / (2 * mass)
            if G is not None:     # a sink only damps: |c| for the backward drifts of Yoshida-4
                phase = phase - G * (abs(c) * dt)
            return (np.exp(phase) / points).astype(dtype)

        self._first = kick(weights[0] / 2)          # opens a stretch of steps
        self._last = self._first                    # closes it: the same factor (rule 3), one array
        self._between = kick((weights[-1] + weights[0]) / 2)  # fuses two steps
        self._inner = [kick((a + b) / 2) for a, b in zip(weights[:-1], weights[1:])]
        distinct = {c: drift(c) for c in set(weights)}
        self._drifts = [distinct[c] for c in weights]
        self.check_every = max(1, CHECK_POINT_STEPS // points)

    @property
    def psi(self) -> np.ndarray:
        """The state buffer (a true ψ(time) between calls to advance)."""
        return self.buffer

    @property
    def time(self) -> float:
        return self.step * self.dt

    @property
    def closing_kick(self) -> np.ndarray:
        """The factor that turns a sampled buffer (see `advance`) into ψ(t)."""
        return self._last

    def set_state(self, psi: np.ndarray, step: int = 0) -> None:
        """Start from ψ at step `step` (t = step·dt)."""
        psi = np.asarray(psi)
        if psi.shape != self.buffer.shape:
            raise ValueError(f"ψ has shape {psi.shape}; the grid's is {self.buffer.shape}")
        if int(step) != step or step < 0:
            raise ValueError(f"the step must be a whole number ≥ 0 (got {step!r})")
        self.buffer[...] = psi
        self.step, self.status = int(step), "ready"

    def advance(self, steps: int, sample_every: int = 0,
                sampler: Optional[Callable[[np.ndarray, int], None]] = None,
                stop: Optional[Callable[[], bool]] = None) -> int:
        """Advance by `steps` steps; returns the number taken (fewer only on a stop).

        If given, sampler(buffer, step) is called after every step whose number
        (counted from t = 0) is divisible by `sample_every`, on the buffer after
        that step's last drift, before the closing kick (see the module note).
        If given, stop() is asked about every `check_every` steps (a bounded
        wall time: ~CHECK_POINT_STEPS point-steps); when it says True, the state
        is closed into a true ψ(time) there and status becomes 'stopped'.

        The steps between two samples or checks run as one stretch of fused
        kicks, so the Python work per step is the FFT calls and the multiplies."""
        if self.status not in ("ready", "stopped"):
            raise ValueError(f"the propagator holds no true state (status {self.status!r}); "
                             "call set_state first")
        if int(steps) != steps or steps < 0:
            raise ValueError(f"steps must be a whole number ≥ 0 (got {steps!r})")
        steps = int(steps)
        self.status = "ready"
        if steps == 0:
            return 0
        if sampler is None or sample_every <= 0:
            sampler, every = None, steps + 1 + self.step
        else:
            every = int(sample_every)
        check = self.check_every if stop is not None else steps + 1
        buf, between, start = self.buffer, self._between, self.step
        done = 0
        w, last = self._weights, len(self._weights) - 1
        try:
            np.multiply(buf, self._first, out=buf)
            if self.drive:
                self._drive_phase(((w[0] / 2, self._mid(start, 0)),))
            while done < steps:
                now = start + done
                stretch = min(every - now % every, check - done % check, steps - done)
                if self.drive:
                    self._driven_stretch(stretch, now)
                else:
                    self._stretch(stretch)
                done += stretch
                if sampler is not None and (start + done) % every == 0:
                    sampler(buf, start + done)
                if done < steps:
                    if stop is not None and done % check == 0 and stop():
                        self.status = "stopped"
                        break
                    np.multiply(buf, between, out=buf)
                    if self.drive:
                        n = start + done
                        self._drive_phase(((w[last] / 2, self._mid(n - 1, last)),
                                           (w[0] / 2, self._mid(n, 0))))
            np.multiply(buf, self._last, out=buf)
            if self.drive:
                self._drive_phase(((w[last] / 2, self._mid(start + done - 1, last)),))
        except KeyboardInterrupt:
            self.status = "interrupted"
            raise
        except BaseException:
            self.status = "failed"
            raise
        self.step = start + done
        return done

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

    # -- the driven path (only when a drive is given) -------------------------------------

    def _mid(self, step: int, sub: int) -> float:
        """The midpoint time of sub-step `sub` of step `step`: its kicks' time."""
        return (step + self._starts[sub] + self._weights[sub] / 2) * self.dt

    def _drive_phase(self, halves) -> None:
        """Multiply the buffer by exp(−i Σ c·d(t) Δt/ħ) over the kick halves (c, t)
        (d the drive's addition to V)."""
        buf, scale = self.buffer, self.dt / self.hbar
        for f, full, edges, S in self._parts:
            angle = scale * sum(c * f(t) for c, t in halves)
            if angle:
                if full is not None:     # cells wholly inside: one phase, a plain multiply
                    buf[..., full] *= complex(math.cos(angle), -math.sin(angle))
                buf[..., edges] *= np.exp(-1j * angle * S)
        for field in self.drive.fields:
            buf *= np.exp(-1j * scale * sum(c * field(t) for c, t in halves))

    def _driven_stretch(self, count: int, first: int) -> None:
        """`_stretch` for a driven potential: `count` steps from step `first`,
        each kick with the drive at its sub-step's midpoint."""
        buf, fwd, bwd, mul = self.buffer, self.fft.forward, self.fft.backward, np.multiply
        w, last = self._weights, len(self._weights) - 1
        for n in range(first, first + count):
            for j, drift in enumerate(self._drifts):
                fwd()
                mul(buf, drift, out=buf)
                bwd()
                if j < last:
                    mul(buf, self._inner[j], out=buf)
                    self._drive_phase(((w[j] / 2, self._mid(n, j)),
                                       (w[j + 1] / 2, self._mid(n, j + 1))))
            if n < first + count - 1:
                mul(buf, self._between, out=buf)
                self._drive_phase(((w[last] / 2, self._mid(n, last)),
                                   (w[0] / 2, self._mid(n + 1, 0))))
