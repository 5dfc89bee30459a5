"""The pictures show the measurement: the delay ruler's length in pixels, a
small channel visible, the x-range that follows the probability, the
potential's zero on the density's zero, `--seconds` movies whose in-between
frames are exact propagations, and nothing drawn outside the canvas."""
from __future__ import annotations

import imageio.v2 as iio2
import imageio.v3 as iio
import numpy as np
import pytest
from matplotlib.colors import to_rgb

from sojourn import cli, render
from sojourn.render.frames import frame_times, propagated_states
from sojourn.model.packets import free_evolution
from sojourn.store import RunFile

SCENARIO = """\
title: {title}
units: atomic
grid:
  span: [{left}, {right}]
  points: {points}
potential: {potential}
packet:
  center: {center}
  direction: {direction}
  width: 5.0
  energy: 0.5
evolve:
  duration: {duration}
absorber:
  width: 15.0
record:
  every: {every}
"""
STEP = "[{step: {at: 0.0, height: 1.0}}]"
# T ≈ 1e-3 at E = V₀/2: T = [1 + V₀² sinh²(κa)/(4E(V₀ − E))]⁻¹ with κ = 1, a = 4.15
# (rectangular barrier; Griffiths, Introduction to Quantum Mechanics, 2nd ed., Problem 2.33,
# problem number from memory)
BARRIER = "[{barrier: {start: 0.0, end: 4.15, height: 1.0}}]"


def make(folder, name, potential=STEP, left=-100.0, right=60.0, points=512, duration=90.0,
         every=6.0, title="Test packet at a unit step", center=-40.0, direction="right"):
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"{name}.yaml"
    path.write_text(SCENARIO.format(title=title, left=left, right=right, points=points,
                                    potential=potential, duration=duration, every=every,
                                    center=center, direction=direction))
    out = folder / f"{name}.h5"
    assert cli.main(["run", str(path), "-o", str(out), "-q"]) == 0
    return out


@pytest.fixture(scope="module")
def step_run(tmp_path_factory):
    return make(tmp_path_factory.mktemp("step"), "step")


def movie_frame(path, index=-1, size=(1920, 1080), **kw):
    with RunFile(path) as rf:
        facts = render.run_facts(rf)
        frame = render.MovieFrame(facts, render.MovieOptions(size=size, **kw),
                                  render.scan_run(rf, facts))
        image = frame.draw(*list(rf.snapshots())[index]).copy()
    return frame, image


def pixel_extent(line) -> np.ndarray:
    """A line's end points in display pixels."""
    return line.axes.transData.transform(np.column_stack(line.get_data()))


def assert_ruler_drawn(line, image, colour) -> None:
    """The ruler spans ≥ 40 px and is really drawn: a run of its colour that
    long on its row of the rendered frame."""
    ends = pixel_extent(line)
    assert abs(ends[1, 0] - ends[0, 0]) >= 40
    row = image.shape[0] - int(round(ends[0, 1]))
    lit = near_colour(image[row - 1: row + 2], colour).any(axis=0)
    lo, hi = sorted(int(round(v)) for v in ends[:, 0])
    assert lit[lo + 2: hi - 2].mean() > 0.9


def near_colour(image, colour, tol=40) -> np.ndarray:
    rgb = np.array(to_rgb(colour)) * 255
    return np.all(np.abs(image[..., :3].astype(float) - rgb) <= tol, axis=-1)


# ---------------------------------------------------------------------------------------
# the delay ruler


def test_movie_ruler_spans_at_least_40_pixels_and_measures_the_step_delay(step_run):
    """At a unit step met at E₀ = V₀/2 the reflected packet is late by
    τ ≈ ħ/√(E(V₀−E)) = 2 (ħ = m = V₀ = 1), to a few per cent over the band.
    # source: step phase δ = arctan√(E/(V₀−E)), τ_R = 2ħ dδ/dE: Griffiths, Introduction to
    # Quantum Mechanics, 2nd ed., Problem 2.34 (number from memory)."""
    frame, image = movie_frame(step_run)
    assert frame.ruler.source == "run centroids"
    assert frame.ruler.delay == pytest.approx(2.0, rel=0.05)
    assert_ruler_drawn(frame.ruler_line, image, frame.look.measurement)


def test_figure_ruler_at_1080p_is_the_delay_and_spans_40_pixels(tmp_path):
    """A box long enough for the measurement's centroid method: the ruler is the
    saved centroid delay."""
    copy = make(tmp_path, "long", left=-300.0, points=1024, duration=160.0)
    assert cli.main(["delay", str(copy), "--save"]) == 0
    fig = render.figure(copy, render.FigureOptions(size=(-1920, -1080), dpi=150))
    fig.canvas.draw()
    ruler = next(line for ax in fig.axes for line in ax.get_lines()
                 if line.get_gid() == "delay-ruler")
    with RunFile(copy) as rf:
        saved = rf.analysis()["reflection"]["measured"]["centroid"]["delay"]
    _, t = ruler.get_data()
    assert t[1] - t[0] == pytest.approx(saved, rel=1e-12)
    ends = pixel_extent(ruler)
    assert abs(ends[1, 1] - ends[0, 1]) >= 40
    assert fig.canvas.get_width_height() == (1920, 1080)


def test_ruler_has_the_measurement_sign_for_either_direction(tmp_path):
    """A symmetric barrier delays a reflected packet equally from either side
    (r is the same from both sides, each referenced at its own edge: parity,
    common practice, no source): the ruler's τ agrees for a packet from the left
    and its mirror image from the right, and both are positive (late)."""
    centred = "[{barrier: {start: -2.075, end: 2.075, height: 1.0}}]"   # x → −x maps the
    kw = dict(potential=centred, left=-120.0, right=120.0, points=1024, duration=100.0,
              every=5.0)                                          # grid onto itself
    delays = []
    for name, center, direction in (("from_left", -40.0, "right"),
                                    ("from_right", 40.0, "left")):
        run = make(tmp_path / name, name, center=center, direction=direction, **kw)
        with RunFile(run) as rf:
            facts = render.run_facts(rf)
            delays.append(render.reflection_ruler(render.scan_run(rf, facts), facts).delay)
    assert delays[0] > 0 and delays[1] > 0
    assert delays[1] == pytest.approx(delays[0], rel=1e-6)


# ---------------------------------------------------------------------------------------
# every channel visible


def test_a_one_per_mille_transmitted_channel_is_visible(tmp_path):
    run = make(tmp_path, "barrier", BARRIER, left=-120.0, right=120.0, points=1024,
               duration=100.0, every=5.0, title="Test packet at a thick barrier")
    with RunFile(run) as rf:
        obs = rf.observables()
        transmitted = obs["P_right"][-1] + obs["absorbed_right"][-1]
    assert 3e-4 < transmitted < 3e-3
    frame, image = movie_frame(run, size=(960, 540), curves=("density", "potential"))
    assert frame.gain >= 100
    ax = frame.ax
    (x0, y0), (x1, y1) = ax.transData.transform([(8.0, 0.0), (ax.get_xlim()[1], frame.top)])
    h = image.shape[0]
    box = image[h - int(y1): h - int(y0) - 3, int(x0): int(x1)]
    lit = np.nonzero(near_colour(box, frame.look.transmitted).any(axis=1))[0]
    assert len(lit), "no pixel of the transmitted colour beyond the barrier"
    height = (box.shape[0] - lit.min()) / box.shape[0]
    assert height > 0.1          # its peak stands at least a tenth of the axes high


# ---------------------------------------------------------------------------------------
# framing


def test_default_range_follows_the_probability_and_zero_is_shared(step_run):
    frame, _ = movie_frame(step_run, size=(640, 360))
    lo, hi = frame.ax.get_xlim()
    with RunFile(step_run) as rf:
        facts = render.run_facts(rf)
    assert facts.inner[0] <= lo and hi <= facts.inner[1]
    assert lo <= -40 - 2 * 5 and hi >= 0.0        # the packet's start and the step
    assert hi < facts.inner[1] - 10               # not the whole box
    energy_axis = [a for a in frame.fig.axes if a is not frame.ax and a.get_ylabel()][0]
    y_density = frame.ax.transData.transform((0.0, 0.0))[1]
    y_energy = energy_axis.transData.transform((0.0, 0.0))[1]
    assert y_density == pytest.approx(y_energy, abs=1e-6)


# ---------------------------------------------------------------------------------------
# --seconds


def test_seconds_gives_the_length_and_size_asked_for(step_run, tmp_path):
    movie = tmp_path / "m.mp4"
    assert cli.main(["render", str(step_run), "-o", str(movie), "--seconds", "3", "--fps",
                     "12", "--size", "320x180", "-q"]) == 0
    reader = iio2.get_reader(movie)
    assert reader.count_frames() == 36          # more frames than the 16 snapshots
    reader.close()
    meta = iio.immeta(movie, plugin="FFMPEG")
    assert meta["duration"] == pytest.approx(3.0, abs=0.05)
    assert iio.imread(movie, index=0).shape == (180, 320, 3)


def test_in_between_frames_are_the_run_at_those_steps(tmp_path):
    """A state propagated from a stored snapshot equals the same run recorded at
    every step (a direct propagation by the time loop)."""
    sparse = make(tmp_path / "a", "sparse", points=256, duration=30.0, every=10.0)
    dense = make(tmp_path / "b", "dense", points=256, duration=30.0, every=0.5)
    with RunFile(dense) as rf:
        direct = {round(t, 9): psi.copy() for t, psi in rf.snapshots()}
        dt = float(rf.attrs["dt"])
    with RunFile(sparse) as rf:
        facts = render.run_facts(rf)
        wanted = frame_times(facts.times, facts.dt, 2.0, 30.0)
        assert len(wanted) == 60 > len(rf)
        checked = 0
        for t, psi in propagated_states(rf, facts, wanted):
            key = round(t, 9)
            if key in direct:
                np.testing.assert_allclose(psi, direct[key], atol=1e-10)
                checked += 1
        assert checked >= 10
    assert dt > 0


def test_in_between_frames_of_a_free_packet_are_the_exact_gaussian(tmp_path):
    """With no potential the frames are the free Gaussian packet, in closed form
    (spreading Gaussian: Griffiths, Introduction to Quantum Mechanics, 2nd ed.,
    Problem 2.43, number from memory), to spectral accuracy."""
    run = make(tmp_path, "free", "[]", left=-160.0, right=160.0, points=1024, duration=40.0,
               every=20.0, title="Free packet")
    with RunFile(run) as rf:
        facts = render.run_facts(rf)
        wanted = frame_times(facts.times, facts.dt, 1.0, 10.0)
        worst = 0.0
        for t, psi in propagated_states(rf, facts, wanted):
            exact = free_evolution(facts.x, t, facts.packet, facts.hbar, facts.mass)
            worst = max(worst, float(np.max(np.abs(psi - exact))))
    assert worst < 1e-6


# ---------------------------------------------------------------------------------------
# nothing clipped; one size convention


@pytest.fixture(scope="module")
def saved_run(step_run, tmp_path_factory):
    saved = tmp_path_factory.mktemp("saved") / "saved.h5"
    saved.write_bytes(step_run.read_bytes())
    assert cli.main(["delay", str(saved), "--save"]) == 0
    return saved


@pytest.mark.parametrize("size,analysed", [((3.5, 2.6), True), ((7.0, 4.5), False),
                                           ((-1920, -1080), True)])
def test_no_text_outside_the_figure_canvas(step_run, saved_run, size, analysed):
    for path in [saved_run if analysed else step_run]:
        fig = render.figure(path, render.FigureOptions(size=size, dpi=100))
        fig.canvas.draw()
        box = fig.get_tightbbox(fig.canvas.get_renderer()).transformed(fig.dpi_scale_trans)
        inside = fig.bbox
        assert box.x0 >= -1 and box.y0 >= -1
        assert box.x1 <= inside.x1 + 1 and box.y1 <= inside.y1 + 1


@pytest.mark.parametrize("size", [(640, 360), (1080, 1080), (1280, 960)])
def test_no_text_outside_the_movie_canvas(step_run, size):
    frame, _ = movie_frame(step_run, size=size)
    renderer = frame.canvas.get_renderer()
    box = frame.fig.get_tightbbox(renderer).transformed(frame.fig.dpi_scale_trans)
    assert box.x0 >= -1 and box.y0 >= -1
    assert box.x1 <= size[0] + 1 and box.y1 <= size[1] + 1


def test_one_size_convention_for_movies_and_figures():
    assert render.parse_size("1920x1080") == (1920, 1080)
    assert render.parse_size("1920x1080px") == (1920, 1080)
    assert render.parse_size("7x4.5in") == (1680, 1080)            # movies: 240 px per inch
    assert render.parse_size("7x4.5in", "in") == (7.0, 4.5)
    assert render.figure_size(render.parse_size("1920x1080px", "in"), 300) == (6.4, 3.6)
