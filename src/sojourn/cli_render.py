"""The `render` verb of the `sojourn` command: movies and figures of a run
(parsing and printing only; the work is `sojourn.render`)."""
from __future__ import annotations

from pathlib import Path

from .cli_support import flag_forced as _flag_forced, frame_bar as _frame_bar, say as _say
from .errors import UsageError


def cmd_render(args) -> int:
    from . import render
    from .render.options import parse_fps
    if not args.output and not args.figure and not args.polar:
        raise UsageError("sojourn render: give -o MOVIE.mp4|.gif and/or --figure FIG.png|.pdf|.svg")
    _flag_forced(args.file)
    if args.polar and not render.is_plane_run(args.file):
        raise UsageError("sojourn render: --polar is for a run in the plane off one disk or ring")
    if render.is_plane_run(args.file):
        if args.polar:
            _render_polar(args)
        return _render_plane(args) if (args.output or args.figure) else 0
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
        movie = render.MovieOptions(fps=parse_fps(args.fps), seconds=args.seconds,
                                    density_power=args.density_power, **common, **(
            {"size": render.parse_size(args.size, "px")} if args.size else {}), **(
            {"curves": render.parse_curves(args.curves)} if args.curves else {}))
        _write_movie(render.render_movie, args, movie)
    if args.figure:
        _say(f"wrote {render.render_figure(args.file, args.figure, fig_opts)}")
    return 0


def _write_movie(renderer, args, options) -> None:
    """Render a movie with a frame progress bar and say where it went."""
    update, close = _frame_bar(args.quiet)
    try:
        path = renderer(args.file, args.output, options, update)
    finally:
        close()
    _say(f"wrote {path}")


def _render_plane(args) -> int:
    """A run in the plane: density (coloured by phase unless --curves density),
    power-law (--density-power, default 0.5) or --log scale."""
    from . import render
    from .render.options import parse_fps
    if args.seconds is not None or args.xlim:
        raise UsageError("sojourn render: --seconds and --xlim are for runs on a line; a movie "
                         "of a run in the plane has one frame per snapshot and shows the box")
    curves = [c.strip() for c in (args.curves or "phase").split(",")]
    options = {"colour": "density" if "phase" not in curves else "phase",
               "scale": "log" if args.log else "power",
               "power": args.density_power if args.density_power != 1.0 else 0.5}
    if args.style:
        options["style"] = args.style
    if args.output:
        movie = render.PlaneOptions(fps=parse_fps(args.fps), **options, **(
            {"size": render.parse_size(args.size, "px")} if args.size else {}))
        _write_movie(render.render_plane_movie, args, movie)
    if args.figure:
        figure = render.PlaneOptions(**{"style": "paper", **options}, size=(2400, 900))
        _say(f"wrote {render.render_plane_figure(args.file, args.figure, args.times, figure)}")
    return 0


def _render_polar(args) -> None:
    """The polar figure of a run off one disk or ring: τ(θ) and dσ/dθ measured
    per detector bin on the beam's packet-averaged partial-wave curves."""
    import numpy as np
    from .measure import delays
    from .render import polar
    from .store import RunFile
    from .theory import obstacles
    report = delays.measure_delays(args.file)
    if report.scattering is None:
        raise UsageError(f"sojourn render --polar: {args.file} is not a run off one disk or ring")
    block = report.scattering["angular"]
    with RunFile(args.file) as rf:
        scenario = rf.scenario()
    theta, delay, section = obstacles.beam_curve(scenario)
    wrapped = np.angle(np.exp(1j * (np.asarray(block["theta"]) - block["direction"])))
    measured = polar.PolarPoints(wrapped, np.asarray(block["measured"], float),
                                 np.asarray(block["error"], float),
                                 np.asarray(block["cross_section"], float),
                                 np.asarray(block["cross_section_error"], float))
    fig = polar.polar_figure([polar.PolarCurve("partial waves, packet average", theta, delay,
                                               section)], measured=measured,
                             time_unit=report.units.get("time", ""),
                             length_unit=report.units.get("length", ""), style=args.style or
                             "paper", title=scenario.title, **({"dpi": args.dpi} if args.dpi
                                                                else {}))
    _say(f"wrote {polar.save_polar(fig, args.polar, **({'dpi': args.dpi} if args.dpi else {}))}")


def add_render(sub) -> None:
    p = sub.add_parser("render", help="movies (.mp4, .gif) and figures (.png, .pdf, .svg)")
    p.add_argument("file", help="a run file")
    p.add_argument("-o", "--output", metavar="MOVIE", help="movie: .mp4 (H.264) or .gif")
    p.add_argument("--figure", metavar="FIG", help="space-time figure: .png, .pdf or .svg")
    p.add_argument("--size", help="movie WxH in pixels (default 1920x1080) or inches "
                                  "(7x4.5in); with --figure alone, the figure's size "
                                  "(as --figure-size)")
    p.add_argument("--figure-size", metavar="WxH", help="figure WxH in pixels (2100x1350, "
                                                        "made at --dpi) or inches (7x4.5in)")
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
    p.add_argument("--density-power", type=float, default=1.0, metavar="P",
                   help="movie: draw (|ψ|²)^P on the density's scale so a weak scattered wave "
                        "shows (0.05 to 1; default 1, the true density; 0.5 is a good lift)")
    p.add_argument("--log", action="store_true", help="figure: logarithmic colour scale (a "
                                                      "run in the plane: movie and figure)")
    p.add_argument("--times", type=float, nargs="+", metavar="T",
                   help="a run in the plane: the snapshots the figure shows (nearest times)")
    p.add_argument("--polar", metavar="FIG",
                   help="a run in the plane off one disk or ring: τ(θ) and dσ/dθ measured "
                        "per angle bin on partial-wave theory (.png, .pdf, .svg)")
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
