"""The motion space: which rigid motions a model has, and their value at a DOF.

Concern: 6 rigid motions in space (translations, rotations), 3 in a plane
(two translations, the rotation about z), 1 for a scalar field (a constant);
the rows ``u = t + q x r`` of those motions at a point, per DOF name.

Sources: the small-rotation rigid displacement ``u = t + q x r`` (common
practice; e.g. J. C. Maxwell, "On the calculation of the equilibrium and
stiffness of frames", Phil. Mag. 27 (1864) 294-299, counts these 6 motions).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DOF_BIT, SCALAR, DofLayout
from bandwise.core.model import Model

from ..supports import model_extent

_BIT = DOF_BIT
ROTATIONS = _BIT["rx"] | _BIT["ry"] | _BIT["rz"]


def motion_space(model: Model, layout: DofLayout) -> str | None:
    """Which rigid motions apply: ``"space"``, ``"plane"``, ``"scalar"``, or None.

    None when the layout has no DOF names or mixes a scalar field with
    displacements (nothing sensible to say about rigid motions then).
    """
    if layout.unnamed is not None or layout.masks.size == 0:
        return None
    used = int(np.bitwise_or.reduce(layout.masks))
    if used & SCALAR:
        return "scalar" if used == SCALAR else None
    out_of_plane = _BIT["uz"] | _BIT["rx"] | _BIT["ry"]
    if _is_planar(model) and not used & out_of_plane:
        return "plane"
    return "space"


def _is_planar(model: Model, rtol: float = 1e-9) -> bool:
    """``Model.is_planar`` computed column by column (the same rule, faster)."""
    pts = model.points
    if pts.shape[1] < 3 or pts.shape[0] == 0:
        return True
    z = pts[:, 2]
    return bool(z.max() - z.min() <= rtol * (model_extent(pts) or 1.0))


def _n_motions(space: str) -> int:
    return {"space": 6, "plane": 3, "scalar": 1}[space]


def motion_rows(space: str, dof: str, r: NDArray[np.float64]) -> NDArray[np.float64]:
    """Rows of the rigid motions evaluated at one DOF of points ``r`` (body frame, scaled).

    Coordinates: space (tx, ty, tz, qx, qy, qz), plane (tx, ty, qz), scalar (c);
    the displacement is ``u = t + q x r`` and a rotational DOF equals ``q``.
    """
    m = len(r)
    if space == "scalar":
        return np.ones((m, 1))
    rows = np.zeros((m, _n_motions(space)))
    x, y, z = r[:, 0], r[:, 1], r[:, 2]
    if space == "plane":
        if dof == "ux":
            rows[:, 0], rows[:, 2] = 1.0, -y
        elif dof == "uy":
            rows[:, 1], rows[:, 2] = 1.0, x
        elif dof == "rz":
            rows[:, 2] = 1.0
        return rows
    if dof == "ux":
        rows[:, 0], rows[:, 4], rows[:, 5] = 1.0, z, -y
    elif dof == "uy":
        rows[:, 1], rows[:, 3], rows[:, 5] = 1.0, -z, x
    elif dof == "uz":
        rows[:, 2], rows[:, 3], rows[:, 4] = 1.0, y, -x
    else:
        rows[:, 3 + "xyz".index(dof[1])] = 1.0
    return rows


def _space_dofs(space: str) -> tuple[str, ...]:
    return {"space": ("ux", "uy", "uz", "rx", "ry", "rz"), "plane": ("ux", "uy", "rz"),
            "scalar": ("t",)}[space]
