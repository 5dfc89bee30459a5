"""Radial matching for 2D partial waves (PHYSICS §Partial waves): Bessel
functions of all orders 0…M by recurrence, the regular solution's series, the
shell-to-shell transfer of (R, R') and its analytic energy derivative, and the
phase shifts δ_m(E), dδ_m/dE it gives. Numbers only; `partial_waves` checks the
arguments and is the public entry."""
from __future__ import annotations

import math

import numpy as np
from scipy import special

from ..errors import TheoryError

SERIES_TERMS = 80           # terms of the regular solution's series (innermost shell)


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


def solve_shells(radii, heights, E, M, hbar, mass):
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
