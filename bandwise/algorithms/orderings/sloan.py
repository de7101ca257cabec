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

from bandwise.core.errors import InputError
from bandwise.core.graph import NodeGraph

from . import register
from ._levels import NO_CAP, _pseudo_diameter, _sweep
from ._parts import each_part, part_kernel

__all__ = ["sloan"]

# Node state in one int64 per node (``slot``), so that the inner loops touch a
# single per-node word: -1 inactive, -2 postactive, and for a node in the heap
# ``2 * position + 1`` if active, ``2 * position`` if preactive.  A node's
# priority lives only in the heap (``hkey``, beside its node in ``heap``) from
# the moment it becomes preactive; before that it is its initial priority
# ``base``.  The heap is a binary max-heap on (priority, -node).  Its two sifts
# (down after taking the top, up after a rise) are written out once each inside
# the loop: as compiled calls (even inlined ones) they cost about twice as much,
# measured on a tetrahedral mesh.
INACTIVE = -1
POSTACTIVE = -2


@numba.njit(cache=True, nogil=True)
def _number_by_priority(indptr, indices, s, w2, base, slot, heap, hkey, out,
                        start):  # pragma: no cover - compiled
    """Sloan's numbering loop from ``s``; writes ``out[start:]``.

    Each step: take the node of highest priority; if it was preactive, its
    neighbours' current degrees drop by one (+W2) and inactive ones become
    preactive; number it; each preactive neighbour becomes active (+W2) and
    its own neighbours' priorities rise too (+W2), inactive ones becoming
    preactive (the numbering steps of Sloan 1986).  "Rise" below means: a node in the
    heap gains W2 and sifts up; an inactive node enters the heap with its
    initial priority + W2.
    """
    heap[0] = s
    hkey[0] = base[s]
    slot[s] = 0
    size = 1
    k = start
    while size > 0:
        # -- take the top of the heap; the last entry sifts down from the root
        i = heap[0]
        was_active = (slot[i] & 1) == 1
        slot[i] = POSTACTIVE
        size -= 1
        if size > 0:
            v = heap[size]
            kv = hkey[size]
            p = 0
            while True:
                c = 2 * p + 1
                if c >= size:
                    break
                if c + 1 < size and (hkey[c + 1] > hkey[c]
                                     or (hkey[c + 1] == hkey[c] and heap[c + 1] < heap[c])):
                    c += 1
                if hkey[c] < kv or (hkey[c] == kv and heap[c] > v):
                    break
                u = heap[c]
                heap[p] = u
                hkey[p] = hkey[c]
                slot[u] = (p << 1) | (slot[u] & 1)
                p = c
            heap[p] = v
            hkey[p] = kv
            slot[v] = (p << 1) | (slot[v] & 1)
        out[k] = i
        k += 1
        # -- the rises: first, if i was preactive, its neighbours (step 7; the
        #    pass t = indptr[i] - 1); then each preactive neighbour j becomes
        #    active and j itself and its neighbours rise (step 9; position
        #    indptr[j] - 1 stands for j itself)
        for t in range(indptr[i] - 1, indptr[i + 1]):
            if t < indptr[i]:
                if was_active:
                    continue
                src = i
                lo = indptr[i]
            else:
                src = indices[t]
                state = slot[src]
                if state < 0 or state & 1:
                    continue
                slot[src] = state | 1
                lo = indptr[src] - 1
            for r in range(lo, indptr[src + 1]):
                m = src if r < indptr[src] else indices[r]
                state = slot[m]
                if state == POSTACTIVE:
                    continue
                if state >= 0:
                    q = state >> 1
                    key = hkey[q] + w2
                else:
                    q = size
                    size += 1
                    key = base[m] + w2
                    slot[m] = q << 1
                # the sift-up (the only one)
                while q > 0:
                    parent = (q - 1) >> 1
                    kp = hkey[parent]
                    if key < kp or (key == kp and m > heap[parent]):
                        break
                    u = heap[parent]
                    heap[q] = u
                    hkey[q] = kp
                    slot[u] = (q << 1) | (slot[u] & 1)
                    q = parent
                heap[q] = m
                hkey[q] = key
                slot[m] = (q << 1) | (slot[m] & 1)
    return k - start


def _sloan_kernel_part(indptr, indices, deg, low, seen, stamp, order, start, iwork, fwork,
                       params, rows):  # pragma: no cover - compiled
    """Part kernel: Sloan numbering of the part of ``low`` into ``order[start:]``.

    ``params`` = (w1, w2, use_key); ``fwork`` rows: key, base, heap keys;
    ``iwork`` rows: three level structures, their pointers, candidates,
    node states, heap.
    """
    w1 = params[0]
    w2 = params[1]
    key = fwork[0]
    base = fwork[1]
    slot = iwork[7]
    trees = iwork[0:3]
    if params[2] != 0.0:
        stamp += 1
        size, _, _, _ = _sweep(indptr, indices, deg, low, seen, stamp, trees[0], start,
                               iwork[3], False, NO_CAP)
        s = low
        for a in range(start, start + size):
            w = trees[0, a]
            base[w] = w1 * key[w] - w2 * (deg[w] + 1)
            slot[w] = INACTIVE
            if key[w] > key[s] or (key[w] == key[s] and w < s):
                s = w
    else:
        s, _, size, depth, _, row_e, _, _, stamp = _pseudo_diameter(
            indptr, indices, deg, low, seen, stamp, trees, iwork[3:6], start, iwork[6])
        nodes = trees[row_e]
        level_ptr = iwork[3 + row_e]
        for lvl in range(depth):
            for a in range(level_ptr[lvl], level_ptr[lvl + 1]):
                w = nodes[a]
                base[w] = w1 * lvl - w2 * (deg[w] + 1)
                slot[w] = INACTIVE
    _number_by_priority(indptr, indices, s, w2, base, slot, iwork[8], fwork[2], order, start)
    return size, stamp


_sloan_kernel = part_kernel(_sloan_kernel_part)


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
        If a weight is negative or not finite (a negative ``w2`` would
        lower priorities, which the heap does not allow for), or ``key`` is
        not one finite number per node.

    Notes
    -----
    The start and end nodes come from
    :func:`bandwise.algorithms.orderings._levels.pseudo_diameter`; the queue is a
    binary heap with priority updates, so the cost is
    O((n + nnz) log n) per part (every node enters the front once and its
    neighbours' priorities are raised once per change of status).

    Examples
    --------
    A path is numbered end to end:

    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 2], [2, 1], [1, 3]])], 4)
    >>> sloan(g).tolist()
    [0, 2, 1, 3]
    """
    try:
        w1, w2 = float(w1), float(w2)
    except (TypeError, ValueError):
        raise InputError(f"Sloan weights must be numbers (got w1={w1!r}, w2={w2!r})") from None
    if not (math.isfinite(w1) and math.isfinite(w2) and w1 >= 0 and w2 >= 0):
        raise InputError(f"Sloan weights must be finite and non-negative (got w1={w1}, w2={w2})")
    return each_part(graph, _sloan_kernel, int_rows=9, float_rows=3,
                     params=(w1, w2, float(key is not None)), fwork=_key_row(graph, key))[0]


def _key_row(graph: NodeGraph, key: NDArray[np.floating] | None) -> NDArray[np.float64] | None:
    """Scratch rows for the kernel with ``key`` in row 0 (None: no key given)."""
    if key is None:
        return None
    key_arr = np.asarray(key, dtype=np.float64)
    if key_arr.shape != (graph.n,) or not np.all(np.isfinite(key_arr)):
        raise InputError(f"the Sloan key must be one finite number per node ({graph.n})")
    fwork = np.empty((3, graph.n + 1), dtype=np.float64)
    fwork[0, :graph.n] = key_arr
    return fwork
