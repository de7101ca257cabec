"""Check 1: connected parts through element coupling.

A structural model in several unconnected pieces has a singular stiffness
matrix unless every piece is supported on its own (each free piece adds
rigid-body modes), so more than one part is reported as an error.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from .context import CheckContext
from .findings import Finding

#: Parts described one by one in the details (the largest first).
DESCRIBED_PARTS = 50


def check_parts(ctx: CheckContext) -> list[Finding]:
    """Report the connected parts when there is more than one."""
    n_parts, part = ctx.parts
    if n_parts <= 1:
        return []
    details = tuple(_describe_parts(ctx, part, n_parts))
    sizes = np.bincount(part[part >= 0], minlength=n_parts)
    small = np.flatnonzero(part >= 1)  # nodes outside the largest part
    message = (f"the mesh falls into {n_parts} unconnected parts (largest {sizes[0]} nodes, "
               f"smallest {sizes.min()}); each part that is not supported on its own "
               "adds rigid-body modes and makes the stiffness matrix singular")
    return [Finding("parts.disconnected", "error", n_parts, message,
                    node_ids=ctx.node_ids(small), node_id_kind=ctx.node_id_kind,
                    details=details)]


def _describe_parts(ctx: CheckContext, part: NDArray[np.int64], n_parts: int,
                    ) -> list[dict[str, Any]]:
    """Nodes, elements, bounding box and sets of the largest parts."""
    model = ctx.model
    shown = min(n_parts, DESCRIBED_PARTS)
    nodes = np.bincount(part[part >= 0], minlength=n_parts)
    elements = np.zeros(n_parts, dtype=np.int64)
    cell_part: list[NDArray[np.int64]] = []
    for b, use in zip(model.cells, ctx.coupling):
        p = np.full(len(b.data), -1, dtype=np.int64)
        if use.any():
            p[use] = part[b.data[use, 0]]
            elements += np.bincount(p[use], minlength=n_parts)
        cell_part.append(p)
    lo, hi = _bounding_boxes(model.points, part, shown)
    sets = _sets_by_part(ctx, part, cell_part, shown)
    return [{"part": k + 1, "nodes": int(nodes[k]), "elements": int(elements[k]),
             "bounding_box": [lo[k].tolist(), hi[k].tolist()], "sets": sets[k]}
            for k in range(shown)]


def _bounding_boxes(points: NDArray[np.float64], part: NDArray[np.int64], shown: int,
                    ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    dim = points.shape[1]
    lo = np.full((shown, dim), np.inf)
    hi = np.full((shown, dim), -np.inf)
    keep = (part >= 0) & (part < shown)
    np.minimum.at(lo, part[keep], points[keep])
    np.maximum.at(hi, part[keep], points[keep])
    return lo, hi


def _sets_by_part(ctx: CheckContext, part: NDArray[np.int64],
                  cell_part: list[NDArray[np.int64]], shown: int) -> list[list[str]]:
    """Names of the node and element sets touching each of the first ``shown`` parts."""
    out: list[list[str]] = [[] for _ in range(shown)]
    for name, idx in ctx.model.point_sets.items():
        for p in np.unique(part[np.asarray(idx, dtype=np.int64)]):
            if 0 <= p < shown:
                out[p].append(f"node set {name}")
    for name, per_block in ctx.model.cell_sets.items():
        touched: set[int] = set()
        for cp, idx in zip(cell_part, per_block):
            idx = np.asarray(idx, dtype=np.int64)
            if idx.size:
                touched.update(int(p) for p in np.unique(cp[idx]) if 0 <= p < shown)
        for p in sorted(touched):
            out[p].append(f"element set {name}")
    return out
