"""sojourn: wave-packet scattering and time delays, simulated and compared with theory."""
import os as _os

# Our array work is elementwise passes and FFTs (FFTW has its own threads).
# A multithreaded BLAS gains nothing on these reductions and, on a busy
# machine, makes each one a thousand times slower; ask for one BLAS thread
# unless the user chose otherwise (effective only before numpy is imported).
_os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

__version__ = "0.1.0"
