"""Sweeps: many runs of one base scenario, one table."""
