"""The run file: layout (the written schema), writer, readers (RunFile on disk,
MemoryRun in memory; the contract in reader.py), analysis saving, safe file
creation (files), locks, paths and repair."""
from .analysis import save_analysis
from .layout import FORMAT, FORMAT_VERSION
from .locks import WriteLock, folder_lock
from .memory import MemoryRun
from .paths import lock_path, output_path, partial_path
from .reader import RunFile, RunReader
from .writer import RunWriter

__all__ = ["RunFile", "RunReader", "MemoryRun", "RunWriter", "save_analysis", "partial_path",
           "lock_path", "output_path", "folder_lock", "WriteLock", "FORMAT", "FORMAT_VERSION"]
