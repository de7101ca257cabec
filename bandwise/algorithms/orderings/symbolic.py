"""Symbolic Cholesky factorisation: elimination tree, column counts, nnz(L).

A sparse direct solver stores the Cholesky factor L of the reordered matrix
``P A P^T``; its size ``nnz(L)`` (diagonal included) is what a fill-reducing
ordering minimises.  It is found here without any numeric work:

1. the **elimination tree**: ``parent[j] = min{ i > j : l_ij != 0 }``
   (Liu 1990), built with path compression in near-linear time;
2. the **column counts** ``c_j = |{ i >= j : l_ij != 0 }|``, from the row
   subtrees of the tree, by the skeleton-and-least-common-ancestor method of
   Gilbert, Ng and Peyton (1994), in near O(nnz(A)) time: nothing of the
   size of L is ever built, so the count of a factor with billions of
   entries costs no more than a pass over the mesh graph.

Everything is in the new numbering: column j of L is new row j, node
``perm[j]`` of the graph (``perm[new] = old``, see :mod:`bandwise.core.model`).

**DOF level.**  A node with ``d`` DOFs is a dense ``d x d`` block; the
pattern of the DOF matrix is that of ``kron(A, ones((d, d)))`` (per-node d
allowed).  Its factor is the node factor with every entry blown up to a
block, except that the diagonal block is triangular: DOF column ``a`` of
node j (``a < d_j``) holds ``d_j - a`` entries of its own node and all the
DOFs of the nodes below j in column j of the node factor.  With
``W_j = sum{ d_i : l_ij != 0, i >= j }`` (a column count where each row is
weighted by its DOFs, which the same algorithm delivers exactly),

    nnz(L_dof) = sum_j [ d_j (d_j + 1) / 2 + d_j (W_j - d_j) ].

Nodes with no DOF do not take part in the factorisation at all: they are
removed from the graph before counting.

References
----------
J. W. H. Liu, "The role of elimination trees in sparse factorization",
SIAM J. Matrix Anal. Appl. 11 (1990) 134-172.
J. R. Gilbert, E. G. Ng, B. W. Peyton, "An efficient algorithm to compute
row and column counts for sparse Cholesky factorization", SIAM J. Matrix
Anal. Appl. 15 (1994) 1075-1091.
T. A. Davis, *Direct Methods for Sparse Linear Systems*, SIAM, 2006, ch. 4.
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DofLayout
from bandwise.core.graph import NodeGraph
from bandwise.core.metrics import _dof_counts
from bandwise.core.model import inverse_permutation, order_and_positions

__all__ = ["cholesky_nnz", "column_counts", "elimination_tree", "factor_flops"]

DofSpec = int | NDArray[np.integer] | DofLayout


@numba.njit(cache=True, nogil=True)
def _etree(indptr, indices, perm, pos):  # pragma: no cover - compiled
    """Parent of every column of the reordered matrix (-1 at roots), Liu's algorithm."""
    n = perm.size
    parent = np.full(n, -1, dtype=np.int64)
    ancestor = np.full(n, -1, dtype=np.int64)
    for k in range(n):
        v = perm[k]
        for t in range(indptr[v], indptr[v + 1]):
            i = pos[indices[t]]
            # climb from i to the root of its current subtree, compressing onto k
            while i != -1 and i < k:
                nxt = ancestor[i]
                ancestor[i] = k
                if nxt == -1:
                    parent[i] = k
                i = nxt
    return parent


@numba.njit(cache=True, nogil=True)
def _postorder(parent):  # pragma: no cover - compiled
    """A depth-first postorder of the forest, children in increasing order."""
    n = parent.size
    head = np.full(n, -1, dtype=np.int64)
    nxt = np.full(n, -1, dtype=np.int64)
    for j in range(n - 1, -1, -1):
        p = parent[j]
        if p != -1:
            nxt[j] = head[p]
            head[p] = j
    post = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    k = 0
    for root in range(n):
        if parent[root] != -1:
            continue
        top = 0
        stack[0] = root
        while top >= 0:
            p = stack[top]
            child = head[p]
            if child == -1:
                top -= 1
                post[k] = p
                k += 1
            else:
                head[p] = nxt[child]
                top += 1
                stack[top] = child
    return post


@numba.njit(cache=True, nogil=True)
def _weighted_counts(indptr, indices, perm, pos, parent, post, weight):  # pragma: no cover
    """``W_j = sum of weight[i]`` over the rows i >= j with ``l_ij != 0`` (all in new order).

    Gilbert, Ng and Peyton (1994): the row subtree of row i is the union of
    tree paths from the "leaves" j (entries a_ij, i > j, that start a new
    branch in postorder) up to i.  Each leaf adds the row's weight at j, each
    least common ancestor of consecutive leaves takes it back once, and the
    parent of a subtree's root takes it back; summing the differences over
    each subtree gives the weighted count.  Least common ancestors come from
    a disjoint-set forest with path compression.  (Davis 2006, ch. 4.)
    """
    n = perm.size
    ancestor = np.arange(n)
    maxfirst = np.full(n, -1, dtype=np.int64)
    prevleaf = np.full(n, -1, dtype=np.int64)
    first = np.full(n, -1, dtype=np.int64)
    delta = np.zeros(n, dtype=np.int64)
    for k in range(n):
        j = post[k]
        delta[j] = weight[j] if first[j] == -1 else 0     # a tree leaf: its own diagonal
        while j != -1 and first[j] == -1:
            first[j] = k
            j = parent[j]
    for k in range(n):
        j = post[k]
        if parent[j] != -1:
            delta[parent[j]] -= weight[j]                 # row j's subtree ends at j
        v = perm[j]
        for t in range(indptr[v], indptr[v + 1]):
            i = pos[indices[t]]
            if i <= j or first[j] <= maxfirst[i]:
                continue                                  # not a leaf of row i's subtree
            maxfirst[i] = first[j]
            jprev = prevleaf[i]
            prevleaf[i] = j
            delta[j] += weight[i]
            if jprev != -1:
                q = jprev
                while q != ancestor[q]:
                    q = ancestor[q]
                s = jprev
                while s != q:
                    up = ancestor[s]
                    ancestor[s] = q
                    s = up
                delta[q] -= weight[i]                     # overlap above the common ancestor
        if parent[j] != -1:
            ancestor[j] = parent[j]
    for j in range(n):                                    # parent[j] > j: children come first
        if parent[j] != -1:
            delta[parent[j]] += delta[j]
    return delta


def elimination_tree(graph: NodeGraph, perm: NDArray[np.integer] | None = None) -> NDArray[np.int64]:
    """Elimination tree of the graph's matrix under an ordering.

    Parameters
    ----------
    graph
        The node graph (old numbering).
    perm
        New order ``perm[new] = old``; None keeps the current numbering.

    Returns
    -------
    ndarray
        ``parent[j]`` for each new column j: the row of the first
        off-diagonal nonzero of column j of L, or -1 for a root (one root per
        connected part).

    Notes
    -----
    O(nnz(A) log n) worst case, close to linear in practice (Liu 1990).

    Examples
    --------
    >>> from bandwise.core.graph import graph_from_matrix
    >>> import scipy.sparse as sp
    >>> path = graph_from_matrix(sp.diags([1.0, 1.0, 1.0], [-1, 0, 1], shape=(4, 4)))
    >>> elimination_tree(path).tolist()
    [1, 2, 3, -1]
    """
    perm, pos = order_and_positions(perm, graph.n)
    return _etree(graph.indptr, graph.indices, perm, pos)


def _weighted_column_counts(graph: NodeGraph, perm: NDArray[np.int64], pos: NDArray[np.int64],
                            weight: NDArray[np.int64]) -> NDArray[np.int64]:
    parent = _etree(graph.indptr, graph.indices, perm, pos)
    post = _postorder(parent)
    return _weighted_counts(graph.indptr, graph.indices, perm, pos, parent, post, weight)


def column_counts(graph: NodeGraph, perm: NDArray[np.integer] | None = None) -> NDArray[np.int64]:
    """Nonzeros in each column of the Cholesky factor, diagonal included.

    Parameters
    ----------
    graph
        The node graph (old numbering).
    perm
        New order ``perm[new] = old``; None keeps the current numbering.

    Returns
    -------
    ndarray
        ``c[j] = |{ i >= j : l_ij != 0 }|`` for each new column j (no
        numerical cancellation assumed, as in every symbolic factorisation).

    Notes
    -----
    Near O(nnz(A)) time and O(n) memory (Gilbert, Ng and Peyton 1994).
    """
    perm, pos = order_and_positions(perm, graph.n)
    return _weighted_column_counts(graph, perm, pos, np.ones(graph.n, dtype=np.int64))


def _dof_columns(graph: NodeGraph, perm: NDArray[np.integer] | None,
                 dofs: DofSpec) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """DOFs per node and DOF-weighted column counts, both in the new order.

    Nodes without DOFs are dropped from the graph first (they are not
    unknowns, so eliminating them creates no fill).
    """
    perm, pos = order_and_positions(perm, graph.n)
    d_old = _dof_counts(graph, dofs)
    keep = d_old > 0
    if not keep.all():
        graph, perm, pos, d_old = _without_nodes(graph, perm, keep, d_old)
    weight = d_old[perm]
    return weight, _weighted_column_counts(graph, perm, pos, weight)


def _without_nodes(graph: NodeGraph, perm: NDArray[np.int64], keep: NDArray[np.bool_],
                   d_old: NDArray[np.int64]) -> tuple[NodeGraph, NDArray[np.int64],
                                                      NDArray[np.int64], NDArray[np.int64]]:
    """The subgraph on ``keep`` with the ordering restricted to it (relative order kept)."""
    new_id = np.cumsum(keep) - 1
    a = graph.to_scipy()[keep][:, keep].tocsr()
    a.sort_indices()
    sub = NodeGraph(a.indptr.astype(np.int64), a.indices.astype(graph.indices.dtype))
    sub_perm = new_id[perm[keep[perm]]]
    return sub, sub_perm, inverse_permutation(sub_perm), d_old[keep]


def cholesky_nnz(graph: NodeGraph, perm: NDArray[np.integer] | None = None,
                 dofs: DofSpec = 1) -> int:
    """Nonzeros of the Cholesky factor L, diagonal included, from a symbolic factorisation.

    Parameters
    ----------
    graph
        The node graph (old numbering).
    perm
        New order ``perm[new] = old``; None keeps the current numbering.
    dofs
        DOFs per node: 1 for the node-level factor; an int, one count per
        node (old numbering) or a :class:`~bandwise.core.dofs.DofLayout` for the
        factor of the DOF matrix, DOFs numbered node after node.

    Returns
    -------
    int
        ``nnz(L)``; storage of the factor is this many values (8 bytes each)
        plus the solver's indices.

    Notes
    -----
    Near O(nnz(A)) time, O(n) memory, whatever the size of L (see the module
    notes for the DOF-level formula).

    Examples
    --------
    >>> from bandwise.core.graph import graph_from_matrix
    >>> import numpy as np, scipy.sparse as sp
    >>> star = graph_from_matrix(sp.csr_matrix(np.array(
    ...     [[1, 1, 1, 1], [1, 1, 0, 0], [1, 0, 1, 0], [1, 0, 0, 1]])))
    >>> cholesky_nnz(star), cholesky_nnz(star, np.array([1, 2, 3, 0]))
    (10, 7)
    """
    weight, wcount = _dof_columns(graph, perm, dofs)
    if weight.size and np.all(weight == 1):
        return int(wcount.sum())
    return int((weight * (weight + 1) // 2 + weight * (wcount - weight)).sum())


def factor_flops(graph: NodeGraph, perm: NDArray[np.integer] | None = None,
                 dofs: DofSpec = 1) -> int:
    """Operation count of a sparse Cholesky factorisation: ``sum_j c_j^2``.

    Convention: the sum over the columns of L (DOF level when ``dofs`` says
    so) of the squared column count, diagonal included; this is an upper
    estimate of the floating-point operations of a left- or right-looking
    column factorisation, each column j updating the others with about
    ``c_j^2`` multiply-adds and divisions (Davis 2006, ch. 4; common
    practice for comparing orderings).

    Parameters
    ----------
    graph, perm, dofs
        As for :func:`cholesky_nnz`.

    Returns
    -------
    int
    """
    weight, wcount = _dof_columns(graph, perm, dofs)
    # DOF column a of node j has (d - a) + R entries, R = W_j - d_j: sum over a of squares
    d = weight
    r = wcount - weight
    return int((d * (d + 1) * (2 * d + 1) // 6 + r * d * (d + 1) + d * r * r).sum())

