"""Delays measured from a run, each beside its own theoretical prediction."""
