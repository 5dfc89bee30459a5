"""Parsing and checking render options: sizes, x-ranges, curve lists, outputs.

One size convention for movies and figures: `WxH` in pixels (`1920x1080` or
`1920x1080px`; a bare WxH is always pixels) or in inches (`7x4.5in`). A figure
given in pixels is made at its dpi (so the PNG has exactly those pixels); a
movie is whole pixels, so inches are converted at `MOVIE_DPI`.
"""
from __future__ import annotations

import math
import os
import re
from pathlib import Path

from ..errors import RenderError

CURVES = ("density", "real", "imag", "phase", "reference", "potential")
DEFAULT_CURVES = ("density", "reference", "potential")
MOVIE_FORMATS = (".mp4", ".gif")
FIGURE_FORMATS = (".png", ".pdf", ".svg")
MAX_PIXELS = 7680          # longest movie side accepted (8K UHD)
MAX_FIGURE_INCHES = 60.0
MOVIE_DPI = 240            # pixels per inch when a movie size is given in inches
PRINT_DPI = 300.0          # the one default resolution for print
MIN_FPS, MAX_FPS = 1.0, 240.0   # frame rates an encoder takes (it rounds a rate below 1 to 0)
XLIM_RESOLUTION = 1e-9     # an x range narrower than this share of its ends cannot be drawn
XLIM_SMALLEST = 1e-30      # nor one narrower than this in any unit of length

_SIZE = re.compile(r"^\s*([0-9.eE+-]+)\s*[x×]\s*([0-9.eE+-]+)\s*(px|in)?\s*$")


def _size_error(text: str) -> RenderError:
    return RenderError(f"--size {text!r}: expected WIDTHxHEIGHT in pixels (1920x1080) or "
                       "inches (7x4.5in)")


def parse_size(text: str, unit: str = "px") -> tuple[float, float]:
    """'WxH[px|in]' → (W, H); a bare 'WxH' is pixels.

    unit is what the caller needs back: 'px' for movies (whole pixels; inches
    converted at MOVIE_DPI), 'in' for figures (inches as given; pixels
    returned as negative numbers for `figure_size` to convert at the dpi)."""
    match = _SIZE.match(str(text).lower())
    if not match:
        raise _size_error(text)
    try:
        w, h = float(match[1]), float(match[2])
    except ValueError:
        raise _size_error(text) from None
    given = match[3] or "px"
    if not (math.isfinite(w) and math.isfinite(h)) or w <= 0 or h <= 0:
        raise RenderError(f"--size {text!r}: width and height must be positive")
    if given == "in":
        if max(w, h) > MAX_FIGURE_INCHES or min(w, h) < 1:
            raise RenderError(f"--size {text!r}: sides in inches must be 1 to "
                              f"{MAX_FIGURE_INCHES:g} (or give pixels, e.g. 2100x1350px)")
        if unit == "in":
            return (w, h)
        w, h = round(w * MOVIE_DPI / 2) * 2, round(h * MOVIE_DPI / 2) * 2
    elif w != int(w) or h != int(h):
        raise RenderError(f"--size {text!r}: pixel sizes are whole numbers")
    if w < 64 or h < 64 or max(w, h) > MAX_PIXELS:
        raise RenderError(f"--size {text!r}: each side must be 64 to {MAX_PIXELS} pixels")
    return (int(w), int(h)) if unit == "px" else (-w, -h)


def figure_size(size: tuple[float, float], dpi: float) -> tuple[float, float]:
    """Inches from `parse_size(..., 'in')` (negative numbers are pixels)."""
    w, h = size
    return (-w / dpi if w < 0 else w, -h / dpi if h < 0 else h)


def parse_xlim(text: str) -> tuple[float, float]:
    """'A:B' → (A, B) with A < B."""
    try:
        a, b = (float(p) for p in str(text).split(":"))
    except ValueError:
        raise RenderError(f"--xlim {text!r}: expected LEFT:RIGHT, e.g. -300:100") from None
    if not (math.isfinite(a) and math.isfinite(b)) or b <= a:
        raise RenderError(f"--xlim {text!r}: the right end must exceed the left end")
    if b - a < max(XLIM_RESOLUTION * max(abs(a), abs(b)), XLIM_SMALLEST):
        raise RenderError(f"--xlim {text!r}: the range is too narrow to draw (at least "
                          f"{XLIM_RESOLUTION:g} of its ends' size and {XLIM_SMALLEST:g})")
    return (a, b)


def parse_fps(value) -> float:
    """A movie frame rate: a finite number from MIN_FPS to MAX_FPS."""
    try:
        fps = float(value)
    except (TypeError, ValueError):
        raise RenderError(f"--fps {value!r}: expected a number of frames per second") from None
    if not (math.isfinite(fps) and MIN_FPS <= fps <= MAX_FPS):
        raise RenderError(f"--fps {value!r}: choose a rate from {MIN_FPS:g} to {MAX_FPS:g} "
                          "frames per second")
    return fps


def parse_curves(text: str) -> tuple[str, ...]:
    """'density,reference' → ('density', 'reference'), checked against CURVES."""
    names = tuple(n.strip() for n in str(text).split(",") if n.strip())
    unknown = [n for n in names if n not in CURVES]
    if unknown or not names:
        raise RenderError(f"--curves: unknown curve {unknown[0]!r}; choose from "
                          f"{', '.join(CURVES)}" if unknown else
                          f"--curves: name at least one of {', '.join(CURVES)}")
    if not set(names) & {"density", "real", "imag", "phase"}:
        raise RenderError("--curves: name at least one of density, real, imag, phase "
                          "(the wave itself)")
    return names


def check_output(path: Path, formats: tuple[str, ...], what: str) -> Path:
    """The output path, if its format is known and its folder writable."""
    path = Path(path)
    if path.suffix.lower() not in formats:
        raise RenderError(f"{path}: {what} format {path.suffix or '(none)'!r} is not supported; "
                          f"use {' or '.join(formats)}")
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.is_dir():
        raise RenderError(f"{path}: folder {parent} does not exist; create it first")
    if not os.access(parent, os.W_OK) or (path.exists() and not os.access(path, os.W_OK)):
        raise RenderError(f"{path}: cannot write there (permission denied); choose another path")
    return path


def unit_label(unit: str) -> str:
    """A unit as it should be printed: atomic time as ħ/Eₕ, hartree as Eₕ."""
    return {"hbar/E_h": "ħ/Eₕ", "hartree": "Eₕ", "bohr": "a₀", "m_e": "mₑ"}.get(unit, unit)
