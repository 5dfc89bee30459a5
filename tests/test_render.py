"""Movies and figures (`sojourn render`): files that open, with the frames, sizes
and overlays asked for; streaming within a memory budget; one-line errors."""
from __future__ import annotations

import re
import tracemalloc
from types import SimpleNamespace

import imageio.v2 as iio2
import imageio.v3 as iio
import numpy as np
import pytest
from scipy import integrate

from sojourn import cli
from sojourn import render
from sojourn.model.packets import describe, free_evolution
from sojourn.store import RunFile

# A unit step met at E₀ = V₀/2 in atomic units (ħ = m = 1): our own test settings.
STEP = """\
title: Test packet at a unit step
units: atomic
grid:
  span: [{left}, {right}]
  points: {points}
potential:
  - step: {{at: 0.0, height: 1.0}}
packet:
  center: -40.0
  width: 5.0
  energy: 0.5
evolve:
  duration: {duration}
absorber:
  width: 15.0
record:
  every: {every}
"""


def make_run(folder, name="step", left=-100.0, right=60.0, points=512, duration=90.0,
             every=6.0):
    folder.mkdir(parents=True, exist_ok=True)
    scenario = folder / f"{name}.yaml"
    scenario.write_text(STEP.format(left=left, right=right, points=points, duration=duration,
                                    every=every))
    out = folder / f"{name}.h5"
    assert cli.main(["run", str(scenario), "-o", str(out), "-q"]) == 0
    return out


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    return make_run(tmp_path_factory.mktemp("render"))


def snapshot_count(path) -> int:
    with RunFile(path) as rf:
        return len(rf)


# ---------------------------------------------------------------------------------------
# movies


def test_mp4_opens_with_one_frame_per_snapshot_at_the_requested_size(run, tmp_path):
    movie = tmp_path / "movie.mp4"
    assert cli.main(["render", str(run), "-o", str(movie), "--size", "320x180", "-q"]) == 0
    reader = iio2.get_reader(movie)
    assert reader.count_frames() == snapshot_count(run)
    reader.close()
    first = iio.imread(movie, index=0)
    assert first.shape == (180, 320, 3)
    # not blank: many colours, and the packet's curve (light blue on dark) is present
    assert len(np.unique(first.reshape(-1, 3), axis=0)) > 50
    assert first.std() > 10
    # H.264 in yuv420p at 30 fps: what presentation players expect (common practice, no source)
    meta = iio.immeta(movie, plugin="FFMPEG")
    assert meta["codec"] == "h264"
    assert meta["pix_fmt"].startswith("yuv420p")
    assert meta["fps"] == pytest.approx(30.0)


def test_frames_change_with_time_and_reuse_one_figure(run):
    options = render.MovieOptions(size=(256, 144))
    with RunFile(run) as rf:
        facts = render.run_facts(rf)
        frame = render.MovieFrame(facts, options, render.scan_run(rf, facts))
        children = [len(ax.get_children()) for ax in frame.fig.axes]
        snaps = list(rf.snapshots())
        first = frame.draw(*snaps[0]).copy()
        later = frame.draw(*snaps[len(snaps) // 2]).copy()
        assert [len(ax.get_children()) for ax in frame.fig.axes] == children
    assert first.shape == (144, 256, 4)
    assert np.mean(np.any(first != later, axis=-1)) > 0.001


def test_gif_path_works_with_every_curve(run, tmp_path):
    movie = tmp_path / "movie.gif"
    code = cli.main(["render", str(run), "-o", str(movie), "--size", "200x120", "--fps", "10",
                     "--curves", "phase,real,imag,reference,potential", "--style", "talk-light",
                     "--xlim=-80:20", "-q"])
    assert code == 0
    images = iio.imread(movie, index=None)
    assert images.shape[0] == snapshot_count(run)
    assert images.shape[1:3] == (120, 200)
    assert images[0].std() > 5


def test_a_run_larger_than_the_memory_budget_streams(tmp_path):
    """The render holds one snapshot at a time: its traced peak stays far below
    the bytes of all snapshots together."""
    small = make_run(tmp_path / "warm", points=256, duration=20.0, every=10.0)
    render.render_movie(small, tmp_path / "warm.mp4", render.MovieOptions(size=(128, 72)))
    big = make_run(tmp_path / "big", left=-800.0, right=480.0, points=4096, every=1.0)
    with RunFile(big) as rf:
        total = rf.h5["snapshots/psi"].size * rf.h5["snapshots/psi"].dtype.itemsize
    assert total > 5e6
    tracemalloc.start()
    try:
        render.render_movie(big, tmp_path / "big.mp4", render.MovieOptions(size=(128, 72)))
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < total / 2, (peak, total)
    assert iio2.get_reader(tmp_path / "big.mp4").count_frames() == snapshot_count(big)


# ---------------------------------------------------------------------------------------
# figures


def test_figures_in_each_format_have_the_requested_size(run, tmp_path):
    png, pdf, svg = tmp_path / "f.png", tmp_path / "f.pdf", tmp_path / "f.svg"
    assert cli.main(["render", str(run), "--figure", str(png), "--size", "4x3in", "--dpi",
                     "100"]) == 0
    assert iio.imread(png).shape[:2] == (300, 400)
    assert cli.main(["render", str(run), "--figure", str(png), "--size", "800x500px",
                     "--dpi", "200", "--log"]) == 0
    assert iio.imread(png).shape[:2] == (500, 800)
    movie = tmp_path / "m.gif"   # with a movie too, --size is the movie's, --figure-size the figure's
    assert cli.main(["render", str(run), "-o", str(movie), "--size", "96x64", "--figure", str(pdf),
                     "--figure-size", "4x3in", "-q"]) == 0
    assert iio.imread(movie, index=0).shape[:2] == (64, 96)
    box = re.search(rb"/MediaBox\s*\[\s*0 0 ([\d.]+) ([\d.]+)\s*\]", pdf.read_bytes())
    assert box and (float(box[1]), float(box[2])) == (288.0, 216.0)   # 72 pt per inch
    assert cli.main(["render", str(run), "--figure", str(svg), "--size", "4x3in"]) == 0
    head = svg.read_text()[:2000]
    assert 'width="288pt"' in head and 'height="216pt"' in head


def test_default_png_is_300_dpi(run, tmp_path):
    png = tmp_path / "f.png"
    render.render_figure(run, png, render.FigureOptions(size=(2.0, 1.5)))
    assert iio.imread(png).shape[:2] == (450, 600)


def test_measured_outgoing_trajectory_trails_the_mirror_by_the_step_delay(run):
    """Behind an ideal mirror, the reflected centroid at a step runs late by
    ⟨dφ/dk⟩/v₀ ≈ ħ/√(E(V₀−E)) = 2 at E₀ = V₀/2 (ħ = m = V₀ = 1).
    # source: step phase δ(E) = arctan√(E/(V₀−E)), r = −e^{2iδ}: Griffiths, Introduction to
    # Quantum Mechanics, 2nd ed., Problem 2.34 (problem number from memory); τ_R = 2ħ dδ/dE.
    The packet's bandwidth (σ_k/k₀ = 0.1) shifts the packet average by a few per cent."""
    fig = render.figure(run, render.FigureOptions())
    ax = fig.axes[0]
    lines = {line.get_gid(): line for line in ax.get_lines()}
    x_meas, t_meas = (np.asarray(a, float) for a in lines["outgoing-centroid"].get_data())
    x_ref, t_ref = (np.asarray(a, float) for a in lines["mirror-trajectory"].get_data())
    late = np.isfinite(x_meas) & (t_meas > 75)
    assert late.sum() >= 2
    ref_at = np.interp(t_meas[late], t_ref, x_ref)
    v0 = 1.0
    delay = (x_meas[late] - ref_at) / v0
    assert np.all(delay == pytest.approx(2.0, rel=0.05))


def test_delay_panel_shows_the_step_phase_delay(run, tmp_path):
    """With a saved analysis the second panel's theory curve is τ_R(E) =
    ħ/√(E(V₀−E)) for the unit step (ħ = m = 1).
    # source: Griffiths, Introduction to Quantum Mechanics, 2nd ed., Problem 2.34 (step
    # reflection phase; number from memory), τ_R = ħ d(arg r)/dE."""
    copy = tmp_path / "with_analysis.h5"
    copy.write_bytes(run.read_bytes())
    assert cli.main(["delay", str(copy), "--save"]) == 0
    fig = render.figure(copy, render.FigureOptions())
    assert len([ax for ax in fig.axes if ax.get_xlabel().startswith("packet energy")]) == 1
    curve = next(line for ax in fig.axes for line in ax.get_lines()
                 if line.get_gid() == "theory-reflection")
    energy, tau = (np.asarray(a, float) for a in curve.get_data())
    np.testing.assert_allclose(tau, 1 / np.sqrt(energy * (1 - energy)), rtol=1e-6)
    png = tmp_path / "panel.png"
    assert cli.main(["render", str(copy), "--figure", str(png), "--size", "8x3in", "--dpi",
                     "50"]) == 0
    assert iio.imread(png).shape[:2] == (150, 400)


def test_figure_without_analysis_has_one_panel(run):
    fig = render.figure(run, render.FigureOptions())
    assert not any(ax.get_xlabel().startswith("packet energy") for ax in fig.axes)


# ---------------------------------------------------------------------------------------
# overlays: pure functions


def _info(k0=1.0, width=5.0, center=-40.0):
    spec = SimpleNamespace(wavenumber=k0, energy=None, direction="right", width=width,
                           center=center)
    return describe(spec, 1.0, 1.0)


def test_mirror_reference_is_the_hard_wall_solution():
    """Method of images: ψ_free(x) − ψ_free(2x_r − x) vanishes at the wall, keeps
    unit norm on the incident side, and is the free packet long before and the
    mirrored packet long after the reflection (common practice, no source)."""
    info = _info()
    x = np.linspace(-400, 0, 80001)
    dx = x[1] - x[0]
    for t in (0.0, 40.0, 90.0):
        psi = render.mirror_reference(x, t, info, 0.0, 1.0, 1.0)
        assert abs(psi[-1]) < 1e-12
        assert np.sum(np.abs(psi) ** 2) * dx == pytest.approx(1.0, abs=1e-6)
    # far from the wall the other term is a Gaussian tail, below 1e-6 here
    early = render.mirror_reference(x, 0.0, info, 0.0, 1.0, 1.0)
    np.testing.assert_allclose(early, free_evolution(x, 0.0, info, 1.0, 1.0), atol=1e-6)
    late = render.mirror_reference(x, 200.0, info, 0.0, 1.0, 1.0)
    np.testing.assert_allclose(late, -free_evolution(-x, 200.0, info, 1.0, 1.0), atol=1e-6)
    assert np.all(render.mirror_reference(np.array([1.0, 5.0]), 40.0, info, 0.0, 1, 1) == 0)


def test_reference_trajectory_is_the_centroid_of_the_mirror_packet():
    info = _info()
    x = np.linspace(-600, 0, 120001)
    for t in (10.0, 150.0, 250.0):     # packet clear of the wall (tail overlap < 1e-7)
        density = np.abs(render.mirror_reference(x, t, info, 0.0, 1.0, 1.0)) ** 2
        centroid = np.sum(x * density) / np.sum(density)
        assert centroid == pytest.approx(render.reference_trajectory(t, info, 0.0), abs=1e-6)
    assert render.turning_time(info, 0.0) == pytest.approx(40.0)


def test_energy_spectrum_is_a_probability_density():
    """|φ̃(k)|² dk → dE: the density integrates to one (scipy quad)."""
    info = _info(k0=2.0, width=3.0)
    total, _ = integrate.quad(lambda e: render.energy_spectrum(np.array([e]), info, 1.0,
                                                               1.0)[0], 1e-9, 10.0, limit=200)
    # the k < 0 part of the Gaussian, folded away here, is erfc(k₀/(√2σ_k))/2 ≈ 1e-28
    assert total == pytest.approx(1.0, rel=1e-8)


def test_parse_size():
    assert render.parse_size("1280x720") == (1280, 720)
    assert render.parse_size("7x4.5in", "in") == (7.0, 4.5)
    # a bare WxH is pixels for figures too (it meant inches before the one convention)
    assert render.figure_size(render.parse_size("600x300", "in"), 300) == (2.0, 1.0)
    assert render.figure_size(render.parse_size("600x300px", "in"), 300) == (2.0, 1.0)


# ---------------------------------------------------------------------------------------
# bad options: the one-line error, exit 2


@pytest.mark.parametrize("extra", [
    ["--curves", "density,spin"],
    ["--curves", "potential"],
    ["--size", "0x100"],
    ["--size", "wide"],
    ["--size", "100000x100"],
    ["--size", "321x181"],
    ["--fps", "0"],
    ["--style", "neon"],
    ["--xlim=5:1"],
    ["--xlim=1000:2000"],
])
def test_bad_movie_options_exit_2_with_one_line(run, tmp_path, capsys, extra):
    movie = tmp_path / "m.mp4"
    assert cli.main(["render", str(run), "-o", str(movie), "-q", *extra]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("sojourn: error:") and "\n" not in err
    assert "Traceback" not in err
    assert not movie.exists()


@pytest.mark.parametrize("target", ["file.txt/m.mp4", "m.avi", "f.jpg"])
def test_unwritable_or_unknown_outputs_exit_2(run, tmp_path, capsys, target):
    (tmp_path / "file.txt").write_text("not a folder")
    flag = "--figure" if target.endswith(".jpg") else "-o"
    assert cli.main(["render", str(run), flag, str(tmp_path / target), "-q"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("sojourn: error:") and "\n" not in err


def test_a_missing_output_folder_is_created_and_said(run, tmp_path, capsys):
    # the rule of every command (run, theory --plot, render): create it, saying so
    figure = tmp_path / "missing" / "f.png"
    assert cli.main(["render", str(run), "--figure", str(figure), "-q"]) == 0
    assert figure.read_bytes()[:4] == b"\x89PNG"
    assert f"created the folder {figure.parent}" in capsys.readouterr().err


def test_figure_size_in_inches_that_cannot_be_exits_2(run, tmp_path, capsys):
    # a bare 1920x1080 is pixels now (valid); inches too small to hold a figure are refused
    assert cli.main(["render", str(run), "--figure", str(tmp_path / "f.png"), "--size",
                     "0.5x0.4in"]) == 2
    assert "inches" in capsys.readouterr().err
    assert not (tmp_path / "f.png").exists()


def test_no_output_and_missing_run_exit_2(run, tmp_path, capsys):
    assert cli.main(["render", str(run)]) == 2
    assert cli.main(["render", str(tmp_path / "none.h5"), "-o", str(tmp_path / "m.mp4")]) == 2
    lines = capsys.readouterr().err.strip().splitlines()
    assert len(lines) == 2 and all(line.startswith("sojourn: error:") for line in lines)


TRAP = """\
title: Test packet in a harmonic trap
units: atomic
grid:
  span: [-100.0, 100.0]
  points: 256
potential:
  - harmonic: {center: 0.0, omega: 0.02}
packet:
  center: 30.0
  width: 5.0
  wavenumber: 0.0
evolve:
  duration: 314.159
record:
  every: 15.70795
"""


def test_trapped_packet_shows_its_centroid_and_no_mirror(tmp_path):
    """A displaced ground state (σ² = ħ/(2mω) = 25) in V = ½mω²x² keeps its shape
    and its centre follows x₀ cos ωt.
    # source: Cohen-Tannoudji, Diu, Laloë, Quantum Mechanics, Complement G_V
    # (coherent states of the harmonic oscillator; complement label from memory)."""
    scenario = tmp_path / "trap.yaml"
    scenario.write_text(TRAP)
    run = tmp_path / "trap.h5"
    assert cli.main(["run", str(scenario), "-o", str(run), "-q"]) == 0
    fig = render.figure(run, render.FigureOptions())
    lines = {line.get_gid(): line for line in fig.axes[0].get_lines()}
    assert "mirror-trajectory" not in lines
    x, t = (np.asarray(a, float) for a in lines["centroid"].get_data())
    np.testing.assert_allclose(x, 30.0 * np.cos(0.02 * t), atol=1e-3)
    movie = tmp_path / "trap.mp4"
    assert cli.main(["render", str(run), "-o", str(movie), "--size", "128x72", "-q"]) == 0
    assert iio2.get_reader(movie).count_frames() == snapshot_count(run)
