"""The command line's shared parts: the parser, messages, the progress bar, the
rule for output files and the stop signal. No stage is imported here, so
`sojourn --help` stays fast; the commands themselves are in cli.py."""
from __future__ import annotations

import argparse
import contextlib
import os
import re
import signal
import sys
from importlib import resources
from pathlib import Path

from .errors import SojournError, UsageError

INPUTS = ("scenario", "file", "sweep")          # positional arguments that name an input file
OUTPUTS = {"run": ("output",), "theory": ("plot", "synthesize"), "render": ("output", "figure")}
EXAMPLES = {
    "run": "sojourn run configs/step.yaml -o outputs/step.h5",
    "check": "sojourn check configs/barrier.yaml",
    "inspect": "sojourn inspect outputs/step.h5 --json",
    "demo": "sojourn demo -o outputs/demo",
    "delay": "sojourn delay outputs/step.h5 --save",
    "theory": "sojourn theory configs/step.yaml --energies 0.1:0.9:41 --plot theory.png",
    "render": "sojourn render outputs/step.h5 -o step.mp4 --xlim -300:100",
    "bench": "sojourn bench --quick",
    "sweep": "sojourn sweep energies.yaml --workers 2",
}


class Parser(argparse.ArgumentParser):
    """One-line errors (exit 2) and values such as -100:20 taken as values, not options."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("formatter_class", argparse.RawDescriptionHelpFormatter)
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = re.compile(r"^-\.?\d")

    def error(self, message):
        verb = self.prog.removeprefix("sojourn").strip()
        raise UsageError(f"{verb + ': ' if verb else ''}{message} (see --help)")


class Bar:
    """A progress bar on stderr counting `unit`s, made at the first report so that
    a resumed job's rate counts only the work done now; with `step_time`, it also
    shows the simulated time reached (in `time_unit`)."""

    def __init__(self, unit: str, desc: str, step_time: float = 0.0, time_unit: str = "",
                 stream=None, disable=None):
        self.unit, self.desc, self.step_time, self.time_unit = unit, desc, step_time, time_unit
        self.stream, self.disable = stream, disable     # disable None: off unless a terminal
        self.bar = None

    def __call__(self, done: int, total: int, counts: dict | None = None) -> None:
        if self.bar is None:
            from tqdm import tqdm
            self.bar = tqdm(total=total, initial=done, unit=self.unit, desc=self.desc,
                            file=self.stream or sys.stderr, dynamic_ncols=True, leave=False,
                            disable=self.disable)
        self.bar.total = total
        postfix = {}
        if self.step_time:
            postfix["t"] = f"{done * self.step_time:.4g}/{total * self.step_time:.4g} " \
                           f"{self.time_unit}"
        postfix.update({k: counts[k] for k in ("complete", "skipped", "failed")
                        if counts and k in counts})
        if postfix:
            self.bar.set_postfix(postfix, refresh=False)
        self.bar.update(done - self.bar.n)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def progress_bar(quiet: bool, unit: str, desc: str, step_time: float = 0.0,
                 time_unit: str = ""):
    """(update, close) for a long job; (None, no-op) when quiet."""
    if quiet:
        return None, lambda: None
    bar = Bar(unit, desc, step_time, time_unit)
    return bar, bar.close


def frame_bar(quiet: bool):
    """The movie encoder's bar: frames."""
    return progress_bar(quiet, "frame", "encoding frames")


def step_bar(setup, quiet: bool, desc: str):
    """A run's bar: time steps, and the simulated time in the run's units."""
    return progress_bar(quiet, "step", desc, setup.dt, setup.scenario.unit_system.time)


def ensure_folder(folder: Path) -> None:
    """Create a missing output folder, saying so (the rule for every command)."""
    folder = Path(folder)
    if folder.is_dir() or str(folder) in ("", "."):
        return
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UsageError(f"cannot create the folder {folder} ({exc.strerror or exc})") from None
    warn(f"created the folder {folder}")


def refuse_inputs(target: Path, inputs, what: str) -> None:
    """Refuse an output path that is one of the inputs (it would replace it)."""
    if Path(target).resolve() in {Path(p).resolve() for p in inputs if p}:
        raise UsageError(f"{what} {target} is one of the command's inputs and would be "
                         "replaced; choose another name")


def prepare_outputs(args) -> None:
    """Every command's output files: never one of its inputs; a missing folder is created."""
    inputs = [getattr(args, name) for name in INPUTS if isinstance(getattr(args, name, None), str)]
    for dest in OUTPUTS.get(args.verb, ()):
        value = getattr(args, dest, None)
        if value:
            refuse_inputs(Path(value), inputs, f"--{dest}")
            ensure_folder(Path(value).parent)


def report_findings(setup, quiet=False, force=False, stream=None) -> None:
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
        raise SojournError(errors[0].located(source) + (
            " (--force overrides this)" if errors[0].forceable else ""))
    for f in setup.errors():
        print(f"sojourn: warning (forced): {f}", file=stream)


def scenario_inputs(scenario) -> list:
    """The files a scenario reads: itself and its terms' files (a table's CSV)."""
    files = [getattr(term, "file", None) for term in scenario.terms]
    return [scenario.source] + [f for f in files if isinstance(f, str)]


STOP = {"requested": False}


def sigterm(signum, frame):
    """The first signal asks the run to stop: the loop sees it within a fraction
    of a second and checkpoints the current state (raising here, at an arbitrary
    point, could land in a finalizer and be lost or print a traceback); a second
    one stops at once."""
    if STOP["requested"]:
        raise KeyboardInterrupt
    STOP["requested"] = True


@contextlib.contextmanager
def stop_on_signals():
    """While a run goes: SIGTERM and Ctrl-C ask it to stop (see `sigterm`)."""
    STOP["requested"] = False
    previous = {sig: signal.signal(sig, sigterm) for sig in (signal.SIGTERM, signal.SIGINT)}
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)


def error_text(exc: BaseException) -> str:
    """An error message without a 'sojourn' prefix of its own (main adds one)."""
    text = str(exc)
    for prefix in ("sojourn: ", "sojourn "):
        if text.startswith(prefix):
            return text[len(prefix):]
    return text


def say(*parts, file=None) -> None:
    print(*parts, file=file or sys.stdout, flush=True)


def warn(message: str) -> None:
    print(f"sojourn: {message}", file=sys.stderr, flush=True)


DEMO_FILES = ("demo.yaml", "demo.h5", "demo.mp4", "demo.png")


def demo_scenario_path(folder: Path, overwrite: bool = False) -> Path:
    """Copy the built-in demo scenario into `folder` and return its path; an
    earlier demo there is replaced only with `overwrite`."""
    earlier = [name for name in DEMO_FILES if (folder / name).exists() or (folder / name).is_symlink()]
    if earlier and not overwrite:
        raise UsageError(f"demo: {folder} already holds an earlier demo ({', '.join(earlier)}); "
                         "give --overwrite to replace it, or -o another folder")
    text = resources.files("sojourn").joinpath("data/demo.yaml").read_text()
    ensure_folder(folder)
    target = folder / "demo.yaml"
    target.write_text(text)
    return target


def flag_forced(run) -> None:
    """Every command that reads a run says so when the run was forced past its guards."""
    from .store import RunFile
    if isinstance(run, (str, os.PathLike)):
        with RunFile(run) as rf:
            forced = str(rf.attrs.get("forced") or "")
    else:
        forced = str(run.attrs.get("forced") or "")
    if forced:
        warn(f"warning: this run was forced past: {forced}")
