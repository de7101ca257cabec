"""Merge coincident nodes: distinct nodes closer than a tolerance become one.

Meshes assembled from separately meshed pieces often keep two nodes at each
point of a seam; the pieces are then not connected and the stiffness matrix
is singular.  Merging keeps the lowest node index of each cluster of
coincident nodes and maps cells, node sets and periodic pairs onto it.
A merge that would put two nodes of one element together is refused, so
no degenerate element is ever created.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray
from scipy import sparse
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

from bandwise.core.errors import InputError
from bandwise.core.graph import NodeGraph, node_graph
from bandwise.core.model import CellBlock, Model, mapped_connectivity, mapped_periodic

#: Direction of the sweep in :func:`coincident_pairs`: a fixed unit vector
#: with unequal components, so that grid-aligned nodes project apart.
SWEEP_DIRECTION = np.array([0.5406, 0.6216, 0.5670]) / np.linalg.norm([0.5406, 0.6216, 0.5670])


def coincident_pairs(points: NDArray[np.float64], tolerance: float) -> NDArray[np.int64]:
    """All pairs ``(i, j)``, ``i < j``, of points at distance at most ``tolerance``.

    Points are sorted along a fixed oblique direction and swept: only points
    whose projections lie within ``tolerance`` are compared, which for a
    tolerance far below the element size is a handful per node.  When the
    sweep would compare too many (a tolerance near the element size), a k-d
    tree (``scipy.spatial.cKDTree.query_pairs``) is used instead.  Never all
    pairs: O(n log n) either way for a mesh with few coincident nodes.
    """
    if not tolerance > 0:
        raise InputError(f"the tolerance must be a positive distance, got {tolerance}")
    pts = np.ascontiguousarray(points, dtype=np.float64)
    if len(pts) < 2:
        return np.zeros((0, 2), dtype=np.int64)
    direction = SWEEP_DIRECTION[:pts.shape[1]] / np.linalg.norm(SWEEP_DIRECTION[:pts.shape[1]])
    proj = pts @ direction
    order = np.argsort(proj, kind="stable")
    limit = 64 * len(pts)
    n_pairs = _sweep(pts, proj[order], order, float(tolerance), limit,
                     np.zeros((0, 2), dtype=np.int64))
    if n_pairs < 0:  # too many candidates: let the tree prune
        tree = cKDTree(pts, balanced_tree=False, compact_nodes=False)
        pairs = tree.query_pairs(float(tolerance), output_type="ndarray").astype(np.int64)
    else:
        pairs = np.empty((n_pairs, 2), dtype=np.int64)
        _sweep(pts, proj[order], order, float(tolerance), limit, pairs)
    pairs.sort(axis=1)
    return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]


@numba.njit(cache=True, nogil=True)
def _sweep(points, sorted_proj, order, tol, limit, out):  # pragma: no cover - compiled
    """Count (``out`` empty) or list the pairs within ``tol``; -1 past ``limit`` candidates."""
    n = order.size
    dim = points.shape[1]
    tol2 = tol * tol
    found = 0
    candidates = 0
    for a in range(n):
        i = order[a]
        b = a + 1
        while b < n and sorted_proj[b] - sorted_proj[a] <= tol:
            candidates += 1
            if candidates > limit:
                return -1
            j = order[b]
            d2 = 0.0
            for c in range(dim):
                x = points[i, c] - points[j, c]
                d2 += x * x
            if d2 <= tol2:
                if out.shape[0]:
                    out[found, 0] = i
                    out[found, 1] = j
                found += 1
            b += 1
    return found


def shortest_edge(graph: NodeGraph, points: NDArray[np.float64]) -> float:
    """Shortest nonzero distance between two nodes of one element (graph neighbours).

    Returns 0.0 when no element joins two distinct points.
    """
    if graph.n == 0 or graph.indices.size == 0:
        return 0.0
    best = _shortest_edge_kernel(graph.indptr, graph.indices,
                                 np.ascontiguousarray(points, dtype=np.float64))
    return float(best) if np.isfinite(best) else 0.0


@numba.njit(cache=True, nogil=True)
def _shortest_edge_kernel(indptr, indices, points):  # pragma: no cover - compiled
    best = np.inf
    dim = points.shape[1]
    for v in range(indptr.size - 1):
        for t in range(indptr[v], indptr[v + 1]):
            u = indices[t]
            if u <= v:
                continue
            d2 = 0.0
            for c in range(dim):
                x = points[u, c] - points[v, c]
                d2 += x * x
            if 0.0 < d2 < best:
                best = d2
    return np.sqrt(best)


def resolve_tolerance(graph: NodeGraph, points: NDArray[np.float64],
                      tolerance: float | None, relative_tolerance: float,
                      ) -> tuple[float, str]:
    """The coincidence distance and a sentence saying how it was chosen.

    An absolute ``tolerance`` wins; otherwise ``relative_tolerance`` times
    the shortest element edge (or, with no edge, times 1/1000 of the extent).
    """
    if tolerance is not None:
        if not tolerance > 0:
            raise InputError(f"the tolerance must be a positive distance, got {tolerance}")
        return float(tolerance), f"absolute tolerance {tolerance:g}"
    if not relative_tolerance > 0:
        raise InputError(f"the relative tolerance must be positive, got {relative_tolerance}")
    h = shortest_edge(graph, points)
    if h == 0.0:
        extent = float(np.ptp(points, axis=0).max()) if len(points) else 0.0
        tol = relative_tolerance * (extent or 1.0) * 1e-3
        return tol, (f"tolerance {tol:.3g}, {relative_tolerance:g} x 1/1000 of the mesh "
                     "extent, as no element edge can be measured")
    tol = relative_tolerance * h
    return tol, (f"tolerance {tol:.3g}, {relative_tolerance:g} x the shortest element "
                 f"edge of {h:.3g}")


@dataclass(frozen=True)
class MergeResult:
    """What :func:`merged_model` did.

    Attributes
    ----------
    model
        The mesh with coincident nodes merged (the input is not changed).
    tolerance, rule
        The distance used and how it was chosen.
    kept, removed
        0-based indices (in the input) of each merged pair: ``removed[k]`` was
        replaced by ``kept[k]``, the lowest index of its cluster.
    refused
        0-based indices of nodes left unmerged because two of their cluster
        belong to one element (merging would make that element degenerate).
    """

    model: Model
    tolerance: float
    rule: str
    kept: NDArray[np.int64]
    removed: NDArray[np.int64]
    refused: NDArray[np.int64]

    @property
    def n_merged(self) -> int:
        """Number of nodes removed by merging."""
        return int(self.removed.size)

    def __repr__(self) -> str:
        return (f"MergeResult({self.n_merged} nodes merged, {self.refused.size} refused, "
                f"tolerance {self.tolerance:.3g})")


def merged_model(model: Model, tolerance: float | None = None,
                 relative_tolerance: float = 1e-3, graph: NodeGraph | None = None,
                 ) -> MergeResult:
    """A copy of the model with coincident nodes merged.

    Parameters
    ----------
    model
        The mesh.
    tolerance
        Absolute merge distance; None for ``relative_tolerance`` times the
        shortest element edge.
    relative_tolerance
        Fraction of the shortest element edge used when ``tolerance`` is None.
    graph
        The node graph, if already built.

    Returns
    -------
    MergeResult
        Each cluster of nodes within the tolerance of one another (chained)
        becomes its lowest-index node; cells, nodal fields, node sets, node
        ids and periodic pairs follow.  Clusters with two nodes in one cell
        are refused (left as they are).
    """
    if graph is None:
        graph = node_graph(model)
    tol, rule = resolve_tolerance(graph, model.points, tolerance, relative_tolerance)
    pairs = coincident_pairs(model.points, tol)
    n = model.n_nodes
    rep = _cluster_representatives(pairs, n)
    refused_clusters = _clusters_in_one_cell(model, rep)
    if refused_clusters.size:
        undo = np.isin(rep, refused_clusters)
        refused = np.flatnonzero(undo & (np.bincount(rep, minlength=n)[rep] > 1))
        rep[undo] = np.flatnonzero(undo)
    else:
        refused = np.zeros(0, dtype=np.int64)
    removed = np.flatnonzero(rep != np.arange(n))
    return MergeResult(_collapsed(model, rep), tol, rule, rep[removed], removed, refused)


def _cluster_representatives(pairs: NDArray[np.int64], n: int) -> NDArray[np.int64]:
    """For each node, the lowest index of its cluster of coincident nodes."""
    if pairs.size == 0:
        return np.arange(n, dtype=np.int64)
    adj = sparse.coo_matrix((np.ones(len(pairs), dtype=np.int8), (pairs[:, 0], pairs[:, 1])),
                            shape=(n, n))
    _, comp = connected_components(adj, directed=False)
    lowest = np.full(comp.max() + 1, n, dtype=np.int64)
    np.minimum.at(lowest, comp, np.arange(n, dtype=np.int64))
    return lowest[comp]


def _clusters_in_one_cell(model: Model, rep: NDArray[np.int64]) -> NDArray[np.int64]:
    """Representatives of clusters that would put two distinct nodes of one cell together."""
    bad: list[NDArray[np.int64]] = []
    for b in model.cells:
        if b.data.dtype == object:
            rows = [np.asarray(c, dtype=np.int64) for c in b.data]
            width = max((len(r) for r in rows), default=0)
            if width < 2:
                continue
            data = np.array([np.pad(r, (0, width - len(r)), constant_values=r[0]) for r in rows])
        else:
            data = np.asarray(b.data, dtype=np.int64)
        if data.ndim != 2 or data.shape[1] < 2 or not len(data):
            continue
        mapped = rep[data]
        order = np.argsort(mapped, axis=1, kind="stable")
        m = np.take_along_axis(mapped, order, axis=1)
        o = np.take_along_axis(data, order, axis=1)
        clash = (m[:, 1:] == m[:, :-1]) & (o[:, 1:] != o[:, :-1])
        if clash.any():
            bad.append(m[:, 1:][clash])
    if not bad:
        return np.zeros(0, dtype=np.int64)
    return np.unique(np.concatenate(bad))


def _collapsed(model: Model, rep: NDArray[np.int64]) -> Model:
    """The model with every node replaced by its representative and the rest dropped."""
    n = model.n_nodes
    keep = rep == np.arange(n)
    new_index = np.cumsum(keep) - 1
    new_of_old = new_index[rep]
    point_sets = {name: np.unique(new_of_old[np.asarray(idx, dtype=np.int64)])
                  for name, idx in model.point_sets.items()}
    return dataclasses.replace(
        model,
        points=model.points[keep],
        cells=[CellBlock(b.type, mapped_connectivity(b.data, new_of_old)) for b in model.cells],
        point_data={k: np.asarray(v)[keep] for k, v in model.point_data.items()},
        point_sets=point_sets,
        node_ids=None if model.node_ids is None else model.node_ids[keep],
        periodic=mapped_periodic(model.periodic, new_of_old),
    )
