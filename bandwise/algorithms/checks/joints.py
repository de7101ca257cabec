"""Check 4: weak joints between regions of a part.

Regions are the face-connected blocks of :mod:`bandwise.algorithms.topology`.  Two
solid or plane regions held together by one node form a hinge, and two
solid regions sharing only an edge a hinge line: displacement elements
carry no moment across them, so the regions can rotate relative to each
other (a mechanism, a singular matrix).  A beam attached to a solid or a
plane mesh by one node spins freely about its own axis at that node.
Regions sharing several nodes but no face or edge are not conforming
(hanging nodes or a mismatched interface).  Articulation nodes of the node
graph are the nodes whose removal would split a part.

References
----------
J. Hopcroft, R. Tarjan, "Algorithm 447: efficient algorithms for graph
manipulation", Communications of the ACM 16(6), 1973 (articulation points).
"""

from __future__ import annotations

from typing import Any

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.algorithms.topology import node_block_pairs
from bandwise.core.graph import NodeGraph, graph_from_cells

from .context import CheckContext
from .findings import Finding, counted

#: Joints described one by one in a finding's details.
DESCRIBED_JOINTS = 50


def articulation_nodes(graph: NodeGraph) -> NDArray[np.int64]:
    """Nodes whose removal disconnects their connected part (cut vertices).

    Parameters
    ----------
    graph
        Symmetric adjacency without self loops.

    Returns
    -------
    numpy.ndarray
        Sorted 0-based indices of the articulation nodes.

    Notes
    -----
    Iterative depth-first search with discovery times and low points
    (Hopcroft and Tarjan, 1973): O(n + m) time, O(n) memory.
    """
    if graph.n == 0:
        return np.zeros(0, dtype=np.int64)
    mark = _articulation_kernel(graph.indptr.astype(np.int64), graph.indices.astype(np.int64),
                                graph.n)
    return np.flatnonzero(mark).astype(np.int64)


@numba.njit(cache=True, nogil=True)
def _articulation_kernel(indptr, indices, n):  # pragma: no cover - compiled
    disc = np.full(n, -1, dtype=np.int64)
    low = np.zeros(n, dtype=np.int64)
    parent = np.full(n, -1, dtype=np.int64)
    nxt = np.zeros(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    cut = np.zeros(n, dtype=np.bool_)
    t = 0
    for root in range(n):
        if disc[root] != -1 or indptr[root] == indptr[root + 1]:
            continue
        root_children = 0
        sp = 0
        stack[0] = root
        disc[root] = t
        low[root] = t
        t += 1
        nxt[root] = indptr[root]
        while sp >= 0:
            v = stack[sp]
            if nxt[v] < indptr[v + 1]:
                u = indices[nxt[v]]
                nxt[v] += 1
                if disc[u] == -1:
                    parent[u] = v
                    disc[u] = t
                    low[u] = t
                    t += 1
                    nxt[u] = indptr[u]
                    sp += 1
                    stack[sp] = u
                    if v == root:
                        root_children += 1
                elif u != parent[v] and disc[u] < low[v]:
                    low[v] = disc[u]
            else:
                sp -= 1
                if sp >= 0:
                    p = stack[sp]
                    low[p] = min(low[p], low[v])
                    if p != root and low[v] >= disc[p]:
                        cut[p] = True
        if root_children > 1:
            cut[root] = True
    return cut


def check_joints(ctx: CheckContext) -> list[Finding]:
    """Single-node and edge-only joints, one-node beam attachments, articulation nodes."""
    out = _region_joints(ctx)
    out += _articulations(ctx)
    return out


def _block_dims(ctx: CheckContext) -> NDArray[np.int64]:
    n_blocks, labels = ctx.blocks
    dim = np.zeros(n_blocks, dtype=np.int64)
    for bi, lab in enumerate(labels):
        keep = lab >= 0
        if keep.any():
            dim[lab[keep]] = ctx.dims[bi]
    return dim


def _shared_pairs(node: NDArray[np.int64], block: NDArray[np.int64],
                  ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    """(node, block a, block b), a < b, for every node shared by two blocks."""
    nodes, a_list, b_list = [], [], []
    shift = 1
    while shift < len(node):
        same = node[shift:] == node[:-shift]
        if not same.any():
            break
        nodes.append(node[shift:][same])
        a_list.append(block[:-shift][same])
        b_list.append(block[shift:][same])
        shift += 1
    if not nodes:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty
    return np.concatenate(nodes), np.concatenate(a_list), np.concatenate(b_list)


def _region_joints(ctx: CheckContext) -> list[Finding]:
    n_blocks, labels = ctx.blocks
    if n_blocks < 2:
        return []
    node, block = node_block_pairs(ctx.model, labels)
    shared, a, b = _shared_pairs(node, block)
    if shared.size == 0:
        return []
    key = a * n_blocks + b
    order = np.argsort(key, kind="stable")
    shared, a, b, key = shared[order], a[order], b[order], key[order]
    uniq, start, count = np.unique(key, return_index=True, return_counts=True)
    pa, pb = uniq // n_blocks, uniq % n_blocks
    dim = _block_dims(ctx)
    da, db = dim[pa], dim[pb]
    planar = ctx.model.is_planar()
    collinear = _collinear_groups(ctx.model.points, shared, start, count)
    same = da == db
    hinge_dim = (da == 3) | ((da == 2) & planar)
    kinds = {
        "joints.single_node": same & (da >= 2) & (count == 1),
        "joints.edge_only": same & (da == 3) & (count > 1) & collinear,
        "joints.nonconforming": same & (da >= 2) & (count > 1) & ~((da == 3) & collinear),
        "joints.line_one_node": ~same & (np.minimum(da, db) == 1) & (count == 1)
                                & ((np.maximum(da, db) == 3) | planar),
    }
    sizes = _block_sizes(labels, n_blocks)
    out = []
    for code, sel in kinds.items():
        idx = np.flatnonzero(sel)
        if not idx.size:
            continue
        nodes = np.unique(np.concatenate([shared[start[i]:start[i] + count[i]] for i in idx]))
        severity, text = _joint_wording(code, bool(hinge_dim[idx].all()))
        details = tuple(_joint_detail(ctx, shared, start, count, pa, pb, sizes, i)
                        for i in idx[:DESCRIBED_JOINTS])
        out.append(Finding(code, severity, int(idx.size),
                           f"{counted(int(idx.size), *text[:2])} {text[2]}",
                           node_ids=ctx.node_ids(nodes), node_id_kind=ctx.node_id_kind,
                           details=details))
    return out


def _joint_wording(code: str, hinge: bool) -> tuple[str, tuple[str, str, str]]:
    """Severity and (singular subject, plural subject, rest) of a joint finding."""
    if code == "joints.single_node":
        if hinge:
            return "error", ("pair of regions is", "pairs of regions are",
                             ("joined by a single node: a hinge, the regions can rotate "
                             "relative to each other"))
        return "warning", ("pair of shell regions is", "pairs of shell regions are",
                           "joined by a single node: a point joint with a stress singularity")
    if code == "joints.edge_only":
        return "error", ("pair of solid regions shares", "pairs of solid regions share",
                         "only an edge: a hinge line, the regions can rotate about it")
    if code == "joints.nonconforming":
        return "warning", ("pair of regions shares", "pairs of regions share",
                           ("nodes but no face or edge (hanging nodes or a mismatched "
                           "interface): displacements are not continuous between them"))
    return "warning", ("line element is", "line elements are",
                       ("attached to a solid or plane mesh by a single node: nothing holds "
                       "their rotation there"))


def _joint_detail(ctx: CheckContext, shared: NDArray[np.int64], start: NDArray[np.int64],
                  count: NDArray[np.int64], pa: NDArray[np.int64], pb: NDArray[np.int64],
                  sizes: NDArray[np.int64], i: int) -> dict[str, Any]:
    nodes = shared[start[i]:start[i] + count[i]]
    return {"nodes": list(ctx.node_ids(nodes)),
            "regions": [int(pa[i]) + 1, int(pb[i]) + 1],
            "region_elements": [int(sizes[pa[i]]), int(sizes[pb[i]])]}


def _block_sizes(labels: list[NDArray[np.int64]], n_blocks: int) -> NDArray[np.int64]:
    sizes = np.zeros(n_blocks, dtype=np.int64)
    for lab in labels:
        if (lab >= 0).any():
            sizes += np.bincount(lab[lab >= 0], minlength=n_blocks)
    return sizes


def _collinear_groups(points: NDArray[np.float64], nodes: NDArray[np.int64],
                      start: NDArray[np.int64], count: NDArray[np.int64]) -> NDArray[np.bool_]:
    """True for each group of nodes lying on one straight line (two nodes always do)."""
    group = np.repeat(np.arange(len(start)), count)
    p = points[nodes]
    centre = np.zeros((len(start), p.shape[1]))
    np.add.at(centre, group, p)
    centre /= count[:, None]
    q = p - centre[group]
    cov = np.zeros((len(start), p.shape[1], p.shape[1]))
    np.add.at(cov, group, q[:, :, None] * q[:, None, :])
    ev = np.linalg.eigvalsh(cov)  # ascending
    return (count <= 2) | (np.sqrt(np.maximum(ev[:, -2], 0)) <= 1e-6 * np.sqrt(ev[:, -1]))


def _articulations(ctx: CheckContext) -> list[Finding]:
    """Articulation nodes of the graph of the 2D and 3D coupling cells."""
    # Within one face-connected block of 2D/3D cells no node is an articulation
    # node (neighbours share a facet of two or more nodes), so only meshes with
    # several such blocks need the search.
    dims = _block_dims(ctx)
    if np.count_nonzero(dims >= 2) < 2:
        return []
    solid = [d >= 2 for d in ctx.dims]
    blocks = [b.data[use] for b, use, keep in zip(ctx.model.cells, ctx.coupling, solid)
              if keep and use.any()]
    if all(keep or not use.any() for use, keep in zip(ctx.coupling, solid)):
        graph = ctx.graph  # no line cells: the node graph is the one wanted
    else:
        graph = graph_from_cells(blocks, ctx.model.n_nodes)
    cut = articulation_nodes(graph)
    if cut.size == 0:
        return []
    return [Finding(
        "nodes.articulation", "warning", int(cut.size),
        f"{counted(int(cut.size), 'node alone holds', 'nodes each alone hold')} parts of "
        "the solid/plane mesh together "
        "(articulation nodes of the node graph): check for hinges",
        node_ids=ctx.node_ids(cut), node_id_kind=ctx.node_id_kind)]
