"""FFT backend: planned in-place pyFFTW transforms with cached wisdom, or
scipy.fft when pyFFTW cannot be imported (announced once on stderr).

Both transforms work in place on one aligned buffer and are unnormalised; the
propagator folds the 1/N into its kinetic factor so that no pass is wasted.
"""
from __future__ import annotations

import os
import pickle
import sys
from pathlib import Path

import numpy as np

try:  # the fast path
    import pyfftw
except ImportError:  # pragma: no cover - depends on the machine
    pyfftw = None

_NOTICE_GIVEN = False
THREAD_THRESHOLD = 1 << 16  # below this, a second thread costs more than it gains
THREADS_VARIABLE = "SOJOURN_FFT_THREADS"


def backend_name() -> str:
    return f"pyfftw {pyfftw.__version__}" if pyfftw is not None else "scipy.fft"


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


class FFTPair:
    """Forward and backward transforms, in place on ``self.buffer``."""

    def __init__(self, n: int, dtype=np.complex128, threads: int | None = None,
                 effort: str = "FFTW_MEASURE"):
        global _NOTICE_GIVEN
        self.n = n
        self.threads = threads or default_threads(n)
        if pyfftw is not None:
            _load_wisdom()
            self.buffer = pyfftw.empty_aligned(n, dtype=dtype)
            flags = (effort, "FFTW_DESTROY_INPUT")
            self._fwd = pyfftw.FFTW(self.buffer, self.buffer, direction="FFTW_FORWARD",
                                    flags=flags, threads=self.threads)
            self._bwd = pyfftw.FFTW(self.buffer, self.buffer, direction="FFTW_BACKWARD",
                                    flags=flags, threads=self.threads)
            _save_wisdom()
            self.forward = self._fwd.execute
            self.backward = self._bwd.execute
            self.backend = backend_name()
        else:
            if not _NOTICE_GIVEN:
                print("sojourn: pyFFTW is not available; using scipy.fft (slower)", file=sys.stderr)
                _NOTICE_GIVEN = True
            import scipy.fft as sfft
            self.buffer = np.empty(n, dtype=dtype)
            buf = self.buffer

            def forward():
                buf[:] = sfft.fft(buf, overwrite_x=True, workers=self.threads)

            def backward():
                buf[:] = sfft.ifft(buf, overwrite_x=True, norm="forward", workers=self.threads)

            self.forward, self.backward = forward, backward
            self.backend = "scipy.fft"
