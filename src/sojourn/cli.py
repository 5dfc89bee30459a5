"""The `sojourn` command: argument parsing and printing only; the work is done
by the library. Exit codes: 0 success, 2 bad input, 1 anything else,
130 interrupted. Bad input never shows a traceback (`--debug` does)."""
from __future__ import annotations

import argparse
import json
import signal
import sys
from importlib import resources
from pathlib import Path

from .scenario import SojournError

EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130


class UsageError(SojournError):
    """Bad command-line arguments."""


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
    from .scenario import load
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
    from .run import execute
    scenario, setup = _load_and_build(path)
    _report_findings(setup, quiet, force)
    update, close = _progress_bar(setup.steps, quiet)
    previous = signal.signal(signal.SIGTERM, _sigterm)
    try:
        result = execute(setup, Path(output) if output else None, overwrite, resume, update)
    finally:
        close()
        signal.signal(signal.SIGTERM, previous)
    return result


def _sigterm(signum, frame):
    raise KeyboardInterrupt


def cmd_run(args) -> int:
    path = run_scenario(args.scenario, args.output, args.overwrite, args.resume, args.force,
                        args.quiet)
    _say(f"wrote {path}")
    return EXIT_OK


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
    from .runfile import RunFile
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
