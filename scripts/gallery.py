"""Regenerate the gallery in docs/gallery/ from the shipped examples.

Each scenario is run into a temporary folder, its delays measured and saved
(`sojourn delay --save`), and a figure and one movie frame drawn as PNG. The
whole gallery takes a minute or two on a laptop.

    python scripts/gallery.py            # writes docs/gallery/*.png
    python scripts/gallery.py --out DIR  # somewhere else
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import imageio.v3 as iio

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "src"))

from sojourn import render                          # noqa: E402
from sojourn.render.facts import run_facts           # noqa: E402
from sojourn.render.scan import scan_run             # noqa: E402
from sojourn.store import RunFile                    # noqa: E402
from sojourn.theory.tables import plot_theory, theory_table  # noqa: E402
from sojourn.config.scenario import load             # noqa: E402

FIGURE_DPI = 150        # the gallery's figures: small files, still sharp on a screen

# (scenario, what to draw): figures in the paper style, frames at 1920x1080
PICTURES = [
    ("src/sojourn/data/demo.yaml", "figure", {}),
    ("src/sojourn/data/demo.yaml", "frame", {"style": "talk-dark", "at": 0.85}),
    ("configs/barrier.yaml", "frame", {"style": "talk-dark", "at": 0.8,
                                       "density_power": 0.5}),
    ("configs/barrier.yaml", "theory", {}),
    ("configs/double_barrier.yaml", "frame", {"style": "talk-light", "at": 0.6}),
    ("configs/double_barrier.yaml", "figure", {}),
    ("configs/harmonic.yaml", "frame", {"style": "talk-dark", "at": 0.3,
                                        "curves": ("phase", "potential")}),
]


def sojourn(*args: str) -> None:
    """Run one sojourn command in a fresh process (as a user would; its notes
    and warnings are not the gallery's business)."""
    env = {**os.environ, "PYTHONPATH": str(ROOT / "src"), "MPLBACKEND": "Agg"}
    subprocess.run([sys.executable, "-m", "sojourn", *args], check=True, env=env,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


def prepare(scenario: Path, folder: Path) -> Path:
    """The scenario's run file in `folder`, with its delays saved when it scatters."""
    run = folder / f"{scenario.stem}.h5"
    if not run.exists():
        sojourn("run", str(scenario), "-o", str(run), "-q")
        try:
            sojourn("delay", str(run), "--save")
        except subprocess.CalledProcessError:
            pass          # a trapped packet has no delay to measure
    return run


def movie_frame(run: Path, out: Path, style: str, at: float, **options) -> None:
    """One 1920x1080 movie frame at the share `at` of the run, as PNG."""
    with RunFile(run) as rf:
        facts = run_facts(rf)
        frame = render.MovieFrame(facts, render.MovieOptions(style=style, **options),
                                  scan_run(rf, facts))
        index = int(round(at * (len(rf) - 1)))
        image = frame.draw(float(rf.times[index]), rf.psi(index))
        iio.imwrite(out, image[..., :3], optimize=True)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=ROOT / "docs" / "gallery")
    args = parser.parse_args()
    args.out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        for name, kind, options in PICTURES:
            scenario = ROOT / name
            stem = f"{scenario.stem}_{kind}"
            out = args.out / f"{stem}.png"
            if kind == "theory":
                plot_theory(theory_table(load(scenario)), out, dpi=FIGURE_DPI)
            elif kind == "figure":
                render.render_figure(prepare(scenario, Path(tmp)), out,
                                     render.FigureOptions(dpi=FIGURE_DPI))
            else:
                options = dict(options)
                movie_frame(prepare(scenario, Path(tmp)), out, options.pop("style"),
                            options.pop("at"), **options)
            print(f"wrote {out.relative_to(ROOT) if out.is_relative_to(ROOT) else out} "
                  f"({out.stat().st_size // 1024} kB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
