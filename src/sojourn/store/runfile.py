"""The old import path of the run-file names; new code imports from `sojourn.store`."""
from .layout import FORMAT, FORMAT_VERSION, OBSERVABLES, SAMPLES  # noqa: F401
from .locks import WriteLock  # noqa: F401
from .paths import lock_path, partial_path  # noqa: F401
from .reader import RunFile, RunReader  # noqa: F401
from .repair import clear_write_flags, lookup3  # noqa: F401
from .writer import RunWriter  # noqa: F401
