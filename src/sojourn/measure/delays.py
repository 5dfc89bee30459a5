"""Delays measured from a run file, each beside its own stationary-theory
prediction (PHYSICS §5): every method of `METHODS` on every outgoing channel
(reflection, and transmission when a transmitted packet exists), the dwell
time, and the run's health warnings. Everything is in the scenario's units."""
from __future__ import annotations

from pathlib import Path
from typing import Optional

import numpy as np

from ..errors import MeasureError
from ..model.packets import PacketInfo
from ..store import RunFile
from . import health
from .frame import ForwardRun, predictions, snapshot_stats
from .methods import METHODS, channel_context
from .report import ChannelReport, DelayReport

READER = ("x", "V", "absorber", "times", "psi", "snapshots", "observables", "samples", "packet",
          "attrs", "reference", "region", "scenario", "status", "units", "path")


def measure_delays(runfile_or_path, reference_run=None) -> DelayReport:
    """Measure the delays of a run file by every method and set each beside
    its own prediction. Both arguments are a path or an open run-file reader
    (anything with the attributes of `store.RunFile`); `reference_run`
    optionally names a run of the same packet without the potential, used
    instead of the exact free evolution."""
    for name, value in (("run file", runfile_or_path), ("reference run", reference_run)):
        if value is None and name == "reference run":
            continue
        if not isinstance(value, (str, Path)) and not all(hasattr(value, a) for a in READER):
            raise MeasureError(f"the {name} must be a path or a run-file reader, not "
                               f"{type(value).__name__}")
    opened = []
    try:
        rf = _open(runfile_or_path, opened)
        potential = rf.scenario().build_potential()
        run = ForwardRun.from_runfile(rf, potential)
        ref = None
        if reference_run is not None:
            ref_file = _open(reference_run, opened)
            ref = ForwardRun.from_runfile(ref_file, ref_file.scenario().build_potential())
        if len(run.times) < 2:
            raise MeasureError(f"{rf.path}: the run holds fewer than two snapshots; "
                               "nothing to measure")
        prediction, why = predictions(potential, PacketInfo(**rf.packet), run.hbar, run.mass,
                                      rf.reference, run.region)
        return measure_run(run, ref, prediction, why, path=str(rf.path), units=rf.units,
                           status=rf.status)
    finally:
        for f in opened:
            f.close()


def _open(source, opened: list):
    if isinstance(source, (str, Path)):
        rf = RunFile(source)
        opened.append(rf)
        return rf
    return source


def measure_run(run: ForwardRun, ref: Optional[ForwardRun], prediction, why: Optional[str], *,
                path: str, units: dict, status: str) -> DelayReport:
    """The report of a run in the forward frame, given theory's prediction
    (None, with the reason `why`, when there is none)."""
    warnings = health.before_measuring(run, status)
    stats = snapshot_stats(run)
    channels, notes = {}, []
    for channel, side in (("reflection", "left"), ("transmission", "right")):
        final = float(run.observables[f"P_{side}"][-1] + run.observables[f"absorbed_{side}"][-1])
        expected = None if prediction is None else getattr(prediction, channel)
        closed = prediction is not None and (expected is None or expected.probability < 1e-8)
        floor = health.channel_floor(run, closed)
        if final > floor:
            channels[channel] = measure_channel(run, stats, channel, warnings, ref)
        else:
            channels[channel] = None
            why = "no outgoing packet to time" if floor == health.CHANNEL_MIN else \
                "what the time step's spurious components may carry where theory transmits nothing"
            notes.append(f"{channel} not measured: its probability {max(final, 0.0):.2g} is "
                         f"below {floor:.2g}, {why}")
    if prediction is None:
        warnings.append(f"no theory prediction: {why}")
    else:
        for channel, report in channels.items():
            if report is not None:
                attach(report, getattr(prediction, channel))
        if channels["transmission"] is not None:
            leak = health.leakage(run, stats, prediction)
            if leak:
                warnings.append(leak)
    dwell = dwell_time(run, prediction)
    warnings += health.after_measuring(run, stats, channels["reflection"],
                                       channels["transmission"])
    return DelayReport(path, units, channels["reflection"], channels["transmission"], dwell,
                       warnings, run.info.energy, notes)


def measure_channel(run: ForwardRun, stats: dict, channel: str, warnings: list,
                    ref: Optional[ForwardRun] = None) -> ChannelReport:
    """Every registered method on one outgoing channel."""
    ctx = channel_context(run, stats, channel, warnings, ref)
    measured = {}
    for name, method in METHODS.items():
        result = method.function(run, channel, ctx)
        if result is not None:
            measured[name] = result
    at_detector = [r for r in measured.values() if r.detector is not None]
    return ChannelReport(
        channel, ctx.final, at_detector[0].probability if at_detector else None, ctx.outgoing,
        measured, filtered=ctx.filtered,
        detector=at_detector[0].detector if at_detector else None,
        snapshots_used=max((r.snapshots for r in measured.values()), default=0),
        spectrum=ctx.spectrum)


def attach(report: ChannelReport, prediction) -> None:
    """Set each measured delay beside the prediction its method names."""
    if prediction is None:
        return
    for name, result in report.measured.items():
        result.predicted = getattr(prediction, METHODS[name].prediction)
    report.wigner = prediction.wigner_delay
    report.packet = prediction.flux_delay
    report.predicted_probability = prediction.probability


def dwell_time(run: ForwardRun, prediction) -> dict:
    """∫ P_region dt per unit incident probability, beside Büttiker's packet average."""
    s = run.samples
    region = run.region
    if region is None or len(s["t"]) < 2:
        return {"measured": None, "predicted": None, "region": None}
    incident = float(run.observables["norm"][0])
    value = float(np.trapezoid(s["P_region"], s["t"]) / incident)
    predicted = prediction.dwell if prediction is not None else None
    return {"measured": value, "predicted": predicted,
            "deviation": None if predicted is None else value - predicted,
            "region": [float(region[0]), float(region[1])]}
