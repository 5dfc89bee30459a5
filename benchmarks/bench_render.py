"""Rendering rate of `sojourn render` (frames per second), not a test.

Runs the built-in demo scenario into a temporary folder (or uses a run file
given as the first argument), then measures at 1920×1080 (or --size):
- draw: updating the one figure per snapshot (blitting) and reading the canvas
  buffer, with no encoder;
- mp4: the whole movie, drawing and H.264 encoding, per x264 speed preset;
- gif: the whole movie as a GIF (one palette per frame) at half the size.
Each rate counts all frames over the whole call, including the figure's setup
and the pass that fixes the axes.

    python benchmarks/bench_render.py [RUN.h5] [--size 1920x1080] [--presets veryfast,fast]
"""
from __future__ import annotations

import argparse
import os
import tempfile
import time
from importlib import resources
from pathlib import Path

from sojourn import render
from sojourn.build import build
from sojourn.workflows import run as execute
from sojourn.store import RunFile
from sojourn.config.scenario import loads


def demo_run(folder: Path) -> Path:
    text = resources.files("sojourn").joinpath("data/demo.yaml").read_text()
    scenario = loads(text, str(folder / "demo.yaml"), folder)
    return execute(build(scenario), folder / "demo.h5", overwrite=True)


def draw_rate(path: Path, options: render.MovieOptions) -> tuple[float, float, int]:
    """(frames/s of the draw loop alone, seconds of setup, frames)."""
    start = time.perf_counter()
    with RunFile(path) as run:
        facts = render.run_facts(run)
        frame = render.MovieFrame(facts, options, render.scan_run(run, facts))
        setup = time.perf_counter() - start
        count = 0
        start = time.perf_counter()
        for t, psi in run.snapshots():
            frame.draw(t, psi)
            count += 1
    return count / (time.perf_counter() - start), setup, count


def movie_rate(path: Path, output: Path, options: render.MovieOptions, frames: int) -> float:
    start = time.perf_counter()
    render.render_movie(path, output, options)
    return frames / (time.perf_counter() - start)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("run", nargs="?", help="a run file (default: a fresh demo run)")
    parser.add_argument("--size", default="1920x1080")
    parser.add_argument("--presets", default="veryfast,fast,superfast")
    args = parser.parse_args()
    size = render.parse_size(args.size)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        path = Path(args.run) if args.run else demo_run(folder)
        options = render.MovieOptions(size=size)
        rate, setup, frames = draw_rate(path, options)
        print(f"run file   {path if args.run else 'demo scenario'}: {frames} snapshots; "
              f"{os.cpu_count()} cores")
        print(f"draw       {size[0]}x{size[1]}: {rate:6.1f} frames/s (setup {setup:.2f} s)")
        for preset in args.presets.split(","):
            out = folder / f"bench_{preset}.mp4"
            fps = movie_rate(path, out, render.MovieOptions(size=size, preset=preset), frames)
            print(f"mp4        {size[0]}x{size[1]}, x264 {preset:<9}: {fps:6.1f} frames/s, "
                  f"{out.stat().st_size / 1e6:.2f} MB")
        half = (size[0] // 2 // 2 * 2, size[1] // 2 // 2 * 2)
        out = folder / "bench.gif"
        fps = movie_rate(path, out, render.MovieOptions(size=half), frames)
        print(f"gif        {half[0]}x{half[1]}: {fps:6.1f} frames/s, "
              f"{out.stat().st_size / 1e6:.2f} MB")


if __name__ == "__main__":
    main()
