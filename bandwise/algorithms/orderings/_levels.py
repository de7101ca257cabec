"""Rooted level structures and pseudo-peripheral nodes: the kernels behind RCM, GPS and Sloan.

A *rooted level structure* ``L(r) = {L_0, ..., L_{h-1}}`` of a connected
graph puts the root ``r`` in ``L_0`` and every other node in the level of
its distance to ``r`` (a breadth-first search).  Its *depth* ``h`` is the
eccentricity of ``r`` plus one and its *width* the size of its largest
level.  Neighbours of a node lie in the same or an adjacent level, so any
numbering level after level has bandwidth at most twice the width.

Every kernel here works on the plain CSR arrays (``indptr``, ``indices``)
and writes a part's nodes into a caller's slice ``order[start:start+size]``,
so that one driver loop can number a whole mesh part after part without
allocating per part.  Visited nodes are marked with a *stamp* that grows by
one per search, so no marker array is ever cleared: a graph of a million
isolated nodes costs O(n), not O(n^2).

References
----------
A. George and J. W. H. Liu, "An implementation of a pseudoperipheral node
finder", ACM Trans. Math. Softw. 5 (1979) 284-295.
N. E. Gibbs, W. G. Poole and P. K. Stockmeyer, "An algorithm for reducing
the bandwidth and profile of a sparse matrix", SIAM J. Numer. Anal. 13
(1976) 236-250.
S. W. Sloan, "A FORTRAN program for profile and wavefront reduction",
Int. J. Numer. Meth. Eng. 28 (1989) 2651-2679.
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.errors import InputError
from bandwise.core.graph import NodeGraph

__all__ = ["pseudo_diameter", "rooted_levels"]

#: Width cap meaning "never abandon the search" in :func:`_sweep`.
NO_CAP = np.iinfo(np.int64).max


@numba.njit(cache=True, nogil=True)
def _nodes_by_degree(deg):  # pragma: no cover - compiled
    """All nodes in increasing degree, ties in index order (a counting sort)."""
    n = deg.size
    top = 0
    for v in range(n):
        top = max(top, deg[v])
    slot = np.zeros(top + 2, dtype=np.int64)
    for v in range(n):
        slot[deg[v] + 1] += 1
    for d in range(top + 1):
        slot[d + 1] += slot[d]
    out = np.empty(n, dtype=np.int64)
    for v in range(n):
        out[slot[deg[v]]] = v
        slot[deg[v]] += 1
    return out


@numba.njit(cache=True, nogil=True)
def _sweep(indptr, indices, deg, root, seen, stamp, order, start, level_ptr,
           by_degree, max_width):  # pragma: no cover - compiled
    """Breadth-first search from ``root``: the rooted level structure of its part.

    Nodes go to ``order[start:start+size]`` level after level; level ``l``
    is ``order[level_ptr[l]:level_ptr[l+1]]`` (absolute positions).  With
    ``by_degree`` the unvisited neighbours of each node are queued in
    increasing degree, which makes the sweep a Cuthill-McKee numbering;
    neighbours of equal degree keep their index order, or the reverse of it
    when ``by_degree == 2``.

    Returns ``(size, depth, width, band)``; ``depth = -1`` when a level
    reached ``max_width`` nodes and the search was abandoned
    (short-circuiting).  ``band`` is the bandwidth of the sweep taken as a
    numbering: a node's first numbered neighbour is the one that queued it,
    so its row bandwidth is its distance in the queue to that node.
    """
    order[start] = root
    seen[root] = stamp
    head = start
    tail = start + 1
    level_end = start + 1
    depth = 1
    width = 1
    band = 0
    level_ptr[0] = start
    while head < tail:
        if head == level_end:
            level_ptr[depth] = head
            depth += 1
            level_end = tail
            if tail - head > width:
                width = tail - head
                if width >= max_width:
                    return tail - start, -1, width, band
        v = order[head]
        head += 1
        batch = tail
        lo = indptr[v]
        count = indptr[v + 1] - lo
        for k in range(count):
            u = indices[lo + count - 1 - k] if by_degree == 2 else indices[lo + k]
            if seen[u] != stamp:
                seen[u] = stamp
                order[tail] = u
                tail += 1
        if tail > batch:
            band = max(band, tail - head)
            if by_degree:
                # stable insertion sort of the new batch by degree (written
                # out: a compiled call per node costs more than the sort)
                for a in range(batch + 1, tail):
                    u = order[a]
                    du = deg[u]
                    b = a - 1
                    while b >= batch and deg[order[b]] > du:
                        order[b + 1] = order[b]
                        b -= 1
                    order[b + 1] = u
    level_ptr[depth] = tail
    return tail - start, depth, width, band


@numba.njit(cache=True, nogil=True)
def _george_liu(indptr, indices, deg, root, seen, stamp, order, start, level_ptr,
                by_degree):  # pragma: no cover - compiled
    """George-Liu pseudo-peripheral node search (George and Liu 1979).

    Level structure from ``root``; take a node of minimum degree in the last
    level and build its structure; repeat while the depth grows.  On return
    ``order[start:start+size]`` and ``level_ptr`` hold the structure rooted at
    the returned node (a Cuthill-McKee sweep when ``by_degree``).

    Returns ``(root, size, depth, stamp, best_root, best_band)``: besides the
    pseudo-peripheral node, the root of the sweep of least bandwidth met on
    the way (the first such, or ``root`` when it ties).
    """
    stamp += 1
    size, depth, _, band = _sweep(indptr, indices, deg, root, seen, stamp, order, start,
                                  level_ptr, by_degree, NO_CAP)
    best_root = root
    best_band = band
    if depth == 1 or depth == size:
        return root, size, depth, stamp, best_root, best_band
    while True:
        lo = level_ptr[depth - 1]
        hi = level_ptr[depth]
        x = order[lo]
        for a in range(lo + 1, hi):
            if deg[order[a]] < deg[x]:
                x = order[a]
        stamp += 1
        _, new_depth, _, band = _sweep(indptr, indices, deg, x, seen, stamp, order, start,
                                       level_ptr, by_degree, NO_CAP)
        root = x
        if band <= best_band:
            best_root = x
            best_band = band
        if new_depth <= depth:
            return root, size, new_depth, stamp, best_root, best_band
        depth = new_depth
        if depth >= size:
            return root, size, depth, stamp, best_root, best_band


@numba.njit(cache=True, nogil=True)
def _shrunk_last_level(order, level_ptr, depth, deg, cand):  # pragma: no cover - compiled
    """Candidates for the far end: last level by increasing degree, one node per degree.

    Writes them to ``cand`` and returns how many.
    """
    lo = level_ptr[depth - 1]
    hi = level_ptr[depth]
    last = order[lo:hi].copy()
    ranks = np.argsort(deg[last], kind="mergesort")
    k = 0
    previous = -1
    for r in ranks:
        v = last[r]
        if deg[v] != previous:
            cand[k] = v
            k += 1
            previous = deg[v]
    return k


@numba.njit(cache=True, nogil=True)
def _profiles_both_ways(indptr, indices, order, start, size, pos):  # pragma: no cover
    """Profile of ``order[start:start+size]`` as numbered and reversed, in one pass.

    Row ``v`` at position ``p`` has ``p - min(p, positions of its neighbours)``
    forward, and ``max(p, positions of its neighbours) - p`` reversed.
    """
    for a in range(start, start + size):
        pos[order[a]] = a
    forward = 0
    backward = 0
    for a in range(start, start + size):
        v = order[a]
        lo = a
        hi = a
        for t in range(indptr[v], indptr[v + 1]):
            q = pos[indices[t]]
            lo = min(lo, q)
            hi = max(hi, q)
        forward += a - lo
        backward += hi - a
    return forward, backward


@numba.njit(cache=True, nogil=True)
def _pseudo_diameter(indptr, indices, deg, low, seen, stamp, trees, tree_ptr, start,
                     cand):  # pragma: no cover - compiled
    """Ends ``(s, e)`` of a pseudo-diameter of the part containing ``low``.

    Gibbs-Poole-Stockmeyer step I with Sloan-style (1989) refinements: start at
    ``low``, a node of minimum degree of its part; build its level
    structure; try the last-level candidates (:func:`_shrunk_last_level`) in
    increasing degree, abandoning any search as soon as a level is as wide
    as the narrowest complete one found so far; a deeper structure makes its
    root the new start; otherwise the candidate of least width is the end.

    ``trees`` (3 x n) and ``tree_ptr`` (3 x (n + 1)) hold three level
    structures in the layout of :func:`_sweep` (the start's, the current
    trial, the best end so far), so that neither end has to be searched
    again.  Returns ``(s, e, size, depth, row_s, row_e, width_s, width_e,
    stamp)``: the structures of ``s`` and ``e`` are in rows ``row_s`` and
    ``row_e``.
    """
    row_s, row_trial, row_e = 0, 1, 2
    s = low
    stamp += 1
    size, depth, width_s, _ = _sweep(indptr, indices, deg, s, seen, stamp, trees[row_s], start,
                                     tree_ptr[row_s], False, NO_CAP)
    while True:
        k = _shrunk_last_level(trees[row_s], tree_ptr[row_s], depth, deg, cand)
        width_e = NO_CAP
        e = -1
        deeper = False
        for c in range(k):
            x = cand[c]
            stamp += 1
            _, d, w, _ = _sweep(indptr, indices, deg, x, seen, stamp, trees[row_trial], start,
                                tree_ptr[row_trial], False, width_e)
            if d < 0:
                continue
            if d > depth:
                s = x
                depth = d
                width_s = w
                row_s, row_trial = row_trial, row_s
                deeper = True
                break
            if w < width_e:
                width_e = w
                e = x
                row_e, row_trial = row_trial, row_e
        if not deeper:
            return s, e, size, depth, row_s, row_e, width_s, width_e, stamp


def _tree_arrays(n: int) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Room for the three level structures of :func:`_pseudo_diameter`."""
    return np.empty((3, n), dtype=np.int64), np.empty((3, n + 1), dtype=np.int64)


def _work_arrays(n: int) -> tuple[NDArray[np.int64], ...]:
    """Marker, node buffer, level pointers and candidate buffer for ``n`` nodes."""
    seen = np.zeros(n, dtype=np.int64)
    order = np.empty(n, dtype=np.int64)
    level_ptr = np.empty(n + 1, dtype=np.int64)
    cand = np.empty(n, dtype=np.int64)
    return seen, order, level_ptr, cand


def pseudo_diameter(graph: NodeGraph, nodes_of_part: NDArray[np.integer]) -> tuple[int, int]:
    """The two ends of a pseudo-diameter of one connected part of the graph.

    Parameters
    ----------
    graph
        The node graph.
    nodes_of_part
        The nodes of one connected part, any order; the search starts at the
        one of least degree (the first such) and covers its whole part.

    Returns
    -------
    (start, end)
        Two nodes far apart: ``end`` is in the last level of the level
        structure rooted at ``start``, and no tried node gave a deeper one.
        For a single-node part both are that node.

    Raises
    ------
    InputError
        If ``nodes_of_part`` is empty or holds a node outside the graph.

    Notes
    -----
    Step I of Gibbs, Poole and Stockmeyer (1976), started at a node of
    minimum degree, with two refinements in the manner of Sloan (1989): the
    list of last-level nodes to try is shrunk (here to one node of each
    degree, lowest degree first; GPS try them all), and a trial search stops
    as soon as one of its levels is as wide as the narrowest complete
    structure so far ("short-circuiting", also in Lewis 1982).  Cost: a few breadth-first searches of the part,
    O(nodes + edges) each.

    References
    ----------
    N. E. Gibbs, W. G. Poole and P. K. Stockmeyer, SIAM J. Numer. Anal. 13
    (1976) 236-250.  S. W. Sloan, Int. J. Numer. Meth. Eng. 28 (1989)
    2651-2679.

    Examples
    --------
    The ends of a path 0-2-1-3:

    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> pseudo_diameter(g, np.arange(4))
    (0, 3)
    """
    nodes = np.asarray(nodes_of_part).ravel()
    if nodes.size == 0:
        raise InputError("a part needs at least one node")
    if not np.issubdtype(nodes.dtype, np.integer) or nodes.min() < 0 or nodes.max() >= graph.n:
        raise InputError(f"the part's nodes must be node numbers of the graph (0..{graph.n - 1})")
    deg = graph.degrees()
    low = int(nodes[np.argmin(deg[nodes])])
    seen, _, _, cand = _work_arrays(graph.n)
    trees, tree_ptr = _tree_arrays(graph.n)
    s, e = _pseudo_diameter(graph.indptr, graph.indices, deg, low, seen, 0, trees, tree_ptr, 0,
                            cand)[:2]
    return int(s), int(e)


def rooted_levels(graph: NodeGraph, root: int) -> list[NDArray[np.int64]]:
    """The rooted level structure of ``root``: its part's nodes by distance.

    Returns a list of arrays, level ``l`` holding the nodes at distance ``l``
    from ``root`` (level 0 is ``[root]``), each in the order of discovery.

    Examples
    --------
    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> [level.tolist() for level in rooted_levels(g, 2)]
    [[2], [0, 1], [3]]
    """
    if not 0 <= root < graph.n:
        raise InputError(f"node {root} is not in the graph ({graph.n} nodes)")
    seen, order, level_ptr, _ = _work_arrays(graph.n)
    _, depth, _, _ = _sweep(graph.indptr, graph.indices, graph.degrees(), root, seen, 1,
                         order, 0, level_ptr, False, NO_CAP)
    return [order[level_ptr[i]:level_ptr[i + 1]].copy() for i in range(depth)]
