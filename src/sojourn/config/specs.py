"""The sections of a scenario as pydantic models (grid, packet, evolve, absorber,
record, measure, larmor): their keys, defaults and the checks on each value.
`scenario` assembles them into the Scenario and turns errors into one line."""
from __future__ import annotations

import math
from typing import Annotated, Literal, Optional, Union

from pydantic import BaseModel, BeforeValidator, ConfigDict, Discriminator, Field, Tag, \
    field_validator, model_validator


class _Strict(BaseModel):
    # YAML reads .nan and .inf as floats: no key of a scenario accepts them
    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)


def _pair_kind(value) -> str:
    """'Plane' for a pair of pairs (or of numbers per axis), 'Line' otherwise: the
    tag a one- or two-dimensional value is validated under (dropped from messages)."""
    if isinstance(value, (list, tuple)) and value and isinstance(value[0], (list, tuple)):
        return "Plane"
    return "Line"


def _per_axis_kind(value) -> str:
    return "Plane" if isinstance(value, (list, tuple)) else "Line"


def _auto_word(value):
    """'auto' in any case stays the word; anything else is validated as a number."""
    return value.strip().lower() if isinstance(value, str) and value.strip().lower() == "auto" \
        else value


Range = tuple[float, float]
Count = Annotated[int, Field(ge=16, description="number of grid points")]


class GridSpec(_Strict):
    """One axis: span [left, right], points N or 'auto' (as many as evolve.accuracy
    needs, chosen by build). Two (the plane): span [[x0, x1], [y0, y1]], points [Nx, Ny]."""

    span: Annotated[Union[Annotated[Range, Tag("Line")],
                          Annotated[tuple[Range, Range], Tag("Plane")]], Discriminator(_pair_kind)]
    points: Annotated[Union[Annotated[Union[Count, Literal["auto"]], BeforeValidator(_auto_word),
                                      Tag("Line")],
                            Annotated[tuple[Count, Count], Tag("Plane")]],
                      Discriminator(_per_axis_kind)]

    @field_validator("span")
    @classmethod
    def _ordered(cls, span):
        for pair in (span if isinstance(span[0], tuple) else (span,)):
            if not all(math.isfinite(v) for v in pair):
                raise ValueError("must be two finite numbers [left, right]")
            if pair[1] <= pair[0]:
                raise ValueError(f"right end must exceed left end (got [{pair[0]}, {pair[1]}])")
            if not math.isfinite(pair[1] - pair[0]):
                raise ValueError(f"the box [{pair[0]:g}, {pair[1]:g}] is too long for a float")
        return span

    @property
    def dimensions(self) -> int:
        return 2 if isinstance(self.span[0], tuple) else 1

    @property
    def x_span(self) -> Range:
        return self.span[0] if self.dimensions == 2 else self.span

    @property
    def x_points(self) -> int:
        return self.points[0] if self.dimensions == 2 else self.points

    @property
    def total_points(self) -> Optional[int]:
        """All the grid's points; None for points: auto (build chooses them)."""
        if self.points == "auto":
            return None
        return self.points[0] * self.points[1] if self.dimensions == 2 else self.points

    @property
    def dx(self) -> float:
        if self.points == "auto":
            raise ValueError("grid.points: auto has no spacing until build chooses the points")
        return (self.x_span[1] - self.x_span[0]) / self.x_points


Width = Annotated[float, Field(gt=0, description="rms width of |psi|^2")]


def _direction_kind(value) -> str:
    return "Word" if isinstance(value, str) else "Angle"


class PacketSpec(_Strict):
    """One axis: center x₀, width σ, direction right/left. The plane: center
    [x₀, y₀], width σ or [σx, σy], direction in degrees from +x."""

    shape: Literal["gaussian"] = "gaussian"
    center: Annotated[Union[Annotated[float, Tag("Line")], Annotated[Range, Tag("Plane")]],
                      Discriminator(_per_axis_kind)]
    width: Annotated[Union[Annotated[Width, Tag("Line")],
                           Annotated[tuple[Width, Width], Tag("Plane")]],
                     Discriminator(_per_axis_kind)]
    energy: Optional[float] = Field(default=None, gt=0)
    wavenumber: Optional[float] = None
    direction: Annotated[Union[Annotated[Literal["right", "left"], Tag("Word")],
                               Annotated[float, Tag("Angle")]],
                         Discriminator(_direction_kind)] = "right"

    @model_validator(mode="after")
    def _one_of(self):
        if (self.energy is None) == (self.wavenumber is None):
            raise ValueError("give exactly one of energy or wavenumber")
        return self


def _duration_word(value):
    """'auto' in any case stays the word; other text is refused naming both
    choices; anything else is validated as a number."""
    if isinstance(value, str):
        if value.strip().lower() == "auto":
            return "auto"
        try:
            float(value)
        except ValueError:
            raise ValueError(f"must be a time (a number > 0) or 'auto' (got {value!r})") from None
    return value


class EvolveSpec(_Strict):
    # a time, or 'auto': until every outgoing channel has left the potential and passed
    # its detector (worked out by build from the packet and the stationary delays)
    duration: Annotated[Union[Annotated[float, Field(gt=0)], Literal["auto"]],
                        BeforeValidator(_duration_word)]
    dt: Optional[float] = Field(default=None, gt=0)
    scheme: Literal["strang", "yoshida4"] = "strang"
    precision: Literal["double", "single"] = "double"
    # the relative error every reported delay should reach: build chooses dt (and, with
    # grid.points: auto, the points and the scheme) for it at least cost
    accuracy: Optional[float] = Field(default=None, ge=1e-6, le=0.1)


class AbsorberSpec(_Strict):
    width: float = Field(gt=0)
    strength: Optional[float] = Field(default=None, gt=0, description="peak W (energy units)")


class RecordSpec(_Strict):
    every: Optional[float] = Field(default=None, gt=0)
    output: Optional[str] = None
    compress: bool = False
    # ψ snapshots stored in single precision (half the file, for movies) while the run
    # computes, and checkpoints, in evolve.precision; default: evolve.precision
    precision: Optional[Literal["double", "single"]] = None
    sample_steps: Optional[int] = Field(default=None, ge=1, le=1000,
                                        description="steps between flux/region samples "
                                                    "(default: 50 per packet passage)")


class MeasureSpec(_Strict):
    reference: Optional[float] = None
    detectors: Optional[list[float]] = None
    region: Optional[tuple[float, float]] = None
    # in the plane, off one disk or ring: the detector circle's radius round the
    # obstacle's centre and its number of angle bins (measure.angular)
    ring: Optional[float] = Field(default=None, gt=0)
    bins: Optional[int] = Field(default=None, ge=4, le=720)

    @field_validator("region")
    @classmethod
    def _ordered(cls, region):
        if region is not None and region[1] < region[0]:
            raise ValueError(f"must be [start, end] with end ≥ start (got [{region[0]:g}, "
                             f"{region[1]:g}])")
        return region


class LarmorSpec(_Strict):
    """A Larmor clock: a weak field along z over `region` (default: the
    potential's extent); spin up sees V + ħω/2 there, spin down V − ħω/2."""

    region: Optional[tuple[float, float]] = None
    omega: float = Field(gt=0, description="Larmor angular frequency (1/time unit)")

    @field_validator("region")
    @classmethod
    def _ordered(cls, region):
        if region is not None and not region[1] > region[0]:
            raise ValueError(f"must be [start, end] with end > start (got [{region[0]:g}, "
                             f"{region[1]:g}])")
        return region
