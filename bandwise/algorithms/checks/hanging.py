"""Hanging nodes: corner nodes lying inside a free edge or face of another element.

Where a fine mesh meets a coarse one without transition, the nodes of the
fine side sit on an edge (2D) or face (3D) of a coarse element without
being its nodes.  Unless tied by constraint equations, the displacement is
not continuous there: the mesh opens a gap under load.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from scipy.spatial import cKDTree

from bandwise.core.model import as_xyz

from .context import CheckContext
from .findings import Finding, counted

#: Nearest free-facet corners examined around each free facet (its own
#: corners, the nodes hanging on it and a few neighbours fit comfortably).
NEAREST = 16


def check_hanging_nodes(ctx: CheckContext) -> list[Finding]:
    """Report corner nodes of free facets that lie inside another free facet."""
    t = ctx.table
    if t.n_facets == 0:
        return []
    free, dims = ctx.free_facets
    free = free[dims >= 2]
    if free.size < 2:
        return []
    tol, rule = ctx.tolerance
    nodes = t.nodes_of(free)
    candidates = np.unique(nodes[nodes >= 0])
    pts = as_xyz(ctx.model.points)
    facet_pts = pts[np.where(nodes >= 0, nodes, 0)]
    valid = nodes >= 0
    k = valid.sum(axis=1)
    centre = (facet_pts * valid[..., None]).sum(axis=1) / k[:, None]
    radius = np.where(valid, np.linalg.norm(facet_pts - centre[:, None], axis=2), 0).max(axis=1)
    tree = cKDTree(pts[candidates])
    k_near = min(NEAREST, len(candidates))
    dist, near = tree.query(centre, k=k_near, distance_upper_bound=float(radius.max() + tol))
    dist, near = dist.reshape(len(centre), -1), near.reshape(len(centre), -1)
    hit = dist <= (radius + tol)[:, None]
    facet = np.broadcast_to(np.arange(len(free))[:, None], hit.shape)[hit]
    node = candidates[near[hit]]
    inside = _inside_facet(pts[node], facet_pts[facet], k[facet], tol)
    inside &= ~(nodes[facet] == node[:, None]).any(axis=1)
    hanging = np.unique(node[inside])
    if hanging.size == 0:
        return []
    return [Finding(
        "nodes.hanging", "warning", int(hanging.size),
        f"{counted(int(hanging.size), 'node lies', 'nodes lie')} on an edge or face of a "
        f"neighbouring element without being its nodes ({rule}): hanging nodes; unless tied by constraint equations, the "
        "displacement is not continuous there",
        node_ids=ctx.node_ids(hanging), node_id_kind=ctx.node_id_kind)]


def _inside_facet(p: NDArray[np.float64], corners: NDArray[np.float64], k: NDArray[np.int64],
                  tol: float) -> NDArray[np.bool_]:
    """True where point ``p`` lies on its facet (a segment, triangle or quad), off its corners."""
    off_corners = (np.linalg.norm(corners - p[:, None], axis=2) > tol).all(axis=1)
    out = np.zeros(len(p), dtype=bool)
    seg = k == 2
    out[seg] = _on_segment(p[seg], corners[seg, 0], corners[seg, 1], tol)
    tri = k == 3
    out[tri] = _on_triangle(p[tri], corners[tri, 0], corners[tri, 1], corners[tri, 2], tol)
    quad = k == 4
    c = corners[quad]
    out[quad] = (_on_triangle(p[quad], c[:, 0], c[:, 1], c[:, 2], tol)
                 | _on_triangle(p[quad], c[:, 0], c[:, 2], c[:, 3], tol))
    return out & off_corners


def _on_segment(p: NDArray[np.float64], a: NDArray[np.float64], b: NDArray[np.float64],
                tol: float) -> NDArray[np.bool_]:
    d = b - a
    length2 = np.einsum("ij,ij->i", d, d)
    s = np.einsum("ij,ij->i", p - a, d) / np.where(length2 > 0, length2, 1.0)
    foot = a + s[:, None] * d
    return (np.linalg.norm(p - foot, axis=1) <= tol) & (s > 0) & (s < 1) & (length2 > 0)


def _on_triangle(p: NDArray[np.float64], a: NDArray[np.float64], b: NDArray[np.float64],
                 c: NDArray[np.float64], tol: float) -> NDArray[np.bool_]:
    n = np.cross(b - a, c - a)
    area2 = np.linalg.norm(n, axis=1)
    nz = np.where(area2 > 0, area2, 1.0)
    dist = np.abs(np.einsum("ij,ij->i", p - a, n)) / nz
    # barycentric coordinates from sub-triangle areas (signed along n)
    wa = np.einsum("ij,ij->i", np.cross(b - p, c - p), n) / nz**2
    wb = np.einsum("ij,ij->i", np.cross(c - p, a - p), n) / nz**2
    wc = 1.0 - wa - wb
    eps = 1e-9
    return (area2 > 0) & (dist <= tol) & (wa >= -eps) & (wb >= -eps) & (wc >= -eps)
