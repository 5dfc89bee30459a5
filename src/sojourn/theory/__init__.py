"""Stationary scattering theory on numbers: the layered solver (`layers`),
r, t and delays (`scattering`), states and exact synthesis (`states`),
packet-averaged predictions (`averages`), Floquet sidebands of driven
potentials (`floquet`, `floquet_averages`) and published closed forms
(`closed_forms`). The command-line tables (`tables`, which read a Scenario)
are imported on their own: the physics here takes numbers only."""
from .layers import Layers, layers_from_potential
from .scattering import Scattering, scatter
from .states import stationary_state, synthesize
from .averages import ChannelPrediction, PacketPrediction, packet_prediction, share_above_top
from .floquet import (DrivenLayers, FloquetScattering, buttiker_landauer_time, driven_layers,
                      floquet_scatter, sideband_asymmetry, weak_drive_sidebands)
from .floquet_averages import PacketSidebands, packet_sidebands

__all__ = [
    "Layers", "layers_from_potential", "Scattering", "scatter", "stationary_state",
    "synthesize", "ChannelPrediction", "PacketPrediction", "packet_prediction",
    "share_above_top", "DrivenLayers", "FloquetScattering", "buttiker_landauer_time",
    "driven_layers", "floquet_scatter", "sideband_asymmetry", "weak_drive_sidebands",
    "PacketSidebands", "packet_sidebands",
]
