"""Stationary scattering theory on numbers: the layered solver (`layers`),
r, t and delays (`scattering`), states and exact synthesis (`states`),
packet-averaged predictions (`averages`) and published closed forms
(`closed_forms`). The command-line tables (`tables`, which read a Scenario)
are imported on their own: the physics here takes numbers only."""
from .layers import Layers, layers_from_potential
from .scattering import Scattering, scatter
from .states import stationary_state, synthesize
from .averages import ChannelPrediction, PacketPrediction, packet_prediction, share_above_top

__all__ = [
    "Layers", "layers_from_potential", "Scattering", "scatter", "stationary_state",
    "synthesize", "ChannelPrediction", "PacketPrediction", "packet_prediction",
    "share_above_top",
]
