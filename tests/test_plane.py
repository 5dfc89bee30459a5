"""Runs in the plane: the scenario, the grid and its shapes, the engine on 2D
arrays against the exact free evolution, the run file's (t, y, x) layout,
and the lateral shift of an obliquely reflected packet against its
stationary-phase prediction."""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest

from sojourn.build import build
from sojourn.config.scenario import loads
from sojourn.engine.observables import Detectors
from sojourn.engine.propagate import Propagator
from sojourn.errors import ScenarioError
from sojourn.model import packets
from sojourn.model.grid import PlaneGrid
from sojourn.model.shapes import Disk, Wall
from sojourn.planar import plane_values

PLANE = textwrap.dedent("""\
    title: plane
    grid:
      span: [[-40.0, 40.0], [-30.0, 30.0]]
      points: [128, 96]
    potential:
      - step: {at: 10.0, height: 1.0}
    packet:
      center: [-10.0, -5.0]
      width: 4.0
      energy: 0.5
      direction: 30.0
    evolve: {duration: 4.0, dt: 0.05}
    absorber: {width: 8.0}
    record: {every: 1.0}
    """)


def _line_of(text: str, needle: str) -> int:
    return next(i for i, line in enumerate(text.splitlines(), 1) if needle in line)


@pytest.mark.parametrize("old, new, key, needle", [
    ("center: [-10.0, -5.0]", "center: -10.0", "packet.center", "center:"),
    ("- step: {at: 10.0, height: 1.0}", "- expression: 'x + y'", None, None),
])
def test_plane_keys_that_do_not_fit_the_grid_name_file_line_and_key(old, new, key, needle):
    text = PLANE.replace(old, new)
    if key is None:   # a formula in y is fine in the plane
        assert build(loads(text, source="p.yaml")).V.shape == (96, 128)
        return
    with pytest.raises(ScenarioError) as err:
        loads(text, source="p.yaml")
    assert str(err.value).startswith(f"p.yaml:{_line_of(text, needle)}: {key}:")


@pytest.mark.parametrize("term, key", [
    ("- disk: {radius: 2.0, height: 1.0}", "potential[0].disk"),
    ("- expression: '0.5*exp(-(x**2 + y**2))'", "potential[0].expression"),
])
def test_shapes_and_formulas_in_y_are_refused_on_a_line(term, key):
    text = textwrap.dedent(f"""\
        grid: {{span: [-40.0, 40.0], points: 256}}
        potential:
          {term}
        packet: {{center: -10.0, width: 4.0, energy: 0.5}}
        evolve: {{duration: 1.0}}
        """)
    with pytest.raises(ScenarioError) as err:
        loads(text, source="l.yaml")
    assert str(err.value).startswith(f"l.yaml:3: {key}:")
    assert "grid.span [[x0, x1], [y0, y1]]" in str(err.value)


def test_plane_grid_wavenumbers_match_numpy():
    grid = PlaneGrid(-5.0, 5.0, 32, -2.0, 4.0, 24)
    kx = 2 * np.pi * np.fft.fftfreq(32, d=10 / 32)
    ky = 2 * np.pi * np.fft.fftfreq(24, d=6 / 24)
    np.testing.assert_allclose(grid.k_squared, ky[:, None] ** 2 + kx[None, :] ** 2)
    assert grid.shape == (24, 32) and grid.cell == pytest.approx((10 / 32) * (6 / 24))
    # the corner of the momentum grid: E_max summed over the axes
    assert grid.kinetic_max(1.0, 1.0) == pytest.approx(0.5 * ((np.pi / grid.dx) ** 2
                                                              + (np.pi / grid.dy) ** 2))


def test_shapes_cover_their_true_area():
    """A disk's cells hold its covered fraction: Σ V dx dy → π r² h (geometry)."""
    grid = PlaneGrid(-8.0, 8.0, 64, -8.0, 8.0, 64)
    V = plane_values([Disk(center=(0.3, -0.2), radius=3.0, height=2.0)], grid, 1.0)
    assert V.sum() * grid.cell == pytest.approx(2.0 * math.pi * 9.0, rel=2e-3)
    wall = plane_values([Wall(at=1.0, thickness=2.0, height=1.0, openings=[(-3.0, -1.0)])],
                        grid, 1.0)
    # a wall 2 thick across 16 of height, less an opening 2 wide (geometry)
    assert wall.sum() * grid.cell == pytest.approx(2.0 * (16.0 - 2.0), rel=1e-9)


def test_packet_in_the_plane_moves_along_its_direction():
    """⟨k⟩ from the FFT of ψ₀ (numpy) is |k|(cos θ, sin θ), |k| = √(2mE)/ħ."""
    setup = build(loads(PLANE, source="p.yaml"))
    psi = setup.psi0()
    assert np.sum(np.abs(psi) ** 2) * setup.grid.cell == pytest.approx(1.0, rel=1e-12)
    weights = np.abs(np.fft.fft2(psi)) ** 2
    kx = np.sum(weights * setup.grid.k[None, :]) / weights.sum()
    ky = np.sum(weights * setup.grid.ky[:, None]) / weights.sum()
    assert (kx, ky) == pytest.approx((math.cos(math.radians(30)), math.sin(math.radians(30))),
                                     rel=1e-9)


def test_free_packet_in_the_plane_follows_the_exact_evolution():
    """The 2D split-operator run against the exact free Gaussian, a product of
    the free spreading along x and y (Cohen-Tannoudji, Diu, Laloë, Complement G_I)."""
    grid = PlaneGrid(-60.0, 60.0, 240, -50.0, 50.0, 200)   # tails e^(-39) at the edges
    normal, transverse = packets.in_plane(
        loads(PLANE).packet, 1.0, 1.0, 0.0)
    prop = Propagator(grid, np.zeros(grid.shape), 1.0, 1.0, 0.02)
    prop.set_state(packets.on_plane(grid, normal, transverse))
    prop.advance(250)
    t = prop.time
    exact = np.multiply.outer(packets.free_evolution(grid.y, t, transverse, 1.0, 1.0),
                              packets.free_evolution(grid.x, t, normal, 1.0, 1.0))
    assert np.max(np.abs(prop.psi - exact)) < 1e-8 * np.max(np.abs(exact))


def test_flux_through_a_line_counts_what_crosses_it():
    """Continuity: ∫ (flux through x = d) dt equals the probability gained
    beyond d (common practice, no source)."""
    grid = PlaneGrid(-40.0, 40.0, 160, -30.0, 30.0, 120)
    normal, transverse = packets.in_plane(loads(PLANE).packet, 1.0, 1.0, 0.0)
    prop = Propagator(grid, np.zeros(grid.shape), 1.0, 1.0, 0.02)
    prop.set_state(packets.on_plane(grid, normal, transverse))
    line = Detectors(grid, [-2.0], 1.0, 1.0)
    # the probability beyond x = −2 by the midpoint rule: the column on the line counts half
    half = np.where(grid.x > -2.0, 1.0, 0.0) + 0.5 * np.isclose(grid.x, -2.0)

    def beyond(psi):
        return float(np.sum(np.abs(psi) ** 2 @ half) * grid.cell)

    before = beyond(prop.psi)
    fluxes = [line.flux(prop.psi)[0]]
    for _ in range(200):
        prop.advance(1)
        fluxes.append(line.flux(prop.psi)[0])
    after = beyond(prop.psi)
    crossed = float(np.trapezoid(fluxes, dx=0.02))
    assert crossed == pytest.approx(after - before, abs=2e-3 * abs(after - before) + 1e-6)


def test_absorbers_line_all_four_sides():
    setup = build(loads(PLANE, source="p.yaml"))
    W = setup.W
    assert W[0, 64] > 0 and W[-1, 64] > 0 and W[48, 0] > 0 and W[48, -1] > 0
    assert W[48, 64] == 0


def test_plane_run_file_holds_psi_on_t_y_x(tmp_path):
    from sojourn.store.reader import RunFile
    from sojourn.workflows import run
    setup = build(loads(PLANE, source=str(tmp_path / "p.yaml")))
    path = run(setup, tmp_path / "p.h5")
    with RunFile(path) as rf:
        assert rf.axes == ("y", "x")
        assert rf.psi(1).shape == (96, 128)
        np.testing.assert_array_equal(rf.coordinate("y"), setup.grid.y)
        assert rf.h5["snapshots/psi"].chunks == (1, 96, 128)   # one chunk per snapshot
        # the norm recorded with the cell dx·dy, and the state read back
        assert rf.observables()["norm"][0] == pytest.approx(1.0, rel=1e-12)
    xr = pytest.importorskip("xarray")
    pytest.importorskip("h5netcdf")
    with xr.open_dataset(path, group="snapshots", engine="h5netcdf") as ds:
        assert ds["psi"].dims == ("t", "y", "x")


def test_plane_run_opens_in_xarray_with_t_y_x(tmp_path):
    pytest.importorskip("xarray")
    import sojourn
    from sojourn.workflows import run
    setup = build(loads(PLANE, source=str(tmp_path / "p.yaml")))
    path = run(setup, tmp_path / "p.h5")
    with sojourn.open(path) as r:
        ds = r.to_xarray()
        assert ds["psi"].dims == ("t", "y", "x") and ds["V"].dims == ("y", "x")
        np.testing.assert_allclose(ds["density"].isel(t=0).values,
                                   np.abs(setup.psi0()) ** 2, rtol=1e-12)


def test_single_precision_snapshots_keep_a_double_state(tmp_path):
    """record.precision: single halves the snapshots (c8) while the run and its
    checkpoints stay double; the snapshots equal the double run's to float32."""
    from sojourn.store.reader import RunFile
    from sojourn.workflows import run
    double = run(build(loads(PLANE, source=str(tmp_path / "d.yaml"))), tmp_path / "d.h5")
    text = PLANE.replace("record: {every: 1.0}", "record: {every: 1.0, precision: single}")
    single = run(build(loads(text, source=str(tmp_path / "s.yaml"))), tmp_path / "s.h5")
    with RunFile(double) as d, RunFile(single) as s:
        assert s.h5["snapshots/psi"].dtype == np.complex64
        assert s.h5["checkpoint/a/psi"].dtype == np.complex128
        assert s.attrs["snapshot_precision"] == "single"
        scale = np.max(np.abs(d.psi(-1)))
        np.testing.assert_allclose(s.psi(-1), d.psi(-1), atol=1e-6 * scale)
        np.testing.assert_array_equal(s.observables()["norm"], d.observables()["norm"])


def test_a_term_of_one_coordinate_acts_along_y_with_axis_y():
    """axis: y turns a barrier across the plane: V depends on y alone, and its cell
    averages keep the barrier's area, height × width (geometry)."""
    text = PLANE.replace("- step: {at: 10.0, height: 1.0}",
                         "- barrier: {start: -2.1, end: 1.7, height: 0.3, axis: y}")
    setup = build(loads(text, source="p.yaml"))
    assert np.ptp(setup.V, axis=1).max() == 0          # constant along x
    assert setup.V[:, 0].sum() * setup.grid.dy == pytest.approx(0.3 * 3.8, rel=1e-12)
    assert not setup.potential.along_x
    line = textwrap.dedent("""\
        grid: {span: [-40.0, 40.0], points: 256}
        potential:
          - step: {at: 0.0, height: 1.0, axis: y}
        packet: {center: -10.0, width: 4.0, energy: 0.5}
        evolve: {duration: 1.0}
        """)
    with pytest.raises(ScenarioError, match=r"^l\.yaml:3: potential\[0\]\.step\.axis: "):
        loads(line, source="l.yaml")


def test_movie_and_figure_of_a_run_in_the_plane(tmp_path):
    """A frame is the density coloured by phase with the potential's outline; the
    movie has one frame per snapshot; a figure shows the chosen snapshots."""
    import imageio.v3 as iio
    from sojourn.render.plane import PlaneOptions, image, render_plane_figure, \
        render_plane_movie
    from sojourn.render.styles import look
    from sojourn.workflows import run
    setup = build(loads(PLANE, source=str(tmp_path / "p.yaml")))
    path = run(setup, tmp_path / "p.h5")
    movie = render_plane_movie(path, tmp_path / "p.mp4", PlaneOptions(size=(320, 180)))
    import imageio_ffmpeg
    assert imageio_ffmpeg.count_frames_and_secs(str(movie))[0] == setup.snapshots
    figure = render_plane_figure(path, tmp_path / "p.png", times=[0.0, 4.0])
    assert iio.imread(figure).shape[0] > 100
    # brightness follows the scaled density, hue the phase (arg ψ = 0 → red)
    psi = np.array([[1.0, 0.25j]])
    rgb = image(psi, 1.0, PlaneOptions(power=1.0), look("talk-dark"))
    assert rgb[0, 0].max() == pytest.approx(1.0) and rgb[0, 0, 0] == rgb[0, 0].max()
    assert rgb[0, 1].max() == pytest.approx(0.0625)
