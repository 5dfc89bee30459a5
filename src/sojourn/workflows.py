"""The only code that chains stages: load → build → guard → evolve → store → measure.

Commands, sweeps and the Python API call these; no stage calls another stage
backwards. Each returns what it made (a run file's path, a report)."""
from __future__ import annotations

import math
import shutil
import tempfile
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable, Optional

import numpy as np

from .build import Setup, build
from .config.scenario import load, table_digests, with_changes
from .engine.fft import backend_name
from .engine.loop import evolve
from .engine.propagate import ORDER
from .engine.sampler import Sampler
from .errors import MeasureError, RunFileError
from .measure import DelayReport, measure_delays
from .measure.angular import is_obstacle_run
from .model.spin import clock_region, component_potentials
from .store import MemoryRun, RunFile, RunReader, RunWriter, output_path, partial_path
from .store.writer import COMMIT_SECONDS
from .theory.states import synthesize as synthesize_states

SAFETY = 1.25   # factor on the Richardson estimate (grid convergence index, Roache 1994)


def prepare(path) -> Setup:
    """Read a scenario file and make it concrete (the guards' findings in `Setup.findings`)."""
    return build(load(path))


def run(setup: Setup, output: Optional[Path] = None, overwrite: bool = False,
        resume: bool = False, progress: Optional[Callable[[int, int], None]] = None,
        stop: Optional[Callable[[], bool]] = None,
        checkpoint_seconds: Optional[float] = COMMIT_SECONDS) -> Path:
    """Run a built scenario into its run file (or continue a `.partial` one with
    `resume`); returns the final path. The file is renamed from `.partial` only
    when the run is complete.

    `stop()` is asked every 0.01-0.1 s of run: when it says True the current
    state is checkpointed, the file is closed 'interrupted' and
    KeyboardInterrupt raised. A checkpoint is also written every
    `checkpoint_seconds` of run without a recording (None: only at recordings)."""
    if not isinstance(setup, Setup):
        raise TypeError("run needs a built Setup (sojourn.build.build)")
    if stop is not None and not callable(stop):
        raise TypeError("stop must be a function of no arguments returning True to stop")
    if checkpoint_seconds is not None and not checkpoint_seconds > 0:
        raise ValueError(f"checkpoint_seconds must be > 0 or None (got {checkpoint_seconds!r})")
    sc = setup.scenario
    final = Path(output) if output else output_path(sc)
    if resume:
        writer, state = RunWriter.open_resume(final, sc.text, table_digests(sc))
    else:
        writer = RunWriter.open_new(final, setup, backend_name(), overwrite, sc.record.compress)
        state = None
    evolve(setup, writer, state, progress, stop, checkpoint_seconds)
    return writer.finish()


def run_in_memory(setup: Setup, progress: Optional[Callable[[int, int], None]] = None) -> MemoryRun:
    """Run a built scenario into memory (no file): a MemoryRun, read like a RunFile."""
    if not isinstance(setup, Setup):
        raise TypeError("run_in_memory needs a built Setup (sojourn.build.build)")
    recorder = MemoryRun(setup, backend_name())
    evolve(setup, recorder, None, progress)
    return recorder.finish()


def run_and_measure(setup: Setup, output: Path,
                    with_error_bars: bool = False) -> tuple[Path, DelayReport]:
    """Run into `output` (continuing a `.partial` file when one is there,
    skipping a complete run of the same scenario) and measure the delays; with
    `with_error_bars`, through `verify`."""
    complete = False
    if output.exists():
        try:
            with RunFile(output) as rf:
                complete = rf.status == "complete" and rf.attrs.get("scenario") == setup.scenario.text
        except RunFileError:
            complete = False
    if not complete:
        partial = partial_path(output)
        try:
            output = run(setup, output, overwrite=True, resume=partial.exists())
        except RunFileError:     # a partial file that cannot be resumed: start again
            output = run(setup, output, overwrite=True)
    report = verify(output).report if with_error_bars else measure_delays(output)
    return output, report


def synthesize(setup: Setup, output: Path, overwrite: bool = False,
               progress: Optional[Callable[[int, int], None]] = None) -> Path:
    """Write the exact solution built from stationary states (theory.synthesize)
    as a run file in the same layout, at the times a run would record and
    sample, so that every other command works on it. No absorber, norm 1."""
    sc = setup.scenario
    if setup.W is not None:
        setup = replace(setup, W=None)
    writer = RunWriter.open_new(Path(output), setup, "exact synthesis (theory)", overwrite,
                                sc.record.compress)
    sampler = Sampler(setup)
    g = setup.grid
    nodes = sorted(set(sampler.detectors.nodes.tolist())
                   | (set(range(sampler.region.cells.start, sampler.region.cells.stop)) if sampler.region
                      else set()))
    nodes = np.array(nodes, dtype=int)
    recordings = list(range(0, setup.steps, setup.record_steps)) + [setup.steps]
    spinor = len(setup.state_shape) > len(g.shape)
    potentials = [setup.potential]
    if spinor:   # each spin component from the stationary states of its own potential
        region = clock_region(sc.larmor.region, setup.potential)
        potentials = component_potentials(setup.potential, region, sc.hbar * sc.larmor.omega)

    def exact(times, x):
        parts = [synthesize_states(p, setup.packet, times, x, hbar=setup.hbar, mass=setup.mass,
                                   reference=setup.reference) for p in potentials]
        return np.stack(parts, axis=1) / np.sqrt(len(parts)) if spinor else parts[0]
    try:
        previous = None
        for step in recordings:
            # the samples a run takes up to this recording: t = 0 first, then every
            # sample_steps steps after the previous recording
            sampled = [0] if previous is None else list(
                range(previous + setup.sample_steps, step + 1, setup.sample_steps))
            times = np.array(sampled, dtype=float) * setup.dt
            full = np.zeros(setup.state_shape, complex)
            for tk, values in zip(times, exact(times, g.x[nodes])):
                full[..., nodes] = values
                sampler.take(full, float(tk))
                sampler.norm[-1] = 1.0
            psi = exact([step * setup.dt], g.x)[0]
            writer.snapshot(step, step * setup.dt, psi, sampler.recording(psi, setup),
                            sampler.batch(), (0.0, 0.0))
            if progress:
                progress(step, setup.steps)
            previous = step
    except BaseException:
        writer.close("failed")
        raise
    return writer.finish()



@dataclass
class Convergence:
    """How far each delay moves on a finer grid (2N points, Δt/4: Δt·E_max
    fixed) and at half the time step, and the Richardson error bars."""

    report: DelayReport                 # the base run, with `error` filled in
    finer_grid: DelayReport
    half_step: DelayReport
    moves: dict                         # "channel.method" -> {"grid": Δ, "time": Δ, "error": e}


def _richardson(base, finer, order_ratio):
    """Error estimate of `base` from a run whose error is `order_ratio` times smaller."""
    return abs(base - finer) * order_ratio / (order_ratio - 1)


def _clock_error_bars(channel: str, block: dict, reruns: dict, order: int, moves: dict) -> None:
    """Richardson error bars on a channel's Larmor times (as on the delays)."""
    for key in ("tau_y", "tau_z", "tau"):
        base = block[key]["measured"]
        values = {}
        for name, rep in reruns.items():
            other = getattr(rep, channel)
            if other is not None and other.larmor is not None:
                values[name] = other.larmor[key]["measured"]
        if base is None or not values:
            continue
        err_grid = _richardson(base, values["grid"], 4.0) if "grid" in values else 0.0
        err_time = _richardson(base, values["time"], 2.0 ** order) if "time" in values else 0.0
        block[key]["error"] = SAFETY * max(err_grid, err_time)
        moves[f"{channel}.larmor.{key}"] = {"grid": values.get("grid", math.nan) - base,
                                            "time": values.get("time", math.nan) - base,
                                            "error": block[key]["error"]}


def _sideband_errors(channel, base, reruns, order, moves) -> None:
    """A driven run: each sideband probability's Richardson error, as for the delays."""
    if not base.sidebands:
        return
    finer = {name: {r["order"]: r["probability"] for r in (getattr(rep, channel).sidebands or [])}
             for name, rep in reruns.items() if getattr(rep, channel) is not None}
    for row in base.sidebands:
        n, p = row["order"], row["probability"]
        grid, time = finer.get("grid", {}).get(n), finer.get("time", {}).get(n)
        err = max(_richardson(p, grid, 4.0) if grid is not None else 0.0,
                  _richardson(p, time, 2.0 ** order) if time is not None else 0.0)
        row["error"] = SAFETY * err
        moves[f"{channel}.sideband{n:+d}"] = {
            "grid": math.nan if grid is None else grid - p,
            "time": math.nan if time is None else time - p, "error": row["error"]}


def _against_accuracy(report: DelayReport, target: Optional[float]) -> None:
    """Set each delay's error bar beside a requested evolve.accuracy: a warning
    for each above it, a note when all are within it."""
    if target is None:
        return
    over = []
    for channel in report.channels():
        for method, result in channel.measured.items():
            if result.error is not None and result.delay:
                relative = result.error / abs(result.delay)
                if relative > target:
                    over.append(f"{channel.channel} {method} ±{relative:.1e}")
    if over:
        report.warnings.append(f"verify: above the requested accuracy {target:g} (relative "
                               f"error bars): {', '.join(over)}")
    else:
        report.notes.append(f"verify: every delay's error bar is within the requested "
                            f"accuracy {target:g}")


def verify(runfile_or_path, progress: Optional[Callable[[str], None]] = None,
           keep: Optional[Path] = None) -> Convergence:
    """Rerun the scenario of a run file on a 2× finer grid with Δt/4 and at Δt/2
    (into a temporary folder, or `keep`), measure each, and attach to every
    delay of the base report the Richardson estimate of its remaining error.

    The finer-grid rerun costs about 8×, the half-step rerun 2× the base run.
    """
    say = progress or (lambda message: None)
    path = Path(runfile_or_path.path if isinstance(runfile_or_path, RunReader) else runfile_or_path)
    with RunFile(path) as rf:
        if is_obstacle_run(rf):
            raise MeasureError(f"{path}: --verify has no Richardson error bars for angle-resolved "
                               "delays yet (their 'error' is the spread between two detector "
                               "circles); rerun with finer points on both axes to judge the grid")
    base = measure_delays(runfile_or_path)
    with RunFile(path) as rf:
        scenario = rf.scenario()
        dt = float(rf.attrs["dt"])
        scheme = str(rf.attrs["scheme"])
        x = np.asarray(rf.x, float)
    # the run's own grid (an auto grid's points and aligned span), refined by halving dx; in
    # the plane the error is the normal motion's (y is free and exact): x alone is refined
    points = len(x)
    span = [float(x[0]), float(x[0] + points * (x[1] - x[0]))]
    if scenario.dimensions == 2:
        ny, y_span = scenario.grid.points[1], list(scenario.grid.span[1])

        def grid_keys(n):
            return {"grid.points": [n, ny], "grid.span": [span, y_span]}
    else:
        def grid_keys(n):
            return {"grid.points": n, "grid.span": span}
    order = ORDER[scheme]
    folder = Path(keep) if keep else Path(tempfile.mkdtemp(prefix="sojourn-verify-"))
    folder.mkdir(parents=True, exist_ok=True)
    try:
        reruns = {}
        plans = {
            "grid": ({**grid_keys(2 * points), "evolve.dt": dt / 4, "evolve.scheme": scheme},
                     f"rerun 1/2: {2 * points} points along x, dt = {dt / 4:.4g} (about 8× the "
                     "base run)"),
            "time": ({**grid_keys(points), "evolve.dt": dt / 2, "evolve.scheme": scheme},
                     f"rerun 2/2: dt = {dt / 2:.4g} (about 2× the base run)"),
        }
        for name, (changes, message) in plans.items():
            say(message)
            sc = with_changes(scenario, changes)
            out = folder / f"{path.stem}-verify-{name}.h5"
            if out.exists():
                raise MeasureError(f"{out} exists; it is never overwritten")
            reruns[name] = measure_delays(run(build(sc), out))
        moves = {}
        for channel in ("reflection", "transmission"):
            b = getattr(base, channel)
            if b is None:
                continue
            for method, result in b.measured.items():
                values = {}
                for name, rep in reruns.items():
                    other = getattr(rep, channel)
                    if other is not None and method in other.measured \
                            and other.measured[method].delay is not None:
                        values[name] = other.measured[method].delay
                if result.delay is None or not values:
                    continue
                # the grid rerun halves Δx and quarters Δt: both O(h²) terms fall 4×
                err_grid = _richardson(result.delay, values["grid"], 4.0) if "grid" in values else 0.0
                err_time = _richardson(result.delay, values["time"], 2.0 ** order) \
                    if "time" in values else 0.0
                result.error = SAFETY * max(err_grid, err_time)
                moves[f"{channel}.{method}"] = {
                    "grid": values.get("grid", math.nan) - result.delay,
                    "time": values.get("time", math.nan) - result.delay,
                    "error": result.error}
            if b.larmor is not None:
                _clock_error_bars(channel, b.larmor, reruns, order, moves)
            _sideband_errors(channel, b, reruns, order, moves)
            _shift_error(b, {name: getattr(rep, channel) for name, rep in reruns.items()},
                         order)
        _against_accuracy(base, scenario.evolve.accuracy)
        return Convergence(base, reruns["grid"], reruns["time"], moves)
    finally:
        if keep is None:
            shutil.rmtree(folder, ignore_errors=True)


def _shift_error(base, reruns: dict, order: int) -> None:
    """A run in the plane: the lateral shift's Richardson error bar from the
    same reruns as the delays (grid: x twice as fine, Δt/4; time: Δt/2)."""
    entry = getattr(base, "lateral_shift", None)
    if not entry or entry.get("measured") is None:
        return
    D, errors = entry["measured"], []
    for name, factor in (("grid", 4.0), ("time", 2.0 ** order)):
        other = getattr(reruns.get(name), "lateral_shift", None)
        if other and other.get("measured") is not None:
            errors.append(_richardson(D, other["measured"], factor))
    if errors:
        entry["error"] = SAFETY * max(errors)
