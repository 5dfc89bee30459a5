"""Text the `sojourn` command prints: pure functions from results to lines.

Nothing here reads files or imports the heavy stages, so `sojourn --help`
stays fast; the command (cli.py) gathers the data and prints these lines."""
from __future__ import annotations

import json
import math


def num(value, digits=7) -> str:
    """A number for a table cell ('—' when missing)."""
    return "—" if value is None else f"{value:.{digits}g}"


def format_check(scenario, setup) -> list:
    """What `check` reports about a built scenario: one line per stage, then the findings."""
    info, g, units = setup.packet, setup.grid, scenario.unit_system
    needed = 2 * (abs(info.k0) + 6 * info.sigma_k)
    lines = [
        f"scenario   {scenario.source}: {scenario.title}",
        f"units      {units.name} (length {units.length}, energy {units.energy}, time {units.time}); "
        f"mass {scenario.mass} m_e",
        f"potential  {setup.potential.describe()}",
        f"grid       {g.points} points on [{g.left:g}, {g.right:g}), dx = {g.dx:.4g}; "
        f"k_max = {g.k_max:.4g} (packet needs ≥ {needed:.4g})"
        + (f"; along y {g.ny} points on [{g.bottom:g}, {g.top:g}), dy = {g.dy:.4g}"
           if setup.transverse is not None else ""),
        f"packet     centre {info.center:g}, width {info.width:g}, k₀ = {info.k0:.5g}, "
        f"σ_k = {info.sigma_k:.4g} (k₀/σ_k = {info.k_ratio:.3g}); E₀ = {info.energy:.6g}, "
        f"⟨E⟩ = {info.mean_energy:.6g} {units.energy}; v₀ = {info.group_velocity:.4g}"
        + (f" (the motion along x; along y: centre {setup.transverse.center:g}, width "
           f"{setup.transverse.width:g}, k_y = {setup.transverse.k0:.5g})"
           if setup.transverse is not None else ""),
        f"time       dt = {setup.dt:.4g} {units.time}{' (chosen)' if setup.dt_chosen else ''}, "
        f"{setup.steps} steps to t = {setup.duration:g}; Δt·(E_top+ΔV)/ħ = "
        f"{setup.band_phase:.3g} over the packet's band (limit 2π), Δt·(E_max+ΔV)/ħ = "
        f"{setup.grid_phase:.3g} on the grid"
        f"{' (detectors read the band-filtered state)' if setup.flux_band else ''}; "
        f"scheme {setup.scenario.evolve.scheme}",
        f"recording  every {setup.record_steps} steps ({setup.record_steps * setup.dt:.4g} "
        f"{units.time}), {setup.snapshots} snapshots; samples every {setup.sample_steps} steps",
        f"measure    reference {setup.reference:g}; detectors "
        f"{', '.join(f'{d:g}' for d in setup.detectors) or 'none'}; region "
        f"{setup.region if setup.region else 'none'}",
    ]
    if scenario.larmor is not None:
        up, down = setup.V
        inside = (up != down).nonzero()[0]   # the arrays' own method: no numpy import here
        where = f"[{g.x[inside[0]]:g}, {g.x[inside[-1]]:g}]" if inside.size else "no grid cell"
        lines.append(f"clock      ω_L = {scenario.larmor.omega:g} per {units.time}: spin up "
                     f"V + ħω_L/2, spin down V − ħω_L/2 on the cells {where}; ψ (2, "
                     f"{g.points}), spin along +x")
    lines += [f"{f.level:<10} {f}" for f in setup.findings]
    n_err = len(setup.errors())
    lines.append("ok: the scenario can run" if not n_err else
                 f"{n_err} problem(s) would stop `sojourn run`")
    return lines


def format_inspect(info: dict) -> list:
    """What `inspect` reports about a run file (from `describe_runfile`)."""
    u = info["units"]
    t_last = "—" if info["t_last"] is None else f"{info['t_last']:g}"
    lines = [f"{info['file']}: {info['title']}",
             f"  status {info['status']}, format {info['format_version']}, written by sojourn "
             f"{info['sojourn_version']} on {info['created']}",
             f"  units: length {u.get('length')}, time {u.get('time')}, energy {u.get('energy')}",
             f"  {info['grid_points']}"
             + (f" × {info['grid_points_y']} (x × y)" if "grid_points_y" in info else "")
             + f" grid points, {info['snapshots']} snapshots up to t = "
             f"{t_last} {u.get('time')}, dt = {info['dt']:g}, scheme {info['scheme']}",
             "  last recording: " + ", ".join(f"{k} = {v:.6g}" for k, v in info["final"].items()
                                              if k != "t"),
             f"  FFT {info['provenance'].get('fft')}, CPU {info['provenance'].get('cpu')}"]
    if len(info.get("axes", ("x",))) > 1:
        lines.append(f"  ψ on axes ({', '.join(info['axes'])}): a spinor run, component 0 spin "
                     "up, 1 spin down (its observables summed over both)")
    if info["analysis"]:
        lines.append("  holds a saved delay analysis (/analysis)")
    if info.get("forced"):
        lines.append(f"  forced past: {info['forced']}")
    return lines


def format_delay_report(report, moves=None) -> list:
    """The delay report as lines of text: one table per channel, warnings below."""
    lines = [f"{report.file}  (times in {report.units.get('time', '')})"]
    for ch in report.channels():
        if ch.sidebands is not None:      # a driven run: sidebands, no phase delays
            lines += ["", f"{ch.channel}: probability {ch.probability:.6g}; sidebands "
                          f"(energy in {report.units.get('energy', '')})",
                      f"  {'order':>5}{'energy':>12}{'measured':>14}{'predicted':>14}"
                      f"{'deviation':>12}"]
            lines += [f"  {r['order']:>+5d}{num(r['energy'], 5):>12}{num(r['probability'], 6):>14}"
                      f"{num(r['predicted'], 6):>14}{num(r['deviation'], 3):>12}"
                      for r in ch.sidebands]
            continue
        lines += ["", f"{ch.channel}: probability {ch.probability:.6g} (detector flux "
                      f"{num(ch.probability_flux, 6)}, spectrum {num(ch.probability_spectral, 6)}; "
                      f"theory {num(ch.predicted_probability, 6)}); reference: "
                      f"{'filtered' if ch.filtered else 'free'} packet",
                  f"  {'method':<10}{'measured':>14}{'predicted':>14}{'deviation':>12}"
                  f"{'relative':>11}{'error bar':>11}"]
        for method, r in ch.measured.items():
            rel = "—" if r.relative is None else f"{r.relative:.2e}"
            err = "—" if r.error is None else f"±{r.error:.2g}"
            lines.append(f"  {method:<10}{num(r.delay):>14}{num(r.predicted):>14}"
                         f"{num(r.deviation, 3):>12}{rel:>11}{err:>11}")
        lines.append(f"  phase delay at E₀ (Wigner) {num(ch.wigner)}; flux-weighted ⟨τ⟩_w "
                     f"{num(ch.packet)}")
        shift = getattr(ch, "lateral_shift", None)
        if shift:
            rel = (shift["deviation"] / abs(shift["predicted"])
                   if shift.get("deviation") is not None and shift.get("predicted") else None)
            lines.append(f"  lateral shift D along the interface: measured {num(shift['measured'])}"
                         f", packet-averaged {num(shift['predicted'])} (relative "
                         f"{'—' if rel is None else f'{rel:.2e}'}); stationary phase at k₀ "
                         f"{num(shift.get('stationary'))}")
    if getattr(report, "scattering", None):
        lines += [""] + format_angular(report.scattering["angular"], report.units)
    if getattr(report, "plane", None):
        p = report.plane
        lines.insert(1, f"in the plane: incidence at {p['angle']:.4g}° from the normal x; the "
                        f"delays are those of the motion along x (k_x = {p['k_x']:.6g}, "
                        f"E_x = {p['energy_normal']:.6g})")
    d = report.dwell
    if d.get("measured") is not None:
        lines += ["", f"dwell time in [{d['region'][0]:g}, {d['region'][1]:g}]: measured "
                      f"{num(d['measured'])}, packet-averaged Büttiker {num(d['predicted'])}"]
        if d.get("relative") is not None:
            allowed = d.get("grid_error")
            lines[-1] += (f", relative {d['relative']:+.2e}" + (
                f" (the grid's resolution of the evanescent tail allows about ±{allowed:.1e})"
                if allowed is not None and allowed >= 1e-3 else ""))
    if any(ch.larmor is not None for ch in report.channels()):   # a spinor run's clock
        lines += [""] + format_tunnelling_times(report.to_dict(), report.units.get("time", ""))
    if moves:
        lines += ["", "convergence (how far each delay moves):"]
        lines += [f"  {key:<24} 2N & Δt/4: {m['grid']:+.3g}   Δt/2: {m['time']:+.3g}   "
                  f"error bar ±{m['error']:.2g}" for key, m in moves.items()]
    if report.notes and any(ch.sidebands is not None for ch in report.channels()):
        lines += [""] + [f"note: {n}" for n in report.notes]
    if report.warnings:
        lines += [""] + [f"warning: {w}" for w in report.warnings]
    return lines


def format_angular(block: dict, units: dict) -> list:
    """The angle-resolved table: per bin θ, τ measured and predicted, dσ/dθ
    measured and predicted, the bin's probability."""
    t, length = units.get("time", ""), units.get("length", "")
    lines = [f"scattering off the obstacle: detector circle r = {block['ring']:g} {length}, "
             f"{block['bins']} bins; scattered probability {block['probability_scattered']:.6g}",
             f"  {'θ (deg)':>8}{'τ measured':>13}{'predicted':>12}{'±':>9}"
             f"{'dσ/dθ':>11}{'predicted':>11}{'P(bin)':>11}   (τ in {t}, dσ/dθ in {length})"]
    for i, th in enumerate(block["theta"]):
        lines.append(f"  {math.degrees(th):>8.1f}{num(block['measured'][i], 5):>13}"
                     f"{num(block['predicted'][i], 5):>12}{num(block['error'][i], 2):>9}"
                     f"{num(block['cross_section'][i], 5):>11}"
                     f"{num(block['predicted_cross_section'][i], 5):>11}"
                     f"{num(block['probability'][i], 4):>11}")
    return lines


def format_bench(results, backend: str, single: bool) -> list:
    """The `bench` table: steps per second against the FFT limit per grid size."""
    lines = [f"FFT {backend}, {'single' if single else 'double'} precision; the FFT "
             "limit is a bare planned FFT pair plus two multiplies",
             f"{'points':>8} {'threads':>7} {'steps/s':>10} {'limit/s':>10} {'fraction':>8} "
             f"{'unsampled':>9} {'sampled every':>13} {'point-steps/s':>13}"]
    lines += [f"{r.points:>8} {r.threads:>7} {r.steps_per_second:>10.4g} "
              f"{r.limit_steps_per_second:>10.4g} {r.fraction:>8.2f} "
              f"{r.propagator_fraction:>9.2f} {r.sample_steps:>13} "
              f"{r.point_steps_per_second:>13.3g}" for r in results]
    lines += ["fraction: of the FFT limit, with the run loop's sampling at its default rate "
              "(unsampled: the propagator alone).",
              "A run of N points and S steps takes about N·S / (point-steps/s) seconds here "
              "(plus writing snapshots)."]
    return lines


def describe_runfile(rf, path) -> dict:
    """What `inspect` shows of an open run file, as plain data (for --json too)."""
    attrs = rf.attrs
    obs = rf.observables()
    n = len(rf)
    out = {
        "file": str(path), "status": rf.status, "title": str(attrs.get("title", "")),
        "format_version": int(attrs["format_version"]),
        "sojourn_version": str(attrs.get("sojourn_version", "")),
        "created": str(attrs.get("created", "")), "units": rf.units,
        "provenance": json.loads(attrs.get("provenance", "{}")),
        "grid_points": rf.points,
        **({"grid_points_y": len(rf.coordinate("y"))} if "y" in rf.axes else {}),
        "snapshots": n, "t_last": float(obs["t"][-1]) if n else None,
        "dt": float(attrs["dt"]), "scheme": str(attrs["scheme"]),
        "detectors": [float(d) for d in rf.samples()["detectors"]],
        "final": {k: float(v[-1]) for k, v in obs.items() if len(v)},
        "analysis": rf.analysis() is not None,
        "forced": str(attrs.get("forced") or ""),
        "axes": list(getattr(rf, "axes", ("x",))),
    }
    return out


def format_tunnelling_times(report: dict, time_unit: str = "") -> list:
    """Every tunnelling time of a `delay --json` report side by side: the phase
    time of each method, the dwell time and the Larmor times τ_y, τ_z, τ, each
    measured (± its error bar, when `--verify` gave one) and predicted, per
    channel (a channel without a clock shows '—')."""
    channels = [c for c in ("reflection", "transmission") if report.get(c)]
    if not channels:
        return []
    rows = []
    methods = list(dict.fromkeys(m for c in channels for m in report[c]["measured"]))
    for m in methods:
        rows.append((f"phase time ({m})", [
            _cell(report[c]["measured"].get(m, {}), "delay") for c in channels]))
    rows.append(("dwell", [_cell(report[c]["dwell"], "measured") for c in channels]))
    for key, label in (("tau_y", "Larmor τ_y"), ("tau_z", "Larmor τ_z"), ("tau", "Larmor τ")):
        rows.append((label, [_cell((report[c].get("larmor") or {}).get(key, {}), "measured")
                             for c in channels]))
    head = f"  {'':<22}" + "".join(f"{c + ' measured':>24}{'predicted':>14}" for c in channels)
    lines = [f"tunnelling times ({time_unit})" if time_unit else "tunnelling times", head]
    for label, cells in rows:
        lines.append(f"  {label:<22}" + "".join(f"{a:>24}{num(b):>14}" for a, b in cells))
    return lines


def _cell(entry: dict, key: str) -> tuple:
    """(measured text with its error bar if any, predicted) of one table entry."""
    error = entry.get("error")
    text = num(entry.get(key))
    return (f"{text} ±{error:.2g}" if isinstance(error, (int, float)) else text,
            entry.get("predicted"))
