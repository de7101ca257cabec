"""Cuthill-McKee and reverse Cuthill-McKee orderings, part after part.

Cuthill-McKee numbers a connected part breadth first from a start node,
queueing the unnumbered neighbours of each node in increasing degree; the
numbering is then a sequence of level structures' levels, and the bandwidth
is bounded by twice the widest level.  Reversing it (George 1971) gives the
same bandwidth and never a larger profile (Liu and Sherman 1976).  The start
node is pseudo-peripheral, found by the George-Liu (1979) search, so the
level structure is deep and narrow; since every structure of that search is
itself a Cuthill-McKee numbering, the narrowest in bandwidth is kept (and a
few more starts are tried on small parts).

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
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph

from . import register
from ._levels import NO_CAP, _george_liu, _shrunk_last_level, _sweep
from ._parts import each_part, part_kernel

__all__ = ["cuthill_mckee", "reverse_cuthill_mckee"]

#: Extra start nodes tried on a part of ``size`` nodes: ``min(16, 50_000 // size)``,
#: so small parts get a wider search and a large mesh costs no more than the
#: George-Liu search itself (the extra work is at most 50,000 node visits, with
#: their edges, per part).
EXTRA_STARTS = 16
EXTRA_BUDGET = 50_000


@numba.njit(cache=True, nogil=True)
def _cuthill_mckee_part(indptr, indices, deg, low, seen, stamp, order, start,
                        level_ptr, cand):  # pragma: no cover - compiled
    """Cuthill-McKee numbering of the part of ``low`` into ``order[start:start+size]``.

    ``low`` is a node of minimum degree of its part, the classical start of
    Cuthill and McKee and the first root of the George-Liu search.  Every
    level structure of that search is itself a Cuthill-McKee sweep.  On a
    small part a few more starts are tried too: the last level of the final
    structure (one node per degree) and the other nodes of minimum degree.
    The sweep of least bandwidth is kept; ties go to the George-Liu node.

    Returns ``(size, stamp)``.
    """
    root, size, depth, stamp, best_root, best_band = _george_liu(
        indptr, indices, deg, low, seen, stamp, order, start, level_ptr, True)
    in_buffer = root
    extra = min(EXTRA_STARTS, EXTRA_BUDGET // size)
    if extra > 0 and size > 2:
        k = _shrunk_last_level(order, level_ptr, depth, deg, cand)
        for a in range(start, start + size):
            if k >= extra:
                break
            v = order[a]
            if deg[v] == deg[low] and v != low:
                cand[k] = v
                k += 1
        for c in range(min(k, extra)):
            x = cand[c]
            if x == root or x == best_root:
                continue
            stamp += 1
            _, _, _, band = _sweep(indptr, indices, deg, x, seen, stamp, order, start,
                                   level_ptr, True, NO_CAP)
            in_buffer = x
            if band < best_band:
                best_root = x
                best_band = band
    if best_root != in_buffer:
        stamp += 1
        _sweep(indptr, indices, deg, best_root, seen, stamp, order, start, level_ptr,
               True, NO_CAP)
    return size, stamp


def _cm_part(indptr, indices, deg, low, seen, stamp, order, start, iwork, fwork,
             params):  # pragma: no cover - compiled
    """Part kernel: Cuthill-McKee of the part of ``low``, reversed when ``params[0]``."""
    size, stamp = _cuthill_mckee_part(indptr, indices, deg, low, seen, stamp, order, start,
                                      iwork[0], iwork[1])
    if params[0] != 0.0:
        order[start:start + size] = order[start:start + size][::-1].copy()
    return size, stamp


_cm_kernel = part_kernel(_cm_part)


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
    Per part: the George-Liu search from a node of least degree (a few
    breadth-first searches, each also a Cuthill-McKee sweep whose bandwidth
    comes for free); on parts below 50,000 nodes up to 16 more starts (the
    last level of the final structure, one node per degree, and the other
    nodes of least degree).  The sweep of least bandwidth is kept.  Cost
    O(n + nnz) per search, plus the sorting of each node's new neighbours.

    Examples
    --------
    A path numbered from one end:

    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> cuthill_mckee(g).tolist()
    [0, 2, 1, 3]
    """
    return each_part(graph, _cm_kernel, int_rows=2, params=(0.0,))[0]


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
    return each_part(graph, _cm_kernel, int_rows=2, params=(1.0,))[0]
