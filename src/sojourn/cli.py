"""The `sojourn` command: argument parsing and printing only; the work is done
by the library. Exit codes: 0 success, 2 bad input, 1 anything else,
130 interrupted. Bad input never shows a traceback (`--debug` does)."""
from __future__ import annotations

import argparse
import json
import os
import signal
import sys
from importlib import resources
from pathlib import Path
from .errors import SojournError, UsageError


EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130




class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2
        raise UsageError(f"{self.prog}: {message} (see --help)")


def _say(*parts, file=None) -> None:
    print(*parts, file=file or sys.stdout, flush=True)


def _warn(message: str) -> None:
    print(f"sojourn: {message}", file=sys.stderr, flush=True)


# ---------------------------------------------------------------------------------------
# run / check


def _load_and_build(path):
    from .build import build
    from .config.scenario import load
    scenario = load(path)
    return scenario, build(scenario)


def _report_findings(setup, quiet=False, force=False, stream=None) -> None:
    """Print warnings (and infos unless quiet); raise on errors not forced."""
    stream = stream or sys.stderr
    for f in setup.findings:
        if f.level == "warning":
            print(f"sojourn: warning: {f}", file=stream)
        elif f.level == "info" and not quiet:
            print(f"sojourn: {f}", file=stream)
    errors = [f for f in setup.errors() if not (force and f.forceable)]
    if errors:
        source = setup.scenario.source or "scenario"
        raise SojournError(f"{source}: {errors[0]}" + (
            " (--force overrides this)" if errors[0].forceable else ""))
    for f in setup.errors():
        print(f"sojourn: warning (forced): {f}", file=stream)


def _progress_bar(total: int, quiet: bool):
    if quiet:
        return None, lambda: None
    from tqdm import tqdm
    bar = tqdm(total=total, unit="step", file=sys.stderr, dynamic_ncols=True, leave=False,
               disable=None)
    state = {"done": 0}

    def update(done, _total):
        bar.update(done - state["done"])
        state["done"] = done

    return update, bar.close


def run_scenario(path, output=None, overwrite=False, resume=False, force=False, quiet=False):
    """Validate, guard, run; returns the run file's path."""
    from . import workflows
    scenario, setup = _load_and_build(path)
    _report_findings(setup, quiet, force)
    update, close = _progress_bar(setup.steps, quiet)
    _STOP["requested"] = False
    previous = {sig: signal.signal(sig, _sigterm) for sig in (signal.SIGTERM, signal.SIGINT)}

    def step(done, total):   # a Ctrl-C or SIGTERM stops the run here, at a recording
        if _STOP["requested"]:
            raise KeyboardInterrupt
        if update:
            update(done, total)

    try:
        result = workflows.run(setup, Path(output) if output else None, overwrite, resume, step)
    finally:
        close()
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    return result


_STOP = {"requested": False}


def _sigterm(signum, frame):
    """The first signal asks the run to stop at its next recording (raising here,
    at an arbitrary point, could land in a finalizer and be lost or print a
    traceback); a second one stops at once."""
    if _STOP["requested"]:
        raise KeyboardInterrupt
    _STOP["requested"] = True


def cmd_run(args) -> int:
    path = run_scenario(args.scenario, args.output, args.overwrite, args.resume, args.force,
                        args.quiet)
    _say(f"wrote {path}")
    if args.verify:
        result = _verify(path)
        for line in format_delay_report(result.report, result.moves):
            _say(line)
    return EXIT_OK


def _verify(path):
    """Delays with convergence error bars (two reruns), announced as slow."""
    from . import workflows
    _warn("verifying: two reruns of the scenario (2× finer grid at Δt/4, about 8× the "
          "run's cost; and Δt/2, about 2×) — this takes a while")
    return workflows.verify(path, progress=_warn)


def cmd_check(args) -> int:
    scenario, setup = _load_and_build(args.scenario)
    info, g, units = setup.packet, setup.grid, scenario.unit_system
    needed = 2 * (abs(info.k0) + 6 * info.sigma_k)
    lines = [
        f"scenario   {scenario.source}: {scenario.title}",
        f"units      {units.name} (length {units.length}, energy {units.energy}, time {units.time}); "
        f"mass {scenario.mass} m_e",
        f"potential  {setup.potential.describe()}",
        f"grid       {g.points} points on [{g.left:g}, {g.right:g}), dx = {g.dx:.4g}; "
        f"k_max = {g.k_max:.4g} (packet needs ≥ {needed:.4g})",
        f"packet     centre {info.center:g}, width {info.width:g}, k₀ = {info.k0:.5g}, "
        f"σ_k = {info.sigma_k:.4g} (k₀/σ_k = {info.k_ratio:.3g}); E₀ = {info.energy:.6g}, "
        f"⟨E⟩ = {info.mean_energy:.6g} {units.energy}; v₀ = {info.group_velocity:.4g}",
        f"time       dt = {setup.dt:.4g} {units.time}{' (chosen)' if setup.dt_chosen else ''}, "
        f"{setup.steps} steps to t = {setup.duration:g}; Δt·(E_max+ΔV)/ħ = "
        f"{setup.grid_phase:.3g} (limit 2π, safe below π); scheme {scenario.evolve.scheme}",
        f"recording  every {setup.record_steps} steps ({setup.record_steps * setup.dt:.4g} "
        f"{units.time}), {setup.snapshots} snapshots; samples every {setup.sample_steps} steps",
        f"measure    reference {setup.reference:g}; detectors "
        f"{', '.join(f'{d:g}' for d in setup.detectors) or 'none'}; region "
        f"{setup.region if setup.region else 'none'}",
    ]
    for line in lines:
        _say(line)
    for f in setup.findings:
        _say(f"{f.level:<10} {f}")
    n_err = len(setup.errors())
    _say("ok: the scenario can run" if not n_err else
         f"{n_err} problem(s) would stop `sojourn run`")
    return EXIT_OK if not n_err else EXIT_INPUT


# ---------------------------------------------------------------------------------------
# inspect


def describe_runfile(path) -> dict:
    from .store.runfile import RunFile
    with RunFile(path) as rf:
        attrs = rf.attrs
        obs = rf.observables()
        n = len(rf)
        out = {
            "file": str(path), "status": rf.status, "title": str(attrs.get("title", "")),
            "format_version": int(attrs["format_version"]),
            "sojourn_version": str(attrs.get("sojourn_version", "")),
            "created": str(attrs.get("created", "")), "units": rf.units,
            "provenance": json.loads(attrs.get("provenance", "{}")),
            "grid_points": int(rf.h5["grid/x"].shape[0]),
            "snapshots": n, "t_last": float(obs["t"][-1]) if n else None,
            "dt": float(attrs["dt"]), "scheme": str(attrs["scheme"]),
            "detectors": [float(d) for d in rf.samples()["detectors"]],
            "final": {k: float(v[-1]) for k, v in obs.items() if len(v)},
            "analysis": rf.analysis() is not None,
        }
    return out


def cmd_inspect(args) -> int:
    info = describe_runfile(args.file)
    if args.json:
        _say(json.dumps(info, indent=2))
        return EXIT_OK
    u = info["units"]
    _say(f"{info['file']}: {info['title']}")
    _say(f"  status {info['status']}, format {info['format_version']}, written by sojourn "
         f"{info['sojourn_version']} on {info['created']}")
    _say(f"  {info['grid_points']} grid points, {info['snapshots']} snapshots up to t = "
         f"{info['t_last']:g} {u['time']}, dt = {info['dt']:g}, scheme {info['scheme']}")
    _say("  last recording: " + ", ".join(f"{k} = {v:.6g}" for k, v in info["final"].items()
                                          if k != "t"))
    _say(f"  FFT {info['provenance'].get('fft')}, CPU {info['provenance'].get('cpu')}")
    if info["analysis"]:
        _say("  holds a saved delay analysis (/analysis)")
    return EXIT_OK


# ---------------------------------------------------------------------------------------
# demo


def demo_scenario_path(folder: Path) -> Path:
    """Copy the built-in demo scenario into `folder` and return its path."""
    text = resources.files("sojourn").joinpath("data/demo.yaml").read_text()
    folder.mkdir(parents=True, exist_ok=True)
    target = folder / "demo.yaml"
    target.write_text(text)
    return target


def cmd_demo(args) -> int:
    out = Path(args.output)
    scenario_path = demo_scenario_path(out)
    _say(f"scenario   {scenario_path}")
    run_path = run_scenario(scenario_path, out / "demo.h5", overwrite=True, quiet=args.quiet)
    _say(f"run file   {run_path}")
    for step in DEMO_STEPS:
        step(run_path, out, args)
    return EXIT_OK


DEMO_STEPS: list = []  # later stages (delay report, movie, figure) append themselves


# ---------------------------------------------------------------------------------------


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="sojourn", description="Wave-packet scattering and time delays.")
    parser.add_argument("--debug", action="store_true", help="show tracebacks")
    sub = parser.add_subparsers(dest="verb", metavar="VERB", parser_class=_Parser)

    p = sub.add_parser("run", help="simulate a scenario and write a run file")
    p.add_argument("scenario")
    p.add_argument("-o", "--output", help="run file (default: record.output or outputs/NAME.h5)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing result")
    p.add_argument("--resume", action="store_true", help="continue an interrupted run")
    p.add_argument("--force", action="store_true",
                   help="run despite an under-resolved grid or a time step past the limit")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar or notes")
    p.add_argument("--verify", action="store_true",
                   help="then measure the delays with convergence error bars (two reruns; slow)")
    p.set_defaults(func=cmd_run)

    p = sub.add_parser("check", help="validate a scenario and report resolution and estimates")
    p.add_argument("scenario")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("inspect", help="what a run file holds")
    p.add_argument("file")
    p.add_argument("--json", action="store_true")
    p.set_defaults(func=cmd_inspect)

    p = sub.add_parser("demo", help="the built-in scenario end to end, into ./outputs/")
    p.add_argument("-o", "--output", default="outputs", help="folder (default: outputs)")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_demo)

    for register in VERBS:
        register(sub)
    return parser


VERBS: list = []  # functions that add a verb's subparser (theory, delay, render, sweep, bench)


# ---------------------------------------------------------------------------------------
# delay


def _num(value, digits=7) -> str:
    return "—" if value is None else f"{value:.{digits}g}"


def format_delay_report(report, moves=None) -> list:
    """The delay report as lines of text: one table per channel, warnings below."""
    lines = [f"{report.file}  (times in {report.units.get('time', '')})"]
    for ch in report.channels():
        lines += ["", f"{ch.channel}: probability {ch.probability:.6g} (detector flux "
                      f"{_num(ch.probability_flux, 6)}, spectrum {_num(ch.probability_spectral, 6)}; "
                      f"theory {_num(ch.predicted_probability, 6)}); reference: "
                      f"{'filtered' if ch.filtered else 'free'} packet",
                  f"  {'method':<10}{'measured':>14}{'predicted':>14}{'deviation':>12}"
                  f"{'relative':>11}{'error bar':>11}"]
        for method, r in ch.measured.items():
            rel = "—" if r.relative is None else f"{r.relative:.2e}"
            err = "—" if r.error is None else f"±{r.error:.2g}"
            lines.append(f"  {method:<10}{_num(r.delay):>14}{_num(r.predicted):>14}"
                         f"{_num(r.deviation, 3):>12}{rel:>11}{err:>11}")
        lines.append(f"  phase delay at E₀ (Wigner) {_num(ch.wigner)}; flux-weighted ⟨τ⟩_w "
                     f"{_num(ch.packet)}")
    d = report.dwell
    if d.get("measured") is not None:
        lines += ["", f"dwell time in [{d['region'][0]:g}, {d['region'][1]:g}]: measured "
                      f"{_num(d['measured'])}, packet-averaged Büttiker {_num(d['predicted'])}"]
    if moves:
        lines += ["", "convergence (how far each delay moves):"]
        lines += [f"  {key:<24} 2N & Δt/4: {m['grid']:+.3g}   Δt/2: {m['time']:+.3g}   "
                  f"error bar ±{m['error']:.2g}" for key, m in moves.items()]
    if report.warnings:
        lines += [""] + [f"warning: {w}" for w in report.warnings]
    return lines


def cmd_delay(args) -> int:
    from .measure import core as measure
    moves = None
    if args.verify:
        result = _verify(args.file)
        report, moves = result.report, result.moves
    else:
        report = measure.measure_delays(args.file, reference_run=args.reference_run)
    if args.save:
        measure.save_report(args.file, report)
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
    from .measure import core as measure
    for line in format_delay_report(measure.measure_delays(run_path)):
        _say(line)


VERBS.append(add_delay)
DEMO_STEPS.append(demo_delay)


# ---------------------------------------------------------------------------------------
# theory


def cmd_theory(args) -> int:
    from .theory import solver as theory
    from .config.scenario import load
    scenario = load(args.scenario)
    if args.synthesize:
        return _synthesize(scenario, args)
    energies = theory.parse_energies(args.energies) if args.energies else None
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


def add_theory(sub) -> None:
    p = sub.add_parser("theory", help="R, T, phases, phase delays, dwell time versus energy")
    p.add_argument("scenario")
    p.add_argument("--energies", metavar="A:B:N",
                   help="N energies from A to B in the scenario's units (default: the packet's band)")
    fmt = p.add_mutually_exclusive_group()
    fmt.add_argument("--json", action="store_true", help="one JSON object on stdout")
    fmt.add_argument("--csv", action="store_true", help="the per-energy columns as CSV")
    p.add_argument("--plot", metavar="FILE.png", help="draw R, T and the delays against energy")
    p.add_argument("--synthesize", metavar="FILE.h5",
                   help="write the exact solution (built from stationary states) as a run file")
    p.add_argument("--overwrite", action="store_true", help="with --synthesize: replace FILE.h5")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_theory)


def _synthesize(scenario, args) -> int:
    from .build import build
    from . import workflows
    setup = build(scenario)
    _report_findings(setup, args.quiet, force=True)
    update, close = _progress_bar(setup.steps, args.quiet)
    try:
        path = workflows.synthesize(setup, Path(args.synthesize), args.overwrite, update)
    finally:
        close()
    _say(f"wrote {path} (exact synthesis)")
    return EXIT_OK


VERBS.append(add_theory)


# ---------------------------------------------------------------------------------------
# render


def _frame_bar(quiet: bool):
    if quiet:
        return None, lambda: None
    from tqdm import tqdm
    bar = tqdm(unit="frame", file=sys.stderr, dynamic_ncols=True, leave=False, disable=None,
               desc="encoding")

    def update(done, total):
        bar.total = total
        bar.update(done - bar.n)

    return update, bar.close


def cmd_render(args) -> int:
    from . import render
    if not args.output and not args.figure:
        raise UsageError("sojourn render: give -o MOVIE.mp4|.gif and/or --figure FIG.png|.pdf|.svg")
    common = {}
    if args.xlim:
        common["xlim"] = render.parse_xlim(args.xlim)
    if args.style:
        common["style"] = args.style
    figure_size = args.figure_size or (args.size if not args.output else None)
    if args.figure:   # checked first: a bad option fails before a long movie is made
        fig_opts = render.FigureOptions(log=args.log, **common, **(
            {"size": render.parse_size(figure_size, "in")} if figure_size else {}), **(
            {"dpi": args.dpi} if args.dpi else {}))
    if args.output:
        movie = render.MovieOptions(fps=args.fps, seconds=args.seconds, **common, **(
            {"size": render.parse_size(args.size, "px")} if args.size else {}), **(
            {"curves": render.parse_curves(args.curves)} if args.curves else {}))
        update, close = _frame_bar(args.quiet)
        try:
            path = render.render_movie(args.file, args.output, movie, update)
        finally:
            close()
        _say(f"wrote {path}")
    if args.figure:
        _say(f"wrote {render.render_figure(args.file, args.figure, fig_opts)}")
    return EXIT_OK


def add_render(sub) -> None:
    p = sub.add_parser("render", help="movies (.mp4, .gif) and figures (.png, .pdf, .svg)")
    p.add_argument("file", help="a run file")
    p.add_argument("-o", "--output", metavar="MOVIE", help="movie: .mp4 (H.264) or .gif")
    p.add_argument("--figure", metavar="FIG", help="space-time figure: .png, .pdf or .svg")
    p.add_argument("--size", help="movie WxH in pixels (default 1920x1080) or inches "
                                  "(7x4.5in); with --figure alone, the figure's size "
                                  "(as --figure-size)")
    p.add_argument("--figure-size", metavar="WxH", help="figure WxH in inches (7x4.5 or "
                                                        "7x4.5in), or in pixels with 'px' "
                                                        "(1920x1080px)")
    p.add_argument("--fps", type=float, default=30.0, help="movie frames per second (default 30)")
    p.add_argument("--seconds", type=float, help="movie length in seconds (default: one frame per "
                                                 "snapshot); states between snapshots are "
                                                 "propagated with the run's own scheme")
    p.add_argument("--style", choices=["talk-dark", "talk-light", "paper", "talk"],
                   help="look (default: talk-dark for movies, paper for figures)")
    p.add_argument("--xlim", metavar="A:B", help="x range, e.g. --xlim=-300:100 (default: where "
                                                 "the probability goes and the potential)")
    p.add_argument("--curves", help="movie curves, comma-separated from density, real, imag, "
                                    "phase, reference, potential (default density,reference,potential)")
    p.add_argument("--log", action="store_true", help="figure: logarithmic colour scale")
    p.add_argument("--dpi", type=float, help="figure resolution for PNG (default 300)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=cmd_render)


def demo_render(run_path, out_folder, args) -> None:
    from . import render
    update, close = _frame_bar(getattr(args, "quiet", False))
    try:   # 720p keeps the demo quick; talks get 1080p by default
        movie = render.render_movie(run_path, Path(out_folder) / "demo.mp4",
                                    render.MovieOptions(size=(1280, 720)), update)
    finally:
        close()
    _say(f"movie      {movie}")
    _say(f"figure     {render.render_figure(run_path, Path(out_folder) / 'demo.png')}")


VERBS.append(add_render)
DEMO_STEPS.append(demo_render)


# bench: this machine's throughput against the FFT limit


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
    _say(f"FFT {backend_name()}, {'single' if args.single else 'double'} precision; the FFT "
         "limit is a bare planned FFT pair plus two multiplies")
    _say(f"{'points':>8} {'threads':>7} {'steps/s':>10} {'limit/s':>10} {'fraction':>8} "
         f"{'unsampled':>9} {'sampled every':>13} {'point-steps/s':>13}")
    for r in results:
        _say(f"{r.points:>8} {r.threads:>7} {r.steps_per_second:>10.4g} "
             f"{r.limit_steps_per_second:>10.4g} {r.fraction:>8.2f} "
             f"{r.propagator_fraction:>9.2f} {r.sample_steps:>13} "
             f"{r.point_steps_per_second:>13.3g}")
    _say("fraction: of the FFT limit, with the run loop's sampling at its default rate "
         "(unsampled: the propagator alone).")
    _say("A run of N points and S steps takes about N·S / (point-steps/s) seconds here "
         "(plus writing snapshots).")
    return EXIT_OK


def add_bench(sub) -> None:
    p = sub.add_parser("bench", help="this machine's steps per second against the FFT limit")
    p.add_argument("--quick", action="store_true", help="four grid sizes, a few seconds")
    p.add_argument("--sizes", type=int, nargs="+", metavar="N", help="grid sizes to measure")
    p.add_argument("--single", action="store_true", help="single precision (complex64)")
    p.add_argument("--threads", type=int, default=None,
                   help="FFT threads (default: 1, or $SOJOURN_FFT_THREADS)")
    p.add_argument("--json", action="store_true")
    p.set_defaults(func=cmd_bench)


VERBS.append(add_bench)


# ---------------------------------------------------------------------------------------
# sweep


def _sweep_bar(total: int, quiet: bool):
    if quiet:
        return None, lambda: None
    from tqdm import tqdm
    bar = tqdm(total=total, unit="point", file=sys.stderr, dynamic_ncols=True, desc="sweep")

    def update(done, _total, counts):
        bar.set_postfix({k: counts[k] for k in ("complete", "skipped", "failed") if k in counts},
                        refresh=False)
        bar.update(done - bar.n)

    return update, bar.close


def cmd_sweep(args) -> int:
    from .sweep import core as sw
    spec = sw.load_sweep(args.sweep)
    if args.workers is not None and args.workers < 1:
        raise UsageError("sojourn sweep: --workers must be at least 1")
    if args.verify:
        _warn("--verify: every point is rerun twice more (2× finer grid at Δt/4, about 8× "
              "its cost; and Δt/2, about 2×) for error bars — this takes about 10× longer")
    for point in spec.points:
        if point.error:
            _warn(f"{point.name} is invalid and will not run: {point.error}")
    update, close = _sweep_bar(len(spec.points), args.quiet)
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
    _say(f"{outcome.count('complete')} complete, {outcome.count('skipped')} already done, "
         f"{outcome.count('failed')} failed of {len(outcome.rows)} points")
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


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    debug = "--debug" in argv
    try:
        args = build_parser().parse_args(argv)
        if not getattr(args, "func", None):
            build_parser().print_help()
            return EXIT_INPUT
        return args.func(args)
    except SojournError as exc:
        if debug:
            raise
        _warn(f"error: {exc}")
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
