"""The fast time loop: same result as the split step written out plainly,
threads and precision options, and the FFT-thread default."""
import numpy as np
import pytest

from sojourn.engine import fft as fft
from sojourn.model.grid import Grid
from sojourn.engine.propagate import SCHEMES, Propagator


def _case(points=512):
    g = Grid(-60.0, 60.0, points)
    V = np.where(g.x > 0.05, 1.0, 0.0)
    W = np.where(np.abs(g.x) > 50, 0.05 * (np.abs(g.x) - 50) ** 2, 0.0)
    psi0 = np.exp(-(g.x + 15) ** 2 / 40 + 1j * 0.9 * g.x)
    return g, V, W, psi0 / np.sqrt(np.vdot(psi0, psi0).real * g.dx)


def _plain_steps(g, V, W, psi, dt, scheme, steps):
    """Each step written out as in the published splitting, with numpy.fft and no
    fused kicks: ψ ← Π_j e^{-iU w_j dt/2} F⁻¹ e^{-ik²w_j dt/2} F e^{-iU w_j dt/2} ψ,
    U = V - iW, ħ = m = 1.
    source: M. D. Feit, J. A. Fleck Jr., A. Steiger, J. Comput. Phys. 47, 412 (1982);
    triple jump: H. Yoshida, Phys. Lett. A 150, 262 (1990)."""
    U = V - 1j * W
    for _ in range(steps):
        for w in SCHEMES[scheme].drifts:
            psi = np.exp(-0.5j * U * w * dt) * psi
            psi = np.fft.ifft(np.exp(-0.5j * g.k ** 2 * w * dt) * np.fft.fft(psi))
            psi = np.exp(-0.5j * U * w * dt) * psi
    return psi


@pytest.mark.parametrize("scheme", ["strang", "yoshida4"])
@pytest.mark.parametrize("every", [0, 1, 4, 7])
def test_fused_stretches_equal_the_plain_steps(scheme, every):
    g, V, W, psi0 = _case()
    dt, steps = 0.05, 23
    prop = Propagator(g, V, 1.0, 1.0, dt, scheme, W)
    prop.set_state(psi0)
    seen = []
    prop.advance(steps, every, (lambda buf, k: seen.append(k)) if every else None)
    expected = _plain_steps(g, V, W, psi0, dt, scheme, steps)
    assert np.abs(prop.psi - expected).max() < 1e-12
    assert seen == ([k for k in range(1, steps + 1) if k % every == 0] if every else [])


def test_samples_see_the_state_after_the_drift():
    # the sampler gets ψ after step k's drift, before the next kick; |ψ|² there
    # equals that of the true ψ(k·dt), since a kick outside the absorber is a phase
    g, V, _, psi0 = _case()
    prop = Propagator(g, V, 1.0, 1.0, 0.05, "strang")
    prop.set_state(psi0)
    densities = {}
    prop.advance(9, 3, lambda buf, k: densities.__setitem__(k, np.abs(buf) ** 2))
    for k, density in densities.items():
        expected = _plain_steps(g, V, 0 * V, psi0, 0.05, "strang", k)
        assert np.abs(density - np.abs(expected) ** 2).max() < 1e-12


def test_two_fft_threads_give_the_same_state():
    g, V, W, psi0 = _case(4096)
    states = []
    for threads in (1, 2):
        prop = Propagator(g, V, 1.0, 1.0, 0.01, "strang", W, threads=threads)
        assert prop.fft.threads == threads
        prop.set_state(psi0)
        prop.advance(50, 5, lambda buf, k: None)
        states.append(prop.psi.copy())
    assert np.abs(states[0] - states[1]).max() < 1e-12


def test_single_precision_stays_close_to_double():
    # complex64 carries ~7 digits (float32 epsilon 1.2e-7): each step's round-off
    # moves the state and the norm by about one epsilon, so 200 steps stay within
    # 200·epsilon of double precision (common practice, no source; the norm drift
    # measured here is 7.5e-8 per step, a cost of single precision over long runs)
    g, V, _, psi0 = _case(1024)
    out = {}
    for single in (False, True):
        prop = Propagator(g, V, 1.0, 1.0, 0.02, "strang", single=single)
        assert prop.psi.dtype == (np.complex64 if single else np.complex128)
        prop.set_state(psi0)
        prop.advance(200)
        out[single] = prop.psi.astype(np.complex128)
    bound = 200 * np.finfo(np.float32).eps
    assert np.abs(out[True] - out[False]).max() < bound
    assert abs(np.vdot(out[True], out[True]).real * g.dx - 1) < bound


def test_fft_threads_default_to_one_unless_asked(monkeypatch):
    monkeypatch.delenv(fft.THREADS_VARIABLE, raising=False)
    assert fft.default_threads(1 << 20) == 1
    monkeypatch.setenv(fft.THREADS_VARIABLE, "2")
    assert fft.default_threads(1 << 20) == min(2, __import__("os").cpu_count() or 1)
    assert fft.default_threads(1024) == 1
    monkeypatch.setenv(fft.THREADS_VARIABLE, "many")
    assert fft.default_threads(1 << 20) == 1
