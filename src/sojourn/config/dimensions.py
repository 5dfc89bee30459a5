"""Which keys of a validated scenario do not fit its grid's dimensions (a
line or the plane): a pair where one number belongs, a shape of the plane or
a formula in y on a line, an axis a line does not have. `scenario.validate`
turns the answer into the one-line error naming file, line and key."""
from __future__ import annotations

from typing import Optional


def dimension_problem(scenario) -> Optional[tuple[tuple, str]]:
    """(key path, message) for the first key that does not fit the grid's
    dimensions (a line or the plane), or None when all do."""
    plane = scenario.dimensions == 2
    packet = scenario.packet
    if plane != isinstance(packet.center, tuple):
        return ("packet", "center"), (
            "must be [x, y] on a grid in the plane" if plane else
            "must be one number on a grid along one axis (a pair needs grid.span [[x0, x1], "
            "[y0, y1]])")
    if not plane and isinstance(packet.width, tuple):
        return ("packet", "width"), "[σx, σy] needs a grid in the plane; give one width"
    if not plane and not isinstance(packet.direction, str):
        return ("packet", "direction"), ("an angle needs a grid in the plane; on a line it is "
                                         "'right' or 'left'")
    for index, (item, term) in enumerate(zip(scenario.potential, scenario.terms)):
        if getattr(term, "axis", "x") == "y" and (not plane or getattr(term, "planar", False)):
            kind = next(iter(type(item).model_fields))
            return ("potential", index, kind, "axis"), (
                "a shape of the plane has no axis; give its outline in x and y" if plane else
                "axis: y needs a grid in the plane (grid.span [[x0, x1], [y0, y1]])")
        if getattr(term, "planar", False) and not plane:
            kind = next(iter(type(item).model_fields))
            what = "a formula in y" if kind == "expression" else f"'{kind}' is a shape of the plane"
            return ("potential", index, kind), (f"{what}: it needs grid.span [[x0, x1], "
                                                "[y0, y1]] and points [Nx, Ny]")
        if plane and (getattr(term, "drive", None) is not None
                      or getattr(term, "uses_time", False)):
            kind = next(iter(type(item).model_fields))
            return ("potential", index, kind) + (("drive",) if term.drive is not None else ()), (
                "a potential that changes in time runs on a line only (one grid axis)")
    if plane and scenario.evolve.accuracy is not None:
        return ("evolve", "accuracy"), ("a requested accuracy chooses the grid and step on a "
                                        "line only; in the plane give points and dt")
    if plane and scenario.larmor is not None:
        return ("larmor",), "a Larmor clock runs on a line only (one grid axis)"
    obstacle = plane and len(scenario.terms) == 1 and \
        getattr(scenario.terms[0], "kind", None) in ("disk", "ring")
    for key in ("ring", "bins"):
        if getattr(scenario.measure, key, None) is not None and not obstacle:
            return ("measure", key), ("a detector circle needs a grid in the plane and one "
                                      "disk or ring as the whole potential")
    return None
