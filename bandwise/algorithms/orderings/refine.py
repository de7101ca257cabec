"""Refinement of a good ordering: Sloan's numbering steered by it, under several weights.

Kumfert and Pothen (1997) showed that Sloan's algorithm improves when its
global priority, the distance to an end of a pseudo-diameter, is replaced by
the position in a good global ordering (the spectral one), and that the
best pair of weights ``(W1, W2)`` depends on the problem.  Reid and Scott
(1999) made the same two observations for the Harwell Subroutine Library's
Sloan code: trying a few weight pairs and keeping the best numbering, and
starting from a better global order, pay for themselves.  This module
takes any ordering (in practice the best one found so far), uses each
node's position in it as the global key of Sloan's priority, runs Sloan with
a list of weight pairs, in both directions (from either end of the order),
and keeps the numbering of least profile; with more rounds, the winner
becomes the key of the next round (as in the iterated refinement of Hu and
Scott 2001, here without the multilevel hierarchy).  The result is never
worse than the ordering given: it is returned unchanged when nothing beats
it.

The key of the node at position ``p`` of its part (``k`` nodes, largest
degree ``D``) is ``(k - 1 - p) / max(1, floor(k / D))``, the normalisation of
:func:`bandwise.algorithms.orderings.spectral_sloan.spectral_key`, so the
global term spans about ``D`` units, the range of the local term.

References
----------
G. Kumfert and A. Pothen, "Two improved algorithms for envelope and
wavefront reduction", BIT 37 (1997) 559-590.
J. K. Reid and J. A. Scott, "Ordering symmetric sparse matrices for small
profile and wavefront", Int. J. Numer. Meth. Eng. 45 (1999) 1737-1755.
Y. F. Hu and J. A. Scott, "A multilevel algorithm for wavefront reduction",
SIAM J. Sci. Comput. 23 (2001) 1352-1375.
S. W. Sloan, "An algorithm for profile and wavefront reduction of sparse
matrices", Int. J. Numer. Meth. Eng. 23 (1986) 239-251.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph, component_labels
from bandwise.core.metrics import _first_columns, metrics
from bandwise.core.model import check_permutation

from ._parts import _indices32
from .sloan import sloan

__all__ = ["EFFORTS", "Refinement", "position_key", "refined"]

#: Weight pairs (W1, W2) tried per effort, and the rounds of refinement.
EFFORTS: dict[str, tuple[tuple[tuple[float, float], ...], int]] = {
    "fast": (((1.0, 1.0), (1.0, 2.0)), 1),
    "balanced": (((1.0, 1.0), (1.0, 2.0), (2.0, 1.0), (1.0, 4.0), (1.0, 8.0), (4.0, 1.0)), 2),
    "thorough": (((1.0, 1.0), (1.0, 2.0), (2.0, 1.0), (1.0, 4.0), (1.0, 8.0), (4.0, 1.0),
                  (1.0, 16.0), (8.0, 1.0), (1.0, 32.0), (2.0, 3.0)), 4),
}
#: Passes of node moves (local exchange) after the Sloan rounds, per effort, and how
#: far (positions) a node may move in one try.
MOVE_PASSES = {"fast": 0, "balanced": 2, "thorough": 8}
MOVE_REACH = 48


@dataclass(frozen=True)
class Refinement:
    """What a refinement did.

    Attributes
    ----------
    perm
        The refined ordering (``perm[new] = old``), or the one given.
    profile_before, profile_after
        Node-level profiles of the given and refined orderings.
    trials
        Sloan numberings computed.
    seconds
        Time spent.
    stopped
        Why it stopped: ``"rounds"`` (all rounds done), ``"no gain"`` (a
        round improved nothing), or ``"time"`` (the time limit was reached).
    """

    perm: NDArray[np.int64]
    profile_before: int
    profile_after: int
    trials: int
    seconds: float
    stopped: str


@numba.njit(cache=True, nogil=True)
def _swap(indptr, indices, order, pos, first, mark, stamp, p):  # pragma: no cover
    """Exchange the nodes at positions ``p`` and ``p + 1``; return the change of profile.

    With ``a`` at ``p`` and ``b`` at ``p + 1``, only two kinds of rows
    change their envelope start (``first``, the least position in the
    row's closed neighbourhood): a row of ``a``'s closed neighbourhood that
    started at ``p`` now starts at ``p + 1``, unless ``b`` is in it too (then
    at ``p``); a row of ``b``'s closed neighbourhood that started at
    ``p + 1`` now starts at ``p``.  So the cost is O(deg a + deg b), no row
    is rescanned (``mark`` holds ``stamp`` for the closed neighbourhood of
    ``b``).  The row indices of ``a`` and ``b`` change by +1 and -1.
    """
    a = order[p]
    b = order[p + 1]
    order[p] = b
    order[p + 1] = a
    pos[a] = p + 1
    pos[b] = p
    mark[b] = stamp
    for t in range(indptr[b], indptr[b + 1]):
        mark[indices[t]] = stamp
    delta = 0
    for t in range(indptr[a] - 1, indptr[a + 1]):
        w = a if t < indptr[a] else indices[t]
        if first[w] == p and mark[w] != stamp:
            first[w] = p + 1
            delta -= 1
    for t in range(indptr[b] - 1, indptr[b + 1]):
        w = b if t < indptr[b] else indices[t]
        if first[w] == p + 1:
            first[w] = p
            delta += 1
    return delta


@numba.njit(cache=True, nogil=True)
def _move_pass(indptr, indices, order, pos, first, mark, stamp, reach,
               label):  # pragma: no cover - compiled
    """One pass of single-node moves: each node tries positions up to ``reach`` away.

    A node is carried one position at a time (adjacent exchanges, each
    costing its rows' envelope starts), first towards the end, then towards
    the start, and left where the profile was least; only strict gains are
    kept.  Returns ``(gain, stamp)``.
    """
    n = order.size
    gain = 0
    for start in range(n):
        v = order[start]
        p = start
        best = 0
        best_p = p
        total = 0
        while p < n - 1 and p - start < reach and label[order[p + 1]] == label[v]:
            stamp += 1
            total += _swap(indptr, indices, order, pos, first, mark, stamp, p)
            p += 1
            if total < best:
                best = total
                best_p = p
        while p > best_p:                            # back to the best place found
            stamp += 1
            _swap(indptr, indices, order, pos, first, mark, stamp, p - 1)
            p -= 1
        if best < 0:
            gain -= best
            continue
        total = 0
        while p > 0 and start - p < reach and label[order[p - 1]] == label[v]:
            stamp += 1
            total += _swap(indptr, indices, order, pos, first, mark, stamp, p - 1)
            p -= 1
            if total < best:
                best = total
                best_p = p
        while p < best_p:
            stamp += 1
            _swap(indptr, indices, order, pos, first, mark, stamp, p)
            p += 1
        gain -= best
        assert order[p] == v
    return gain, stamp


def local_exchange(graph: NodeGraph, perm: NDArray[np.integer], passes: int,
                   reach: int = MOVE_REACH, seconds: float | None = None) -> NDArray[np.int64]:
    """Node moves that lower the profile, in the manner of Hager's exchanges.

    Each pass offers every node, in turn, the positions up to ``reach``
    away on either side and keeps the one of least profile (strict gains
    only), so the profile never grows.  Passes stop early when one gains
    nothing or ``seconds`` have passed.  A node moves only among the nodes
    of its own part, so parts stay contiguous.

    References
    ----------
    W. W. Hager, "Minimizing the profile of a symmetric matrix", SIAM J.
    Sci. Comput. 23 (2002) 1799-1816.
    """
    order = check_permutation(perm, graph.n).copy()
    n = graph.n
    if n < 3 or passes <= 0:
        return order
    indptr = np.ascontiguousarray(graph.indptr, dtype=np.int64)
    indices = _indices32(graph)
    pos = np.empty(n, dtype=np.int64)
    pos[order] = np.arange(n)
    first = _first_columns(indptr, indices, pos)
    mark = np.zeros(n, dtype=np.int64)
    label = component_labels(graph)[1]
    stamp = 0
    t0 = time.perf_counter()
    for _ in range(passes):
        gain, stamp = _move_pass(indptr, indices, order, pos, first, mark, stamp, reach, label)
        if gain <= 0 or (seconds is not None and time.perf_counter() - t0 > seconds):
            break
    return order


def position_key(graph: NodeGraph, perm: NDArray[np.integer]) -> NDArray[np.float64]:
    """Sloan global key from an ordering: highest first, scaled per part (module notes).

    Examples
    --------
    >>> import numpy as np
    >>> from bandwise.core.graph import graph_from_cells
    >>> g = graph_from_cells([np.array([[0, 1], [1, 2]])], 3)
    >>> position_key(g, np.array([2, 1, 0])).tolist()
    [0.0, 1.0, 2.0]
    """
    perm = check_permutation(perm, graph.n)
    n = graph.n
    _, labels = component_labels(graph)
    lab = labels[perm]
    size = np.bincount(lab)
    top = np.zeros(size.size, dtype=np.int64)
    np.maximum.at(top, labels, graph.degrees())
    first = np.zeros(size.size, dtype=np.int64)
    first_pos = np.full(size.size, n, dtype=np.int64)
    np.minimum.at(first_pos, lab, np.arange(n))
    first[:] = first_pos
    rank = np.empty(n, dtype=np.float64)
    rank[perm] = np.arange(n) - first[lab]          # position within the part
    scale = np.maximum(1, size // np.maximum(1, top))
    return (size[labels] - 1 - rank) / scale[labels]


def refined(graph: NodeGraph, perm: NDArray[np.integer], effort: str = "balanced",
            seconds: float | None = None) -> Refinement:
    """Sloan refinement of ``perm`` for a smaller profile (module notes).

    Parameters
    ----------
    graph
        The node graph.
    perm
        The ordering to refine (``perm[new] = old``).
    effort
        A key of :data:`EFFORTS`: the weight pairs and rounds.
    seconds
        Stop starting new trials after this long (None: no limit).

    Returns
    -------
    Refinement
        The best numbering found (never of larger profile than ``perm``).

    Notes
    -----
    Cost: per trial one Sloan numbering, O((n + nnz) log n), and a profile
    count, O(n + nnz); ``2 * pairs * rounds`` trials at most.
    """
    if effort not in EFFORTS:
        raise ValueError(f"unknown effort {effort!r}; valid: {', '.join(EFFORTS)}")
    t0 = time.perf_counter()
    pairs, rounds = EFFORTS[effort]
    best = check_permutation(perm, graph.n).copy()
    before = best_prof = metrics(graph, best).profile
    trials = 0
    stopped = "rounds"
    for _ in range(rounds):
        gained = False
        key = position_key(graph, best)
        round_best = best
        for key_sign in (1.0, -1.0):
            for w1, w2 in pairs:
                if seconds is not None and time.perf_counter() - t0 > seconds:
                    stopped = "time"
                    break
                candidate = sloan(graph, w1=w1, w2=w2, key=key_sign * key)
                trials += 1
                prof = metrics(graph, candidate).profile
                if prof < best_prof:
                    best_prof, round_best, gained = prof, candidate, True
            if stopped == "time":
                break
        best = round_best
        if stopped == "time":
            break
        if not gained:
            stopped = "no gain"
            break
    if MOVE_PASSES[effort] and stopped != "time":
        left = None if seconds is None else max(0.0, seconds - (time.perf_counter() - t0))
        moved = local_exchange(graph, best, MOVE_PASSES[effort], seconds=left)
        prof = metrics(graph, moved).profile
        if prof < best_prof:
            best, best_prof = moved, prof
    return Refinement(best, before, best_prof, trials, time.perf_counter() - t0, stopped)
