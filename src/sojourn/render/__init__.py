"""Movies and figures of a run: styles (the looks), overlays (pure physics for
what is drawn over the wave), facts (what is read from the run file), movie,
figure, options (parsing sizes, ranges, curve lists)."""
from .facts import RunFacts, run_facts
from .figure import (FigureOptions, figure, outgoing_trajectory, render_figure, space_time)
from .movie import MovieFrame, MovieOptions, open_encoder, render_movie
from .scan import Ruler, Scan, reflection_ruler, scan_run
from .options import (CURVES, DEFAULT_CURVES, figure_size, parse_curves, parse_size,
                      parse_xlim)
from .overlays import (centroid_delay, direction, phase_delay, energy_spectrum, mirror_reference,
                       reference_trajectory, side_centroid, turning_time)
from .spin import SpinSummed, clock_panels, spin_summed
from .styles import LOOKS, STYLES, Look
from .plane import PlaneOptions, is_plane_run, render_plane_figure, render_plane_movie

__all__ = ["CURVES", "DEFAULT_CURVES", "STYLES", "LOOKS", "Look", "MovieOptions",
           "FigureOptions", "RunFacts", "parse_size", "parse_xlim", "parse_curves",
           "figure_size", "direction", "mirror_reference", "reference_trajectory",
           "centroid_delay", "turning_time", "side_centroid", "energy_spectrum",
           "render_movie", "render_figure", "figure", "space_time", "outgoing_trajectory",
           "phase_delay", "MovieFrame", "Scan", "scan_run", "Ruler", "reflection_ruler", "run_facts", "open_encoder",
           "SpinSummed", "spin_summed", "clock_panels",
           "PlaneOptions", "is_plane_run", "render_plane_movie", "render_plane_figure"]
