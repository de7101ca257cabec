"""Rigid links and multi-point constraints of the input, as bodies of the analysis.

Concern: a rigid link joins the analysis as one more rigid body owning the
tied components (shared nodes then give its equality constraints exactly);
nodes used only by links get DOFs of their own.

Sources: a node in no element carrying 6 DOFs in space, 3 in the plane, as
a solver gives such a node (common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import PLANE_FRAME, SCALAR, SPACE, DofLayout
from bandwise.core.model import Model

from .bodies import Bodies
from .motions import _is_planar


@dataclass(frozen=True)
class Link:
    """A rigid link or multi-point constraint of the input, for the analysis.

    Attributes
    ----------
    kind
        ``"rigid"`` (the nodes move as one rigid body in ``components``),
        ``"average"`` (the reference follows a weighted average of the
        others) or ``"general"`` (a linear equation between DOFs).
    card
        The card or keyword it came from (for notes).
    nodes
        0-based node indices, reference (independent) node first.
    components
        DOF mask the link ties (all DOFs by default).
    """

    kind: str
    card: str
    nodes: NDArray[np.int64]
    components: int = SPACE


def link_layout(model: Model, layout: DofLayout, links: tuple[Link, ...] | list[Link]) -> DofLayout:
    """The layout with DOFs of their own at nodes that only rigid links use.

    A node in no element (a reference node alone, which the DOF layout
    gives translations only, as an orphan) gets 6 DOFs in 3D, 3 in
    the plane (two translations and the in-plane rotation), as a solver
    gives such a node (common practice).
    """
    rigid = [ln.nodes for ln in links if ln.kind == "rigid" and ln.nodes.size > 1]
    if not rigid:
        return layout
    nodes = np.unique(np.concatenate(rigid))
    in_cell = np.zeros(model.n_nodes, dtype=bool)
    for b in model.cells:
        in_cell[b.data.ravel()] = True
    bare = nodes[~in_cell[nodes]]
    if not bare.size:
        return layout
    masks = layout.masks.copy()
    masks[bare] = PLANE_FRAME if _is_planar(model) else SPACE
    return DofLayout(masks, layout.rule + f"; {bare.size} node(s) used only by rigid links "
                     "carry their own DOFs", layout.unnamed)


def _add_link_bodies(bodies: Bodies, links: list[Link], space: str, planar: bool) -> Bodies:
    """One rigid body per rigid link, owning the link's components.

    Shared nodes then give the equality constraints of the link exactly:
    the dependent nodes follow the rigid motion of the link body in the
    tied components, and the reference node does too.
    """
    full = PLANE_FRAME if space == "plane" or planar else SPACE
    if space == "scalar":
        full = SCALAR
    nodes, ids, own = [bodies.node], [bodies.body], [bodies.own]
    for k, ln in enumerate(links):
        u = np.unique(ln.nodes)
        nodes.append(u)
        ids.append(np.full(u.size, bodies.n + k, dtype=np.int64))
        own.append(np.array([int(ln.components) & full], dtype=np.int64))
    node = np.concatenate(nodes)
    body = np.concatenate(ids)
    order = np.lexsort((body, node))
    return Bodies(bodies.n + len(links), np.concatenate(own), node[order], body[order],
                  np.concatenate([bodies.is_bar, np.zeros(len(links), dtype=bool)]))
