"""The command-line edge of the theory: a Scenario turned into the numbers the
physics functions take, tables (JSON-ready, CSV, plain text) and a figure."""
from __future__ import annotations

import math
from typing import NamedTuple, Optional

import numpy as np

from ..build import default_region
from ..errors import TheoryError
from ..model.grid import Grid
from ..model.packets import PacketInfo, describe, in_plane
from ..model.potentials import Potential
from .averages import packet_prediction
from .floquet import buttiker_landauer_time, driven_layers, sideband_asymmetry
from .floquet_averages import packet_sidebands
from .oblique import lateral_shifts
from .larmor import larmor_times, packet_larmor
from .layers import check_scattering
from .scattering import scatter
from ..render.options import unit_label
from ..render.styles import PAPER, apply_look, fit_inside


class TheoryInputs(NamedTuple):
    """What the physics functions take, read off a scenario the way a run does."""

    potential: Potential
    packet: PacketInfo
    hbar: float
    mass: float
    reference: Optional[float]
    region: Optional[tuple[float, float]]


def scenario_inputs(scenario) -> TheoryInputs:
    """The potential, the packet as the run describes it (k₀ from V at the
    packet's centre), ħ, m, ``measure.reference`` and the dwell region by the
    run's own rule (``measure.region``, else `build.default_region`). In the
    plane: the theory of the motion along x (the packet at k_x), for a
    potential of x alone (PHYSICS §9)."""
    potential = scenario.build_potential()
    plane = scenario.dimensions == 2
    if plane and not potential.along_x:
        raise TheoryError("the potential has a shape of the plane (or a formula in y): the "
                          "stationary theory here is that of potentials of x alone")
    check_scattering(potential)
    hbar, mass = scenario.hbar, scenario.particle_mass
    center = scenario.packet.center[0] if plane else scenario.packet.center
    level = float(potential(np.array([center]))[0])
    try:
        packet = in_plane(scenario.packet, hbar, mass, level)[0] if plane else \
            describe(scenario.packet, hbar, mass, level)
    except ValueError as exc:
        raise TheoryError(f"packet.energy: {exc}") from None
    if scenario.measure.region is not None:
        region = tuple(float(v) for v in scenario.measure.region)
    else:
        width = scenario.absorber.width if scenario.absorber is not None else 0.0
        grid = Grid(*scenario.grid.x_span, scenario.grid.x_points) if plane else \
            Grid.from_spec(scenario.grid)
        region = default_region(potential, grid, width, packet)
    return TheoryInputs(potential, packet, hbar, mass, scenario.measure.reference, region)


def default_energies(packet: PacketInfo, hbar: float, mass: float, n: int = 201,
                     floor: Optional[float] = None) -> np.ndarray:
    """Energies level + ħ²k²/2m for k in |k₀| ± 4σ_k (k kept above |k₀|/100 and,
    with `floor`, the energies above it): the packet's spectrum."""
    k0, sk = abs(packet.k0), packet.sigma_k
    c = hbar ** 2 / (2 * mass)
    k_lo = max(k0 - 4 * sk, k0 / 100)
    if floor is not None and floor > packet.level:
        k_lo = max(k_lo, math.sqrt((floor - packet.level) / c) * (1 + 1e-9))
    k = np.linspace(k_lo, k0 + 4 * sk, n)
    return packet.level + c * k ** 2


def parse_energies(text: str) -> np.ndarray:
    """'A:B:N' → N energies from A to B (inclusive)."""
    parts = str(text).split(":")
    try:
        if len(parts) != 3:
            raise ValueError
        a, b, n = float(parts[0]), float(parts[1]), int(parts[2])
    except ValueError:
        raise TheoryError(f"--energies must look like A:B:N (two numbers and a count), "
                          f"got {text!r}") from None
    if n < 1 or not (math.isfinite(a) and math.isfinite(b)):
        raise TheoryError(f"--energies: need finite A, B and N >= 1 (got {text!r})")
    if n > 1_000_000:
        raise TheoryError(f"--energies: N = {n} is too many points (at most 1000000)")
    return np.linspace(a, b, n) if n > 1 else np.array([a])


def _clean(values) -> list:
    return [None if (v is None or not math.isfinite(float(v))) else float(v) for v in values]


def theory_table(scenario, energies=None, *, packet: bool = True) -> dict:
    """Everything `sojourn theory` reports, JSON-ready (None where undefined).

    Arrays: energy, R, T, phase_reflection, phase_transmission,
    delay_reflection, delay_transmission, dwell; plus units, reference_points,
    levels, the dwell region and (unless ``packet=False``) the packet-averaged
    predictions. The packet, reference and region are those a run of the
    scenario uses (`scenario_inputs`).
    """
    inputs = scenario_inputs(scenario)
    pot, info = inputs.potential, inputs.packet
    direction = "right" if info.k0 > 0 else "left"
    incidence = pot.levels()[0 if direction == "right" else 1]
    E = (default_energies(info, inputs.hbar, inputs.mass, floor=incidence)
         if energies is None else np.asarray(energies, dtype=float))
    sc = scatter(pot, E, hbar=inputs.hbar, x_r=inputs.reference, direction=direction,
                 dwell=inputs.region is not None, dwell_region=inputs.region)
    opn = sc.open
    units = scenario.unit_system
    phase_t = np.where(opn, sc.phase_transmission, np.nan)
    phase_r = np.where(np.abs(sc.r) > 0, sc.phase_reflection, np.nan)
    table = {
        "scenario": scenario.title,
        "units": {"length": units.length, "energy": units.energy, "time": units.time,
                  "mass": units.mass, "phase": "rad", "system": units.name},
        "direction": sc.direction,
        "levels": _clean(pot.levels()),
        "reference_points": {"x_r": sc.x_r, "x_t": sc.x_t},
        "dwell_region": _clean(inputs.region) if inputs.region else None,
        "energy": _clean(sc.energy),
        "R": _clean(sc.R),
        "T": _clean(sc.T),
        "phase_reflection": _clean(phase_r),
        "phase_transmission": _clean(phase_t),
        "delay_reflection": _clean(sc.delay_reflection),
        "delay_transmission": _clean(sc.delay_transmission),
        "dwell": _clean(sc.dwell) if sc.dwell is not None else [None] * len(sc.energy),
    }
    if getattr(scenario, "larmor", None) is not None:
        table.update(_larmor_columns(scenario, inputs, sc.energy, direction, packet))
    if pot.drives():
        table["drive"] = _drive_columns(inputs, packet)
    if packet:
        pred = packet_prediction(pot, info, hbar=inputs.hbar, mass=inputs.mass,
                                 reference=inputs.reference, region=inputs.region)
        table["packet"] = pred.as_dict()
        k = np.linspace(pred.k_range[0], pred.k_range[1], 201)
        table["packet_spectrum"] = {
            "energy": _clean(info.level + (inputs.hbar * k) ** 2 / (2 * inputs.mass)),
            "weight_dk": _clean(np.exp(-0.5 * ((k - pred.k0) / pred.sigma_k) ** 2)),
        }
        if scenario.dimensions == 2:   # the energies above are the motion along x, E_x
            k_y = in_plane(scenario.packet, inputs.hbar, inputs.mass, info.level)[1].k0
            shifts = lateral_shifts(pot, info, k_y, inputs.hbar, inputs.mass, inputs.reference,
                                    pred)
            table["plane"] = {
                "angle": math.degrees(math.atan2(k_y, info.k0)), "k_x": info.k0, "k_y": k_y,
                "lateral_shift": {c: None if v is None else {key: _clean([x])[0]
                                                             for key, x in v.items()}
                                  for c, v in shifts.items()}}
    return table


COLUMNS = ("energy", "R", "T", "phase_reflection", "phase_transmission",
           "delay_reflection", "delay_transmission", "dwell")
LARMOR_COLUMNS = ("tau_y_reflection", "tau_z_reflection", "tau_y_transmission",
                  "tau_z_transmission")


ASYMMETRY_SPAN = np.geomspace(0.25, 4.0, 9)     # ω / the scenario's ω for the asymmetry curve


def _drive_columns(inputs: TheoryInputs, packet: bool) -> dict:
    """A driven scenario: τ_BL at E₀, the asymmetry curve T(+1)/T(−1) against ω
    at E₀, and the packet-averaged sidebands (the arrays of the table are the
    undriven potential's)."""
    pot, info, hbar, mass = inputs.potential, inputs.packet, inputs.hbar, inputs.mass
    out = {"note": "R, T and the delays above are the undriven potential's; a driven one "
                   "scatters into sidebands E0 + n*hbar*omega and has no phase delays"}
    try:
        layers = driven_layers(pot, hbar)
        seen = layers.mirrored() if info.k0 < 0 else layers
        omegas = layers.omega * ASYMMETRY_SPAN
        tau = buttiker_landauer_time(pot, info.energy, hbar=hbar)
        out.update(omega=layers.omega, tau_bl=tau, asymmetry={
            "omega": _clean(omegas), "omega_tau_bl": _clean(omegas * tau),
            "T_plus_over_T_minus": _clean(sideband_asymmetry(seen, info.energy, omegas,
                                                             hbar=hbar, mass=mass))})
        if packet:
            ps = packet_sidebands(pot, info, hbar=hbar, mass=mass)
            out["packet_sidebands"] = {
                "order": list(ps.orders), "energy": _clean([ps.energy[n] for n in ps.orders]),
                **{f"{kind}_{ch}": _clean([getattr(ps, kind)[ch][n] for n in ps.orders])
                   for kind in ("stationary", "windowed") for ch in ("reflection", "transmission")}}
    except TheoryError as exc:
        out["error"] = str(exc)
    return out


def _larmor_columns(scenario, inputs: TheoryInputs, E, direction: str, packet: bool) -> dict:
    """Larmor times of both channels (and their packet averages) for a scenario
    with a ``larmor`` clock; the region defaults to the potential's extent."""
    spec = scenario.larmor
    region = tuple(spec.region) if spec.region is not None else inputs.potential.support()
    lt = larmor_times(inputs.potential, E, hbar=inputs.hbar, region=region,
                      direction=direction)
    out = {"larmor_region": _clean(lt.region), "larmor_omega": float(spec.omega)}
    out.update({name: _clean(getattr(lt, name)) for name in LARMOR_COLUMNS})
    if packet:
        info = inputs.packet
        avg = packet_larmor(inputs.potential, info.k0, info.sigma_k, info.level,
                            hbar=inputs.hbar, omega=spec.omega, region=region)
        out["larmor_packet"] = {
            name: None if ch is None else {key: (list(v) if isinstance(v, tuple) else v)
                                           for key, v in ch.items()}
            for name, ch in avg.items()}
    return out


def _columns(table: dict) -> tuple:
    return COLUMNS + (LARMOR_COLUMNS if "tau_y_transmission" in table else ())


def table_csv(table: dict) -> str:
    """The per-energy columns as CSV text (empty fields where undefined)."""
    cols = _columns(table)
    lines = [",".join(cols)]
    for row in zip(*(table[c] for c in cols)):
        lines.append(",".join("" if v is None else repr(v) for v in row))
    return "\n".join(lines) + "\n"


DISPLAY_ROWS = 21   # rows a terminal table shows (the first, the last and evenly between)


def _display_rows(n: int) -> list:
    if n <= DISPLAY_ROWS:
        return list(range(n))
    return sorted({round(i * (n - 1) / (DISPLAY_ROWS - 1)) for i in range(DISPLAY_ROWS)})


def format_table(table: dict) -> str:
    """A readable plain-text table with the packet summary below it."""
    u = table["units"]
    heads = [f"E [{u['energy']}]", "R", "T", "phi_r [rad]", "phi_t [rad]",
             f"tau_R [{u['time']}]", f"tau_T [{u['time']}]", f"dwell [{u['time']}]"]
    cols = _columns(table)
    if len(cols) > len(COLUMNS):
        heads += [f"{n} [{u['time']}]" for n in ("tauy_R", "tauz_R", "tauy_T", "tauz_T")]
    rows = [heads]
    all_rows = list(zip(*(table[c] for c in cols)))
    shown = _display_rows(len(all_rows))
    for i in shown:
        rows.append(["-" if v is None else f"{v:.5g}" for v in all_rows[i]])
    width = [max(len(r[i]) for r in rows) for i in range(len(heads))]
    text = [f"# {table.get('scenario', '')}",
            f"# r referenced at x_r = {table['reference_points']['x_r']:g} {u['length']}, "
            f"t at x_t = {table['reference_points']['x_t']:g} {u['length']} "
            f"(incident from the {'left' if table['direction'] == 'right' else 'right'})"]
    text += ["  ".join(c.rjust(w) for c, w in zip(r, width)) for r in rows]
    if len(shown) < len(all_rows):
        text.append(f"# {len(shown)} of {len(all_rows)} energies shown, rounded; --json or --csv "
                    "give every energy at full precision")
    pk = table.get("packet")
    if pk:
        def fmt(v):
            return "-" if v is None else f"{v:.8g}"
        text.append("")
        text.append(f"packet: k0 = {pk['k0']:.6g}, sigma_k = {pk['sigma_k']:.4g}, "
                    f"E0 = {pk['energy0']:.6g}, <E> = {pk['mean_energy']:.6g} {u['energy']}; "
                    f"share above barrier top = {100 * pk['share_above_top']:.3g}%")
        for name in ("reflection", "transmission"):
            ch = pk[name]
            if ch:
                text.append(f"  {name:12s} P = {fmt(ch['probability'])}  centroid = "
                            f"{fmt(ch['centroid_delay'])}  flux = {fmt(ch['flux_delay'])}  "
                            f"spectral = {fmt(ch['spectral_delay'])}  Wigner(E0) = "
                            f"{fmt(ch['wigner_delay'])} {u['time']}")
        text.append(f"  dwell (packet) = {fmt(pk['dwell'])} {u['time']}")
        plane = table.get("plane")
        if plane:
            text.append(f"  in the plane at {plane['angle']:.4g} deg: the energies are those of the "
                        f"motion along x (k_x = {plane['k_x']:.6g}, k_y = {plane['k_y']:.6g})")
            for name, shift in plane["lateral_shift"].items():
                if shift:
                    text.append(f"  {name:12s} lateral shift D = {fmt(shift['packet'])} (packet), "
                                f"{fmt(shift['stationary'])} (stationary, k0) {u['length']}")
        for w in pk["warnings"]:
            text.append(f"  warning: {w}")
    lp = table.get("larmor_packet")
    if lp:
        a, b = table["larmor_region"]
        text.append(f"Larmor clock on [{a:g}, {b:g}] {u['length']}, omega_L = "
                    f"{table['larmor_omega']:g} per {u['time']} (packet averages, weights "
                    f"|psi0(k)|^2 R or T):")
        for name in ("reflection", "transmission"):
            ch = lp.get(name)
            if ch:
                text.append(f"  {name:12s} tau_y = {ch['tau_y']:.8g}  tau_z = {ch['tau_z']:.8g}  "
                            f"tau = {ch['tau']:.8g} {u['time']}  (at omega_L: tau_y = "
                            f"{ch['tau_y_exact']:.8g}, tau_z = {ch['tau_z_exact']:.8g})")
    drive = table.get("drive")
    if drive:
        text.append(f"driven: {drive['note']}")
        if "error" in drive:
            text.append(f"  no Floquet prediction: {drive['error']}")
        else:
            text.append(f"  omega = {drive['omega']:g} per {u['time']}; Buttiker-Landauer time "
                        f"at E0 = {drive['tau_bl']:.6g} {u['time']}")
            a = drive["asymmetry"]
            text.append("  T(+1)/T(-1) at E0: " + ", ".join(
                f"{fmt(r)} (omega*tau = {w:.3g})" for r, w in zip(a["T_plus_over_T_minus"],
                                                                  a["omega_tau_bl"])))
            ps = drive.get("packet_sidebands")
            if ps:
                for ch in ("reflection", "transmission"):
                    text.append(f"  packet {ch:12s} " + "  ".join(
                        f"{n:+d}: {fmt(v)}" for n, v in zip(ps["order"], ps[f"stationary_{ch}"])))
    return "\n".join(text) + "\n"


def plot_theory(table: dict, path, dpi: float = 300.0):
    """R, T and the phase delays against energy in sojourn's paper look (a
    Figure on its own Agg canvas, no pyplot state): the packet's spectrum
    shaded, E₀ marked, τ_R and τ_T each in its channel's colour where the
    channel is open, the dwell time only where it is defined and not zero
    (a step has no region to dwell in). Returns the Figure."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    def arr(key):
        return np.array([np.nan if v is None else v for v in table[key]], dtype=float)

    look, E, u = PAPER, arr("energy"), table["units"]
    font, lw = 0.7 * look.font, 0.8 * look.line
    fig = Figure(figsize=(7, 6), layout="constrained")
    FigureCanvasAgg(fig)
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    R, T = arr("R"), arr("T")
    ax1.plot(E, R, color=look.reflected, linewidth=lw, label="reflection R", gid="R")
    if np.nanmax(np.nan_to_num(T)) > 0:
        ax1.plot(E, T, color=look.transmitted, linewidth=lw, label="transmission T", gid="T")
    ax1.set_ylabel("probability", fontsize=font)
    ax1.set_ylim(-0.02, 1.02)
    # τ_R broad and pale beneath a thin τ_T: both stay visible where they coincide
    # (a symmetric barrier has τ_R = τ_T with these reference points)
    curves = [("delay_reflection", look.reflected, "τ_R (reflection)", "-", 3.2),
              ("delay_transmission", look.transmitted, "τ_T (transmission)", "-", 1.0),
              ("dwell", look.theory, "τ_D (dwell time)", (0, (4, 2)), 1.0)]
    if "tau_y_transmission" in table:       # a Larmor clock: its times beside the others
        curves += [("tau_y_transmission", look.transmitted, "τ_y (Larmor, transmission)", ":", 1.0),
                   ("tau_z_transmission", look.transmitted, "τ_z (Larmor, transmission)", "-.", 1.0),
                   ("tau_y_reflection", look.reflected, "τ_y (Larmor, reflection)", ":", 1.0),
                   ("tau_z_reflection", look.reflected, "τ_z (Larmor, reflection)", "-.", 1.0)]
    for key, colour, label, style, width in curves:
        values = arr(key)
        finite = np.isfinite(values)
        if not finite.any() or (key == "dwell" and np.all(values[finite] == 0)):
            continue
        ax2.plot(E, values, color=colour, linewidth=width * lw, linestyle=style, label=label,
                 gid=key, alpha=0.55 if width > 1 else 1.0)
    ax2.set_ylabel(f"delay ({unit_label(u['time'])})", fontsize=font)
    ax2.set_xlabel(f"energy E ({unit_label(u['energy'])})", fontsize=font)
    spec = table.get("packet_spectrum")
    if spec:
        se = np.array(spec["energy"], dtype=float)
        sw = np.array(spec["weight_dk"], dtype=float)
        for ax in (ax1, ax2):
            shade = ax.twinx()
            shade.fill_between(se, 0, sw / sw.max(), color=look.density, alpha=0.12,
                               linewidth=0, label="packet spectrum" if ax is ax1 else None)
            shade.set_ylim(0, 1.15)
            shade.set_yticks([])
            shade.set_zorder(ax.get_zorder() - 1)
            ax.patch.set_visible(False)
            shade.patch.set_visible(False)
    e0 = (table.get("packet") or {}).get("energy0")
    if isinstance(e0, (int, float)):
        for ax in (ax1, ax2):
            ax.axvline(e0, color=look.theory, linewidth=0.6 * lw, linestyle=":", gid="E0")
        ax1.text(e0, 0.5, f" E₀ = {e0:.4g} {unit_label(u['energy'])}", color=look.theory,
                 transform=ax1.get_xaxis_transform(), fontsize=0.75 * font, va="center")
    if np.isfinite(E).any():
        ax1.set_xlim(float(np.nanmin(E)), float(np.nanmax(E)))
    ax1.legend(fontsize=0.75 * font, frameon=False, loc="center right")
    ax2.legend(fontsize=0.75 * font, frameon=False, loc="best")
    ax1.set_title("stationary scattering: how much is reflected and transmitted",
                  fontsize=0.85 * font, loc="left")
    ax2.set_title("and how long each channel is delayed (ħ dφ/dE)", fontsize=0.85 * font,
                  loc="left")
    fig.suptitle(table.get("scenario", ""), fontsize=font, color=look.text)
    apply_look(fig, [ax1, ax2], look, font)
    fit_inside(fig)
    fig.savefig(path, dpi=dpi, facecolor=fig.get_facecolor())
    return fig
