"""Delays measured from a run file, each beside its own stationary-theory
prediction (PHYSICS §5): every method of `METHODS` on every outgoing channel
(reflection, and transmission when a transmitted packet exists), the dwell
time, and the run's health warnings. Everything is in the scenario's units."""
from __future__ import annotations

import math
from pathlib import Path
from typing import Optional

import numpy as np

from ..errors import MeasureError
from ..grid_error import band_floor, dwell_grid_error
from ..model.packets import PacketInfo
from ..store import RunFile
from . import angular, health, larmor
from .frame import ForwardRun, predictions, snapshot_stats
from .methods import METHODS, channel_context
from .plane import measure_plane
from .report import ChannelReport, DelayReport
from .sidebands import UNDEFINED, sideband_entries

DWELL_WARN = 3.0   # a dwell deviation this many times the grid's allowance is flagged
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
        if "y" in rf.axes:   # a run in the plane: along the normal, and the lateral shift
            if reference_run is not None:
                raise MeasureError("a reference run is not used for a run in the plane (its "
                                   "reference is the exact free evolution)")
            if angular.is_obstacle_run(rf):   # off one disk or ring: per direction
                return angular.obstacle_report(rf)
            return measure_plane(rf, measure_run)
        scenario = rf.scenario()
        potential = scenario.build_potential()
        run = ForwardRun.from_runfile(rf, potential)
        ref = None
        if reference_run is not None:
            ref_file = _open(reference_run, opened)
            ref = ForwardRun.from_runfile(ref_file, ref_file.scenario().build_potential())
        if len(run.times) < 2:
            raise MeasureError(f"{rf.path}: the run holds fewer than two snapshots; "
                               "nothing to measure")
        packet = PacketInfo(**rf.packet)
        if potential.driven:     # no stationary delays: the sidebands are measured instead
            prediction, why = None, None
        else:
            prediction, why = predictions(potential, packet, run.hbar, run.mass, rf.reference,
                                          run.region)
        accuracy = scenario.evolve.accuracy
        report = measure_run(run, ref, prediction, why, path=str(rf.path), units=rf.units,
                             status=rf.status, potential=potential, packet=packet,
                             accuracy=accuracy)
        if larmor.is_spinor(rf):
            attach_clock(report, run, scenario, packet)
        beside_accuracy(report, accuracy)
        return report
    finally:
        for f in opened:
            f.close()


def _open(source, opened: list):
    if isinstance(source, (str, Path)):
        rf = RunFile(source)
        opened.append(rf)
        return rf
    return source


def beside_accuracy(report: DelayReport, target: Optional[float]) -> None:
    """Warn where a delay misses its prediction by more than a requested
    evolve.accuracy: the plan bounds the grid's and the time step's errors, not
    a method's own (the arrival method's, e.g., PHYSICS §3)."""
    if target is None:
        return
    over = [f"{c.channel} {name} {result.relative:+.1e}" for c in report.channels()
            for name, result in c.measured.items()
            if result.relative is not None and abs(result.relative) > target]
    if over:
        report.warnings.append(f"measured against theory, above the requested accuracy "
                               f"{target:g} (relative): {', '.join(over)}")


def attach_clock(report: DelayReport, run: ForwardRun, scenario, packet: PacketInfo) -> None:
    """Add each measured channel's Larmor block (a spinor run) and its warnings.
    The ordinary methods above measured the spin-summed run (PHYSICS §Larmor)."""
    if getattr(scenario, "larmor", None) is None:
        raise MeasureError(f"{report.file}: a spinor run without a `larmor` clock in its "
                           "scenario: nothing says which field split its components")
    measured = [c.channel for c in report.channels()]
    blocks, warnings = larmor.measure_clock(run, snapshot_stats(run), scenario, packet, measured)
    for channel in report.channels():
        channel.larmor = blocks.get(channel.channel)
    report.warnings += warnings
    report.notes.append("spinor run: the delays and the dwell time are those of the spin-summed "
                        "density and flux, each predicted for the field-free potential (the "
                        "clock shifts them by O(ω_L²))")


def measure_run(run: ForwardRun, ref: Optional[ForwardRun], prediction, why: Optional[str], *,
                path: str, units: dict, status: str, potential=None,
                packet: Optional[PacketInfo] = None,
                accuracy: Optional[float] = None) -> DelayReport:
    """The report of a run in the forward frame, given theory's prediction
    (None, with the reason `why`, when there is none). A driven `potential`
    (with the run's signed `packet`) gets each channel's sidebands instead of
    phase-delay predictions; `accuracy` is the requested evolve.accuracy."""
    warnings = health.before_measuring(run, status)
    stats = snapshot_stats(run)
    channels, notes = {}, []
    driven = potential is not None and potential.driven and packet is not None
    for channel, side in (("reflection", "left"), ("transmission", "right")):
        final = float(run.observables[f"P_{side}"][-1] + run.observables[f"absorbed_{side}"][-1])
        expected = None if prediction is None else getattr(prediction, channel)
        closed = prediction is not None and (expected is None or expected.probability < 1e-8)
        floor = health.channel_floor(run, closed)
        if final > floor and driven:   # no phase delays to measure
            channels[channel] = ChannelReport(channel, final, None, None, {})
        elif final > floor:
            channels[channel] = measure_channel(run, stats, channel, warnings, ref)
        else:
            channels[channel] = None
            reason = "no outgoing packet to time" if floor == health.CHANNEL_MIN else \
                "what the time step's spurious components may carry where theory transmits nothing"
            notes.append(f"{channel} not measured: its probability {max(final, 0.0):.2g} is "
                         f"below {floor:.2g}, {reason}")
    if driven:
        measured = [c for c, r in channels.items() if r is not None]
        blocks, found = sideband_entries(run, stats, potential, packet, measured)
        warnings += found
        for channel, rows in blocks.items():
            channels[channel].sidebands = rows
        notes.append(f"phase delays are {UNDEFINED}")
    elif prediction is None:
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
    if dwell.get("relative") is not None and abs(dwell["relative"]) > DWELL_WARN * max(
            dwell["grid_error"] or 0.0, 1e-3):
        warnings.append(f"the dwell time deviates from its prediction by {dwell['relative']:+.1e} "
                        f"(relative), more than {DWELL_WARN:g}× what the grid allows "
                        f"(±{max(dwell['grid_error'] or 0.0, 1e-3):.1e}): was the packet still "
                        "in the region when the run ended, or there at its start?")
    shifts = _sideband_shifts(potential, run.hbar) if driven else (0.0,)
    warnings += health.after_measuring(run, stats, channels["reflection"],
                                       channels["transmission"], shifts, accuracy)
    return DelayReport(path, units, channels["reflection"], channels["transmission"], dwell,
                       warnings, run.info.energy, notes)


def _sideband_shifts(potential, hbar) -> tuple:
    """The energies n·ħω the outgoing spectrum legitimately reaches (health's k-band)."""
    from_drive = max((d.angular_frequency for d, _ in potential.drives()), default=0.0)
    beta = sum(abs(d.amplitude) for d, _ in potential.drives()) / max(hbar * from_drive, 1e-300)
    reach = int(math.ceil(beta)) + 6 if from_drive else 0
    return tuple(n * hbar * from_drive for n in range(-reach, reach + 1))


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
    V = np.mean(np.reshape(run.V, (-1, run.V.shape[-1])), axis=0)   # spin components: their mean
    inside = V if run.W is None else V[run.W == 0]
    grid_error = dwell_grid_error(inside, run.dx, band_floor(run.info, run.hbar, run.mass),
                                  run.hbar, run.mass)
    return {"measured": value, "predicted": predicted,
            "deviation": None if predicted is None else value - predicted,
            "relative": None if not predicted else (value - predicted) / abs(predicted),
            "grid_error": grid_error,
            "region": [float(region[0]), float(region[1])]}
