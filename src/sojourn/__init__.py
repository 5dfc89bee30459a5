"""sojourn: wave-packet scattering and time delays, simulated and compared with theory.

The Python API (the same work as the command line, as objects):

    load(path | yaml_text | dict)        -> Scenario   (validated; one-line errors)
    run(scenario, output=None, *, overwrite=False, progress=False, force=False) -> Run
                                          (in memory when no output is given)
    open(path)                           -> Run        (a run file, complete or partial)
    delay(run, reference=None)           -> DelayReport (`sojourn delay --json`: .to_dict())
    theory_table(scenario, energies=None) -> dict      (`sojourn theory --json`)
    run_sweep(path, workers=None)        -> list of rows (a sweep's table)
    Run: .x .t .V .absorber .psi .density .observables .samples .scenario .analysis
         .units .path .status, .to_xarray(), .close(), a context manager

The stages are imported on first use of these names, so `import sojourn` is cheap.
"""
import os as _os

# Our array work is elementwise passes and FFTs (FFTW has its own threads).
# A multithreaded BLAS gains nothing on these reductions and, on a busy
# machine, makes each one a thousand times slower; ask for one BLAS thread
# unless the user chose otherwise (effective only before numpy is imported).
_os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

__version__ = "0.1.0"

__all__ = ["Run", "Scenario", "DelayReport", "delay", "load", "open", "run", "run_sweep",
           "theory_table", "__version__"]
_API = {"Run", "Snapshots", "delay", "load", "open", "run", "run_sweep", "theory_table"}


def __getattr__(name):
    """The API's names, imported when first asked for (the API edge, like cli.py)."""
    if name in _API:
        from . import api
        return getattr(api, name)
    if name == "Scenario":
        from .config.scenario import Scenario
        return Scenario
    if name == "DelayReport":
        from .measure import DelayReport
        return DelayReport
    raise AttributeError(f"module 'sojourn' has no attribute {name!r}")


def __dir__():
    return sorted({name for name in globals() if not name.startswith("_")} | set(__all__))
