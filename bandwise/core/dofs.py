"""Degrees of freedom per node, chosen from the element families present.

Each node carries the union of the DOFs its elements need (common practice
of displacement-based finite elements):

==============================  ======================  ==================
element family                  DOFs of its nodes       count
==============================  ======================  ==================
3D solid (tetra, hexa, ...)     ux uy uz                3
plane (2D cells in a plane)     ux uy                   2
shell (2D cells not planar)     ux uy uz rx ry rz       6
plane frame (lines in a plane)  ux uy rz                3
space frame (lines in 3D)       ux uy uz rx ry rz       6
scalar field (``physics``)      t                       1
==============================  ======================  ==================

A node shared by a solid and a frame therefore carries 6 DOFs, the solid's
3 translations and the frame's rotations.  Nodes no element references
(orphans) get the layout of the model's main family: they are counted as
unknowns, as a solver would, and reported by the checks.

The layout is a bit mask per node over the DOF names, so mixed models are
laid out exactly and DOF counting needs no Python loop.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .elements import cell_dimension
from .errors import InputError
from .model import Model

#: DOF names in the order they are numbered within a node.
DOF_NAMES: tuple[str, ...] = ("ux", "uy", "uz", "rx", "ry", "rz", "t")
#: The bit of each DOF name in a mask.
DOF_BIT = {name: 1 << k for k, name in enumerate(DOF_NAMES)}

SOLID = DOF_BIT["ux"] | DOF_BIT["uy"] | DOF_BIT["uz"]
PLANE = DOF_BIT["ux"] | DOF_BIT["uy"]
PLANE_FRAME = DOF_BIT["ux"] | DOF_BIT["uy"] | DOF_BIT["rz"]
SPACE = SOLID | DOF_BIT["rx"] | DOF_BIT["ry"] | DOF_BIT["rz"]
SCALAR = DOF_BIT["t"]

#: Named physics choices accepted by ``--physics``.
PHYSICS = ("structural", "scalar")


@dataclass(frozen=True)
class DofLayout:
    """Which DOFs each node carries, and the rule that chose them.

    Attributes
    ----------
    masks
        One bit mask per node over :data:`DOF_NAMES`.
    rule
        Plain-language statement of the rule that produced the layout.
    """

    masks: NDArray[np.int64]
    rule: str
    unnamed: int | None = None  # a uniform count with no standard DOF names

    @property
    def per_node(self) -> NDArray[np.int64]:
        """Number of DOFs of each node."""
        if self.unnamed is not None:
            return np.full(self.masks.shape, self.unnamed, dtype=np.int64)
        return popcount(self.masks)

    @property
    def total(self) -> int:
        """Total number of DOFs."""
        return int(self.per_node.sum())

    @property
    def uniform(self) -> int | None:
        """The DOFs per node if every node has the same count, else None."""
        d = self.per_node
        return int(d[0]) if d.size and np.all(d == d[0]) else None

    def names(self, node: int) -> list[str]:
        """DOF names of one node, in numbering order."""
        if self.unnamed is not None:
            return [f"dof{k + 1}" for k in range(self.unnamed)]
        m = int(self.masks[node])
        return [name for name in DOF_NAMES if m & DOF_BIT[name]]

    def counts_by_family(self) -> dict[str, int]:
        """Number of nodes with each DOF signature, e.g. ``{'ux uy uz': 1200}``."""
        if self.unnamed is not None:
            return {f"{self.unnamed} unnamed DOFs": int(self.masks.size)}
        values, counts = np.unique(self.masks, return_counts=True)
        return {mask_names(int(v)): int(c) for v, c in zip(values, counts)}


def mask_names(mask: int) -> str:
    """The DOF names of a mask, space-separated."""
    return " ".join(name for name in DOF_NAMES if mask & DOF_BIT[name]) or "(none)"


def dof_mask(names: list[str]) -> int:
    """The bit mask of a list of DOF names (``ux``, ``rz``, ``t`` ...)."""
    mask = 0
    for name in names:
        if name not in DOF_BIT:
            raise InputError(f"unknown DOF name {name!r}; known: {' '.join(DOF_NAMES)}")
        mask |= DOF_BIT[name]
    return mask


def popcount(masks: NDArray[np.int64]) -> NDArray[np.int64]:
    """Number of DOFs in each mask (the set bits over ``DOF_NAMES``)."""
    m = np.asarray(masks, dtype=np.int64)
    count = np.zeros(m.shape, dtype=np.int64)
    for k in range(len(DOF_NAMES)):
        count += (m >> k) & 1
    return count


def _nodes_of(data: NDArray[np.int64], n: int) -> NDArray[np.int64]:
    """The distinct nodes of a connectivity array, in O(n + size) (no sort)."""
    present = np.zeros(n, dtype=bool)
    present[data.ravel()] = True
    return np.flatnonzero(present)


def _raise_max(top: NDArray[np.int64], data: NDArray[np.int64], dim: int) -> None:
    """top[v] = max(top[v], dim) for every node v of ``data`` (vectorised)."""
    nodes = _nodes_of(data, top.size)
    top[nodes] = np.maximum(top[nodes], dim)


def _uniform_mask(d: int) -> int:
    return {1: SCALAR, 2: PLANE, 3: SOLID, 6: SPACE}.get(d, 0)


def dof_layout(model: Model, dofs_per_node: int | None = None,
               physics: str | None = None) -> DofLayout:
    """Choose the DOFs of each node from the elements attached to it.

    Parameters
    ----------
    model
        The mesh.
    dofs_per_node
        Override: every node carries this many DOFs.
    physics
        ``"scalar"`` for a scalar field (heat conduction, potential flow ...):
        one DOF ``t`` per node; ``"structural"`` (default) applies the
        family rules above.

    Returns
    -------
    DofLayout
    """
    n = model.n_nodes
    if dofs_per_node is not None:
        if dofs_per_node < 1 or dofs_per_node > 64:
            raise InputError(f"--dofs-per-node must be between 1 and 64, got {dofs_per_node}")
        mask = _uniform_mask(dofs_per_node)
        if mask == 0:  # an unusual count: no standard names, counting only
            return DofLayout(np.zeros(n, dtype=np.int64),
                             f"{dofs_per_node} DOFs per node, as requested", dofs_per_node)
        return DofLayout(np.full(n, mask, dtype=np.int64),
                         f"{dofs_per_node} DOFs per node ({mask_names(mask)}), as requested")
    if physics not in (None, *PHYSICS):
        raise InputError(f"unknown physics {physics!r}; one of: {', '.join(PHYSICS)}")
    if physics == "scalar":
        return DofLayout(np.full(n, SCALAR, dtype=np.int64),
                         "scalar field: 1 DOF per node (t), as requested")
    planar = model.is_planar()
    family_mask = {1: PLANE_FRAME if planar else SPACE, 2: PLANE if planar else SPACE, 3: SOLID}
    family_word = {1: "plane frame" if planar else "space frame",
                   2: "plane" if planar else "shell", 3: "3D solid"}
    blocks = [(cell_dimension(b.type), b.data) for b in model.cells
              if cell_dimension(b.type) and b.data.dtype != object and len(b)]
    top = np.zeros(n, dtype=np.int64)  # highest cell dimension at each node
    for dim, data in blocks:
        _raise_max(top, data, dim)
    masks = np.zeros(n, dtype=np.int64)
    used: dict[int, int] = {}
    tags = 0
    highest = max(dim for dim, _ in blocks) if blocks else 0
    for dim, data in blocks:
        if dim == highest:  # cells of the highest dimension always carry stiffness
            masks[_nodes_of(data, n)] |= family_mask[dim]
            used[dim] = used.get(dim, 0) + len(data)
            continue
        # A cell lying wholly on nodes of higher-dimensional cells is a boundary
        # or tag cell (a gmsh physical surface on a solid): it adds no DOFs.
        structural = (top[data] == dim).any(axis=1)
        tags += int(np.count_nonzero(~structural))
        if not structural.any():
            continue
        masks[_nodes_of(data[structural], n)] |= family_mask[dim]
        used[dim] = used.get(dim, 0) + int(np.count_nonzero(structural))
    if not used:
        raise InputError(f"{model.source or 'mesh'}: no element couples nodes (only vertex cells, "
                         "or cell types bandwise does not analyse)")
    main_dim = max(used, key=lambda d: (used[d], d))
    orphan = masks == 0
    masks[orphan] = family_mask[main_dim]
    parts = [f"{family_word[d]} elements: {mask_names(family_mask[d])}" for d in sorted(used, reverse=True)]
    rule = "; ".join(parts)
    if len(used) > 1:
        rule += " (a node shared by several families carries the union)"
    if tags:
        rule += (f"; {tags} lower-dimensional cells lying on higher-dimensional ones "
                 "taken as boundary/tag cells")
    return DofLayout(masks, rule)
