"""The one driver that numbers a graph part after part, each part by a kernel.

Every ordering of bandwise numbers the connected parts of a graph one after
another; only what happens inside one part differs.  The loop over the parts
is written once, here (networkx's ``utils/rcm.py`` and scipy's
``csgraph/_reordering.pyx`` are organised the same way: one loop over the
components, one kernel per component):

- nodes are visited in increasing degree (ties in index order); the first
  node of a part met this way, a node of least degree of its part, starts
  that part, so parts come in increasing order of their least degree and
  isolated nodes (degree 0, each a part of its own) come first;
- a *part kernel* numbers the part of its start node into
  ``order[start:start+size]``, marks those nodes in ``seen`` (any non-zero
  value; it grows ``stamp`` by one per search it makes) and returns
  ``(size, stamp)``.  A kernel that renumbers the graph as it goes also
  writes the part's rows, in their new numbering, into ``rows`` (empty for
  the others): the one search then both finds the part and lays its rows
  out in the order the later passes read them.

Kernels are compiled functions of one fixed signature (:data:`PART_KERNEL`),
so the driver is compiled once and called with any of them through a
function pointer (degrees and marks are int32, half the memory traffic of
int64 in the breadth-first searches, which are bound by it); each kernel gets two scratch arrays (integer and float
rows of ``n + 1`` entries, as many rows as it asks for) and a vector of
float parameters.  Python-level kernels (the Fiedler vector, METIS) go
through :func:`ordered_by_parts`, which lets the same driver split the graph
and then hands each part over as a subgraph.

References
----------
E. Cuthill and J. McKee, "Reducing the bandwidth of sparse symmetric
matrices", Proc. 24th ACM National Conference (1969) 157-172 (components
numbered one after another, each from a node of least degree).
A. George and J. W. H. Liu, *Computer Solution of Large Sparse Positive
Definite Systems*, Prentice-Hall, 1981, ch. 4 (components ordered apart).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numba
import numpy as np
import scipy.sparse as sp
from numba import types
from numpy.typing import NDArray

from bandwise.core.errors import InputError
from bandwise.core.graph import NodeGraph

from ._levels import _nodes_by_degree

__all__ = ["PART_KERNEL", "each_part", "ordered_by_parts", "parts_in_order",
           "renumbered_parts"]

_i64 = types.int64
_vec = types.Array(types.int64, 1, "C")
_idx = types.Array(types.int32, 1, "C")
_mat = types.Array(types.int64, 2, "C")
_fmat = types.Array(types.float64, 2, "C")
_fvec = types.Array(types.float64, 1, "C")

#: Signature of a part kernel: ``kernel(indptr, indices, deg, low, seen, stamp, order,
#: start, iwork, fwork, params, rows) -> (size, stamp)``.
PART_KERNEL = types.UniTuple(_i64, 2)(_vec, _idx, _idx, _i64, _idx, _i64, _vec, _i64, _mat,
                                      _fmat, _fvec, _idx)

PartKernel = Any  # a numba dispatcher compiled for PART_KERNEL
PartOrdering = Callable[[NodeGraph], NDArray[np.int64]]


def part_kernel(func: Callable[..., tuple[int, int]]) -> PartKernel:
    """Compile ``func`` as a part kernel (cached, releasing the interpreter lock)."""
    return numba.njit([PART_KERNEL], cache=True, nogil=True)(func)


@numba.njit(types.Tuple((_vec, _vec))(_vec, _idx, types.FunctionType(PART_KERNEL), _mat, _fmat,
                                      _fvec, _idx), cache=True, nogil=True)
def _each_part(indptr, indices, kernel, iwork, fwork, params, rows):  # pragma: no cover - compiled
    """The loop over parts: ``(order, part_ptr)``, part ``p`` at ``order[part_ptr[p]:part_ptr[p+1]]``."""
    n = indptr.size - 1
    deg = np.empty(n, dtype=np.int32)
    for v in range(n):
        deg[v] = indptr[v + 1] - indptr[v]
    seen = np.zeros(n, dtype=np.int32)
    order = np.empty(n, dtype=np.int64)
    part_ptr = np.empty(n + 1, dtype=np.int64)
    placed = 0
    stamp = 0
    parts = 0
    for v in _nodes_by_degree(deg):
        if seen[v] != 0:
            continue
        part_ptr[parts] = placed
        parts += 1
        if deg[v] == 0:  # an isolated node is a part of its own
            seen[v] = 1
            order[placed] = v
            placed += 1
            continue
        size, stamp = kernel(indptr, indices, deg, v, seen, stamp, order, placed, iwork, fwork,
                             params, rows)
        placed += size
    part_ptr[parts] = placed
    return order, part_ptr[:parts + 1].copy()


def _indices32(graph: NodeGraph) -> NDArray[np.int32]:
    """The graph's neighbour array as int32, the index type of the compiled kernels."""
    if graph.n >= 2**31 - 1:
        raise InputError(f"{graph.n:,} nodes is more than the orderings handle (2^31 - 1)")
    return np.ascontiguousarray(graph.indices, dtype=np.int32)


def each_part(graph: NodeGraph, kernel: PartKernel, int_rows: int = 0, float_rows: int = 0,
              params: tuple[float, ...] | NDArray[np.float64] = (),
              iwork: NDArray[np.int64] | None = None,
              fwork: NDArray[np.float64] | None = None,
              rows: NDArray[np.int32] | None = None
              ) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Number every connected part of ``graph`` with a part kernel.

    Parameters
    ----------
    graph
        The node graph.
    kernel
        A function compiled by :func:`part_kernel`.
    int_rows, float_rows
        Rows of ``n + 1`` scratch entries the kernel needs (int64, float64).
    params
        Float parameters handed to the kernel unchanged.
    iwork, fwork
        The scratch rows themselves, when the caller fills some of them in
        (``int_rows`` or ``float_rows`` is then ignored).
    rows
        Room for the renumbered rows (``nnz`` entries), for a kernel that
        writes them; empty by default.

    Returns
    -------
    (order, part_ptr)
        ``order`` is ``perm[new] = old``; part ``p`` holds the new numbers
        ``part_ptr[p]:part_ptr[p+1]``.

    Notes
    -----
    Cost: a counting sort of the degrees, then the kernel's own work per part.
    """
    n = graph.n
    if iwork is None:
        iwork = np.empty((int_rows, n + 1), dtype=np.int64)
    if fwork is None:
        fwork = np.empty((float_rows, n + 1), dtype=np.float64)
    if rows is None:
        rows = np.empty(0, dtype=np.int32)
    return _each_part(np.ascontiguousarray(graph.indptr, dtype=np.int64), _indices32(graph),
                      kernel, iwork, fwork, np.ascontiguousarray(params, dtype=np.float64), rows)


def _breadth_first_part(indptr, indices, deg, low, seen, stamp, order, start, iwork, fwork,
                        params, rows):  # pragma: no cover - compiled
    """The part of ``low`` in breadth-first order (only to find the parts)."""
    stamp += 1
    seen[low] = stamp
    order[start] = low
    head = start
    tail = start + 1
    while head < tail:
        v = order[head]
        head += 1
        for t in range(indptr[v], indptr[v + 1]):
            u = indices[t]
            if seen[u] != stamp:
                seen[u] = stamp
                order[tail] = u
                tail += 1
    return tail - start, stamp


_breadth_first = part_kernel(_breadth_first_part)


def _renumbering_part(indptr, indices, deg, low, seen, stamp, order, start, iwork, fwork,
                      params, rows):  # pragma: no cover - compiled
    """The part of ``low`` breadth first, its rows written in the new numbering.

    A node's new number is its place in ``order``.  Every node is reached
    once, so its mark in ``seen`` can be that number plus one: a neighbour's
    new number is then known the moment its edge is read, and the row goes
    straight to ``rows`` (row pointers in row 0 of ``iwork``, which the
    caller zeroes: parts without a kernel call are isolated nodes, all
    placed first, with empty rows).
    """
    ptr = iwork[0]
    top = ptr[start]
    seen[low] = start + 1
    order[start] = low
    head = start
    tail = start + 1
    while head < tail:
        v = order[head]
        head += 1
        for t in range(indptr[v], indptr[v + 1]):
            u = indices[t]
            k = seen[u] - 1
            if k < 0:
                k = tail
                seen[u] = tail + 1
                order[tail] = u
                tail += 1
            rows[top] = k
            top += 1
        ptr[head] = top
    return tail - start, stamp + 1


_renumbering = part_kernel(_renumbering_part)


def renumbered_parts(graph: NodeGraph) -> tuple[NDArray[np.int64], NDArray[np.int64],
                                                NDArray[np.int64], NDArray[np.int32]]:
    """The graph renumbered breadth first, part after part: ``(order, part_ptr, indptr, indices)``.

    ``order`` is ``perm[new] = old`` with the parts placed as by
    :func:`each_part` and each part breadth first from its start;
    ``(indptr, indices)`` is the graph in that numbering, so part ``p`` is
    the diagonal block of rows ``part_ptr[p]:part_ptr[p+1]``.  One search
    does both: a pass over the renumbered rows then reads its vectors
    within a band instead of all over memory.
    """
    iwork = np.zeros((1, graph.n + 1), dtype=np.int64)
    rows = np.empty(graph.indices.size, dtype=np.int32)
    order, ptr = each_part(graph, _renumbering, iwork=iwork, rows=rows)
    return order, ptr, iwork[0], rows


def parts_in_order(graph: NodeGraph,
                   sort: bool = True) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """The connected parts in the driver's order: ``(nodes, part_ptr)``.

    Part ``p`` is ``nodes[part_ptr[p]:part_ptr[p+1]]`` in increasing node
    number (with ``sort=False``: breadth first from its start); parts come in
    increasing order of their least degree (ties: the lowest node of that
    degree), as every ordering places them.
    """
    order, ptr = each_part(graph, _breadth_first)
    if sort:
        for p in np.flatnonzero(np.diff(ptr) > 1):
            order[ptr[p]:ptr[p + 1]].sort()
    return order, ptr


def ordered_by_parts(graph: NodeGraph, order_part: PartOrdering) -> NDArray[np.int64]:
    """Apply a Python-level ordering of one connected graph to each part.

    Parts are placed as by :func:`each_part`; parts of one or two nodes keep
    their nodes in increasing number, the others are numbered by
    ``order_part(subgraph)``, which returns a permutation of the part's own
    nodes (``perm[new] = old`` within the part; the subgraph numbers the
    part's nodes in increasing order of their number in ``graph``).

    Parameters
    ----------
    graph
        The node graph.
    order_part
        Ordering of one connected subgraph.

    Returns
    -------
    ndarray of int64
        ``perm[new] = old`` over the whole graph.
    """
    if graph.n == 0:
        return np.zeros(0, dtype=np.int64)
    perm, ptr = parts_in_order(graph)
    big = np.flatnonzero(np.diff(ptr) > 2)
    if big.size == 1 and ptr[big[0] + 1] - ptr[big[0]] == graph.n:
        return np.asarray(order_part(graph), dtype=np.int64)
    adjacency = graph.to_scipy()
    for p in big:
        nodes = perm[ptr[p]:ptr[p + 1]]
        perm[ptr[p]:ptr[p + 1]] = nodes[order_part(_subgraph(adjacency, nodes))]
    return perm


def _subgraph(adjacency: sp.csr_matrix, nodes: NDArray[np.int64]) -> NodeGraph:
    """The induced subgraph on ``nodes``, renumbered 0..k-1 in their given order."""
    sub = adjacency[nodes][:, nodes].tocsr()
    sub.sort_indices()
    return NodeGraph(sub.indptr.astype(np.int64), sub.indices.astype(np.int32))
