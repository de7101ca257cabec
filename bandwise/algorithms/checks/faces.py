"""Check 6: free faces and edges, and free faces lying on other free faces.

A free facet belongs to one element only: the boundary faces of a solid,
the boundary edges of a plane or shell mesh.  Two free facets at the same
place (all corners coincident within the tolerance) mean an internal crack
or an unmerged seam: the model is cut there, whether meant or not.  They
are reported apart from the outer skin.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from bandwise.algorithms.merge import coincident_pairs

from .context import CheckContext
from .findings import Finding, counted


def check_free_facets(ctx: CheckContext) -> list[Finding]:
    """Count the free facets and report those that coincide with another free facet."""
    t = ctx.table
    if t.n_facets == 0:
        return []
    free, dims = ctx.free_facets
    out = []
    for dim, word in ((3, "faces"), (2, "edges")):
        sel = free[dims == dim]
        if sel.size:
            out.append(Finding(
                f"facets.free_{word}", "note", int(sel.size),
                f"{counted(int(sel.size), 'free ' + word[:-1], 'free ' + word)} (owned by one "
                "element: the outer skin"
                f"{'' if dim == 3 else ' of plane and shell meshes'} and any cut)"))
    solid_or_plane = free[dims >= 2]
    pairs = _coincident_facets(ctx, solid_or_plane)
    if pairs.size:
        nodes = np.unique(t.nodes_of(pairs.ravel()))
        nodes = nodes[nodes >= 0]
        blocks, rows = t.owner_of(pairs.ravel())
        _, rule = ctx.tolerance
        out.append(Finding(
            "facets.coincident_free", "error", len(pairs),
            f"{counted(len(pairs), 'pair', 'pairs')} of free faces or edges lie on each other "
            f"({rule}): an "
            "internal crack or unmerged seam; the mesh is cut there",
            node_ids=ctx.node_ids(nodes), node_id_kind=ctx.node_id_kind,
            element_ids=ctx.element_ids(blocks, rows), element_id_kind=ctx.element_id_kind))
    return out


def _coincident_facets(ctx: CheckContext, rows: NDArray[np.int64]) -> NDArray[np.int64]:
    """Pairs of facet rows (distinct node sets) whose corners coincide geometrically."""
    if rows.size < 2:
        return np.zeros((0, 2), dtype=np.int64)
    t = ctx.table
    tol, _ = ctx.tolerance
    nodes = t.nodes_of(rows)
    valid = nodes >= 0
    pts = ctx.model.points[np.where(valid, nodes, 0)]
    k = valid.sum(axis=1)
    centroid = (pts * valid[..., None]).sum(axis=1) / k[:, None]
    pairs = coincident_pairs(centroid, tol)
    if pairs.size == 0:
        return np.zeros((0, 2), dtype=np.int64)
    a, b = pairs[:, 0], pairs[:, 1]
    pairs = pairs[k[a] == k[b]]  # free facets never share a node set: no self matches
    if pairs.size == 0:
        return np.zeros((0, 2), dtype=np.int64)
    # every corner of one facet within tol of some corner of the other
    pa, pb = pts[pairs[:, 0]], pts[pairs[:, 1]]
    va, vb = valid[pairs[:, 0]], valid[pairs[:, 1]]
    d = np.linalg.norm(pa[:, :, None, :] - pb[:, None, :, :], axis=-1)
    d = np.where(vb[:, None, :], d, np.inf)
    near = (d.min(axis=2) <= tol) | ~va
    match = near.all(axis=1)
    return rows[pairs[match]]
