"""Two-dimensional partial waves for a circularly symmetric potential V(r)
(PHYSICS §Partial waves): exact phase shifts δ_m(E) and their analytic energy
derivatives for piecewise-constant shells, the scattering amplitude f(θ),
the differential cross section |f|², the partial-wave delays 2ħ dδ_m/dE and the
angle-resolved delay τ(θ, E) = ħ ∂ arg f/∂E.

Conventions. ψ ~ e^{ikx} + f(θ) e^{ikr}/√r, E = ħ²k²/2m (V = 0 beyond the
last shell), θ from +x,

    f(θ) = √(2/(πk)) e^{iπ/4} Σ_{m=−∞}^{∞} e^{iδ_m} sin δ_m e^{imθ},   δ_{−m} = δ_m,

and τ(θ) is relative to a free outgoing wave that leaves the centre when the
free incident packet's centre passes it. Shells are [(r_1, V_1), (r_2, V_2), …]
with 0 < r_1 < r_2 < …: V = V_j for r_{j−1} < r < r_j. A height of +inf is a
hard core (ψ = 0 inside its radius). Energies are in the caller's units.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
from scipy import special

from ..errors import TheoryError

M_CAP = 4000                # the largest m_max ever tried
TAIL_TOL = 1e-13            # |sin δ_m| of the last partial waves kept, relative
LEVEL_GAP = 1e-9            # an energy this close (relative) to a shell level is nudged
SERIES_TERMS = 80           # terms of the regular solution's series (innermost shell)


def check_shells(shells) -> tuple[np.ndarray, np.ndarray]:
    """(radii, heights) of a shell list, checked: increasing positive finite
    radii, finite heights or +inf (a hard core)."""
    try:
        pairs = [(float(r), float(v)) for r, v in shells]
    except (TypeError, ValueError):
        raise TheoryError("shells must be a list of (radius, height) pairs of numbers") from None
    if not pairs:
        raise TheoryError("shells must hold at least one (radius, height) pair")
    radii = np.array([p[0] for p in pairs])
    heights = np.array([p[1] for p in pairs])
    if not (np.all(np.isfinite(radii)) and radii[0] > 0 and np.all(np.diff(radii) > 0)):
        raise TheoryError(f"shell radii must be finite, positive and increasing (got "
                          f"{radii.tolist()})")
    if np.any(np.isnan(heights)) or np.any(heights == -np.inf):
        raise TheoryError(f"shell heights must be finite numbers or +inf (got {heights.tolist()})")
    return radii, heights


def sliced_shells(profile: Callable, radius: float, count: int) -> list[tuple[float, float]]:
    """A smooth profile V(r) on [0, radius] as `count` equal shells holding
    its midpoint values (V = 0 beyond `radius`); the phase shifts converge as
    count^−2 (PHYSICS §Partial waves)."""
    if not (isinstance(count, (int, np.integer)) and count >= 1):
        raise TheoryError(f"count must be a positive integer (got {count!r})")
    if not (math.isfinite(radius) and radius > 0):
        raise TheoryError(f"radius must be finite and positive (got {radius!r})")
    edges = np.linspace(0.0, radius, count + 1)
    values = np.asarray(profile(0.5 * (edges[1:] + edges[:-1])), dtype=float)
    if values.shape != (count,) or not np.all(np.isfinite(values)):
        raise TheoryError("the profile must give one finite value per radius")
    return [(float(r), float(v)) for r, v in zip(edges[1:], values)]


def _check_positive(**values) -> None:
    for name, v in values.items():
        if not (isinstance(v, (int, float, np.floating)) and math.isfinite(v) and v > 0):
            raise TheoryError(f"{name} must be a finite positive number (got {v!r})")


@dataclass(frozen=True)
class PhaseShifts:
    """Phase shifts δ_m (mod π, in [−π/2, π/2)) and dδ_m/dE at an array of
    energies, m = 0 … m_max (δ_{−m} = δ_m); rows index energies."""

    energy: np.ndarray
    k: np.ndarray
    m: np.ndarray
    delta: np.ndarray
    ddelta_dE: np.ndarray
    hbar: float
    mass: float

    @property
    def partial_delays(self) -> np.ndarray:
        """The partial-wave delays 2ħ dδ_m/dE (Eisenbud–Wigner)."""
        return 2 * self.hbar * self.ddelta_dE

    @property
    def total_cross_section(self) -> np.ndarray:
        """σ = (4/k) Σ_{all m} sin²δ_m (a length in 2D)."""
        s2 = np.sin(self.delta) ** 2
        return 4 / self.k * (s2[:, 0] + 2 * s2[:, 1:].sum(axis=1))

    def _sums(self, theta) -> tuple[np.ndarray, np.ndarray]:
        """S(θ) = Σ e^{iδ}sin δ e^{imθ} and dS/dE over all m, shape (energies, θ)."""
        theta = np.atleast_1d(np.asarray(theta, dtype=float))
        if not np.all(np.isfinite(theta)):
            raise TheoryError("angles must be finite numbers (radians)")
        weight = np.where(self.m == 0, 1.0, 2.0)[:, None] * np.cos(np.outer(self.m, theta))
        a = np.exp(1j * self.delta) * np.sin(self.delta)
        da = self.ddelta_dE * np.exp(2j * self.delta)
        return a @ weight, da @ weight

    def amplitude(self, theta) -> np.ndarray:
        """f(θ) at every energy (rows) and angle (columns)."""
        S, _ = self._sums(theta)
        return np.sqrt(2 / (np.pi * self.k))[:, None] * np.exp(0.25j * np.pi) * S

    def cross_section(self, theta) -> np.ndarray:
        """dσ/dθ = |f(θ)|² (a length per radian)."""
        S, _ = self._sums(theta)
        return (2 / (np.pi * self.k))[:, None] * np.abs(S) ** 2

    def delay(self, theta) -> np.ndarray:
        """τ(θ) = ħ ∂ arg f/∂E = ħ Im(S_E/S) (the prefactor √(2/πk) is real);
        NaN where f = 0."""
        S, dS = self._sums(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(S != 0, self.hbar * np.imag(dS / S), np.nan)

    def weighted_delay(self, theta) -> np.ndarray:
        """|f|²·τ = (2ħ/πk) Im(S* S_E), smooth through zeros of f (packet averages)."""
        S, dS = self._sums(theta)
        return (2 * self.hbar / (np.pi * self.k))[:, None] * np.imag(np.conj(S) * dS)


def _miller(z, top: int, sign: float) -> np.ndarray:
    """Orders 0…top of J (sign −1) or I·e^{−z} (sign +1) at z (a vector) by
    backward recurrence Z_{k−1} = (2k/z)Z_k + sign·Z_{k+1} from far above
    (Miller), normalised by J₀ + 2ΣJ_{2k} = 1 or e^{−z}(I₀ + 2ΣI_k) = 1."""
    big = max(top, float(np.max(z)))
    start = int(big + math.sqrt(160 * big)) + 12
    start += start % 2
    out = np.zeros((z.size, top + 1))
    above, here = np.zeros(z.size), np.full(z.size, 1e-280)
    total = np.zeros(z.size)
    for k in range(start, 0, -1):
        below = (2 * k / z) * here + sign * above
        above, here = here, below
        if sign > 0 or (k - 1) % 2 == 0:
            total += here if k - 1 == 0 else 2 * here
        if k - 1 <= top:
            out[:, k - 1] = here
        high = np.abs(here) > 1e250
        if high.any():                          # rescale what these rows hold so far
            scale = np.where(high, 1e-250, 1.0)
            above, here, total = above * scale, here * scale, total * scale
            out *= scale[:, None]
    return out / total[:, None]


def _upward(z, top: int, f0, f1, sign: float) -> np.ndarray:
    """Orders 0…top of Y (sign −1) or K·e^{z} (sign +1) by the forward
    recurrence Z_{k+1} = (2k/z)Z_k + sign·Z_{k−1}, stable for these."""
    out = np.empty((z.size, top + 1))
    out[:, 0] = f0
    if top >= 1:
        out[:, 1] = f1
    with np.errstate(over="ignore", invalid="ignore"):
        for k in range(1, top):
            out[:, k + 1] = (2 * k / z) * out[:, k] + sign * out[:, k - 1]
    return out


def _orders(kind: str, M: int, z) -> np.ndarray:
    """Z for orders −1…M+1 (columns) at z (a column)."""
    x = np.ravel(z)
    if kind == "J":
        F = _miller(x, M + 1, -1.0)
    elif kind == "I":
        F = _miller(x, M + 1, 1.0)
    elif kind == "Y":
        F = _upward(x, M + 1, special.y0(x), special.y1(x), -1.0)
    else:
        F = _upward(x, M + 1, special.k0e(x), special.k1e(x), 1.0)
    minus = -F[:, 1] if kind in "JY" else F[:, 1]        # Z_{−1} = ∓Z_1
    return np.column_stack([minus, F])


def _bessel(kind: str, M: int, z):
    """Z, Z', Z'' for orders 0…M (columns) at z (a column): J, Y, or the
    scaled I·e^{−z}, K·e^{z} with I'·e^{−z}, I''·e^{−z} (and K alike); the
    derivatives by the recurrences."""
    F = _orders(kind, M, z)
    f, m = F[:, 1:-1], np.arange(M + 1)
    with np.errstate(over="ignore", invalid="ignore"):
        if kind in "JY":
            f1 = 0.5 * (F[:, :-2] - F[:, 2:])
            return f, f1, -f1 / z - (1 - m ** 2 / z ** 2) * f
        f1 = 0.5 * (F[:, :-2] + F[:, 2:]) * (1.0 if kind == "I" else -1.0)
        return f, f1, -f1 / z + (1 + m ** 2 / z ** 2) * f


def _regular_series(m, Q, dQ, b):
    """Log-derivative L = R'/R of the regular solution at r = b and dL/dE from
    its power series in s = −Q b²/4 (Q = q², signed; dQ = dQ/dE): exact and
    free of under/overflow where |s| ≤ m + 1."""
    s = -Q * b * b / 4
    c = np.ones(np.broadcast(m, s).shape)
    B, A, A1 = c.copy(), np.zeros_like(c), np.zeros_like(c)   # Σc s^k, Σk c s^k, Σk² c s^(k−1)
    sk1 = np.ones_like(c)                                    # s^(k−1)
    for k in range(1, SERIES_TERMS):
        c = c / (k * (m + k))
        term = c * sk1
        A1 = A1 + k * k * term
        term = term * s
        B, A = B + term, A + k * term
        sk1 = sk1 * s
    L = (m + 2 * A / B) / b
    B1 = np.where(s != 0, A / np.where(s != 0, s, 1), 1.0 / (m + 1))
    dL = 2 / b * (A1 * B - A * B1) / B ** 2 * (-dQ * b * b / 4)
    return L, dL


def _radial(kind, M, q, dq, r, low, high):
    """Values and E-derivatives of a solution and its r-derivative at radius r:
    (F, F', ∂F/∂E, ∂F'/∂E). J, Y unscaled; I scaled by e^{−q·high}, K by
    e^{q·low} (one E-dependent factor per shell: the matching ignores it)."""
    f, f1, f2 = _bessel(kind, M, q * r)
    if kind in "JY":
        return f, q * f1, dq * r * f1, dq * (f1 + q * r * f2)
    # the factor e^{−q·s0} of I and K is differentiated too (the −s0 terms)
    g, s0 = (np.exp(q * (r - high)), high) if kind == "I" else (np.exp(-q * (r - low)), -low)
    return (g * f, g * q * f1, g * dq * (r * f1 - s0 * f),
            g * dq * (f1 + q * r * f2 - s0 * q * f1))


def _regular_start(m, Q, q, dq, c, b, rows):
    """(u, u', ∂u/∂E, ∂u'/∂E) at r = b of the regular solution of a constant
    q² = Q from r = 0, for the energies `rows`: the series where |s| ≤ m + 1,
    else J_m(qb) or the scaled I_m(κb)."""
    Q, q, dq = Q[rows], q[rows], dq[rows]
    M = int(m[0, -1])
    with np.errstate(all="ignore"):          # each form is used only where it is sound
        L, dL = _regular_series(m, Q, c, b)
        direct = np.empty((4, len(Q), M + 1))
        for kind, sel in (("J", Q[:, 0] > 0), ("I", Q[:, 0] <= 0)):
            if sel.any():
                direct[:, sel] = _radial(kind, M, q[sel], dq[sel], b, 0.0, b)
    series = np.abs(Q) * b * b / 4 <= m + 1
    return np.where(series, np.stack(np.broadcast_arrays(1.0, L, 0.0, dL)), direct)


def _solve(radii, heights, E, M, hbar, mass):
    """δ_m(E), dδ_m/dE for energies E (none at a shell level) and m = 0…M.

    A partial wave whose transfer through a shell overflows (deep beneath the
    centrifugal barrier there: Y_m or K_m at the inner radius beyond 1e308)
    restarts as the regular solution of that shell alone: what lies inside
    changes δ_m by about J_m/Y_m there, far below rounding."""
    c = 2 * mass / hbar ** 2
    E = E[:, None]
    m = np.arange(M + 1)[None, :]
    k = np.sqrt(c * E)
    state = np.zeros((4, len(E), M + 1))            # u, u', ∂u/∂E, ∂u'/∂E
    core = np.nonzero(np.isinf(heights))[0]
    first = int(core[-1]) + 1 if core.size else 0
    fresh = np.ones(state.shape[1:], bool)
    if core.size:          # a hard core: R = 0 at its radius
        state[1] = 1.0
        fresh[:] = False
    for j in range(first, len(radii)):
        b, V = radii[j], heights[j]
        Q = c * (E - V)
        q = np.sqrt(np.abs(Q))
        dq = c / (2 * q) * np.sign(Q)          # d|q|/dE (κ falls as E rises)
        if j > first or core.size:
            a = radii[j - 1]
            new = np.full(state.shape, np.nan)
            osc = Q[:, 0] > 0
            for rows, (kf, kg), w in ((osc, "JY", 2 / (np.pi * a)), (~osc, "IK", -1 / a)):
                if rows.any():
                    with np.errstate(all="ignore"):
                        F = [_radial(kf, M, q[rows], dq[rows], r, a, b) for r in (a, b)]
                        G = [_radial(kg, M, q[rows], dq[rows], r, a, b) for r in (a, b)]
                        new[:, rows] = _transfer(F[0], F[1], G[0], G[1], w, *state[:, rows])
            fresh = ~(np.all(np.isfinite(new), axis=0) & ((new[0] != 0) | (new[1] != 0)))
            state = new
        rows = np.nonzero(fresh.any(axis=1))[0]
        if rows.size:
            start = _regular_start(m, Q, q, dq, c, b, rows)
            state[:, rows] = np.where(fresh[rows], start, state[:, rows])
        state = state / np.maximum(np.abs(state[0]), np.abs(state[1]))
    u, p, du, dp = state
    R = radii[-1]
    J, J1, J2 = _bessel("J", M, k * R)
    Y, Y1, Y2 = _bessel("Y", M, k * R)
    dk = c / (2 * k)
    N = u * k * J1 - p * J
    D = u * k * Y1 - p * Y
    dN = du * k * J1 + u * dk * (J1 + k * R * J2) - dp * J - p * R * dk * J1
    dD = du * k * Y1 + u * dk * (Y1 + k * R * Y2) - dp * Y - p * R * dk * Y1
    delta = np.arctan2(N, D)
    delta = (delta + 0.5 * np.pi) % np.pi - 0.5 * np.pi
    ddelta = (dN * D - N * dD) / (N ** 2 + D ** 2)
    if not (np.all(np.isfinite(delta)) and np.all(np.isfinite(ddelta))):
        raise TheoryError("a partial wave could not be matched (an energy too close to a "
                          "shell level, or m_max beyond what double precision can hold)")
    return delta, ddelta
def _transfer(Fa, Fb, Ga, Gb, w, u, p, du, dp):
    """(u, p) at the shell's outer radius from (u, p) at its inner one, with
    E-derivatives: R(b) = [u(G'_a F_b − F'_a G_b) + p(F_a G_b − G_a F_b)]/W(a)."""
    (f, f1, df, df1), (F, F1, dF, dF1) = Fa, Fb
    (g, g1, dg, dg1), (G, G1, dG, dG1) = Ga, Gb
    t11, t12 = (g1 * F - f1 * G) / w, (f * G - g * F) / w
    t21, t22 = (g1 * F1 - f1 * G1) / w, (f * G1 - g * F1) / w
    d11 = (dg1 * F + g1 * dF - df1 * G - f1 * dG) / w
    d12 = (df * G + f * dG - dg * F - g * dF) / w
    d21 = (dg1 * F1 + g1 * dF1 - df1 * G1 - f1 * dG1) / w
    d22 = (df * G1 + f * dG1 - dg * F1 - g * dF1) / w
    return (t11 * u + t12 * p, t21 * u + t22 * p,
            d11 * u + d12 * p + t11 * du + t12 * dp, d21 * u + d22 * p + t21 * du + t22 * dp)


def _m_start(radii, heights, E, c) -> int:
    finite = heights[np.isfinite(heights)]
    q_max = math.sqrt(c * max(float(np.max(E)), float(np.max(E)) - float(np.min(finite, initial=0.0))))
    x = q_max * radii[-1]
    return int(math.ceil(x + 6 * x ** (1 / 3) + 10))


def phase_shifts(shells, energies, *, hbar: float = 1.0, mass: float = 1.0,
                 m_max: int | None = None) -> PhaseShifts:
    """Exact 2D phase shifts δ_m(E) and dδ_m/dE for a shell potential.

    Matching Bessel functions (J_m, Y_m where E > V; scaled I_m, K_m where
    E < V; the regular solution's series in the innermost shell) at every
    radius, differentiated forward-mode in E; outside, tan δ_m =
    [kJ'_m u − J_m u']/[kY'_m u − Y_m u'] at the last radius. m_max (default:
    grown from k·a + 6(k·a)^{1/3} + 10 until the last two |sin δ_m| are below
    1e-13 of the largest) sets the partial waves kept. An energy within 1e-9
    (relative) of a shell level is the mean of two nudged ones.
    """
    radii, heights = check_shells(shells)
    _check_positive(hbar=hbar, mass=mass)
    E = np.atleast_1d(np.asarray(energies, dtype=float)).ravel()
    if E.size == 0 or not np.all(np.isfinite(E)) or np.any(E <= 0):
        raise TheoryError("energies must be finite and positive (V = 0 outside the shells)")
    if m_max is not None and not (isinstance(m_max, (int, np.integer)) and 0 <= m_max <= M_CAP):
        raise TheoryError(f"m_max must be an integer in 0…{M_CAP} (got {m_max!r})")
    c = 2 * mass / hbar ** 2
    top = m_max if m_max is not None else min(_m_start(radii, heights, E, c), M_CAP)
    while True:
        m = np.arange(top + 1)
        delta, ddelta = _nudged(radii, heights, E, top, hbar, mass)
        s = np.abs(np.sin(delta))
        tail = s[:, -2:].max() if top >= 1 else 0.0
        if m_max is not None or tail <= TAIL_TOL * max(s.max(), 1e-300) or top >= M_CAP:
            break
        top = min(int(1.5 * top) + 5, M_CAP)
    return PhaseShifts(E, np.sqrt(c * E), m, delta, ddelta, float(hbar), float(mass))


def _nudged(radii, heights, E, M, hbar, mass):
    """_solve, with energies at a shell level replaced by the mean of E(1 ± h)."""
    levels = heights[np.isfinite(heights)]
    near = np.zeros(E.shape, bool)
    for V in levels:
        near |= np.abs(E - V) <= LEVEL_GAP * np.maximum(np.abs(E), abs(V))
    if not near.any():
        return _solve(radii, heights, E, M, hbar, mass)
    h = 1e-5 * E
    lo = _solve(radii, heights, np.where(near, E - h, E), M, hbar, mass)
    hi = _solve(radii, heights, np.where(near, E + h, E), M, hbar, mass)
    gap = (hi[0] - lo[0] + 0.5 * np.pi) % np.pi - 0.5 * np.pi       # the same branch
    delta = (lo[0] + 0.5 * gap + 0.5 * np.pi) % np.pi - 0.5 * np.pi
    return delta, 0.5 * (lo[1] + hi[1])


def hard_disk_phase_shifts(radius: float, energies, *, hbar: float = 1.0, mass: float = 1.0,
                           m_max: int | None = None) -> PhaseShifts:
    """The impenetrable disk of `radius`: tan δ_m = J_m(ka)/Y_m(ka)."""
    _check_positive(radius=radius)
    return phase_shifts([(radius, math.inf)], energies, hbar=hbar, mass=mass, m_max=m_max)


def smooth_phase_shifts(profile: Callable, radius: float, energies, *, hbar: float = 1.0,
                        mass: float = 1.0, count: int = 200,
                        m_max: int | None = None) -> PhaseShifts:
    """Phase shifts of a smooth V(r) (0 beyond `radius`): `sliced_shells` with
    `count` and 2·`count` shells, Richardson-extrapolated in count⁻² (δ and
    dδ/dE alike; the slicing error is then O(count⁻⁴))."""
    fine = phase_shifts(sliced_shells(profile, radius, 2 * count), energies, hbar=hbar,
                        mass=mass, m_max=m_max)
    coarse = phase_shifts(sliced_shells(profile, radius, count), energies, hbar=hbar,
                          mass=mass, m_max=int(fine.m[-1]))
    step = (fine.delta - coarse.delta + 0.5 * np.pi) % np.pi - 0.5 * np.pi
    delta = (fine.delta + step / 3 + 0.5 * np.pi) % np.pi - 0.5 * np.pi
    ddelta = fine.ddelta_dE + (fine.ddelta_dE - coarse.ddelta_dE) / 3
    return PhaseShifts(fine.energy, fine.k, fine.m, delta, ddelta, fine.hbar, fine.mass)
