"""Sloan's profile and wavefront ordering, part after part.

Sloan (1986, 1989) numbers a part from the start of a pseudo-diameter
towards its end, choosing each time, among the nodes next to the front,
the one of highest priority

    P(i) = W1 * dist(i, end) - W2 * (current degree(i) + 1),

where the *current degree* counts the nodes that would join the front if
``i`` were numbered next.  The first term keeps the numbering moving away
from the start (global), the second keeps the front small (local).  Nodes
pass through four statuses: inactive (not yet seen), preactive (next to an
active or preactive node), active (next to a numbered node) and postactive
(numbered).  Candidates sit in a binary max-heap keyed on the priority.

The optional ``key`` replaces the distance term, so that another global
measure can steer the numbering: with a scaled Fiedler vector this is the
spectral-Sloan hybrid of Kumfert and Pothen (1997).

References
----------
S. W. Sloan, "An algorithm for profile and wavefront reduction of sparse
matrices", Int. J. Numer. Meth. Eng. 23 (1986) 239-251.
S. W. Sloan, "A FORTRAN program for profile and wavefront reduction",
Int. J. Numer. Meth. Eng. 28 (1989) 2651-2679.
G. Kumfert and A. Pothen, "Two improved algorithms for envelope and
wavefront reduction", BIT 37 (1997) 559-590.
"""

from __future__ import annotations

import math

import numba
import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from ..graph import NodeGraph
from . import register
from ._levels import NO_CAP, _nodes_by_degree, _pseudo_diameter, _sweep

INACTIVE, PREACTIVE, ACTIVE, POSTACTIVE = 0, 1, 2, 3


# The heap keeps a copy of each entry's priority beside its node (``hkey``), so
# that sifting touches only the heap's own small arrays, not the per-node ones.
# Its operations are inlined: a compiled call per operation (with its array
# reference counting) would cost several times the operation itself.  Raises
# are batched per step (:func:`_bump`, :func:`_settle`).


@numba.njit(cache=True, nogil=True, inline="always")
def _ahead(hkey, heap, a, b):  # pragma: no cover - compiled
    """Whether heap entry ``a`` comes out before entry ``b`` (ties: lower node first)."""
    return hkey[a] > hkey[b] or (hkey[a] == hkey[b] and heap[a] < heap[b])


@numba.njit(cache=True, nogil=True, inline="always")
def _sift_up(heap, hkey, where, i):  # pragma: no cover - compiled
    v = heap[i]
    kv = hkey[i]
    while i > 0:
        parent = (i - 1) >> 1
        kp = hkey[parent]
        if kv < kp or (kv == kp and v > heap[parent]):
            break
        u = heap[parent]
        heap[i] = u
        hkey[i] = kp
        where[u] = i
        i = parent
    heap[i] = v
    hkey[i] = kv
    where[v] = i


@numba.njit(cache=True, nogil=True, inline="always")
def _sift_down(heap, hkey, where, i, size):  # pragma: no cover - compiled
    v = heap[i]
    kv = hkey[i]
    while True:
        child = 2 * i + 1
        if child >= size:
            break
        if child + 1 < size and _ahead(hkey, heap, child + 1, child):
            child += 1
        kc = hkey[child]
        if kc < kv or (kc == kv and heap[child] > v):
            break
        u = heap[child]
        heap[i] = u
        hkey[i] = kc
        where[u] = i
        i = child
    heap[i] = v
    hkey[i] = kv
    where[v] = i


@numba.njit(cache=True, nogil=True, inline="always")
def _push(heap, hkey, where, prio, size, v):  # pragma: no cover - compiled
    heap[size] = v
    hkey[size] = prio[v]
    _sift_up(heap, hkey, where, size)
    return size + 1


@numba.njit(cache=True, nogil=True, inline="always")
def _pop(heap, hkey, where, size):  # pragma: no cover - compiled
    top = heap[0]
    where[top] = -1
    size -= 1
    if size > 0:
        heap[0] = heap[size]
        hkey[0] = hkey[size]
        _sift_down(heap, hkey, where, 0, size)
    return top, size


@numba.njit(cache=True, nogil=True, inline="always")
def _bump(prio, touched, count, v, amount):  # pragma: no cover - compiled
    """Raise the priority of ``v`` now and note it for the heap (repeats are harmless)."""
    prio[v] += amount
    touched[count] = v
    return count + 1


@numba.njit(cache=True, nogil=True, inline="always")
def _settle(heap, hkey, where, prio, status, touched, count, size):  # pragma: no cover
    """Bring the heap up to date with the nodes raised in one step; returns its size.

    The order out of the heap (priority, then lowest node) is a total order,
    so sifting once per batch gives the same numbering as sifting after
    every raise; a node noted twice is sifted twice, the second time at no
    cost.
    """
    for c in range(count):
        v = touched[c]
        i = where[v]
        if i >= 0:
            hkey[i] = prio[v]
            _sift_up(heap, hkey, where, i)
        elif status[v] != POSTACTIVE:
            size = _push(heap, hkey, where, prio, size, v)
    return size


@numba.njit(cache=True, nogil=True)
def _number_by_priority(indptr, indices, s, w2, prio, status, heap, hkey, where, touched, out,
                        start):  # pragma: no cover - compiled
    """Sloan's numbering loop from ``s`` (priorities set); writes ``out[start:]``.

    Each step: take the node of highest priority; if it was preactive, its
    neighbours lose one from their current degree (+W2) and inactive ones
    become preactive; number it; each preactive neighbour becomes active
    (+W2) and so do its own neighbours' priorities (+W2), inactive ones
    becoming preactive (Sloan 1986, steps 6-9).
    """
    size = _push(heap, hkey, where, prio, 0, s)
    status[s] = PREACTIVE
    room = touched.size
    k = start
    while size > 0:
        i, size = _pop(heap, hkey, where, size)
        count = 0
        if status[i] == PREACTIVE:
            for t in range(indptr[i], indptr[i + 1]):
                j = indices[t]
                if status[j] == POSTACTIVE:
                    continue
                count = _bump(prio, touched, count, j, w2)
                if status[j] == INACTIVE:
                    status[j] = PREACTIVE
        out[k] = i
        status[i] = POSTACTIVE
        for t in range(indptr[i], indptr[i + 1]):
            j = indices[t]
            if status[j] != PREACTIVE:
                continue
            if count + indptr[j + 1] - indptr[j] + 1 > room:
                size = _settle(heap, hkey, where, prio, status, touched, count, size)
                count = 0
            status[j] = ACTIVE
            count = _bump(prio, touched, count, j, w2)
            for r in range(indptr[j], indptr[j + 1]):
                m = indices[r]
                if status[m] == POSTACTIVE:
                    continue
                count = _bump(prio, touched, count, m, w2)
                if status[m] == INACTIVE:
                    status[m] = PREACTIVE
        size = _settle(heap, hkey, where, prio, status, touched, count, size)
        k += 1
    return k - start


@numba.njit(cache=True, nogil=True)
def _sloan_part(indptr, indices, deg, low, w1, w2, key, use_key, seen, stamp, order, start,
                trees, tree_ptr, cand, prio, status, heap, hkey, where,
                touched):  # pragma: no cover - compiled
    """Sloan numbering of the part of ``low`` into ``order[start:]``; returns ``(size, stamp)``."""
    if use_key:
        stamp += 1
        size, _, _, _ = _sweep(indptr, indices, deg, low, seen, stamp, trees[0], start,
                               tree_ptr[0], False, NO_CAP)
        s = low
        for a in range(start, start + size):
            w = trees[0, a]
            prio[w] = w1 * key[w] - w2 * (deg[w] + 1)
            if key[w] > key[s] or (key[w] == key[s] and w < s):
                s = w
    else:
        s, _, size, depth, _, row_e, _, _, stamp = _pseudo_diameter(
            indptr, indices, deg, low, seen, stamp, trees, tree_ptr, start, cand)
        nodes = trees[row_e]
        level_ptr = tree_ptr[row_e]
        for lvl in range(depth):
            for a in range(level_ptr[lvl], level_ptr[lvl + 1]):
                w = nodes[a]
                prio[w] = w1 * lvl - w2 * (deg[w] + 1)
    _number_by_priority(indptr, indices, s, w2, prio, status, heap, hkey, where, touched,
                        order, start)
    return size, stamp


@numba.njit(cache=True, nogil=True)
def _sloan_parts(indptr, indices, w1, w2, key, use_key):  # pragma: no cover - compiled
    """Sloan numbering of every part, parts started at their node of least degree."""
    n = indptr.size - 1
    deg = np.empty(n, dtype=np.int64)
    for v in range(n):
        deg[v] = indptr[v + 1] - indptr[v]
    seen = np.zeros(n, dtype=np.int64)
    order = np.empty(n, dtype=np.int64)
    trees = np.empty((3, n), dtype=np.int64)
    tree_ptr = np.empty((3, n + 1), dtype=np.int64)
    cand = np.empty(n, dtype=np.int64)
    prio = np.empty(n, dtype=np.float64)
    status = np.zeros(n, dtype=np.int8)
    heap = np.empty(n, dtype=np.int64)
    hkey = np.empty(n, dtype=np.float64)
    where = np.full(n, -1, dtype=np.int64)
    touched = np.empty(n, dtype=np.int64)
    placed = 0
    stamp = 0
    for v in _nodes_by_degree(deg):
        if seen[v] != 0:
            continue
        size, stamp = _sloan_part(indptr, indices, deg, v, w1, w2, key, use_key, seen, stamp,
                                  order, placed, trees, tree_ptr, cand, prio, status, heap, hkey,
                                  where, touched)
        placed += size
    return order


@register("sloan", "Sloan (1986, 1989): priority-driven profile and wavefront reduction",
          "profile")
def sloan(graph: NodeGraph, w1: float = 2.0, w2: float = 1.0,
          key: NDArray[np.floating] | None = None) -> NDArray[np.int64]:
    """Sloan ordering for small profile and wavefront, part after part.

    Parameters
    ----------
    graph
        The node graph.
    w1, w2
        Weights of the global term (distance to the end node, or ``key``)
        and of the local term (current degree + 1).  Sloan recommends
        ``w1 = 2, w2 = 1``; ``w1 = 1, w2 = 2`` favours a smaller front.
    key
        Optional float per node replacing the distance-to-end term: a node
        of higher key is numbered earlier, and each part starts at its node
        of highest key (ties: lowest node).  None uses the pseudo-diameter.

    Returns
    -------
    ndarray of int64
        ``perm[new] = old``; parts one after another, in increasing order of
        their least degree (isolated nodes first).

    Raises
    ------
    InputError
        If a weight is not finite, or ``key`` is not one finite number per
        node.

    Notes
    -----
    The start and end nodes come from
    :func:`bandwise.orderings._levels.pseudo_diameter`; the queue is a
    binary heap with priority updates, so the cost is
    O((n + nnz) log n) per part (every node enters the front once and its
    neighbours' priorities are raised once per change of status).

    Examples
    --------
    A path is numbered end to end:

    >>> import numpy as np
    >>> from bandwise.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> sloan(g).tolist()
    [0, 2, 1, 3]
    """
    if not (math.isfinite(w1) and math.isfinite(w2)):
        raise InputError(f"Sloan weights must be finite numbers (got w1={w1}, w2={w2})")
    if key is None:
        key_arr = np.zeros(0, dtype=np.float64)
        use_key = False
    else:
        key_arr = np.ascontiguousarray(key, dtype=np.float64)
        if key_arr.shape != (graph.n,) or not np.all(np.isfinite(key_arr)):
            raise InputError(f"the Sloan key must be one finite number per node ({graph.n})")
        use_key = True
    return _sloan_parts(graph.indptr, graph.indices, float(w1), float(w2), key_arr, use_key)
