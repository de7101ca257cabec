"""The Gibbs-Poole-Stockmeyer ordering, part after part.

Gibbs, Poole and Stockmeyer (1976) reduce bandwidth in three steps:

I.   find the ends ``v``, ``u`` of a pseudo-diameter and their rooted level
     structures ``L_v``, ``L_u`` (same depth ``k``);
II.  combine them into one level structure of small width: a node in level
     ``i`` of ``L_v`` and level ``j`` of ``L_u`` gets the pair
     ``(i, k-1-j)``; nodes whose pair agrees are placed; the others form
     connected components, which, largest first, are placed entirely by
     ``L_v`` or entirely by ``L_u``, whichever makes the widest level they
     touch narrower;
III. number level by level from the end of smaller degree: within a level,
     the unnumbered neighbours of numbered nodes in order of their
     numbering, each batch in increasing degree; when the level's queue
     runs dry, its unnumbered node of least degree; a node's neighbours in
     the next level are queued for that level as it goes.

References
----------
N. E. Gibbs, W. G. Poole and P. K. Stockmeyer, "An algorithm for reducing
the bandwidth and profile of a sparse matrix", SIAM J. Numer. Anal. 13
(1976) 236-250.
J. G. Lewis, "Implementation of the Gibbs-Poole-Stockmeyer and Gibbs-King
algorithms", ACM Trans. Math. Softw. 8 (1982) 180-189.
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph

from . import register
from ._levels import _profiles_both_ways, _pseudo_diameter
from ._parts import each_part, part_kernel

__all__ = ["gps"]


@numba.njit(cache=True, nogil=True)
def _levels_of(order, level_ptr, depth, level, reverse):  # pragma: no cover - compiled
    """Write each node's level (``depth-1-l`` when ``reverse``) from a level structure."""
    for lv in range(depth):
        value = depth - 1 - lv if reverse else lv
        for a in range(level_ptr[lv], level_ptr[lv + 1]):
            level[order[a]] = value


@numba.njit(cache=True, nogil=True)
def _free_components(indptr, indices, nodes, comb, seen, stamp, buf):  # pragma: no cover
    """Connected components of the not-yet-placed nodes (``comb == -1``).

    Nodes go to ``buf``, component ``c`` being ``buf[ptr[c]:ptr[c+1]]``.
    Returns ``(ptr, stamp)``.
    """
    stamp += 1
    ptr = [0]
    tail = 0
    for w in nodes:
        if comb[w] != -1 or seen[w] == stamp:
            continue
        seen[w] = stamp
        head = tail
        buf[tail] = w
        tail += 1
        while head < tail:
            v = buf[head]
            head += 1
            for t in range(indptr[v], indptr[v + 1]):
                x = indices[t]
                if comb[x] == -1 and seen[x] != stamp:
                    seen[x] = stamp
                    buf[tail] = x
                    tail += 1
        ptr.append(tail)
    return np.array(ptr, dtype=np.int64), stamp


@numba.njit(cache=True, nogil=True)
def _combined_levels(indptr, indices, nodes, depth, lv, lu, width_v, width_u, comb, seen,
                     stamp, buf):  # pragma: no cover - compiled
    """GPS step II: one level per node in ``comb`` from the two structures.

    ``lv`` and ``lu`` hold each node's level from ``v`` and its reversed
    level from ``u``.  Returns ``stamp``.
    """
    total = np.zeros(depth, dtype=np.int64)
    for w in nodes:
        if lv[w] == lu[w]:
            comb[w] = lv[w]
            total[lv[w]] += 1
        else:
            comb[w] = -1
    ptr, stamp = _free_components(indptr, indices, nodes, comb, seen, stamp, buf)
    sizes = ptr[1:] - ptr[:-1]
    inc_v = np.zeros(depth, dtype=np.int64)
    inc_u = np.zeros(depth, dtype=np.int64)
    for c in np.argsort(-sizes, kind="mergesort"):
        part = buf[ptr[c]:ptr[c + 1]]
        for w in part:
            inc_v[lv[w]] += 1
            inc_u[lu[w]] += 1
        widest_v = 0
        widest_u = 0
        for w in part:
            for lvl in (lv[w], lu[w]):
                widest_v = max(widest_v, total[lvl] + inc_v[lvl])
                widest_u = max(widest_u, total[lvl] + inc_u[lvl])
        by_v = widest_v < widest_u or (widest_v == widest_u and width_v <= width_u)
        for w in part:
            inc_v[lv[w]] = 0
            inc_u[lu[w]] = 0
        for w in part:
            comb[w] = lv[w] if by_v else lu[w]
            total[comb[w]] += 1
    return stamp


@numba.njit(cache=True, nogil=True)
def _level_lists(nodes, comb, depth, deg):  # pragma: no cover - compiled
    """The nodes of each combined level, each level in increasing degree.

    Returns ``(ptr, members)``: level ``l`` is ``members[ptr[l]:ptr[l+1]]``.
    """
    ptr = np.zeros(depth + 1, dtype=np.int64)
    for w in nodes:
        ptr[comb[w] + 1] += 1
    for lvl in range(depth):
        ptr[lvl + 1] += ptr[lvl]
    fill = ptr[:-1].copy()
    members = np.empty(nodes.size, dtype=np.int64)
    for w in nodes:
        members[fill[comb[w]]] = w
        fill[comb[w]] += 1
    for lvl in range(depth):
        lo = ptr[lvl]
        hi = ptr[lvl + 1]
        if hi - lo > 1:
            ranks = np.argsort(deg[members[lo:hi]], kind="mergesort")
            members[lo:hi] = members[lo:hi][ranks]
    return ptr, members


@numba.njit(cache=True, nogil=True)
def _number_by_levels(indptr, indices, deg, root, forward, depth, comb, lptr, members,
                      out, start):  # pragma: no cover - compiled
    """GPS step III: number the part level by level into ``out[start:]``.

    ``comb[w]`` is the node's combined level and becomes -1 once queued.
    The region of a level is known in advance (its width), so nodes queued
    for the next level are written straight after it.
    """
    out[start] = root
    comb[root] = -1
    q1_front = start
    q1_back = start + 1
    for step in range(depth):
        level = step if forward else depth - 1 - step
        next_level = level + 1 if forward else level - 1
        left = lptr[level + 1] - lptr[level]
        queue2 = q1_front + left
        q2_back = queue2
        cursor = lptr[level]
        while True:
            while q1_front < q1_back:
                c = out[q1_front]
                q1_front += 1
                left -= 1
                batch1 = q1_back
                batch2 = q2_back
                for t in range(indptr[c], indptr[c + 1]):
                    x = indices[t]
                    lx = comb[x]
                    if lx < 0:
                        continue
                    comb[x] = -1
                    if lx == level:
                        out[q1_back] = x
                        q1_back += 1
                    elif lx == next_level:
                        out[q2_back] = x
                        q2_back += 1
                    else:
                        raise ValueError("combined level structure with a jump of two levels")
                # each batch by increasing degree (a stable insertion sort,
                # written out: a compiled call per node costs more than the sort)
                for lo, hi in ((batch1, q1_back), (batch2, q2_back)):
                    for a in range(lo + 1, hi):
                        u = out[a]
                        du = deg[u]
                        b = a - 1
                        while b >= lo and deg[out[b]] > du:
                            out[b + 1] = out[b]
                            b -= 1
                        out[b + 1] = u
            if left == 0:
                break
            while comb[members[cursor]] < 0:
                cursor += 1
            x = members[cursor]
            comb[x] = -1
            out[q1_back] = x
            q1_back += 1
        q1_front = queue2
        q1_back = q2_back


@numba.njit(cache=True, nogil=True)
def _gps_part(indptr, indices, deg, low, seen, stamp, order, start, trees, tree_ptr, cand, lv,
              lu, comb):  # pragma: no cover - compiled
    """Gibbs-Poole-Stockmeyer numbering of the part of ``low``; returns ``(size, stamp)``."""
    s, e, size, depth, row_s, row_e, width_v, width_u, stamp = _pseudo_diameter(
        indptr, indices, deg, low, seen, stamp, trees, tree_ptr, start, cand)
    if size <= 2:
        order[start:start + size] = trees[row_s, start:start + size]
        return size, stamp
    _levels_of(trees[row_s], tree_ptr[row_s], depth, lv, False)
    _levels_of(trees[row_e], tree_ptr[row_e], depth, lu, True)
    nodes = trees[row_s, start:start + size].copy()
    stamp = _combined_levels(indptr, indices, nodes, depth, lv, lu, width_v, width_u, comb,
                             seen, stamp, cand)
    lptr, members = _level_lists(nodes, comb, depth, deg)
    if deg[s] <= deg[e]:
        _number_by_levels(indptr, indices, deg, s, True, depth, comb, lptr, members,
                          order, start)
    else:
        _number_by_levels(indptr, indices, deg, e, False, depth, comb, lptr, members,
                          order, start)
    return size, stamp


def _gps_kernel_part(indptr, indices, deg, low, seen, stamp, order, start, iwork, fwork,
                     params, rows):  # pragma: no cover - compiled
    """Part kernel: GPS of the part of ``low``, kept in the direction of smaller profile."""
    size, stamp = _gps_part(indptr, indices, deg, low, seen, stamp, order, start, iwork[0:3],
                            iwork[3:6], iwork[6], iwork[7], iwork[8], iwork[9])
    forward, backward = _profiles_both_ways(indptr, indices, order, start, size, iwork[7])
    if backward <= forward:
        order[start:start + size] = order[start:start + size][::-1].copy()
    return size, stamp


_gps_kernel = part_kernel(_gps_kernel_part)


@register("gps", "Gibbs-Poole-Stockmeyer (1976): pseudo-diameter, combined level structure",
          "bandwidth")
def gps(graph: NodeGraph) -> NDArray[np.int64]:
    """Gibbs-Poole-Stockmeyer ordering, part after part.

    Parameters
    ----------
    graph
        The node graph.

    Returns
    -------
    ndarray of int64
        ``perm[new] = old``; parts one after another, each started at its
        node of least degree (isolated nodes first).

    Notes
    -----
    Steps II and III follow the paper: a component of the reduced graph
    whose two placements give the same widest level goes to the narrower of
    the two structures (to ``v``'s when they are equally wide).  Where this
    implementation differs:

    - step I tries only one last-level node of each degree and abandons a
      trial structure as soon as it is as wide as the narrowest so far
      (shrinking and short-circuiting in the manner of Sloan 1989 and Lewis
      1982, see :func:`bandwise.algorithms.orderings._levels.pseudo_diameter`), where
      GPS try every last-level node;
    - because of the short-circuiting, a trial structure that is deeper
      but no narrower than an earlier complete trial is abandoned instead
      of restarting the search (Lewis 1982 does the same);
    - each part's numbering is kept as numbered or reversed, whichever has
      the smaller profile (reversed on a tie, as in reverse Cuthill-McKee;
      the bandwidth is the same both ways); Lewis's code chooses the
      direction from the tie-breaking of an earlier program instead.

    Cost: a few breadth-first searches per part, O(n + nnz) each, plus a
    sort of each level by degree and of each node's queued neighbours.

    Examples
    --------
    A path is numbered end to end:

    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> gps(g).tolist()
    [3, 1, 2, 0]
    """
    return each_part(graph, _gps_kernel, int_rows=10)[0]
