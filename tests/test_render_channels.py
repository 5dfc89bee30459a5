"""The transmitted channel's reference and ruler, the untrusted channel marked,
the potential at true width, the power-law density, one size convention, and
the theory and sweep figures — measured on the images."""
from __future__ import annotations

import dataclasses
import math

import imageio.v3 as iio
import numpy as np
import pytest

from sojourn import cli, render
from sojourn.config.scenario import loads
from sojourn.render.channels import thin_span, transmitted_packet
from sojourn.store import RunFile
from sojourn.sweep.table import key_label
from sojourn.theory.averages import packet_prediction
from sojourn.theory.tables import plot_theory, theory_table

from test_render_measure import assert_ruler_drawn, make, near_colour, pixel_extent

# a rectangular barrier met below its top: T ≈ 0.07 at E₀ = 0.5, V₀ = 1, a = 2 (ħ = m = 1),
# so both channels are well populated
WIDE = "[{barrier: {start: 0.0, end: 2.0, height: 1.0}}]"
# two 0.5-wide barriers in a 700-wide box: far below a pixel in the main panel at 1080p
THIN = "[{barrier: {start: 0.0, end: 0.5, height: 1.0}}, {barrier: {start: 2.5, end: 3.0, " \
       "height: 1.0}}]"


@pytest.fixture(scope="module")
def barrier_run(tmp_path_factory):
    return make(tmp_path_factory.mktemp("barrier"), "barrier", potential=WIDE, left=-150.0,
                right=150.0, points=2048, duration=110.0, every=2.0,
                title="Test packet at a barrier")


def frame_of(path, index=-1, **kw):
    with RunFile(path) as rf:
        facts = render.run_facts(rf)
        changes = kw.pop("facts", {})
        facts = dataclasses.replace(facts, **changes)
        frame = render.MovieFrame(facts, render.MovieOptions(**kw), render.scan_run(rf, facts))
        t, psi = list(rf.snapshots())[index]
        return frame, frame.draw(t, psi).copy(), facts, (t, psi)


def test_transmitted_ruler_is_the_packet_averaged_delay_and_spans_40_pixels(barrier_run):
    """The transmitted centroid delay from the run's own far-side centroid
    against the filtered free packet equals the packet-averaged centroid
    prediction of stationary theory (an independent module: theory.averages).
    # source: packet-averaged phase delay, PHYSICS §5 of this project; the rectangular
    # barrier's t(E) in closed form is Griffiths, Introduction to Quantum Mechanics,
    # 2nd ed., Problem 2.33 (number from memory)."""
    frame, image, facts, _ = frame_of(barrier_run)
    ruler = frame.ruler_t
    assert ruler is not None and ruler.source == "run centroids"
    pred = packet_prediction(facts.potential, facts.packet, hbar=facts.hbar, mass=facts.mass,
                             reference=facts.reference)
    assert ruler.delay == pytest.approx(pred.transmission.centroid_delay, rel=0.03)
    panel = next(p for p in frame.panels if getattr(p, "channel", "") == "transmission")
    assert_ruler_drawn(panel.ruler_line, image, frame.look.measurement)


def test_transmitted_reference_packet_carries_T_and_moves_as_its_centroid(barrier_run):
    """The filtered free packet holds the packet-averaged T (Parseval) and its
    centroid is where the stationary-phase trajectory says."""
    with RunFile(barrier_run) as rf:
        facts = render.run_facts(rf)
    pred = packet_prediction(facts.potential, facts.packet, hbar=facts.hbar, mass=facts.mass,
                             reference=facts.reference)
    t = 100.0
    x = np.linspace(0.0, 400.0, 8001)
    density = np.abs(transmitted_packet(x, t, facts)) ** 2
    dx = x[1] - x[0]
    assert density.sum() * dx == pytest.approx(pred.transmission.probability, rel=2e-3)
    centre = float(np.dot(x, density) / density.sum())
    assert centre == pytest.approx(float(render.channels.transmitted_reference(t, facts)),
                                   abs=0.02 * facts.packet.width)


def test_untrusted_channel_is_hatched_and_dashed(barrier_run):
    """A channel the analysis warned about: its fill is hollow (hatched), so
    the background shows through under its curve; a trusted one is filled."""
    def background_share(warnings):
        frame, image, facts, (t, psi) = frame_of(
            barrier_run, facts={"analysis": {"warnings": warnings}})
        ax = frame.ax
        x = frame.xs
        density = np.abs(psi[frame.index]) ** 2 * frame.gain
        peak = int(np.argmax(np.where(frame.far, density, 0)))
        (px, py), (_, p0) = ax.transData.transform([(x[peak], density[peak] * 0.5),
                                                     (x[peak], 0.0)])
        h = image.shape[0]
        box = image[h - int(py): h - int(p0) - 3, int(px) - 15: int(px) + 15]
        return near_colour(box, frame.look.background, tol=3).mean(), frame
    trusted, _ = background_share([])
    doubted, frame = background_share(["the transmitted packet is still leaving"])
    assert trusted < 0.05
    assert doubted > 0.3
    assert "untrusted" in frame.density_lines[1].get_label()


def test_thin_barriers_get_a_true_width_panel(tmp_path):
    run = make(tmp_path, "thin", potential=THIN, left=-350.0, right=350.0, points=8192,
               duration=80.0, every=8.0, title="Test packet at two thin barriers")
    frame, _, facts, _ = frame_of(run)
    lo, hi = frame.ax.get_xlim()
    main = frame.ax.transData.transform([(0.0, 0), (0.5, 0)])
    assert main[1, 0] - main[0, 0] < 5         # a spike in the main panel …
    panel = next(p for p in frame.panels if type(p).__name__ == "TrueWidth")
    shown = panel.ax.transData.transform([(0.0, 0), (0.5, 0)])
    assert shown[1, 0] - shown[0, 0] >= 15     # … drawn at true width beside it
    assert shown[1, 0] - shown[0, 0] >= 4 * (main[1, 0] - main[0, 0])
    assert thin_span(facts.x, facts.V, (lo, hi)) is not None
    # a step (or a wide barrier) needs none
    assert thin_span(facts.x, np.where(facts.x > 0, 1.0, 0.0), (lo, hi)) is None


def test_density_power_lifts_a_weak_wave_by_the_power_law(barrier_run):
    """With --density-power p a part at share s of the top is drawn at s^p of
    the axis height (the mapping y = top·(ρ/top)^p)."""
    heights = {}
    for p in (1.0, 0.5):
        frame, image, _, (t, psi) = frame_of(barrier_run, index=-1, density_power=p,
                                             curves=("density",))
        ax = frame.ax
        near = ~frame.far
        density = np.abs(psi[frame.index]) ** 2
        peak = int(np.argmax(np.where(near, density, 0)))
        column = int(round(ax.transData.transform((frame.xs[peak], 0))[0]))
        lit = np.nonzero(near_colour(image[:, column - 1: column + 2], frame.look.reflected,
                                     tol=30).any(axis=1))[0]
        zero = image.shape[0] - ax.transData.transform((0, 0))[1]
        top = image.shape[0] - ax.transData.transform((0, frame.top))[1]
        heights[p] = (zero - lit.min()) / (zero - top)
        share = density[peak] / frame.top
    assert heights[1.0] == pytest.approx(share, abs=0.02)
    assert heights[0.5] == pytest.approx(math.sqrt(share), abs=0.02)


def test_bad_density_power_exits_2(barrier_run, tmp_path, capsys):
    movie = tmp_path / "m.mp4"
    assert cli.main(["render", str(barrier_run), "-o", str(movie), "--density-power", "3",
                     "-q"]) == 2
    assert "--density-power" in capsys.readouterr().err and not movie.exists()


@pytest.mark.parametrize("size,expected", [("1920x1080", (1080, 1920)),
                                           ("7x4.5in", (1350, 2100)),
                                           ("800x600px", (600, 800))])
def test_one_size_convention_for_figures(barrier_run, tmp_path, size, expected):
    png = tmp_path / "f.png"
    assert cli.main(["render", str(barrier_run), "--figure", str(png), "--size", size,
                     "-q"]) == 0     # default dpi: 300 for print
    assert iio.imread(png).shape[:2] == expected


def test_movie_sizes_in_both_conventions(barrier_run, tmp_path):
    movie = tmp_path / "m.gif"
    assert cli.main(["render", str(barrier_run), "-o", str(movie), "--size", "1.5x1in",
                     "--seconds", "0.2", "--fps", "5", "-q"]) == 0
    assert iio.imread(movie, index=0).shape[:2] == (240, 360)     # 240 px per inch


@pytest.mark.parametrize("size", [(640, 360), (1920, 1080), (1080, 1350)])
def test_no_text_outside_the_canvas_with_every_panel(barrier_run, size):
    frame, _, _, _ = frame_of(barrier_run, size=size, density_power=0.5)
    renderer = frame.canvas.get_renderer()
    for ax in frame.fig.axes:
        box = ax.get_tightbbox(renderer)
        assert box.x0 >= -1 and box.y0 >= -1
        assert box.x1 <= size[0] + 1 and box.y1 <= size[1] + 1


STEP = """\
title: Unit step
units: atomic
grid: {span: [-300.0, 100.0], points: 2048}
potential: [{step: {at: 0.0, height: 1.0}}]
packet: {center: -100.0, width: 10.0, energy: 0.5}
evolve: {duration: 100.0}
"""
BARRIER = STEP.replace("{step: {at: 0.0, height: 1.0}}", "{barrier: {start: 0.0, end: 2.0, "
                                                          "height: 1.0}}")


def test_theory_plot_at_300_dpi_with_both_delays_and_no_zero_dwell(tmp_path):
    png = tmp_path / "t.png"
    fig = plot_theory(theory_table(loads(BARRIER)), png)
    assert iio.imread(png).shape[:2] == (1800, 2100)          # 7x6 in at 300 dpi
    gids = {line.get_gid() for ax in fig.axes for line in ax.get_lines()}
    assert {"delay_reflection", "delay_transmission", "E0"} <= gids
    # τ_R = τ_T for a symmetric barrier (common practice, no source): both must show
    image = iio.imread(png)
    lower = image[image.shape[0] // 2:]
    for colour in (render.LOOKS["paper"].transmitted, render.LOOKS["paper"].reflected):
        assert near_colour(lower, colour, tol=60).sum() > 500
    # a step with no region to dwell in: its τ_D column is zeros or undefined, not drawn
    table = theory_table(loads(STEP))
    for empty in (0.0, None):
        table["dwell"] = [empty] * len(table["energy"])
        step = plot_theory(table, tmp_path / "s.png")
        step_gids = {line.get_gid() for ax in step.axes for line in ax.get_lines()}
        assert "dwell" not in step_gids and "delay_reflection" in step_gids
        assert "delay_transmission" not in step_gids     # closed below the step


def test_sweep_keys_in_words_with_units():
    units = {"energy": "eV", "length": "nm", "time": "fs"}
    assert key_label("packet.energy", units) == "packet energy (eV)"
    assert key_label("potential.0.barrier.height", units) == "barrier height (eV)"
    assert key_label("packet.width", units) == "packet width (nm)"
    assert key_label("grid.points", units) == "grid points"
