"""Stationary scattering theory on numbers: the layered solver (`layers`),
r, t and delays (`scattering`), states and exact synthesis (`states`),
packet-averaged predictions (`averages`), the command-line tables (`tables`)
and published closed forms (`closed_forms`)."""
from .layers import Layers, layers_from_potential
from .scattering import Scattering, scatter
from .states import stationary_state, synthesize
from .averages import ChannelPrediction, PacketPrediction, packet_prediction, share_above_top
from .tables import (COLUMNS, default_energies, format_table, parse_energies, plot_theory,
                     scenario_inputs, table_csv, theory_table)

__all__ = [
    "Layers", "layers_from_potential", "Scattering", "scatter", "stationary_state",
    "synthesize", "ChannelPrediction", "PacketPrediction", "packet_prediction",
    "share_above_top", "COLUMNS", "default_energies", "format_table", "parse_energies",
    "plot_theory", "scenario_inputs", "table_csv", "theory_table",
]
