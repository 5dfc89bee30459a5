"""Parameter sweeps: many runs of one scenario with some values changed, one table.

A sweep file (YAML, validated like a scenario, errors as ``file:line: key: why``)::

    base: step.yaml                 # a scenario, relative to the sweep file
    vary:                           # dotted key paths into the scenario → values
      packet.energy: [0.2, 0.4, 0.6]
    pairing: product                # product (default: every combination) | zip
    output: results/step-energies   # a folder, relative to the sweep file

Each point is a full run (``point-003.h5``, with its scenario ``point-003.yaml``
beside it) plus the delay measurement, recorded as ``point-003.json``. Points
run in a local process pool or on a Dask cluster; a point that fails is
recorded with its error while the others go on; a point whose run file is
complete and whose result is recorded is skipped when the sweep is run again.
The results are ``table.csv``, ``table.json`` and ``summary.png`` in the
output folder. One sweep at a time may use a folder (a lock file).
"""
from __future__ import annotations

import contextlib
import csv
import difflib
import hashlib
import io
import itertools
import json
import math
import os
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Optional

import yaml

from ..config.scenario import Scenario, model_at, format_path, load, loads, parse_yaml, read_text, with_changes
from .. import workflows
from ..build import build
from ..errors import RunFileError, SojournError, SweepError, one_line
from ..store import RunFile, folder_lock
from ..theory.scattering import scatter

SWEEP_KEYS = ("base", "vary", "pairing", "output")
PAIRINGS = ("product", "zip")
METHODS = ("centroid", "arrival", "spectral")     # the delay methods of `measure`
CHANNELS = ("reflection", "transmission")
STOP_NAME = ".sweep.stop"      # present while an interrupted sweep stops its workers
TABLE_CSV, TABLE_JSON, SUMMARY_PNG = "table.csv", "table.json", "summary.png"
RESULT_FORMAT = "sojourn.sweep-point"




# ----------------------------------------------------------------------------------------
# The sweep file


@dataclass(frozen=True)
class Point:
    """One combination of values: its scenario, or the one-line reason it is invalid."""

    index: int
    values: dict                      # dotted path -> value, in the sweep file's order
    scenario: Optional[Scenario]
    error: Optional[str] = None

    @property
    def name(self) -> str:
        return f"point-{self.index:03d}"

    @property
    def fingerprint(self) -> str:
        """Identifies the point's scenario, so that a changed sweep is noticed."""
        text = self.scenario.text if self.scenario is not None else ""
        return hashlib.sha256(text.encode()).hexdigest()[:16]


@dataclass(frozen=True)
class Sweep:
    """A validated sweep: the base scenario, the varied keys and every point."""

    source: str
    base: Scenario
    keys: tuple
    pairing: str
    output: Path
    points: tuple = field(default_factory=tuple)

    @property
    def units(self) -> dict:
        u = self.base.unit_system
        return {"length": u.length, "energy": u.energy, "time": u.time, "mass": u.mass,
                "system": u.name}


def load_sweep(path) -> Sweep:
    """A sweep from its YAML file (paths in it are relative to its folder)."""
    path = Path(path)
    return loads_sweep(read_text(path, "sweep", SweepError), str(path), path.parent)


def loads_sweep(text: str, source: str = "<sweep>", base_dir: Optional[Path] = None) -> Sweep:
    """A sweep from YAML text: the file is checked, then every point's scenario is
    generated and validated (an invalid point is kept, with its error)."""
    base_dir = Path(base_dir) if base_dir is not None else Path(".")
    data, lines = parse_yaml(text, source)

    def fail(key_path: tuple, message: str):
        line = next((lines[key_path[:n]] for n in range(len(key_path), -1, -1)
                     if key_path[:n] in lines), 1)
        raise SweepError(f"{source}:{line}: {format_path(key_path)}: {message}")

    if not isinstance(data, dict):
        raise SweepError(f"{source}:1: a sweep file must be a mapping with the keys "
                         f"{', '.join(SWEEP_KEYS)}")
    for key in data:
        if key not in SWEEP_KEYS:
            close = difflib.get_close_matches(str(key), SWEEP_KEYS, n=1)
            fail((key,), "unknown key" + (f"; did you mean '{close[0]}'?" if close else
                                          f"; valid keys: {', '.join(SWEEP_KEYS)}"))
    for key in ("base", "vary", "output"):
        if key not in data:
            fail((), f"required key '{key}' is missing")
    for key in ("base", "output"):
        if not isinstance(data[key], str) or not data[key].strip():
            fail((key,), f"must be a path (text), relative to the sweep file (got {data[key]!r})")
    pairing = data.get("pairing", "product")
    if pairing not in PAIRINGS:
        fail(("pairing",), f"must be one of {' | '.join(PAIRINGS)} (got {pairing!r})")

    base_path = Path(data["base"])
    base_path = base_path if base_path.is_absolute() else base_dir / base_path
    if not base_path.is_file():
        fail(("base",), f"no scenario file at {str(base_path)!r}")
    base = load(base_path)
    base_data, _ = parse_yaml(base.text, base.source)

    vary = data["vary"]
    if not isinstance(vary, dict) or not vary:
        fail(("vary",), "must be a mapping of dotted key paths to lists of values, "
                        "e.g. 'packet.energy: [0.1, 0.2]'")
    for key, values in vary.items():
        if not isinstance(key, str):
            fail(("vary", key), f"a key path must be text like 'packet.energy' (got {key!r})")
        problem = _path_problem(base_data, key)
        if problem:
            fail(("vary", key), f"{problem} in the scenario {base.source}")
        if not isinstance(values, list) or not values:
            fail(("vary", key), f"must be a non-empty list of values (got {values!r})")
    keys = tuple(vary)
    if pairing == "zip":
        lengths = {k: len(v) for k, v in vary.items()}
        if len(set(lengths.values())) > 1:
            fail(("pairing",), "zip pairs the i-th values of every key, so the lists need equal "
                               "lengths (got " + ", ".join(f"{k}: {n}" for k, n in lengths.items())
                 + ")")
        combos = list(zip(*vary.values()))
    else:
        combos = list(itertools.product(*vary.values()))

    output = Path(data["output"])
    output = output if output.is_absolute() else base_dir / output
    points = tuple(_make_point(i, dict(zip(keys, combo)), base)
                   for i, combo in enumerate(combos))
    return Sweep(source, base, keys, pairing, output, points)


def _path_problem(data: Any, dotted: str) -> Optional[str]:
    """Why a dotted path does not name a value of the scenario (None if it does).

    A path exists if the base file gives it, or if it names an optional key of a
    section the scenario has or may have (e.g. ``evolve.dt`` left to its default)."""
    parts = [int(p) if p.isdigit() else p for p in dotted.split(".")]
    if any(p == "" for p in parts):
        return f"'{dotted}' is not a dotted key path"
    node: Any = data
    for depth, part in enumerate(parts):
        here = ".".join(str(p) for p in parts[:depth + 1])
        if isinstance(node, list):
            if not isinstance(part, int) or part >= len(node):
                return (f"'{here}': {'.'.join(map(str, parts[:depth])) or 'this'} is a list of "
                        f"{len(node)} item(s); use an index 0..{len(node) - 1}")
            node = node[part]
        elif isinstance(node, dict):
            if part in node:
                node = node[part]
                continue
            model = model_at(tuple(parts[:depth + 1]))
            known = list(getattr(model, "model_fields", {})) if model is not None else []
            known = [k for k in known if k not in ("source", "text")]
            if part in known:      # an optional key the base leaves to its default
                node = {}
                continue
            options = [k for k in list(node) + known if isinstance(k, str)]
            close = difflib.get_close_matches(str(part), options, n=1)
            prefix = ".".join(map(str, parts[:depth]))
            hint = f"; did you mean '{prefix + '.' if prefix else ''}{close[0]}'?" if close else ""
            return f"no key '{here}'{hint}"
        else:
            return f"'{'.'.join(map(str, parts[:depth]))}' is a single value, not a section"
    if isinstance(node, (dict, list)) and node:
        return f"'{dotted}' is a whole section; vary one of its values"
    return None


def _make_point(index: int, values: dict, base: Scenario) -> Point:
    name = f"point-{index:03d}"
    try:
        scenario = with_changes(base, {**values, "record.output": f"{name}.h5"})
    except SojournError as exc:
        return Point(index, values, None, _one_line(exc))
    return Point(index, values, scenario)


def _one_line(exc: BaseException) -> str:
    return one_line(exc if isinstance(exc, SojournError) else f"{type(exc).__name__}: {exc}")


# ----------------------------------------------------------------------------------------
# One point (runs in a worker process: local pool or Dask worker)


def run_point(task: dict) -> dict:
    """Run one point, measure it, record its result beside the run file; return it.

    Never raises for a failing point: the result has status 'failed' and the
    error. A KeyboardInterrupt (Ctrl-C, or SIGTERM) leaves the run file as
    .partial with status 'interrupted' and returns status 'interrupted'.
    """
    folder, name = Path(task["folder"]), task["name"]
    result = {"format": RESULT_FORMAT, "point": name, "fingerprint": task["fingerprint"],
              "values": task["values"], "status": "failed", "error": None,
              "verified": bool(task["verify"])}
    if (folder / STOP_NAME).exists():   # the sweep was interrupted before this point began
        return {**result, "status": "interrupted", "error": "interrupted"}
    try:
        result.update(_run_and_measure(task, folder, name))
        result["status"] = "complete"
    except KeyboardInterrupt:
        result.update(status="interrupted", error="interrupted")
        return result
    except Exception as exc:  # noqa: BLE001 - a failing point must not stop the others
        result["error"] = _one_line(exc)
    _write_atomic(folder / f"{name}.json", json.dumps(result, indent=1))
    return result


def _run_and_measure(task: dict, folder: Path, name: str) -> dict:
    scenario = loads(task["text"], task["source"], Path(task["base_dir"]))
    setup = build(scenario)
    errors = setup.errors()
    if errors:
        raise SweepError(f"{name}: {errors[0]}")
    path, report = workflows.run_and_measure(setup, folder / f"{name}.h5", task["verify"])
    return {"measured": _report_values(report, path, scenario), "warnings": list(report.warnings)}


def _report_values(report, path: Path, scenario: Scenario) -> dict:
    """The table's numbers from a delay report: R, T and per channel the delays."""
    with RunFile(path) as rf:
        obs = rf.observables()
    left = float(obs["P_left"][-1] + obs["absorbed_left"][-1])
    right = float(obs["P_right"][-1] + obs["absorbed_right"][-1])
    forward = scenario.packet.direction == "right"
    out = {"R": report.reflection.probability if report.reflection else (left if forward else right),
           "T": report.transmission.probability if report.transmission else (
               right if forward else left)}
    for channel in CHANNELS:
        ch = getattr(report, channel)
        if ch is None:
            continue
        for method in METHODS:
            r = ch.measured.get(method)
            out[f"{channel}_delay_{method}"] = None if r is None else r.delay
            out[f"{channel}_predicted_{method}"] = None if r is None else r.predicted
            out[f"{channel}_error_{method}"] = None if r is None else r.error
        out[f"{channel}_delay_wigner"] = ch.wigner
        out[f"{channel}_delay_packet"] = ch.packet
    return out


def _write_atomic(path: Path, text: str) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


# ----------------------------------------------------------------------------------------
# Running a sweep


@dataclass
class Outcome:
    """What a sweep invocation did: the table rows and where the results are."""

    rows: list
    columns: list
    table_csv: Path
    table_json: Path
    summary: Optional[Path]
    interrupted: bool = False

    def count(self, status: str) -> int:
        return sum(1 for r in self.rows if r["status"] == status)


Progress = Callable[[int, int, dict], None]   # (points done, points in all, counts by status)


def run_sweep(sweep: Sweep, workers: Optional[int] = None, scheduler: Optional[str] = None,
              verify: bool = False, progress: Optional[Progress] = None) -> Outcome:
    """Run every valid point not already complete, then write the table and figure.

    Locally a process pool of `workers` processes (default: the number of
    cores); with `scheduler` (a Dask scheduler address) on that cluster. Points
    that are already complete (run file complete, result recorded for the same
    scenario, verified if `verify`) are skipped. On Ctrl-C the running points
    are interrupted (their run files stay resumable), the table is written with
    the points done so far, and KeyboardInterrupt is raised again.
    """
    out = sweep.output
    out.mkdir(parents=True, exist_ok=True)
    with folder_lock(out):
        stop = out / STOP_NAME
        stop.unlink(missing_ok=True)
        results: dict[int, dict] = {}
        todo = []
        for point in sweep.points:
            if point.scenario is None:
                results[point.index] = {"status": "failed", "error": point.error}
                continue
            done = _recorded(out, point, verify)
            if done is not None:
                results[point.index] = {**done, "status": "skipped"}
                continue
            _write_atomic(out / f"{point.name}.yaml", point.scenario.text)
            todo.append(point)
        tasks = [_task(sweep, p, out, verify) for p in todo]
        total = len(sweep.points)

        def report(index: int, result: dict) -> None:
            results[index] = result
            if progress:
                progress(len(results), total, _counts(results))

        if progress:
            progress(len(results), total, _counts(results))
        interrupted = False
        try:
            if tasks:
                if scheduler:
                    _run_on_dask(scheduler, tasks, report)
                else:
                    _run_locally(tasks, workers or os.cpu_count() or 1, report)
        except KeyboardInterrupt:
            interrupted = True
        finally:
            stop.unlink(missing_ok=True)
        outcome = write_results(sweep, results, verify)
        outcome.interrupted = interrupted or any(
            r["status"] == "interrupted" for r in results.values())
    if interrupted:
        raise KeyboardInterrupt
    return outcome


def _task(sweep: Sweep, point: Point, folder: Path, verify: bool) -> dict:
    source = point.scenario.source or sweep.base.source
    return {"name": point.name, "index": point.index, "values": point.values,
            "text": point.scenario.text, "source": str(source),
            "base_dir": str(Path(source).parent.resolve()), "folder": str(folder.resolve()),
            "fingerprint": point.fingerprint, "verify": verify}


def _recorded(folder: Path, point: Point, verify: bool) -> Optional[dict]:
    """The recorded result of a complete point (None if it must run)."""
    try:
        result = json.loads((folder / f"{point.name}.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if result.get("status") != "complete" or result.get("format") != RESULT_FORMAT:
        return None
    if result.get("fingerprint") != point.fingerprint:
        raise SweepError(f"{folder / point.name}.json was recorded for another scenario (the "
                         "sweep file or its base changed): use a new output folder, or delete "
                         "the old points")
    if verify and not result.get("verified"):
        return None
    run = folder / f"{point.name}.h5"
    try:
        with RunFile(run) as rf:
            if rf.status != "complete":
                return None
    except (RunFileError, OSError):
        return None
    return result


def _counts(results: dict) -> dict:
    counts: dict = {}
    for r in results.values():
        counts[r["status"]] = counts.get(r["status"], 0) + 1
    return counts


@contextlib.contextmanager
def _one_thread_per_worker():
    """Worker processes started inside inherit one BLAS/OpenMP thread each, so N
    workers use N cores and do not fight over them."""
    names = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
    saved = {n: os.environ.get(n) for n in names}
    for n in names:
        os.environ.setdefault(n, "1")
    try:
        yield
    finally:
        for n, v in saved.items():
            if v is None:
                os.environ.pop(n, None)
            else:
                os.environ[n] = v


def _run_locally(tasks: list, workers: int, report) -> None:
    import multiprocessing
    context = multiprocessing.get_context("spawn")
    pool = ProcessPoolExecutor(max_workers=max(1, min(workers, len(tasks))), mp_context=context)
    try:
        with _one_thread_per_worker():
            pending = {pool.submit(run_point, t): t for t in tasks}
        while pending:
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for future in done:
                task = pending.pop(future)
                report(task["index"], _result_of(future, task))
    except KeyboardInterrupt:
        _stop(tasks)
        for future in pending:
            future.cancel()
        pool.shutdown(wait=True, cancel_futures=True)
        for future, task in pending.items():
            if future.done() and not future.cancelled():
                report(task["index"], _result_of(future, task))
        raise
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def _stop(tasks: list) -> None:
    """Tell the workers not to begin queued points (they check for the stop file)."""
    if tasks:
        (Path(tasks[0]["folder"]) / STOP_NAME).touch()


def _result_of(future, task: dict) -> dict:
    try:
        return future.result()
    except BaseException as exc:  # noqa: BLE001 - a worker that died (killed, out of memory)
        return {"status": "failed", "error": _one_line(exc) or type(exc).__name__,
                "values": task["values"], "point": task["name"]}


def _run_on_dask(address: str, tasks: list, report) -> None:
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise SweepError("--scheduler needs dask.distributed: pip install 'sojourn[cluster]'") \
            from None
    try:
        client = Client(address, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise SweepError(f"cannot reach the Dask scheduler at {address} ({_one_line(exc)}); "
                         "check the address (tcp://HOST:PORT)") from None
    import uuid
    run_id = uuid.uuid4().hex[:8]       # keys unique to this invocation on the cluster
    futures = []
    try:
        for t in tasks:
            futures.append(client.submit(run_point, t, pure=False,
                                         key=f"sojourn-{t['name']}-{run_id}"))
        by_key = {f.key: t for f, t in zip(futures, tasks)}
        for future in as_completed(futures):
            task = by_key[future.key]
            report(task["index"], _result_of(future, task))
    except KeyboardInterrupt:
        _stop(tasks)
        client.cancel(futures)
        raise
    finally:
        client.close()


# ----------------------------------------------------------------------------------------
# Results: table.csv, table.json, summary.png


def table_columns(sweep: Sweep, rows: list, verify: bool) -> list:
    """Column names: point, the varied keys, R, T, per channel present the delays
    and predictions per method, the Wigner delay, ⟨τ⟩_w, error bars if verified."""
    columns = ["point", *sweep.keys, "R", "T"]
    for channel in CHANNELS:
        if not any(r.get(f"{channel}_delay_wigner") is not None
                   or any(r.get(f"{channel}_delay_{m}") is not None for m in METHODS)
                   for r in rows):
            continue
        columns += [f"{channel}_delay_{m}" for m in METHODS]
        columns += [f"{channel}_predicted_{m}" for m in METHODS]
        columns += [f"{channel}_delay_wigner", f"{channel}_delay_packet"]
        if verify:
            columns += [f"{channel}_error_{m}" for m in METHODS]
    return columns + ["status", "error"]


def table_rows(sweep: Sweep, results: dict) -> list:
    rows = []
    for point in sweep.points:
        result = results.get(point.index, {"status": "pending", "error": None})
        measured = {k: (None if isinstance(v, float) and not math.isfinite(v) else v)
                    for k, v in result.get("measured", {}).items()}   # JSON has no NaN
        rows.append({"point": point.name, **point.values, **measured,
                     "status": result["status"], "error": result.get("error")})
    return rows


def write_results(sweep: Sweep, results: dict, verify: bool = False) -> Outcome:
    """Write table.csv, table.json and summary.png from the points' results."""
    rows = table_rows(sweep, results)
    columns = table_columns(sweep, rows, verify)
    rows = [{c: row.get(c) for c in columns} for row in rows]
    out = sweep.output
    u = sweep.units
    header = (f"# sojourn sweep {sweep.source} (base {sweep.base.source}); units: time "
              f"{u['time']}, energy {u['energy']}, length {u['length']}, mass {u['mass']} "
              f"(system {u['system']}); delays in {u['time']}; R and T are probabilities")
    buffer = io.StringIO()
    buffer.write(header + "\n")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        writer.writerow([_csv_value(row[c]) for c in columns])
    csv_path, json_path = out / TABLE_CSV, out / TABLE_JSON
    _write_atomic(csv_path, buffer.getvalue())
    _write_atomic(json_path, json.dumps({
        "sweep": sweep.source, "base": sweep.base.source, "units": u, "keys": list(sweep.keys),
        "pairing": sweep.pairing, "columns": columns, "rows": rows}, indent=1))
    summary = out / SUMMARY_PNG
    plot_summary(sweep, rows, summary)
    return Outcome(rows, columns, csv_path, json_path, summary)


def _csv_value(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (list, dict)):
        return json.dumps(value)
    return str(value)


def _number(value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return math.nan
    return v


def plot_summary(sweep: Sweep, rows: list, path: Path) -> None:
    """Measured delays against the first varied key, one panel per channel, with
    theory: for a varied packet energy the phase delay τ(E) over the same range
    and each point's packet-averaged predictions; otherwise the predictions
    joined by a line. Other varied keys make one series per combination."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    key = sweep.keys[0]
    u = sweep.units
    channels = [c for c in CHANNELS if rows and f"{c}_delay_wigner" in rows[0]]
    fig, axes = plt.subplots(len(channels) or 1, 1, figsize=(7.5, 4.2 * max(len(channels), 1)),
                             squeeze=False, constrained_layout=True)
    # zip ties the other keys to the first: one series; a product: one per combination
    others = sweep.keys[1:] if sweep.pairing == "product" else ()
    groups: dict = {}
    for row, point in zip(rows, sweep.points):
        label = ", ".join(f"{k} = {_label(row[k])}" for k in others)
        groups.setdefault(label, []).append((row, point))
    markers = {"centroid": "o", "arrival": "s", "spectral": "^"}
    colours = {"centroid": "C0", "arrival": "C1", "spectral": "C2"}
    energy_sweep = key == "packet.energy"
    for ax, channel in zip(axes[:, 0], channels or [None]):
        if channel is None:
            ax.text(0.5, 0.5, "no complete points", ha="center", va="center",
                    transform=ax.transAxes)
            break
        for g, (label, members) in enumerate(groups.items()):
            done = [(r, p) for r, p in members if r["status"] in ("complete", "skipped")]
            x = np.array([_number(r[key]) for r, _ in done])
            order = np.argsort(x)
            style = ["-", "--", ":", "-."][g % 4]
            first = g == 0
            if energy_sweep and len(done) > 1:
                curve = _theory_curve(done[0][1].scenario, channel, x)
                if curve is not None:
                    ax.plot(*curve, color="k", lw=1.2, ls=style,
                            label="phase delay τ(E)" + (f" ({label})" if label else ""))
            elif label:
                ax.plot([], [], color="k", ls=style, label=label)
            for method in METHODS:
                y = np.array([_number(r.get(f"{channel}_delay_{method}")) for r, _ in done])
                pred = np.array([_number(r.get(f"{channel}_predicted_{method}")) for r, _ in done])
                err = np.array([_number(r.get(f"{channel}_error_{method}")) for r, _ in done])
                if not np.isfinite(y).any():
                    continue
                ax.errorbar(x[order], y[order],
                            yerr=err[order] if np.isfinite(err).any() else None,
                            fmt=markers[method], color=colours[method], ms=6, capsize=3, ls="none",
                            mfc="none", label=f"{method} (measured)" if first else None)
                if energy_sweep:   # each point's own packet average: a tick at the point
                    ax.plot(x[order], pred[order], ls="none", marker="_", ms=16, mew=1.5,
                            color=colours[method], label=f"{method} (packet theory)" if first
                            else None)
                else:
                    ax.plot(x[order], pred[order], ls=style, color=colours[method], lw=1,
                            label=f"{method} (packet theory)" if first else None)
        unit = u["energy"] if energy_sweep else ""
        ax.set_xlabel(f"{key}" + (f" [{unit}]" if unit else ""))
        ax.set_ylabel(f"{channel} delay [{u['time']}]")
        ax.legend(fontsize=7, ncol=2)
    fig.suptitle(f"{sweep.base.title}: sweep over {', '.join(sweep.keys)}", fontsize=10)
    fig.savefig(path, dpi=130)
    plt.close(fig)


def _label(value) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _theory_curve(scenario: Scenario, channel: str, energies):
    """(E, τ(E)) of the stationary theory over the range of the swept energies."""
    import numpy as np
    finite = energies[np.isfinite(energies)]
    if finite.size < 1 or scenario is None:
        return None
    E = np.linspace(float(finite.min()), float(finite.max()), 400)
    try:
        sc = scatter(scenario.build_potential(), E, hbar=scenario.hbar, dwell=False,
                     x_r=scenario.measure.reference, direction=scenario.packet.direction)
    except SojournError:
        return None
    tau = sc.delay_reflection if channel == "reflection" else sc.delay_transmission
    return E, tau
