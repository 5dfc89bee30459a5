"""Sweeps: many runs of one base scenario with some values changed, one table.

The sweep file is read by `sojourn.config.sweepfile`; `run_sweep` runs its
points (a local pool or a Dask cluster) and writes table.csv, table.json and
summary.png through `sojourn.sweep.table`."""
from ..config.sweepfile import Point, Sweep, load_sweep, loads_sweep
from ..errors import SweepError
from .runner import LOCK_NAME, STOP_NAME, check_outputs, folder_lock, run_point, run_sweep
from .table import CHANNELS, METHODS, Outcome, plot_summary, summary_figure, table_columns, \
    table_rows, warning_key, write_results

__all__ = ["CHANNELS", "LOCK_NAME", "METHODS", "Outcome", "Point", "STOP_NAME", "Sweep",
           "SweepError", "check_outputs", "folder_lock", "load_sweep", "loads_sweep",
           "plot_summary", "run_point", "run_sweep", "summary_figure", "table_columns",
           "table_rows", "warning_key", "write_results"]
