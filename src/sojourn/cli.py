"""The `sojourn` command: argument parsing and printing only; the work is done
by the library. Exit codes: 0 success, 2 bad input, 1 anything else,
130 interrupted. Bad input never shows a traceback (`--debug`, anywhere on the
line, does). Each verb is one `add_<verb>(sub)` appended to VERBS; the stages
are imported inside the commands, so `sojourn --help` stays fast."""
from __future__ import annotations

import argparse
import json
import os
import sys
import warnings
from pathlib import Path

from . import __version__
from .cli_format import describe_runfile, format_bench, format_check, format_delay_report, \
    format_inspect
from .cli_support import EXAMPLES, STOP, Parser, demo_scenario_path, ensure_folder, error_text, \
    prepare_outputs, progress_bar, refuse_inputs, report_findings, scenario_inputs, step_bar, stop_on_signals
from .cli_render import add_render, demo_render
from .cli_support import flag_forced as _flag_forced, say as _say, warn as _warn
from .errors import SojournError, UsageError

EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130
VERBS: list = []        # functions add_<verb>(sub) that add a verb's subparser, in help order
DEMO_STEPS: list = []   # later stages of `demo` (delay report, movie, figure), in order


# --- run / check


def _load_and_build(path):
    from .build import build
    from .config.scenario import load
    scenario = load(path)
    return scenario, build(scenario)


def run_scenario(path, output=None, overwrite=False, resume=False, force=False, quiet=False):
    """Validate, guard, run; returns the run file's path."""
    from . import workflows
    from .store.paths import output_path
    scenario, setup = _load_and_build(path)
    report_findings(setup, quiet, force)
    final = Path(output) if output else output_path(scenario)
    refuse_inputs(final, scenario_inputs(scenario), "the run file")
    ensure_folder(final.parent)
    update, close = step_bar(setup, quiet, "running")

    def stopping():   # a Ctrl-C or SIGTERM: the run checkpoints where it is and stops
        return STOP["requested"]

    with stop_on_signals():
        try:
            result = workflows.run(setup, final, overwrite, resume, update, stopping)
        finally:
            close()
    return result


def cmd_run(args) -> int:
    path = run_scenario(args.scenario, args.output, args.overwrite, args.resume, args.force,
                        args.quiet)
    _say(f"wrote {path}")
    if args.verify:
        result = _verify(path)
        for line in format_delay_report(result.report, result.moves):
            _say(line)
    return EXIT_OK


def add_run(sub) -> None:
    p = sub.add_parser("run", help="simulate a scenario and write a run file")
    p.add_argument("scenario", help="a scenario file (YAML)")
    p.add_argument("-o", "--output", help="run file (default: record.output or outputs/NAME.h5)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing result")
    p.add_argument("--resume", action="store_true", help="continue an interrupted run")
    p.add_argument("--force", action="store_true",
                   help="run despite an under-resolved grid or a time step past the limit")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar or notes")
    p.add_argument("--verify", action="store_true",
                   help="then measure the delays with convergence error bars (two reruns; slow)")
    p.set_defaults(func=cmd_run)


VERBS.append(add_run)


def _verify(path):
    """Delays with convergence error bars (two reruns), announced as slow."""
    from . import workflows
    _warn("verifying: two reruns of the scenario (2× finer grid at Δt/4, about 8× the "
          "run's cost; and Δt/2, about 2×) — this takes a while")
    return workflows.verify(path, progress=_warn)


def cmd_check(args) -> int:
    scenario, setup = _load_and_build(args.scenario)
    for line in format_check(scenario, setup):
        _say(line)
    return EXIT_OK if not setup.errors() else EXIT_INPUT


def add_check(sub) -> None:
    p = sub.add_parser("check", help="validate a scenario and report resolution and estimates")
    p.add_argument("scenario", help="a scenario file (YAML)")
    p.set_defaults(func=cmd_check)


VERBS.append(add_check)


# --- inspect

def cmd_inspect(args) -> int:
    from .store import RunFile
    with RunFile(args.file) as rf:
        _flag_forced(rf)
        info = describe_runfile(rf, args.file)
    if args.json:
        _say(json.dumps(info, indent=2))
        return EXIT_OK
    for line in format_inspect(info):
        _say(line)
    return EXIT_OK


def add_inspect(sub) -> None:
    p = sub.add_parser("inspect", help="what a run file holds")
    p.add_argument("file", help="a run file (.h5)")
    p.add_argument("--json", action="store_true", help="one JSON object on stdout")
    p.set_defaults(func=cmd_inspect)


VERBS.append(add_inspect)


# ---------------------------------------------------------------------------------------
# demo

def cmd_demo(args) -> int:
    out = Path(args.output)
    scenario_path = demo_scenario_path(out, args.overwrite)
    _say(f"scenario   {scenario_path}")
    run_path = run_scenario(scenario_path, out / "demo.h5", overwrite=True, quiet=args.quiet)
    _say(f"run file   {run_path}")
    for step in DEMO_STEPS:
        step(run_path, out, args)
    return EXIT_OK


def add_demo(sub) -> None:
    p = sub.add_parser("demo", help="the built-in scenario end to end, into ./outputs/")
    p.add_argument("-o", "--output", default="outputs", help="folder (default: outputs)")
    p.add_argument("--overwrite", action="store_true", help="replace an earlier demo there")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bars or notes")
    p.set_defaults(func=cmd_demo)


VERBS.append(add_demo)


# --- delay

def cmd_delay(args) -> int:
    from . import measure
    from .store import save_analysis
    _flag_forced(args.file)
    moves = None
    if args.verify:
        result = _verify(args.file)
        report, moves = result.report, result.moves
    else:
        report = measure.measure_delays(args.file, reference_run=args.reference_run)
    if args.save:
        save_analysis(args.file, report.to_dict())
    if args.json:
        out = report.to_dict()
        if moves is not None:
            out["convergence"] = moves
        _say(json.dumps(out, indent=2))
    else:
        for line in format_delay_report(report, moves):
            _say(line)
        if args.save:
            _say(f"saved the analysis into {args.file} (/analysis)")
    return EXIT_OK


def add_delay(sub) -> None:
    p = sub.add_parser("delay", help="measured delays beside theory")
    p.add_argument("file", help="a run file")
    p.add_argument("--json", action="store_true", help="one JSON object on stdout")
    p.add_argument("--save", action="store_true", help="store the result in the run file (/analysis)")
    p.add_argument("--verify", action="store_true",
                   help="rerun finer (2N points, Δt/4) and at Δt/2 for Richardson error bars (slow)")
    p.add_argument("--reference-run", metavar="FILE",
                   help="a run of the same packet without the potential, used as the reference")
    p.set_defaults(func=cmd_delay)


def demo_delay(run_path, out_folder, args) -> None:
    from . import measure
    for line in format_delay_report(measure.measure_delays(run_path)):
        _say(line)


VERBS.append(add_delay)
DEMO_STEPS.append(demo_delay)


# --- theory

def cmd_theory(args) -> int:
    from .theory import tables as theory
    from .config.scenario import load
    scenario = load(args.scenario)
    for dest in ("plot", "synthesize"):   # never the table file the scenario reads
        if getattr(args, dest):
            refuse_inputs(Path(getattr(args, dest)), scenario_inputs(scenario), f"--{dest}")
    if args.synthesize:
        return _synthesize(scenario, args)
    energies = theory.parse_energies(args.energies) if args.energies else None
    if scenario.dimensions == 2 and not scenario.build_potential().along_x:
        return _obstacle_theory(scenario, energies, args)
    table = theory.theory_table(scenario, energies)
    if args.plot:
        theory.plot_theory(table, args.plot)
    if args.json:
        _say(json.dumps(table, indent=2))
    elif args.csv:
        sys.stdout.write(theory.table_csv(table))
    else:
        sys.stdout.write(theory.format_table(table))
        if args.plot:
            _say(f"wrote {args.plot}")
    return EXIT_OK


def _obstacle_theory(scenario, energies, args) -> int:
    """`sojourn theory` of a scenario in the plane with one disk or ring."""
    import numpy as np
    from .theory import obstacles
    from .render import polar
    table = obstacles.obstacle_table(scenario, energies)
    if args.plot:
        curves = polar.curves_from_table(table, table["units"]["energy"])
        p = table["packet"]
        curves.append(polar.PolarCurve("packet average", np.asarray(p["theta"], float),
                                       np.asarray(p["delay"], float),
                                       np.asarray(p["cross_section"], float)))
        fig = polar.polar_figure(curves, time_unit=table["units"]["time"],
                                 length_unit=table["units"]["length"], title=scenario.title)
        polar.save_polar(fig, args.plot)
    if args.json:
        _say(json.dumps(table, indent=2))
    elif args.csv:
        raise UsageError("--csv: a partial-wave table has no single per-energy column "
                            "set; use --json")
    else:
        sys.stdout.write(obstacles.format_obstacle_table(table))
        if args.plot:
            _say(f"wrote {args.plot}")
    return EXIT_OK


def add_theory(sub) -> None:
    p = sub.add_parser("theory", help="R, T, phases, phase delays, dwell time versus energy")
    p.add_argument("scenario", help="a scenario file (YAML)")
    p.add_argument("--energies", metavar="A:B:N",
                   help="N energies from A to B in the scenario's units (default: the packet's band)")
    fmt = p.add_mutually_exclusive_group()
    fmt.add_argument("--json", action="store_true", help="one JSON object on stdout")
    fmt.add_argument("--csv", action="store_true", help="the per-energy columns as CSV")
    p.add_argument("--plot", metavar="FILE.png", help="draw R, T and the delays against energy")
    p.add_argument("--synthesize", metavar="FILE.h5",
                   help="write the exact solution (built from stationary states) as a run file")
    p.add_argument("--overwrite", action="store_true", help="with --synthesize: replace FILE.h5")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar or notes")
    p.set_defaults(func=cmd_theory)


def _synthesize(scenario, args) -> int:
    from .build import build
    from . import workflows
    setup = build(scenario)
    report_findings(setup, args.quiet, force=True)
    update, close = step_bar(setup, args.quiet, "synthesizing")
    try:
        path = workflows.synthesize(setup, Path(args.synthesize), args.overwrite, update)
    finally:
        close()
    _say(f"wrote {path} (exact synthesis)")
    return EXIT_OK


VERBS.append(add_theory)


# --- render (in cli_render.py)

VERBS.append(add_render)
DEMO_STEPS.append(demo_render)


# --- bench: this machine's throughput against the FFT limit

def cmd_bench(args) -> int:
    from . import bench
    from .engine.fft import backend_name
    sizes = args.sizes or (bench.QUICK_SIZES if args.quick else bench.FULL_SIZES)
    budget = 0.3 if args.quick else 1.5
    results = bench.survey(sizes, args.single, args.threads, budget)
    if args.json:
        _say(json.dumps({"fft": backend_name(), "results": [r.as_dict() for r in results]},
                        indent=2))
        return EXIT_OK
    for line in format_bench(results, backend_name(), args.single):
        _say(line)
    return EXIT_OK


def add_bench(sub) -> None:
    p = sub.add_parser("bench", help="this machine's steps per second against the FFT limit")
    p.add_argument("--quick", action="store_true", help="four grid sizes, a few seconds")
    p.add_argument("--sizes", type=int, nargs="+", metavar="N", help="grid sizes to measure")
    p.add_argument("--single", action="store_true", help="single precision (complex64)")
    p.add_argument("--threads", type=int, default=None,
                   help="FFT threads (default: 1, or $SOJOURN_FFT_THREADS)")
    p.add_argument("--json", action="store_true", help="one JSON object on stdout")
    p.set_defaults(func=cmd_bench)


VERBS.append(add_bench)


# --- sweep

def cmd_sweep(args) -> int:
    from . import sweep as sw
    spec = sw.load_sweep(args.sweep)
    if args.workers is not None and args.workers < 1:
        raise UsageError("sweep: --workers must be at least 1")
    sw.check_outputs(spec)
    if args.verify:
        _warn("--verify: every point is rerun twice more (2× finer grid at Δt/4, about 8× "
              "its cost; and Δt/2, about 2×) for error bars — this takes about 10× longer")
    for point in spec.points:
        if point.error:
            _warn(f"{point.name} is invalid and will not run: {point.error}")
    ensure_folder(spec.output)
    update, close = progress_bar(args.quiet, "point", "sweep points")
    try:
        outcome = sw.run_sweep(spec, args.workers, args.scheduler, args.verify, update)
    except KeyboardInterrupt:
        close()
        _warn(f"interrupted; completed points are kept and listed in {spec.output}/table.csv "
              "(run the same command again to continue)")
        return EXIT_INTERRUPTED
    close()
    for row in outcome.rows:
        if row["status"] == "failed":
            _warn(f"{row['point']} failed: {row['error']}")
    untrusted = sum(1 for r in outcome.rows if r["status"] in ("complete", "skipped")
                    and r.get("warnings"))
    _say(f"{outcome.count('complete')} complete, {outcome.count('skipped')} already done, "
         f"{outcome.count('failed')} failed of {len(outcome.rows)} points"
         + (f"; {untrusted} with warnings (column 'warnings')" if untrusted else ""))
    _say(f"wrote {outcome.table_csv}, {outcome.table_json.name}, {outcome.summary.name}")
    return EXIT_OK if not outcome.count("failed") else EXIT_FAIL


def add_sweep(sub) -> None:
    p = sub.add_parser("sweep", help="many runs of one scenario with values varied, one table")
    p.add_argument("sweep", help="a sweep file (YAML: base, vary, pairing, output)")
    p.add_argument("--workers", type=int, help="local worker processes (default: the number of "
                                               "cores)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run the points on a Dask cluster (e.g. tcp://127.0.0.1:8786)")
    p.add_argument("--verify", action="store_true",
                   help="error bars from two reruns of every point (about 10× slower)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=cmd_sweep)


VERBS.append(add_sweep)


def build_parser() -> argparse.ArgumentParser:
    parser = Parser(prog="sojourn", description="Wave-packet scattering and time delays.",
                     epilog="example: sojourn demo; sojourn VERB --help for each verb")
    parser.add_argument("--version", action="version", version=f"sojourn {__version__}")
    parser.add_argument("--debug", action="store_true",
                        help="show tracebacks (accepted anywhere on the line)")
    sub = parser.add_subparsers(dest="verb", metavar="VERB", parser_class=Parser,
                                help="what to do (sojourn VERB --help for its options)")
    for register in VERBS:
        register(sub)
    for verb, p in sub.choices.items():
        p.epilog = f"example:\n  {EXAMPLES[verb]}\n" if verb in EXAMPLES else p.epilog
    return parser


def main(argv=None) -> int:
    if not sys.warnoptions:   # numbers past their range are reported in words, never as
        warnings.simplefilter("ignore", RuntimeWarning)   # numpy's warnings with source lines
    argv = list(sys.argv[1:] if argv is None else argv)
    end = argv.index("--") if "--" in argv else len(argv)
    debug = "--debug" in argv[:end]
    argv = [a for i, a in enumerate(argv) if not (a == "--debug" and i < end)]
    if any("\x00" in a for a in argv):   # no path or value can hold one (the OS refuses it)
        _warn("error: an argument holds a NUL character (\\x00): no file name can")
        return EXIT_INPUT
    try:
        args = build_parser().parse_args(argv)
        if not getattr(args, "func", None):
            build_parser().print_help()
            return EXIT_INPUT
        prepare_outputs(args)
        return args.func(args)
    except SojournError as exc:
        if debug:
            raise
        _warn(f"error: {error_text(exc)}")
        return EXIT_INPUT
    except BrokenPipeError:  # output piped into a program that stopped reading
        sys.stdout = open(os.devnull, "w")
        return EXIT_OK
    except KeyboardInterrupt:
        _warn("interrupted; the run file is kept as .partial with status 'interrupted' "
              "(continue it with `sojourn run SCENARIO --resume`)")
        return EXIT_INTERRUPTED
    except Exception as exc:  # noqa: BLE001 - the last line of defence
        if debug:
            raise
        _warn(f"failed: {type(exc).__name__}: {exc} (run with --debug for the traceback)")
        return EXIT_FAIL


if __name__ == "__main__":
    sys.exit(main())
