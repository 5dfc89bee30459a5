"""FFT backends: planned in-place pyFFTW transforms with cached wisdom, or
scipy.fft when pyFFTW cannot be imported (announced once on stderr).

A backend is a class in `BACKENDS`, tried in order by `FFTPair`. Its contract:

1. ``Backend.available()`` says, without side effects, whether it can run here.
2. ``Backend(shape, dtype, threads, effort, axes)`` allocates ``buffer``, an
   array of that shape and dtype (aligned where the library wants it), and
   plans both transforms over ``axes`` (all axes when None; a leading axis left
   out holds independent components, e.g. spinor components).
3. ``forward()`` replaces ``buffer`` in place by its DFT over ``axes`` with
   numpy's sign convention (ψ̃_k = Σ_j ψ_j e^{-2πi jk/N}), unnormalised;
   ``backward()`` by the inverse sum (sign +, no 1/N). The propagator folds
   the 1/N into its kinetic factor, so that no pass over the array is wasted.
4. The two calls take no arguments and allocate nothing: they are the hot path.
5. Attributes ``name`` (shown in run files, with the library version) and
   ``threads`` (the threads the transforms really use).
6. The same input gives the same output whatever ``threads`` is (to round-off).

FFTW wisdom (planning results) is cached in $XDG_CACHE_HOME/sojourn (or
~/.cache/sojourn), so a grid size is measured once per machine.
"""
from __future__ import annotations

import math
import os
import pickle
import sys
from pathlib import Path
from typing import Optional, Sequence, Union

import numpy as np

try:  # the fast path
    import pyfftw
except ImportError:  # pragma: no cover - depends on the machine
    pyfftw = None

THREAD_THRESHOLD = 1 << 16  # below this, a second thread costs more than it gains
THREADS_VARIABLE = "SOJOURN_FFT_THREADS"
_NOTICE = {"given": False}


def wisdom_path() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "sojourn" / "fftw-wisdom.pickle"


def _load_wisdom() -> None:
    try:
        with open(wisdom_path(), "rb") as handle:
            pyfftw.import_wisdom(pickle.load(handle))
    except Exception:  # missing or stale wisdom only costs planning time
        pass


def _save_wisdom() -> None:
    try:
        path = wisdom_path()
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_suffix(".tmp%d" % os.getpid())
        with open(tmp, "wb") as handle:
            pickle.dump(pyfftw.export_wisdom(), handle)
        os.replace(tmp, path)
    except OSError:
        pass


def default_threads(n: int) -> int:
    """FFT threads for an n-point transform: one, unless the environment variable
    SOJOURN_FFT_THREADS asks for more (used only from THREAD_THRESHOLD points up).

    Measured on a shared 2-core machine (benchmarks/RESULTS.md): a second FFTW
    thread gained up to 1.3x on an idle machine but lost 2-40x whenever the other
    core was busy, so more threads are the user's choice, not the default."""
    try:
        wanted = int(os.environ.get(THREADS_VARIABLE, "1"))
    except ValueError:
        wanted = 1
    return max(1, min(wanted, os.cpu_count() or 1)) if n >= THREAD_THRESHOLD else 1


class PyFFTWBackend:
    """Planned in-place FFTW transforms (the fast path)."""

    name = f"pyfftw {pyfftw.__version__}" if pyfftw is not None else "pyfftw"

    @staticmethod
    def available() -> bool:
        return pyfftw is not None

    def __init__(self, shape, dtype, threads: int, effort: str, axes):
        _load_wisdom()
        self.buffer = pyfftw.empty_aligned(shape, dtype=dtype)
        flags = (effort, "FFTW_DESTROY_INPUT")
        plans = [pyfftw.FFTW(self.buffer, self.buffer, axes=axes, direction=direction,
                             flags=flags, threads=threads)
                 for direction in ("FFTW_FORWARD", "FFTW_BACKWARD")]
        _save_wisdom()
        self.forward, self.backward = plans[0].execute, plans[1].execute
        self.threads = threads


class ScipyBackend:
    """scipy.fft, writing its result back into the buffer (slower: one copy per call)."""

    name = "scipy.fft"

    @staticmethod
    def available() -> bool:
        return True

    def __init__(self, shape, dtype, threads: int, effort: str, axes):
        import scipy.fft as sfft   # a third of a second to import: only when used
        self.buffer = buf = np.empty(shape, dtype=dtype)
        self.threads = threads

        def forward():
            buf[...] = sfft.fftn(buf, axes=axes, overwrite_x=True, workers=threads)

        def backward():
            buf[...] = sfft.ifftn(buf, axes=axes, overwrite_x=True, norm="forward",
                                  workers=threads)

        self.forward, self.backward = forward, backward


BACKENDS = {"pyfftw": PyFFTWBackend, "scipy": ScipyBackend}


def backend_name() -> str:
    """Name of the backend `FFTPair` uses on this machine."""
    return next(cls for cls in BACKENDS.values() if cls.available()).name


def FFTPair(shape: Union[int, Sequence[int]], dtype=np.complex128, threads: Optional[int] = None,
            effort: str = "FFTW_MEASURE", axes: Optional[Sequence[int]] = None,
            backend: Optional[str] = None):
    """Forward and backward transforms, in place on ``.buffer`` of `shape`
    (an int for one axis), by the first available backend (or the one named)."""
    shape = (int(shape),) if np.ndim(shape) == 0 else tuple(int(s) for s in shape)
    if not shape or min(shape) < 1:
        raise ValueError(f"an FFT needs a shape of positive sizes, not {shape}")
    axes = tuple(range(len(shape))) if axes is None else tuple(axes)
    if backend is not None:
        if backend not in BACKENDS:
            raise ValueError(f"unknown FFT backend {backend!r}; known: {', '.join(BACKENDS)}")
        cls = BACKENDS[backend]
        if not cls.available():
            raise ValueError(f"FFT backend {backend!r} is not available on this machine")
    else:
        cls = next(c for c in BACKENDS.values() if c.available())
        if cls is not PyFFTWBackend and not _NOTICE["given"]:
            print("sojourn: pyFFTW is not available; using scipy.fft (slower)", file=sys.stderr)
            _NOTICE["given"] = True
    points = math.prod(shape[a] for a in axes)
    pair = cls(shape, dtype, threads or default_threads(points), effort, axes)
    pair.shape, pair.axes, pair.n = shape, axes, points
    pair.backend = pair.name
    return pair
