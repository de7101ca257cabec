"""Check 2: orphan nodes, referenced by no element.

A node no element references gets DOFs with no stiffness: a zero pivot
(singular matrix) for a solver that numbers it, unless the solver drops it.
Nodes used only by vertex cells or listed in node sets are reported apart:
a point mass, a load or a reference node may be meant.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .context import CheckContext
from .findings import Finding, counted


def check_orphans(ctx: CheckContext) -> list[Finding]:
    """Report nodes no coupling element references."""
    unreferenced = ctx.references == 0
    if not unreferenced.any():
        return []
    kept = unreferenced & _vertex_or_set_nodes(ctx)
    bare = np.flatnonzero(unreferenced & ~kept)
    marked = np.flatnonzero(kept)
    out = []
    if bare.size:
        out.append(Finding(
            "nodes.orphan", "warning", int(bare.size),
            f"{counted(bare.size, 'node is', 'nodes are')} used by no element, so DOFs there "
            "have no stiffness "
            "(zero pivots) unless the solver removes them",
            node_ids=ctx.node_ids(bare), node_id_kind=ctx.node_id_kind))
    if marked.size:
        out.append(Finding(
            "nodes.point_only", "note", int(marked.size),
            f"{counted(marked.size, 'node belongs', 'nodes belong')} to no element but to "
            "vertex cells or node sets "
            "(a point mass, load or reference node?): they need an element, a constraint "
            "or a support to be solved for",
            node_ids=ctx.node_ids(marked), node_id_kind=ctx.node_id_kind))
    return out


def _vertex_or_set_nodes(ctx: CheckContext) -> NDArray[np.bool_]:
    """True for nodes in a vertex cell, a tag cell or a node set."""
    mark = np.zeros(ctx.model.n_nodes, dtype=bool)
    for b in ctx.model.cells:
        if b.data.dtype != object and b.data.size:
            mark[b.data.ravel()] = True
    for idx in ctx.model.point_sets.values():
        mark[np.asarray(idx, dtype=np.int64)] = True
    return mark
