"""Check 3: coincident nodes, distinct nodes closer than a tolerance.

Two nodes at one point that no element joins are not connected: across a
seam between separately meshed pieces (an unmerged interface) the pieces
stay apart and the matrix is singular; inside one part they open a crack.
``bandwise merge`` merges them.
"""

from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.sparse.csgraph import connected_components

from bandwise.algorithms.merge import coincident_pairs

from .context import CheckContext
from .findings import Finding, counted


def check_coincident(ctx: CheckContext) -> list[Finding]:
    """Report coincident node pairs: across parts (a seam) apart from within one part."""
    tol, rule = ctx.tolerance
    pairs = coincident_pairs(ctx.model.points, tol)
    if pairs.size == 0:
        return []
    n_parts, part = ctx.parts
    pa, pb = part[pairs[:, 0]], part[pairs[:, 1]]
    seam = (pa >= 0) & (pb >= 0) & (pa != pb)
    out = []
    if seam.any():
        after = _parts_after_merge(pa[seam], pb[seam], n_parts)
        s = pairs[seam]
        out.append(Finding(
            "nodes.coincident_seam", "error", int(seam.sum()),
            f"{counted(int(seam.sum()), 'pair', 'pairs')} of coincident nodes join different "
            f"parts ({rule}): "
            f"an unmerged seam; merged, the {n_parts} parts would become {after}",
            node_ids=ctx.node_ids(s.ravel()), node_id_kind=ctx.node_id_kind,
            where=tuple(f"part {p + 1}" for p in np.unique(np.r_[pa[seam], pb[seam]])[:50]),
            details=({"parts_before": n_parts, "parts_after_merge": after,
                      "tolerance": tol},)))
    inside = ~seam
    if inside.any():
        s = pairs[inside]
        out.append(Finding(
            "nodes.coincident", "warning", int(inside.sum()),
            f"{counted(int(inside.sum()), 'pair', 'pairs')} of coincident nodes within one "
            "part or on orphan "
            f"nodes ({rule}): a crack or a doubled node where the mesh should be continuous",
            node_ids=ctx.node_ids(s.ravel()), node_id_kind=ctx.node_id_kind,
            details=({"tolerance": tol},)))
    return out


def _parts_after_merge(pa: np.ndarray, pb: np.ndarray, n_parts: int) -> int:
    """Number of parts left once the parts joined by coincident pairs are merged."""
    adj = sparse.coo_matrix((np.ones(len(pa), dtype=np.int8), (pa, pb)), shape=(n_parts, n_parts))
    return int(connected_components(adj, directed=False)[0])
