# %% [markdown]
# # sojourn from Python: a packet on a potential step
# A scenario built in code, run in memory, its delays measured and set beside
# stationary-state theory, then opened as an xarray Dataset and drawn.
# Run it as a script or cell by cell (`# %%` cells). The grid is coarse: seconds.

# %%
import tempfile
from pathlib import Path

import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt

import sojourn

scenario = sojourn.load({
    "title": "unit step, E0 = V0/2",
    "units": "atomic",
    "grid": {"span": [-200.0, 200.0], "points": 512},
    "potential": [{"step": {"at": 0.0, "height": 1.0}}],
    "packet": {"center": -60.0, "width": 10.0, "energy": 0.5},
    "evolve": {"duration": 120.0},
    "absorber": {"width": 40.0},
    "record": {"every": 10.0},
})

# %% run in memory (give an output path to write a run file instead)
run = sojourn.run(scenario)
print(run)

# %% the delays, measured by every method, beside their packet-averaged predictions
report = sojourn.delay(run)
for method, result in report.reflection.measured.items():
    print(f"reflection {method:9s} {result.delay:8.4f} {run.units['time']}")

# %% stationary-state theory at a few energies
table = sojourn.theory_table(scenario, "0.3:0.7:5")
for energy, tau in zip(table["energy"], table["delay_reflection"]):
    print(f"E = {energy:.2f}: phase delay {tau:.4f}")

# %% as xarray: named dimensions t, x with units
ds = run.to_xarray()
print(ds.density.attrs)
folder = Path(tempfile.mkdtemp(prefix="sojourn-quickstart-"))
fig, ax = plt.subplots(figsize=(6, 3.5))
ds.density.sel(t=[0.0, 60.0, 120.0], method="nearest").plot.line(x="x", ax=ax)
ax.set_xlim(-120, 40)
fig.savefig(folder / "density.png", dpi=100)
print("wrote", folder / "density.png")
