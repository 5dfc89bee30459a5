"""sojourn's looks: one palette, a fixed colour for each role, two styles.

Roles and their colours (the same roles in every style, so a reader learns
them once):

==================  =============  =============  ==================================
role                paper          talk (dark)    drawn as
==================  =============  =============  ==================================
reflected channel   #0b6e69 teal   #3cc7b8        |ψ|² on the incident side, points
transmitted         #b36b00 ochre  #f2a93b        |ψ|² beyond the potential, points
reference           #6b7280 slate  #aab2c0        dashed: ideal mirror, free packet
theory              #7a2e6e plum   #d38bc4        predictions, E₀, residual zero
measurement         #c8401e red    #ff6f4f        measured centroid, the delay ruler
potential           #8c7a5b sand   #bfae8c        V(x), filled from its zero
untrusted           #a8a8a8 grey   #6c707a        hollow markers
Re ψ, Im ψ          #2f5fb3 blue,  #7aa6ff,       thin lines (scaled to the density)
                    #7d8a2e olive  #c5d86d
==================  =============  =============  ==================================

The three delay methods, where a figure sets them side by side (the sweep
summary): centroid #c8401e red (circle), arrival #2f5fb3 blue (square),
spectral #5d7a1e olive (diamond); each method's prediction in its colour.
The tunnelling clocks side by side (a spinor run's figure): phase time #2f5fb3
blue, dwell #8c7a5b sand (both dashed), τ_y #0b6e69 teal, τ_z #b36b00 ochre,
τ #7a2e6e plum; the field region is shaded in the theory colour.

Maps: cividis (paper), bone (talk); phase as hue: twilight, with its key.
Type: DejaVu Sans (ships with matplotlib, so every machine draws the same
glyphs), scaled with the canvas. Styles:
"paper" (light, print sizes), "talk" = "talk-dark" (dark, movie sizes) and
"talk-light" (the paper colours at movie sizes).
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass

from matplotlib.legend import Legend

from ..errors import RenderError


@dataclass(frozen=True)
class Look:
    """Colours, type and line sizes of one style (sizes at 1080 pixels high for
    movies, in points for figures)."""

    background: str
    text: str
    grid: str
    density: str
    reflected: str
    transmitted: str
    real: str
    imag: str
    reference: str
    theory: str
    measurement: str
    potential: str
    energy: str
    untrusted: str
    font: float
    line: float
    cmap: str
    trajectory: str
    family: str = "DejaVu Sans"


PAPER = Look(background="#fbfaf7", text="#1d1d1f", grid="#e4e1da", density="#23395b",
             reflected="#0b6e69", transmitted="#b36b00", real="#2f5fb3", imag="#7d8a2e",
             reference="#6b7280", theory="#7a2e6e", measurement="#c8401e", potential="#8c7a5b",
             energy="#7a2e6e", untrusted="#a8a8a8", font=14, line=1.6, cmap="cividis",
             trajectory="#c8401e")
TALK = Look(background="#15181f", text="#ecebe6", grid="#2f3441", density="#9fb7d9",
            reflected="#3cc7b8", transmitted="#f2a93b", real="#7aa6ff", imag="#c5d86d",
            reference="#aab2c0", theory="#d38bc4", measurement="#ff6f4f", potential="#bfae8c",
            energy="#d38bc4", untrusted="#6c707a", font=26, line=4.0, cmap="bone",
            trajectory="#ff6f4f")
TALK_LIGHT = Look(**{**PAPER.__dict__, "font": 26, "line": 4.0})

METHOD_COLOURS = {"centroid": "#c8401e", "arrival": "#2f5fb3", "spectral": "#5d7a1e"}
METHOD_MARKERS = {"centroid": "o", "arrival": "s", "spectral": "D"}
CLOCK_COLOURS = {"phase": "#2f5fb3", "dwell": "#8c7a5b", "tau_y": "#0b6e69", "tau_z": "#b36b00",
                 "tau": "#7a2e6e"}

LOOKS = {"talk-dark": TALK, "talk-light": TALK_LIGHT, "paper": PAPER, "talk": TALK}
STYLES = ("talk-dark", "talk-light", "paper", "talk")


def look(style: str) -> Look:
    """The Look of a style name (RenderError naming the choices otherwise)."""
    if style not in LOOKS:
        raise RenderError(f"--style {style!r}: choose from {', '.join(STYLES)}")
    return LOOKS[style]


def apply_look(fig, axes, look: Look, font: float) -> None:
    """Background, spines, ticks and labels of `axes` in the look's colours and type."""
    fig.set_facecolor(look.background)
    for ax in axes:
        ax.set_facecolor("none" if ax is not axes[0] else look.background)
        ax.tick_params(colors=look.text, labelsize=0.8 * font, width=max(font / 20, 0.6),
                       length=font / 3)
        for label in ax.get_xticklabels() + ax.get_yticklabels():
            label.set_family(look.family)
        for spine in ax.spines.values():
            spine.set_color(look.text)
            spine.set_linewidth(max(font / 20, 0.6))
        for side in ("top", "right"):
            if ax is axes[0] and len(axes) == 1:
                ax.spines[side].set_visible(False)
        for label in (ax.xaxis.label, ax.yaxis.label, ax.title, ax._left_title,
                      ax.xaxis.get_offset_text(), ax.yaxis.get_offset_text()):
            label.set_color(look.text)
            label.set_family(look.family)
        ax.xaxis.label.set_fontsize(font)
        ax.yaxis.label.set_fontsize(font)


def _outside(box, canvas) -> bool:
    return (box.x0 < canvas.x0 - 1 or box.y0 < canvas.y0 - 1 or box.x1 > canvas.x1 + 1
            or box.y1 > canvas.y1 + 1)


def fit_inside(fig, tries: int = 6) -> None:
    """Shrink the type of any panel (ticks, labels, title, legend, texts) or
    figure text that reaches past the canvas, by 15% a try, until nothing is
    cut off: the last guard for unusual sizes. Leaves the canvas drawn."""
    with warnings.catch_warnings():     # tiny canvases: the layout gives up, we shrink
        warnings.filterwarnings("ignore", "constrained_layout not applied")
        _fit(fig, tries)


def _fit(fig, tries: int) -> None:
    for _ in range(tries):
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        shrink = [t for t in fig.texts if t.get_visible() and t.get_text()
                  and _outside(t.get_window_extent(renderer), fig.bbox)]
        for ax in fig.axes:
            if not _outside(ax.get_tightbbox(renderer), fig.bbox):
                continue
            size = ax.xaxis.get_majorticklabels()[0].get_fontsize() if \
                ax.xaxis.get_majorticklabels() else 10.0
            ax.tick_params(labelsize=0.85 * size)
            shrink += [ax.xaxis.label, ax.yaxis.label, ax.title, ax._left_title,
                       *ax.texts, *[t for c in ax.get_children() if isinstance(c, Legend)
                                    for t in c.get_texts()]]
        if not shrink:
            return
        for text in shrink:
            text.set_fontsize(0.85 * text.get_fontsize())
    fig.canvas.draw()
