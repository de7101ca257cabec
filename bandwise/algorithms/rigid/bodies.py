"""The rigid bodies of a model and their incidence with nodes.

Concern: every face-connected block of elements is one rigid body; a
pin-jointed line element (nodes without rotations) is a body of its own;
line elements whose nodes carry rotations join rigidly.  Gives the distinct
(node, body) pairs sorted by node, with one compiled pass for big meshes.

Sources: the body-and-joint model of C. R. Calladine, "Buckminster Fuller's
'Tensegrity' structures and Clerk Maxwell's rules for the construction of
stiff frames", Int. J. Solids Struct. 14 (1978) 161-172.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import PLANE, PLANE_FRAME, SCALAR, SOLID, SPACE, DofLayout
from bandwise.core.elements import cell_dimension
from bandwise.core.model import Model

from .motions import _BIT, ROTATIONS, _is_planar


@dataclass(frozen=True)
class Bodies:
    """The rigid bodies of a model and their incidence with nodes.

    Attributes
    ----------
    n
        Number of bodies.
    own
        DOF mask each body stiffens (before intersecting with its nodes' DOFs).
    node, body
        Distinct (node, body) incidences, sorted by node.
    is_bar
        True for a pin-jointed line element body.
    """

    n: int
    own: NDArray[np.int64]
    node: NDArray[np.int64]
    body: NDArray[np.int64]
    is_bar: NDArray[np.bool_]


@numba.njit(cache=True, nogil=True)
def _first_body(data, body, first, multi):  # pragma: no cover - compiled
    """first[v] = the first body seen at node v; multi[v] = v is in two bodies or more."""
    for e in range(data.shape[0]):
        b = body[e]
        if b < 0:
            continue
        for a in range(data.shape[1]):
            v = data[e, a]
            f = first[v]
            if f == -1:
                first[v] = b
            elif f != b:
                multi[v] = True


def _own_mask(space: str, dim: int, planar: bool) -> int:
    if space == "scalar":
        return SCALAR
    if dim == 3:
        return SOLID
    if dim == 2:
        return PLANE if planar else SPACE
    return PLANE_FRAME if planar else SPACE


def make_bodies(model: Model, layout: DofLayout, space: str,
                labels: list[NDArray[np.int64]] | None = None) -> Bodies:
    """Split the coupling elements into rigid bodies (see the module docstring).

    Parameters
    ----------
    model, layout, space
        The mesh, its DOFs, and its motion space (:func:`motion_space`).
    labels
        Face-connected block of every cell (from
        :func:`bandwise.algorithms.topology.face_connected_blocks`), if already known.
    """
    if labels is None:
        from ..topology import face_connected_blocks

        _, labels = face_connected_blocks(model)
    planar = space == "plane" or _is_planar(model)   # as the DOF layout decides families
    rot_needed = _BIT["rz"] if space == "plane" else ROTATIONS
    n_blocks = max((int(lab.max()) + 1 for lab in labels if lab.size), default=0)
    dim_of_block = np.zeros(n_blocks, dtype=np.int64)
    block_pinned = np.zeros(n_blocks, dtype=bool)
    for b, lab in zip(model.cells, labels):
        keep = lab >= 0
        if not keep.any():
            continue
        dim = cell_dimension(b.type) or 0
        dim_of_block[lab[keep]] = dim
        if dim == 1 and space != "scalar":
            lacks = (layout.masks[b.data[keep]] & rot_needed) != rot_needed
            block_pinned[np.unique(lab[keep][lacks.any(axis=1)])] = True
    # pin-jointed line blocks: one body per element
    body_labels, extra_own, extra_bar = [], [], []
    next_id = n_blocks
    for b, lab in zip(model.cells, labels):
        lab = lab.copy()
        split = (lab >= 0) & block_pinned[np.maximum(lab, 0)] if lab.size else lab >= 0
        if split.any():
            k = int(np.count_nonzero(split))
            lab[split] = np.arange(next_id, next_id + k)
            next_id += k
            extra_own.append(np.full(k, _own_mask(space, 1, planar), dtype=np.int64))
            extra_bar.append(np.ones(k, dtype=bool))
        body_labels.append(lab)
    own = np.array([_own_mask(space, int(d), planar) for d in dim_of_block], dtype=np.int64)
    own = np.concatenate([own, *extra_own]) if extra_own else own
    is_bar = np.concatenate([np.zeros(n_blocks, dtype=bool), *extra_bar])
    node, body = _incidence(model, body_labels)
    # bodies that only existed as a whole pin-jointed block are empty now: keep ids, no nodes
    return Bodies(next_id, own, node, body, is_bar)


def _incidence(model: Model, labels: list[NDArray[np.int64]]) -> tuple[NDArray[np.int64], ...]:
    """Distinct (node, body) pairs sorted by node, with a compiled pass for big meshes."""
    n = model.n_nodes
    first = np.full(n, -1, dtype=np.int64)
    multi = np.zeros(n, dtype=bool)
    regular = [(b.data, lab) for b, lab in zip(model.cells, labels)
               if lab.size and (lab >= 0).any()]
    for data, lab in regular:
        _first_body(np.ascontiguousarray(data, dtype=np.int64), lab, first, multi)
    single = np.flatnonzero((first >= 0) & ~multi)
    nodes, bodies = [single], [first[single]]
    if multi.any():
        mn, mb = [], []
        for data, lab in regular:
            touch = (lab >= 0) & multi[data].any(axis=1)
            if touch.any():
                d = data[touch]
                sel = multi[d]
                mn.append(d[sel])
                mb.append(np.broadcast_to(lab[touch][:, None], d.shape)[sel])
        nb = int(max(first.max(), max(int(x.max()) for x in mb))) + 1
        key = np.unique(np.concatenate(mn) * nb + np.concatenate(mb))
        nodes.append(key // nb)
        bodies.append(key % nb)
    node = np.concatenate(nodes)
    body = np.concatenate(bodies)
    order = np.lexsort((body, node))
    return node[order], body[order]
