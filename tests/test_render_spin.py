"""Pictures of a spinor run: the density drawn spin-summed, the clock's field
region shaded, each outgoing packet's spin as a Bloch arrow (movies), and the
tunnelling clocks against energy with the measured points (figures)."""
import numpy as np
import pytest

from scenarios import TINY_STEP, scenario_text
from sojourn import cli, render
from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.render.spin import SpinArrows, side_spins, spin_summed
from sojourn.store.reader import RunFile
from sojourn.theory.larmor import spin_vector
from sojourn.workflows import run

# our own settings: a barrier with a clock over it, small (as tests/test_larmor_run.py)
CLOCK = {**TINY_STEP, "grid": {"span": [-200.0, 200.0], "points": 1024},
         "potential": [{"barrier": {"start": 0.0, "end": 2.0, "height": 1.0}}],
         "packet": {"center": -50.0, "width": 8.0, "energy": 0.5},
         "evolve": {"duration": 90.0, "dt": 0.05}, "record": {"every": 10.0},
         "measure": {"detectors": [-25.0, 30.0]},
         "larmor": {"region": [0.0, 2.0], "omega": 0.01}}


@pytest.fixture(scope="module")
def spinor_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("spin")
    path = run(build(loads(scenario_text(CLOCK), "clock.yaml")), folder / "clock.h5")
    assert cli.main(["delay", str(path), "--save"]) == 0
    return path


def test_the_density_drawn_is_spin_summed_and_the_spin_read_per_side(spinor_run):
    with RunFile(spinor_run) as rf:
        psi = rf.psi(len(rf) - 1)
        x = rf.x
    shown = spin_summed(psi)
    assert np.allclose(np.abs(shown) ** 2, np.sum(np.abs(psi) ** 2, axis=0))
    spins = side_spins(x, psi, (0.0, 2.0))
    for channel, side in (("reflection", x < 0.0), ("transmission", x > 2.0)):
        prob, spin = spins[channel]
        # the same spin as theory's ratio of integrals on the same amplitudes
        assert spin == pytest.approx(spin_vector(psi[0, side], psi[1, side]), abs=1e-12)
        assert prob == pytest.approx(np.sum(np.abs(psi[:, side]) ** 2) * (x[1] - x[0]))


@pytest.mark.parametrize("size", [(640, 360), (1080, 1080)])
def test_movie_frames_carry_the_arrows_and_nothing_leaves_the_canvas(spinor_run, size):
    with RunFile(spinor_run) as rf:
        facts = render.run_facts(rf)
        assert facts.clock == ((0.0, 2.0), 0.01) and facts.V.ndim == 1
        frame = render.MovieFrame(facts, render.MovieOptions(size=size),
                                  render.scan_run(render.SpinSummed(rf), facts))
        t, psi = list(rf.snapshots())[-1]
        image = frame.draw(t, psi).copy()
        analysis = rf.analysis()
    assert image.shape[:2] == (size[1], size[0])
    assert isinstance(frame.spin, SpinArrows)
    for channel in ("reflection", "transmission"):
        arrow, text = frame.spin.parts[channel]
        assert arrow.get_visible() and text.get_visible()
        # the arrow's turn is the side's measured spin angle, times the stated gain
        sy, sx = analysis[channel]["larmor"]["spin"]["y"], analysis[channel]["larmor"]["spin"]["x"]
        angle = np.arctan2(arrow.xy[1], arrow.xy[0])
        assert angle == pytest.approx(frame.spin.gain * np.arctan2(sy, sx), rel=1e-3)
        tau_y = float(text.get_text().split()[1])
        assert tau_y == pytest.approx(analysis[channel]["larmor"]["tau_y"]["measured"], rel=5e-3)
    renderer = frame.canvas.get_renderer()
    box = frame.fig.get_tightbbox(renderer).transformed(frame.fig.dpi_scale_trans)
    assert box.x0 >= -1 and box.y0 >= -1
    assert box.x1 <= size[0] + 1 and box.y1 <= size[1] + 1
    assert any(p.get_gid() == "clock-region" for p in frame.ax.patches)


def test_movie_file_of_a_spinor_run(spinor_run, tmp_path):
    import imageio.v3 as iio
    out = tmp_path / "clock.gif"
    assert cli.main(["render", str(spinor_run), "-o", str(out), "--size", "480x270",
                     "--seconds", "0.4", "--fps", "5", "-q"]) == 0     # propagated frames too
    assert iio.imread(out, index=0).shape[:2] == (270, 480)


@pytest.mark.parametrize("size", [(5.0, 3.6), (7.0, 4.5), (14.0, 4.0)])
def test_figure_sets_the_clocks_side_by_side(spinor_run, size):
    fig = render.figure(spinor_run, render.FigureOptions(size=size, dpi=100))
    fig.canvas.draw()
    box = fig.get_tightbbox(fig.canvas.get_renderer()).transformed(fig.dpi_scale_trans)
    assert box.x0 >= -1 and box.y0 >= -1
    assert box.x1 <= fig.bbox.x1 + 1 and box.y1 <= fig.bbox.y1 + 1
    with RunFile(spinor_run) as rf:
        analysis = rf.analysis()
    lines = {line.get_gid(): line for ax in fig.axes for line in ax.get_lines()}
    for channel in ("transmission", "reflection"):
        for clock in ("phase", "dwell", "tau_y", "tau_z", "tau"):
            assert f"clock-{channel}-{clock}" in lines
        # the measured point sits at the saved analysis's value
        containers = [c for ax in fig.axes for c in ax.containers
                      if c.get_label() == f"measured-{channel}-tau_y" or
                      getattr(c[0], "get_gid", lambda: None)() == f"measured-{channel}-tau_y"]
        assert containers, channel
        y = containers[0][0].get_ydata()[0]
        assert y == pytest.approx(analysis[channel]["larmor"]["tau_y"]["measured"])


def test_figure_without_theory_still_shows_the_measured_clocks(spinor_run, monkeypatch):
    from sojourn.errors import TheoryError
    from sojourn.render import spin

    def refuse(facts, energies):
        raise TheoryError("the layered solver cannot treat this potential")
    monkeypatch.setattr(spin, "clock_curves", refuse)
    fig = render.figure(spinor_run, render.FigureOptions(size=(7.0, 4.5), dpi=80))
    texts = [t.get_text() for ax in fig.axes for t in ax.texts]
    assert any(t.startswith("no theory curves") for t in texts)
    assert any(c.get_label() == "measured-transmission-tau_y" or
               getattr(c[0], "get_gid", lambda: None)() == "measured-transmission-tau_y"
               for ax in fig.axes for c in ax.containers)
