"""FFT backends against numpy.fft (the reference library) on random data."""
import numpy as np
import pytest

from sojourn.engine import fft

AVAILABLE = [name for name, cls in fft.BACKENDS.items() if cls.available()]


def _random(shape, seed=3):
    rng = np.random.default_rng(seed)
    return rng.standard_normal(shape) + 1j * rng.standard_normal(shape)


@pytest.mark.parametrize("backend", AVAILABLE)
@pytest.mark.parametrize("shape", [64, 1000, (3, 256)])
def test_forward_and_backward_match_numpy(backend, shape):
    # forward: numpy's sign convention, unnormalised; backward: the inverse sum without 1/N
    data = _random(shape)
    # a leading axis of independent components (as spinor components will be)
    pair = fft.FFTPair(shape, backend=backend, axes=(1,) if isinstance(shape, tuple) else None)
    pair.buffer[...] = data
    pair.forward()
    expected = np.fft.fft(data, axis=-1)
    assert np.abs(pair.buffer - expected).max() < 1e-10 * np.abs(expected).max()
    pair.backward()
    n = data.shape[-1]
    assert np.abs(pair.buffer / n - data).max() < 1e-12 * n


@pytest.mark.parametrize("backend", AVAILABLE)
def test_all_axes_by_default(backend):
    data = _random((8, 12))
    pair = fft.FFTPair((8, 12), backend=backend)
    pair.buffer[...] = data
    pair.forward()
    assert np.abs(pair.buffer - np.fft.fft2(data)).max() < 1e-10


@pytest.mark.parametrize("backend", AVAILABLE)
def test_single_precision_buffer(backend):
    data = _random(512).astype(np.complex64)
    pair = fft.FFTPair(512, dtype=np.complex64, backend=backend)
    assert pair.buffer.dtype == np.complex64
    pair.buffer[...] = data
    pair.forward()
    expected = np.fft.fft(data.astype(np.complex128))
    # float32 round-off: ~ε·log2(N) relative (common practice, no source)
    assert np.abs(pair.buffer - expected).max() < 1e-5 * np.abs(expected).max()


@pytest.mark.parametrize("backend", AVAILABLE)
def test_two_threads_give_the_same_transform(backend):
    # FFTW_ESTIMATE: planning two-thread transforms by measurement is slow on a busy machine
    data = _random(1 << 12)
    out = []
    for threads in (1, 2):
        pair = fft.FFTPair(1 << 12, threads=threads, backend=backend, effort="FFTW_ESTIMATE")
        assert pair.threads == threads
        pair.buffer[...] = data
        pair.forward()
        out.append(pair.buffer.copy())
    assert np.abs(out[0] - out[1]).max() < 1e-10 * np.abs(out[0]).max()


def test_backend_contract_attributes():
    for name in AVAILABLE:
        pair = fft.FFTPair(32, backend=name)
        assert pair.buffer.shape == (32,) and pair.n == 32
        assert isinstance(pair.name, str) and pair.name == pair.backend
    assert fft.backend_name() == fft.FFTPair(16).name


def test_refusals():
    with pytest.raises(ValueError, match="known: pyfftw, scipy"):
        fft.FFTPair(16, backend="nope")
    with pytest.raises(ValueError, match="positive sizes"):
        fft.FFTPair((0,))


@pytest.mark.skipif("pyfftw" not in AVAILABLE, reason="pyFFTW not installed")
def test_wisdom_is_written_to_the_cache_folder(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    assert fft.wisdom_path() == tmp_path / "sojourn" / "fftw-wisdom.pickle"
    fft.FFTPair(96, backend="pyfftw")
    assert fft.wisdom_path().is_file()
