"""Unit systems. A scenario is computed in its own units; this module holds the
constants that make those units consistent (ħ and the electron mass expressed
in them), taken from scipy.constants."""
from __future__ import annotations

from dataclasses import dataclass, asdict

from scipy import constants as _c


@dataclass(frozen=True)
class UnitSystem:
    """A consistent set of units: ħ in energy·time, the electron mass in
    energy·time²/length²."""

    name: str
    length: str
    energy: str
    time: str
    mass: str
    hbar: float
    electron_mass: float

    def as_dict(self) -> dict:
        return asdict(self)


LAB = UnitSystem(
    name="lab", length="nm", energy="eV", time="fs", mass="m_e",
    hbar=_c.hbar / _c.e * 1e15,                      # eV·fs
    electron_mass=_c.m_e / _c.e * (1e-9 / 1e-15) ** 2,  # eV·fs²/nm²
)

ATOMIC = UnitSystem(
    name="atomic", length="bohr", energy="hartree", time="hbar/E_h", mass="m_e",
    hbar=1.0, electron_mass=1.0,
)

SYSTEMS = {"lab": LAB, "atomic": ATOMIC}


def get(name: str) -> UnitSystem:
    """The unit system called `name` ('lab' or 'atomic')."""
    return SYSTEMS[name]
