"""Cuthill-McKee and reverse Cuthill-McKee orderings, part after part.

Cuthill-McKee numbers a connected part breadth first from a start node,
queueing the unnumbered neighbours of each node in increasing degree; the
numbering is then a sequence of level structures' levels, and the bandwidth
is bounded by twice the widest level.  Reversing it (George 1971) gives the
same bandwidth and never a larger profile (Liu and Sherman 1976).  The start
node is pseudo-peripheral, so the level structure is deep and narrow: on a
large part, the far end of a breadth-first search from a node of least
degree (the first step of the George-Liu 1979 search: two searches in all,
as fast as scipy's single sweep from the node of least degree); on a part of
at most :data:`SMALL_PART` nodes, the best of many starts (every node, most
peripheral first, trials abandoned once too wide as in Lewis 1982, ties
broken both ways), within a budget of node visits for the whole graph.

References
----------
E. Cuthill and J. McKee, "Reducing the bandwidth of sparse symmetric
matrices", Proc. 24th ACM National Conference (1969) 157-172.
A. George, "Computer implementation of the finite element method", Stanford
University report STAN-CS-71-208, 1971.
A. George and J. W. H. Liu, "An implementation of a pseudoperipheral node
finder", ACM Trans. Math. Softw. 5 (1979) 284-295.
W.-H. Liu and A. H. Sherman, "Comparative analysis of the Cuthill-McKee and
the reverse Cuthill-McKee ordering algorithms for sparse matrices", SIAM J.
Numer. Anal. 13 (1976) 198-213.
J. G. Lewis, "Implementation of the Gibbs-Poole-Stockmeyer and Gibbs-King
algorithms", ACM Trans. Math. Softw. 8 (1982) 180-189 (short-circuiting).
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph

from . import register
from ._levels import NO_CAP, _george_liu, _profiles_both_ways, _sweep
from ._parts import each_part, part_kernel

__all__ = ["cuthill_mckee", "reverse_cuthill_mckee"]

#: Parts of at most this many nodes get the wide start search (every node of the
#: part, most peripheral first, both tie rules, while the budget lasts).
SMALL_PART = 6_000
#: Node and edge visits the wide search may spend over a whole graph, beyond the two
#: sweeps every part gets (at most about half a second on this project's machine;
#: the 77 open test matrices take 3.5 s in all).
EXTRA_BUDGET = 80_000_000
#: Bandwidth slack within which the wide search prefers the smaller profile ...
BAND_SLACK = 1.05
#: ... or within this one, when that gains more than 5% of profile.
WIDE_SLACK = 1.10
WIDE_GAIN = 0.95


@numba.njit(cache=True, nogil=True)
def _two_sweeps(indptr, indices, deg, low, seen, stamp, order, start,
                level_ptr):  # pragma: no cover - compiled
    """Cuthill-McKee from the far end of a breadth-first search from ``low``.

    The first step of the George-Liu (1979) search: the level structure of
    ``low`` (a plain breadth-first search), then the Cuthill-McKee sweep from
    a node of least degree in its last level (the first such), into
    ``order[start:start+size]``.  Two searches in all, where the compiled
    reference (scipy) makes one from ``low`` itself: the far end's numbering
    is as narrow or narrower in most meshes and its reversal has the smaller
    profile (measured on a random Delaunay mesh of 200,000 nodes: 0.93x).
    Returns ``(size, stamp, root)``.
    """
    stamp += 1
    size, depth, _, _ = _sweep(indptr, indices, deg, low, seen, stamp, order, start,
                               level_ptr, 0, NO_CAP)
    x = low
    if depth > 1:
        x = order[level_ptr[depth - 1]]
        for a in range(level_ptr[depth - 1] + 1, level_ptr[depth]):
            if deg[order[a]] < deg[x]:
                x = order[a]
    stamp += 1
    _sweep(indptr, indices, deg, x, seen, stamp, order, start, level_ptr, 1, NO_CAP)
    return size, stamp, x


@numba.njit(cache=True, nogil=True)
def _wide_search(indptr, indices, deg, low, seen, stamp, order, start, level_ptr, cand, pos,
                 budget):  # pragma: no cover - compiled
    """Cuthill-McKee of a small part from the best of many starts.

    Candidates: the George-Liu node (George and Liu 1979) first, then every
    node of the part from its last level back to ``low`` (the most
    peripheral first).  A candidate's sweep is abandoned as soon as one of
    its levels is wider than :data:`BAND_SLACK` times the narrowest complete
    structure so far (short-circuiting, Lewis 1982; good starts have narrow
    structures), so most trials cost a fraction of a search.  A complete
    sweep is also run with ties between neighbours of equal degree broken
    the other way.  Of the complete sweeps whose bandwidth is within
    :data:`BAND_SLACK` of the least, the one whose reversal has the least
    profile is kept.  The search stops when ``budget[0]`` (node and edge
    visits, shared by every part of the graph) runs out.  Returns ``(size, stamp)``.
    """
    root, size, _, stamp, _, _ = _george_liu(indptr, indices, deg, low, seen, stamp,
                                             order, start, level_ptr, 1)
    mean_degree = 0
    for a in range(start, start + size):
        mean_degree += deg[order[a]]
    mean_degree = mean_degree // size + 1
    k = 0
    cand[k] = root
    k += 1
    for a in range(start + size - 1, start - 1, -1):
        if order[a] != root:
            cand[k] = order[a]
            k += 1
    kept = np.empty((2 * size, 4), dtype=np.int64)   # band, profile, candidate, tie rule
    done = 0
    best_band = NO_CAP
    narrowest = NO_CAP
    for c in range(size):
        if budget[0] <= 0 and done > 0:
            break
        for mode in (1, 2):
            cap = NO_CAP if narrowest == NO_CAP else int(narrowest * WIDE_SLACK) + 1
            stamp += 1
            reached, d, width, band = _sweep(indptr, indices, deg, cand[c], seen, stamp, order,
                                             start, level_ptr, mode, cap)
            budget[0] -= reached * mean_degree
            if d < 0:
                break                      # too wide: the other tie rule is not tried
            narrowest = min(narrowest, width)
            best_band = min(best_band, band)
            kept[done, 0] = band
            kept[done, 1] = _profiles_both_ways(indptr, indices, order, start, size, pos)[1]
            kept[done, 2] = cand[c]
            kept[done, 3] = mode
            budget[0] -= size * mean_degree
            done += 1
    best = _least_profile_within(kept, done, int(best_band * BAND_SLACK))
    wider = _least_profile_within(kept, done, int(best_band * WIDE_SLACK))
    if kept[wider, 1] < WIDE_GAIN * kept[best, 1]:
        best = wider
    stamp += 1
    _sweep(indptr, indices, deg, kept[best, 2], seen, stamp, order, start, level_ptr,
           kept[best, 3], NO_CAP)
    return size, stamp


@numba.njit(cache=True, nogil=True)
def _least_profile_within(kept, done, limit):  # pragma: no cover - compiled
    """Row of ``kept[:done]`` of least profile among bandwidths <= ``limit`` (first on ties)."""
    best = 0
    for t in range(done):
        if kept[t, 0] <= limit and (kept[best, 0] > limit or kept[t, 1] < kept[best, 1]):
            best = t
    return best


def _cm_part(indptr, indices, deg, low, seen, stamp, order, start, iwork, fwork,
             params, rows):  # pragma: no cover - compiled
    """Part kernel: Cuthill-McKee of the part of ``low``, reversed when ``params[0]``.

    Every part gets :func:`_two_sweeps`; a part of at most :data:`SMALL_PART`
    nodes then gets :func:`_wide_search` while the budget (row 3 entry 0 of
    ``iwork``) lasts.  ``iwork`` rows: level pointers, candidates or a second
    numbering, its level pointers or positions.
    """
    budget = iwork[3]
    size, stamp, _ = _two_sweeps(indptr, indices, deg, low, seen, stamp, order, start,
                                 iwork[0])
    if size <= SMALL_PART and size > 2 and budget[0] > 0:
        size, stamp = _wide_search(indptr, indices, deg, low, seen, stamp, order, start,
                                   iwork[0], iwork[1], iwork[2], budget)
    if params[0] != 0.0:
        order[start:start + size] = order[start:start + size][::-1].copy()
    return size, stamp


_cm_kernel = part_kernel(_cm_part)


def _ordered(graph: NodeGraph, reverse: bool, budget: int = EXTRA_BUDGET) -> NDArray[np.int64]:
    """(Reverse) Cuthill-McKee of every part through the part driver.

    ``budget``: node and edge visits for the wide search of small parts (0:
    two searches per part and nothing more, the cheapest banded numbering).
    """
    iwork = np.empty((4, graph.n + 1), dtype=np.int64)
    iwork[3, 0] = budget
    return each_part(graph, _cm_kernel, params=(float(reverse),), iwork=iwork)[0]


@register("cm", "Cuthill-McKee (1969) from a George-Liu pseudo-peripheral node", "bandwidth")
def cuthill_mckee(graph: NodeGraph) -> NDArray[np.int64]:
    """Cuthill-McKee ordering, each connected part from a pseudo-peripheral node.

    Parameters
    ----------
    graph
        The node graph.

    Returns
    -------
    ndarray of int64
        ``perm[new] = old``.  Parts are numbered one after another, in
        increasing order of their least degree (ties: lowest node), so
        isolated nodes come first; an isolated node is a part.

    Notes
    -----
    Per part: a breadth-first search from a node of least degree, then the
    Cuthill-McKee sweep from the far end; on parts of at most
    :data:`SMALL_PART` nodes, the wide start search of :func:`_wide_search`
    (of the sweeps within 5% of the least bandwidth, the least profile
    reversed; within 10% when that gains over 5% of profile), limited to
    :data:`EXTRA_BUDGET` node and edge visits per graph.  Cost O(n + nnz)
    per search, plus the sorting of each node's new neighbours.

    Examples
    --------
    A path numbered from one end:

    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> cuthill_mckee(g).tolist()
    [0, 2, 1, 3]
    """
    return _ordered(graph, False)


@register("rcm", "reverse Cuthill-McKee (George 1971) from a George-Liu pseudo-peripheral node",
          "bandwidth")
def reverse_cuthill_mckee(graph: NodeGraph) -> NDArray[np.int64]:
    """Reverse Cuthill-McKee ordering, part after part.

    The Cuthill-McKee numbering of each part, reversed within the part (the
    parts keep their order).  Same bandwidth as Cuthill-McKee and never a
    larger profile (Liu and Sherman 1976).

    Parameters
    ----------
    graph
        The node graph.

    Returns
    -------
    ndarray of int64
        ``perm[new] = old``.

    Examples
    --------
    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> reverse_cuthill_mckee(g).tolist()
    [3, 1, 2, 0]
    """
    return _ordered(graph, True)
