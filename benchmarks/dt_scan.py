"""How each delay method's error depends on the time step (issue: time to accuracy, step 1).

For the unit step and a rectangular barrier, runs at several N and several
grid phases Δt·(E_max + ΔV)/ħ (π/8 … 30, past the grid limit 2π on purpose:
the builder's findings are ignored here) and prints, per run, each method's
relative deviation from its own packet-averaged prediction, the dwell time's,
and the norm lost to the absorbers. One JSON object a line; `--table` turns a
saved output into the Markdown table of RESULTS.md.

    nice python benchmarks/dt_scan.py --case step --points 1024 2048 > out.jsonl

`--dts` gives time steps instead of phases, `--aligned` puts the jump on a grid
point (accuracy.aligned_span, as `grid.points: auto` does), `--no-sink` runs
without the sideband sink and `--sink-start` moves where it starts (a fraction
of the first sideband's wavenumber):

    nice python benchmarks/dt_scan.py --points 8192 --aligned --dts 0.016 0.02 --no-sink
"""
from __future__ import annotations

import argparse
import json
import math
import sys
import time
from dataclasses import replace

from sojourn import timestep
from sojourn.accuracy import aligned_span
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.measure.delays import measure_delays
from sojourn.workflows import run_in_memory

CASES = {
    # the geometry (E0 = 0.2 V0, σ = 20, x0 = −100, box [−380, 120]), duration auto
    "step": """\
units: atomic
grid: {{span: [-380.0, 120.0], points: {points}}}
potential:
  - step: {{at: 0.0, height: 1.0}}
packet: {{center: -100.0, width: 20.0, energy: 0.2}}
evolve: {{duration: auto, dt: {dt}, scheme: {scheme}}}
absorber: {{width: 60.0}}
record: {{every: 20.0}}
{extra}""",
    # the shipped barrier example's physics: V0 = 1, a = 2, E0 = 0.5, σ = 20
    "barrier": """\
units: atomic
grid: {{span: [-500.0, 500.0], points: {points}}}
potential:
  - barrier: {{start: 0.0, end: 2.0, height: 1.0}}
packet: {{center: -200.0, width: 20.0, energy: 0.5}}
evolve: {{duration: auto, dt: {dt}, scheme: {scheme}}}
absorber: {{width: 60.0}}
record: {{every: 10.0}}
{extra}""",
}
PHASES = (math.pi / 8, math.pi / 2, math.pi, 2 * math.pi, 8.0, 16.0, 30.0)


def scenario(case: str, points: int, dt: float, scheme: str = "strang", extra: str = "",
             aligned: bool = False):
    text = CASES[case].format(points=points, dt="null" if dt is None else repr(dt),
                              scheme=scheme, extra=extra)
    if aligned:
        plain = loads(text, f"{case}.yaml")
        span = aligned_span(plain.grid.span, points, [0.0])   # both cases' first jump is at 0
        text = text.replace(str(list(plain.grid.span)).replace("'", ""), f"[{span[0]!r}, {span[1]!r}]")
    return loads(text, f"{case}.yaml")


def one(case: str, points: int, phase: float, scheme: str = "strang", extra: str = "",
        dt: float | None = None, aligned: bool = False, sink: bool = True) -> dict:
    probe = build(scenario(case, points, 0.01, scheme, extra, aligned))
    e_range = probe.grid.kinetic_max(1.0, 1.0) + float(probe.V.max() - probe.V.min())
    dt = phase / e_range if dt is None and phase > 0 else dt
    setup = build(scenario(case, points, dt, scheme, extra, aligned))   # dt None: the default
    if not sink:
        setup = replace(setup, sink=None)
    start = time.perf_counter()
    run = run_in_memory(setup)
    seconds = time.perf_counter() - start
    report = measure_delays(run)
    out = {"case": case, "points": points, "scheme": scheme, "phase": setup.grid_phase,
           "span": [setup.grid.left, setup.grid.right], "sink": setup.sink, "sink_start": timestep.SINK_START,
           "default": setup.dt_chosen, "filtered": setup.flux_band is not None,
           "dt": setup.dt, "steps": setup.steps, "seconds": round(seconds, 2),
           "absorbed": float(1 - run.observables()["norm"][-1])}
    for channel in report.channels():
        out[channel.channel[0] + "_P"] = channel.probability
        for name, result in channel.measured.items():
            out[f"{channel.channel[0]}_{name}"] = result.relative
            out[f"{channel.channel[0]}_{name}_err"] = (result.error / abs(result.predicted)
                                                       if result.error and result.predicted
                                                       else None)
    dwell = report.dwell
    if dwell.get("measured") is not None and dwell.get("predicted"):
        out["dwell"] = dwell["measured"] / dwell["predicted"] - 1
    out["warnings"] = [str(w) for w in report.warnings]
    return out


def table(lines) -> str:
    rows = [json.loads(line) for line in lines if line.strip()]
    keys = [k for k in ("r_centroid", "r_arrival", "r_spectral", "t_centroid", "t_arrival",
                        "t_spectral", "dwell") if any(k in r for r in rows)]
    head = "| case | N | Δt·E/ħ | Δt | filter | " + " | ".join(keys) + " | absorbed |"
    out = [head, "|" + "---|" * (head.count("|") - 1)]
    for r in rows:
        cells = [f"{r[k]:+.1e}" if r.get(k) is not None else "–" for k in keys]
        mark = "default " if r.get("default") else ""
        out.append(f"| {r['case']} | {r['points']} | {mark}{r['phase']:.3g} | {r['dt']:.3g} | "
                   + ("yes | " if r.get("filtered") else "no | ")
                   + " | ".join(cells) + f" | {r['absorbed']:.2e} |")
    return "\n".join(out)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", choices=sorted(CASES), default="step")
    parser.add_argument("--points", type=int, nargs="+", default=[1024, 2048])
    parser.add_argument("--phases", type=float, nargs="+", default=list(PHASES),
                        help="grid phases Δt·(E_max + ΔV)/ħ; 0 stands for the default Δt")
    parser.add_argument("--scheme", default="strang")
    parser.add_argument("--extra", default="", help="YAML lines appended to the scenario")
    parser.add_argument("--dts", type=float, nargs="+", help="time steps (instead of phases)")
    parser.add_argument("--aligned", action="store_true", help="the jump on a grid point")
    parser.add_argument("--no-sink", action="store_true", help="without the sideband sink")
    parser.add_argument("--sink-start", type=float, default=timestep.SINK_START,
                        help="where the sink starts, a fraction of the first sideband's k")
    parser.add_argument("--table", metavar="JSONL", help="print a saved scan as Markdown")
    args = parser.parse_args(argv)
    if args.table:
        with open(args.table) as fh:
            print(table(fh))
        return
    timestep.SINK_START = args.sink_start   # read by timestep.sideband_sink at build
    steps = [(0.0, dt) for dt in args.dts] if args.dts else [(p, None) for p in args.phases]
    for points in args.points:
        for phase, dt in steps:
            print(json.dumps(one(args.case, points, phase, args.scheme, args.extra, dt,
                                 args.aligned, not args.no_sink)), flush=True)


if __name__ == "__main__":
    sys.exit(main())
