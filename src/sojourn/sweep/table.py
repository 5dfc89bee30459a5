"""A sweep's results: table.csv, table.json (strict JSON) and summary.png.

Each row is one point: its varied values, R and T, per channel the delays and
predictions of every method, the phase delay and ⟨τ⟩_w, `status`, `error` and
`warnings` (the warnings' short keys, empty when the point is trusted; their
full texts are in table.json under `warning_texts`)."""
from __future__ import annotations

import csv
import io
import json
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
import numpy as np

from ..config.sweepfile import Sweep
from ..errors import SojournError
from ..theory import scatter
from ..render.options import unit_label
from ..render.styles import METHOD_COLOURS, METHOD_MARKERS, PAPER, apply_look, fit_inside

# The delay methods, in table order. Switch to the measure registry's names
# (`tuple(sojourn.measure.METHODS)`) once it exists: this is the only list.
METHODS = ("centroid", "arrival", "spectral")
CHANNELS = ("reflection", "transmission")
TABLE_CSV, TABLE_JSON, SUMMARY_PNG = "table.csv", "table.json", "summary.png"
TABLE_FORMAT = "sojourn.sweep-table"
CSV_HEADER = "# sojourn sweep "          # the first line of every table.csv written here
PNG_MARK = "sojourn sweep summary"       # the PNG's Software text, to know it as ours
DONE = ("complete", "skipped")


@dataclass
class Outcome:
    """What a sweep invocation did: the table rows and where the results are."""

    rows: list
    columns: list
    table_csv: Path
    table_json: Path
    summary: Optional[Path]
    interrupted: bool = False

    def count(self, status: str) -> int:
        return sum(1 for r in self.rows if r["status"] == status)


def warning_key(text) -> str:
    """A warning's short key: its own `key` if it has one, else a slug of its first words."""
    key = getattr(text, "key", None)
    if key:
        return str(key)
    words = [w for w in re.findall(r"[a-z]+", str(text).lower())
             if w not in ("the", "a", "an", "of", "up", "to", "is", "has", "at", "in", "on")]
    return "-".join(words[:4]) or "warning"


def table_columns(sweep: Sweep, rows: list, verify: bool) -> list:
    """Column names: point, the varied keys, R, T, per channel present the delays
    and predictions per method, the Wigner delay, ⟨τ⟩_w, error bars if verified."""
    columns = ["point", *sweep.keys, "R", "T"]
    for channel in CHANNELS:
        if not any(r.get(f"{channel}_delay_wigner") is not None
                   or any(r.get(f"{channel}_delay_{m}") is not None for m in METHODS)
                   for r in rows):
            continue
        columns += [f"{channel}_delay_{m}" for m in METHODS]
        columns += [f"{channel}_predicted_{m}" for m in METHODS]
        columns += [f"{channel}_delay_wigner", f"{channel}_delay_packet"]
        if verify:
            columns += [f"{channel}_error_{m}" for m in METHODS]
    for channel in CHANNELS:     # a driven scenario's sidebands (sweep.runner._sideband_values)
        extra = sorted({k for r in rows for k in r if k.startswith((f"{channel}_sideband",
                                                                     f"{channel}_asymmetry"))})
        columns += [c for c in extra if c not in columns]
    return columns + ["status", "error", "warnings"]


def table_rows(sweep: Sweep, results: dict) -> list:
    """One row per point (missing numbers None, never NaN: strict JSON)."""
    rows = []
    for point in sweep.points:
        result = results.get(point.index, {"status": "pending", "error": None})
        measured = {k: _finite(v) for k, v in result.get("measured", {}).items()}
        texts = [str(w) for w in result.get("warnings") or []]
        rows.append({"point": point.name, **{k: _finite(v) for k, v in point.values.items()},
                     **measured, "status": result["status"], "error": result.get("error"),
                     "warnings": " ".join(dict.fromkeys(warning_key(w) for w in texts)),
                     "warning_texts": texts})
    return rows


def write_results(sweep: Sweep, results: dict, verify: bool = False) -> Outcome:
    """Write table.csv, table.json and summary.png from the points' results."""
    full = table_rows(sweep, results)
    columns = table_columns(sweep, full, verify)
    rows = [{c: row.get(c) for c in columns} for row in full]
    out, u = sweep.output, sweep.units
    header = (f"{CSV_HEADER}{sweep.source} (base {sweep.base.source}); units: time "
              f"{u['time']}, energy {u['energy']}, length {u['length']}, mass {u['mass']} "
              f"(system {u['system']}); delays in {u['time']}; R and T are probabilities")
    buffer = io.StringIO()
    buffer.write(header + "\n")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        writer.writerow([_csv_value(row[c]) for c in columns])
    csv_path, json_path = out / TABLE_CSV, out / TABLE_JSON
    write_atomic(csv_path, buffer.getvalue())
    write_atomic(json_path, json.dumps({
        "format": TABLE_FORMAT, "sweep": sweep.source, "base": sweep.base.source, "units": u,
        "keys": list(sweep.keys), "pairing": sweep.pairing, "columns": columns, "rows": rows,
        "warning_texts": {r["point"]: r["warning_texts"] for r in full if r["warning_texts"]}},
        indent=1, allow_nan=False))
    summary = out / SUMMARY_PNG
    plot_summary(sweep, rows, summary)
    return Outcome(rows, columns, csv_path, json_path, summary)


def write_atomic(path: Path, text: str) -> None:
    """Write a file whole or not at all (a temporary beside it, then renamed)."""
    tmp = path.with_name(path.name + ".tmp")
    tmp.unlink(missing_ok=True)
    with open(tmp, "x", encoding="utf-8") as handle:   # never through a planted link
        handle.write(text)
    os.replace(tmp, path)


def is_ours(path: Path) -> bool:
    """Whether a table or figure file at `path` was written by a sweep (or is absent)."""
    if not path.exists() and not path.is_symlink():
        return True
    if path.is_symlink() or not path.is_file() or path.stat().st_size > 50_000_000:
        return False
    try:
        if path.name == TABLE_CSV:
            with open(path, encoding="utf-8") as handle:
                return handle.readline().startswith(CSV_HEADER)
        if path.name == TABLE_JSON:
            data = json.loads(path.read_text(encoding="utf-8"))
            return isinstance(data, dict) and "rows" in data and "sweep" in data
        json_path = path.with_name(TABLE_JSON)      # a figure beside our own table is ours
        return PNG_MARK.encode() in path.read_bytes() or (json_path.exists() and is_ours(json_path))
    except (OSError, ValueError):
        return False


def _finite(value):
    """The value with every NaN or infinity (also inside lists) as None: strict JSON."""
    if isinstance(value, list):
        return [_finite(v) for v in value]
    return None if isinstance(value, float) and not math.isfinite(value) else value


def _csv_value(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (list, dict)):
        return json.dumps(value)
    return str(value)


def _number(value) -> float:
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


def plot_summary(sweep: Sweep, rows: list, path: Path) -> None:
    """Draw `summary_figure` into `path` (marked as written by a sweep)."""
    fig = summary_figure(sweep, rows)
    FigureCanvasAgg(fig)
    fig.savefig(path, dpi=SUMMARY_DPI, metadata={"Software": PNG_MARK},
                facecolor=fig.get_facecolor())


SUMMARY_DPI = 200          # 9.6 inches wide: 1920 pixels, type 11 pt ≈ 30 px tall
# words and the unit kind of a varied key's last part ("packet.energy" → packet energy (eV))
KEY_WORDS = {"energy": ("energy", "energy"), "height": ("height", "energy"),
             "depth": ("depth", "energy"), "width": ("width", "length"),
             "center": ("start position", "length"), "start": ("start", "length"),
             "end": ("end", "length"), "at": ("position", "length"),
             "duration": ("duration", "time"), "dt": ("time step", "time"),
             "points": ("grid points", None), "mass": ("mass", "mass"),
             "wavenumber": ("wavenumber", None)}


def key_label(key: str, units: dict) -> str:
    """A varied key in words with its unit: 'packet.energy' → 'packet energy (eV)';
    'potential.0.barrier.height' → 'barrier height (eV)'."""
    parts = [p for p in key.split(".") if not p.isdigit()]
    words, kind = KEY_WORDS.get(parts[-1], (parts[-1].replace("_", " "), None))
    owner = parts[-2] if len(parts) > 1 and parts[-2] not in ("evolve", "grid") else ""
    owner = owner.replace("_", " ")
    text = f"{owner} {words}".strip()
    unit = units.get(kind) if kind else None
    return f"{text} ({unit_label(unit)})" if isinstance(unit, str) else text


def summary_figure(sweep: Sweep, rows: list):
    """Measured delays against the first varied key, one panel per channel, in
    sojourn's paper look, 1920 pixels wide: for a varied packet energy the
    phase delay τ(E) over the same range and each point's packet-averaged
    predictions; otherwise the predictions joined by a line. Each method has
    its colour and marker (styles.METHOD_COLOURS), its predictions drawn in
    the same colour. Other varied keys make one series per combination.
    Trusted points are filled; points with warnings are hollow."""
    key = sweep.keys[0]
    u = sweep.units
    look = PAPER
    font, lw = 11.0, 1.5
    channels = [c for c in CHANNELS if rows and f"{c}_delay_wigner" in rows[0]]
    fig = Figure(figsize=(9.6, 4.6 * max(len(channels), 1)), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(len(channels) or 1, 1, squeeze=False)
    # zip ties the other keys to the first: one series; a product: one per combination
    others = sweep.keys[1:] if sweep.pairing == "product" else ()
    groups: dict = {}
    for row, point in zip(rows, sweep.points):
        label = ", ".join(f"{key_label(k, u)} = {_label(row[k])}" for k in others)
        groups.setdefault(label, []).append((row, point))
    markers = {m: METHOD_MARKERS.get(m, "^") for m in METHODS}
    colours = {m: METHOD_COLOURS.get(m, look.text) for m in METHODS}
    energy_sweep = key == "packet.energy"
    untrusted_shown = False
    for ax, channel in zip(axes[:, 0], channels or [None]):
        if channel is None:
            ax.text(0.5, 0.5, "no complete points", ha="center", va="center",
                    transform=ax.transAxes, fontsize=font)
            break
        for g, (label, members) in enumerate(groups.items()):
            done = [(r, p) for r, p in members if r["status"] in DONE]
            x = np.array([_number(r[key]) for r, _ in done])
            trusted = np.array([not r.get("warnings") for r, _ in done], dtype=bool)
            order = np.argsort(x)
            style = ["-", "--", ":", "-."][g % 4]
            first = g == 0
            if energy_sweep and len(done) > 1:
                curve = _theory_curve(done[0][1].scenario, channel, x)
                if curve is not None:
                    ax.plot(*curve, color=look.theory, lw=lw, ls=style,
                            label="phase delay τ(E)" + (f" ({label})" if label else ""))
            elif label:
                ax.plot([], [], color=look.theory, ls=style, label=label)
            for method in METHODS:
                y = np.array([_number(r.get(f"{channel}_delay_{method}")) for r, _ in done])
                pred = np.array([_number(r.get(f"{channel}_predicted_{method}")) for r, _ in done])
                err = np.array([_number(r.get(f"{channel}_error_{method}")) for r, _ in done])
                if not np.isfinite(y).any():
                    continue
                for mask, filled in ((trusted, True), (~trusted, False)):
                    pick = order[mask[order]]
                    if not pick.size:
                        continue
                    untrusted_shown |= not filled
                    ax.errorbar(x[pick], y[pick], yerr=err[pick] if np.isfinite(err).any() else None,
                                fmt=markers[method], color=colours[method], ms=7, capsize=3,
                                ls="none", mfc=colours[method] if filled else "none",
                                label=f"{method} (measured)" if first and filled else None)
                if energy_sweep:   # each point's own packet average: a tick at the point
                    ax.plot(x[order], pred[order], ls="none", marker="_", ms=18, mew=2,
                            color=colours[method], label=f"{method} (packet theory)" if first
                            else None)
                else:
                    ax.plot(x[order], pred[order], ls=style, color=colours[method], lw=lw,
                            label=f"{method} (packet theory)" if first else None)
        if untrusted_shown:
            ax.plot([], [], ls="none", marker="o", mfc="none", color=look.untrusted,
                    label="hollow: with warnings (see table.json)")
        ax.set_xlabel(key_label(key, u))
        ax.set_ylabel(f"{'reflected' if channel == 'reflection' else 'transmitted'} delay "
                      f"({unit_label(u['time'])})")
        ax.grid(True, color=look.grid, linewidth=0.6)
        ax.legend(fontsize=0.8 * font, ncol=2, frameon=False)
    fig.suptitle(f"{sweep.base.title}: measured delays against "
                 f"{', '.join(key_label(k, u) for k in sweep.keys)}", fontsize=font)
    apply_look(fig, list(axes[:, 0]), look, font)
    fit_inside(fig)
    return fig


def _label(value) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _theory_curve(scenario, channel: str, energies):
    """(E, τ(E)) of the stationary theory over the range of the swept energies."""
    finite = energies[np.isfinite(energies)]
    if finite.size < 1 or scenario is None or scenario.dimensions == 2:
        return None   # in the plane the swept energy is not the normal one: no line curve
    E = np.linspace(float(finite.min()), float(finite.max()), 400)
    try:
        sc = scatter(scenario.build_potential(), E, hbar=scenario.hbar, dwell=False,
                     x_r=scenario.measure.reference, direction=scenario.packet.direction)
    except SojournError:
        return None
    tau = sc.delay_reflection if channel == "reflection" else sc.delay_transmission
    return E, tau
