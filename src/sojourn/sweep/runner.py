"""Running a sweep: every point a full run plus its delay measurement.

Each point is a run file (``point-003.h5``, its scenario ``point-003.yaml``
beside it) and its result ``point-003.json``. Points run in a local process
pool or on a Dask cluster; a point that fails is recorded with its error while
the others go on; a point whose run file is complete and whose result is
recorded is skipped when the sweep is run again. One sweep at a time may use
a folder (`folder_lock`); a sweep writes only the files it names here and
refuses a folder where they would replace an input or a file it did not write.
"""
from __future__ import annotations

import contextlib
import json
import multiprocessing
import os
import signal
import threading
import time
import uuid
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from pathlib import Path
from typing import Callable, Optional

from .. import workflows
from ..build import build
from ..config.scenario import loads
from ..config.sweepfile import Point, Sweep
from ..errors import RunFileError, SojournError, SweepError, one_line
from ..store import RunFile, folder_lock
from ..store.locks import SWEEP_LOCK
from .table import CHANNELS, METHODS, SUMMARY_PNG, TABLE_CSV, TABLE_JSON, Outcome, is_ours, \
    write_atomic, write_results

LOCK_NAME = SWEEP_LOCK
STOP_NAME = ".sweep.stop"      # present while an interrupted sweep stops its workers
RESULT_FORMAT = "sojourn.sweep-point"
POINT_FILES = (".h5", ".h5.partial", ".yaml", ".json")

Progress = Callable[[int, int, dict], None]   # (points done, points in all, counts by status)


# ----------------------------------------------------------------------------------------
# One point (runs in a worker process: local pool or Dask worker)


def run_point(task: dict) -> dict:
    """Run one point, measure it, record its result beside the run file; return it.

    Never raises for a failing point: the result has status 'failed' and the
    error. A KeyboardInterrupt (Ctrl-C, SIGTERM, or the sweep's process gone)
    leaves the run file as .partial and returns status 'interrupted'.
    """
    folder, name = Path(task["folder"]), task["name"]
    result = {"format": RESULT_FORMAT, "point": name, "fingerprint": task["fingerprint"],
              "values": task["values"], "status": "failed", "error": None,
              "verified": bool(task["verify"])}
    if (folder / STOP_NAME).exists() or _ORPHANED.is_set():   # stopped before this point began
        return {**result, "status": "interrupted", "error": "interrupted"}
    _BUSY.set()
    try:
        result.update(_run_and_measure(task, folder, name))
        result["status"] = "complete"
    except KeyboardInterrupt:
        result.update(status="interrupted", error="interrupted")
        return result
    except Exception as exc:  # noqa: BLE001 - a failing point must not stop the others
        result["error"] = _one_line(exc)
    finally:
        _BUSY.clear()
    write_atomic(folder / f"{name}.json", json.dumps(result, indent=1))
    return result


def _run_and_measure(task: dict, folder: Path, name: str) -> dict:
    scenario = loads(task["text"], task["source"], Path(task["base_dir"]))
    setup = build(scenario)
    errors = setup.errors()
    if errors:
        raise SweepError(f"{name}: {errors[0]}")
    path, report = workflows.run_and_measure(setup, folder / f"{name}.h5", task["verify"])
    return {"measured": _report_values(report, path, scenario), "warnings": list(report.warnings)}


def _report_values(report, path: Path, scenario) -> dict:
    """The table's numbers from a delay report: R, T and per channel the delays."""
    with RunFile(path) as rf:
        obs = rf.observables()
    left = float(obs["P_left"][-1] + obs["absorbed_left"][-1])
    right = float(obs["P_right"][-1] + obs["absorbed_right"][-1])
    plane = getattr(report, "plane", None)   # in the plane: the sign of k_x
    forward = plane["k_x"] >= 0 if plane else scenario.packet.direction == "right"
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
        out.update(_sideband_values(channel, ch.sidebands))
    return out


def _sideband_values(channel: str, rows) -> dict:
    """A driven run's sideband probabilities (measured and predicted) and the
    asymmetry P(+1)/P(−1) of each (the Büttiker–Landauer crossover)."""
    if not rows:
        return {}
    out = {}
    by_order = {r["order"]: r for r in rows}
    for r in rows:
        out[f"{channel}_sideband_{r['order']:+d}"] = r["probability"]
        out[f"{channel}_sideband_{r['order']:+d}_predicted"] = r["predicted"]
    if 1 in by_order and -1 in by_order:
        for kind, key in (("", "probability"), ("_predicted", "predicted")):
            up, down = by_order[1][key], by_order[-1][key]
            out[f"{channel}_asymmetry{kind}"] = up / down if up is not None and down else None
    return out


def _one_line(exc: BaseException) -> str:
    return one_line(exc if isinstance(exc, SojournError) else f"{type(exc).__name__}: {exc}")


_ORPHANED = threading.Event()    # set in a worker whose sweep process has gone
_BUSY = threading.Event()        # set while a worker runs a point


def _watch_parent(parent: int, every: float = 0.5) -> None:
    """Pool initializer: a worker whose sweep process dies (even by kill -9) stops
    its point as if interrupted (the run file stays resumable) within `every`
    seconds, then exits: nobody is left to take its result. SIGINT raises
    KeyboardInterrupt here even if the sweep was started with it ignored (a
    background job): it is how the watcher stops the point."""
    signal.signal(signal.SIGINT, signal.default_int_handler)

    def watch():
        while os.getppid() == parent:
            time.sleep(every)
        _ORPHANED.set()
        if _BUSY.is_set():
            os.kill(os.getpid(), signal.SIGINT)
        while _BUSY.is_set():          # the point closes its run file as interrupted
            time.sleep(0.05)
        os._exit(130)

    threading.Thread(target=watch, name="sojourn-parent-watch", daemon=True).start()


# ----------------------------------------------------------------------------------------
# Running a sweep


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
    if not isinstance(sweep, Sweep):
        raise TypeError(f"run_sweep needs a Sweep (from load_sweep), not {type(sweep).__name__}")
    if workers is not None and (not isinstance(workers, int) or workers < 1):
        raise SweepError(f"workers must be a whole number ≥ 1 (got {workers!r})")
    out = sweep.output
    check_outputs(sweep)
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
            write_atomic(out / f"{point.name}.yaml", point.scenario.text)
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


def check_outputs(sweep: Sweep) -> None:
    """Refuse an output folder where the sweep would replace one of its inputs
    (the sweep file, the base scenario, a file the base reads) or a table or
    figure that no sweep wrote. One line, before anything is written."""
    out = sweep.output
    if out.exists() and not out.is_dir():
        raise SweepError(f"{sweep.source}: output: {out} is a file, not a folder")
    inputs = sweep.inputs
    names = [TABLE_CSV, TABLE_JSON, SUMMARY_PNG, LOCK_NAME, STOP_NAME]
    names += [f"{p.name}{ext}" for p in sweep.points for ext in POINT_FILES]
    for name in names + [f"{n}.tmp" for n in names]:
        if (out / name).resolve() in inputs:
            raise SweepError(f"{sweep.source}: output: the sweep would write {out / name}, which "
                             "is one of its inputs; choose another output folder")
    for name in (TABLE_CSV, TABLE_JSON, SUMMARY_PNG):
        if not is_ours(out / name):
            raise SweepError(f"{sweep.source}: output: {out / name} exists and was not written "
                             "by a sweep; choose another output folder (or move that file)")


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
    if not isinstance(result, dict) or result.get("status") != "complete" \
            or result.get("format") != RESULT_FORMAT:
        return None
    if result.get("fingerprint") != point.fingerprint:
        raise SweepError(f"{folder / point.name}.json was recorded for another scenario (the "
                         "sweep file or its base changed): use a new output folder, or delete "
                         "the old points")
    if verify and not result.get("verified"):
        return None
    try:
        with RunFile(folder / f"{point.name}.h5") as rf:
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
    context = multiprocessing.get_context("spawn")
    pool = ProcessPoolExecutor(max_workers=max(1, min(workers, len(tasks))), mp_context=context,
                               initializer=_watch_parent, initargs=(os.getpid(),))
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
        from distributed import Client, as_completed    # optional: sojourn[cluster]
    except ImportError:
        raise SweepError("--scheduler needs dask.distributed: pip install 'sojourn[cluster]'") \
            from None
    try:
        client = Client(address, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise SweepError(f"cannot reach the Dask scheduler at {address} ({_one_line(exc)}); "
                         "check the address (tcp://HOST:PORT)") from None
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
