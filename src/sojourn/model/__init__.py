"""The physical model on numbers: units, grid, packets, potentials (terms and their registry), formulas, absorbing layers."""
