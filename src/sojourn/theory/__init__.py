"""Stationary scattering theory: the layered solver, states, packet-averaged predictions, tables, closed forms."""
