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
Scott 2001, here without the multilevel hierarchy).  With more effort the
runner-up orderings are refined the same way (a worse start often refines
to a better numbering), the winner is polished by single-node moves
(:func:`local_exchange`, after Hager 2002) and then by simulated annealing
of those moves (:func:`annealed`, after Lewis 1994), and moved again.  The
result is never worse than the ordering given: it is returned unchanged
when nothing beats it.

Settings chosen by measurement on the 77 open test matrices (geometric
mean of the profile over networkx's RCM profile, ``thorough`` weights and
rounds): Sloan rounds from the best ordering alone 0.646, from the best
two 0.640, three 0.638, five 0.636; a grid of 24 weight pairs and six
rounds instead gained nothing (0.647); after the rounds from three starts,
eight passes of moves 0.626, then 1,000 annealing steps per node (reach 8,
temperatures 0.6 to 0.02 of the mean degree) and moves again 0.614.  A
hotter start that ends less cold, 1.0 to 0.05, lowered ``balanced`` from
0.6184 to 0.6169 and ``thorough`` from 0.6130 to 0.6118 (seeds 0 and 1
agree within 0.0003); at 250 steps per node, 0.2 to 0.02 gave 0.6249 against
0.6210 for 0.6 to 0.02.

The key of the node at position ``p`` of its part (``k`` nodes, largest
degree ``D``) is ``(k - 1 - p) / max(1, floor(k / D))``
(:func:`bandwise.algorithms.orderings.spectral_sloan.position_key`, the key the
spectral-Sloan hybrid uses), so the global term spans about ``D`` units, the
range of the local term.

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
W. W. Hager, "Minimizing the profile of a symmetric matrix", SIAM J. Sci.
Comput. 23 (2002) 1799-1816.
R. R. Lewis, "Simulated annealing for profile and fill reduction of sparse
matrices", Int. J. Numer. Meth. Eng. 37 (1994) 905-925 (volume and pages
from memory).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph, component_labels
from bandwise.core.metrics import _first_columns, metrics
from bandwise.core.model import check_permutation

from ._parts import _indices32
from .sloan import sloan
from .spectral_sloan import position_key

__all__ = ["EFFORTS", "Refinement", "annealed", "local_exchange", "refined"]

#: Weight pairs (W1, W2) tried per effort, and the rounds of refinement.
EFFORTS: dict[str, tuple[tuple[tuple[float, float], ...], int]] = {
    "fast": (((1.0, 1.0), (1.0, 2.0)), 1),
    "balanced": (((1.0, 1.0), (1.0, 2.0), (2.0, 1.0), (1.0, 4.0), (1.0, 8.0), (4.0, 1.0)), 2),
    "thorough": (((1.0, 1.0), (1.0, 2.0), (2.0, 1.0), (1.0, 4.0), (1.0, 8.0), (4.0, 1.0),
                  (1.0, 16.0), (8.0, 1.0), (1.0, 32.0), (2.0, 3.0)), 4),
}
#: Passes of node moves (local exchange) after the Sloan rounds, and how far (positions)
#: a node may move in one try, per effort; the reach when none is given.
MOVES = {"fast": (1, 8), "balanced": (4, 48), "thorough": (8, 48)}
MOVE_REACH = 48
#: How many orderings (the best and the runners-up, by profile) are refined, per effort.
STARTS = {"fast": 2, "balanced": 3, "thorough": 3}
#: Annealing steps per node after the moves, per effort (0: none), and the most steps
#: on one graph; how far one step may move a node; the temperatures at the start and
#: the end, in units of the mean degree (a profile change is a count of envelope starts
#: that moved, each move shifting about a degree's worth of them).
ANNEAL_STEPS = {"fast": 0, "balanced": 500, "thorough": 1000}
ANNEAL_MAX_STEPS = 3_000_000
ANNEAL_REACH = 8
ANNEAL_TEMPERATURES = (1.0, 0.05)


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
def _carry(indptr, indices, order, pos, first, mark, stamp, p, q):  # pragma: no cover
    """Carry the node at position ``p`` to position ``q`` by adjacent exchanges.

    Returns ``(change of profile, stamp)``; used to put a node back where a
    move was best, or where it was when a move is rejected.
    """
    change = 0
    while p < q:
        stamp += 1
        change += _swap(indptr, indices, order, pos, first, mark, stamp, p)
        p += 1
    while p > q:
        stamp += 1
        change += _swap(indptr, indices, order, pos, first, mark, stamp, p - 1)
        p -= 1
    return change, stamp


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
        _, stamp = _carry(indptr, indices, order, pos, first, mark, stamp, p, best_p)
        p = best_p                                   # back to the best place found
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
        _, stamp = _carry(indptr, indices, order, pos, first, mark, stamp, p, best_p)
        p = best_p
        gain -= best
        assert order[p] == v
    return gain, stamp


def _move_state(graph: NodeGraph, order: NDArray[np.int64]) -> tuple:
    """Arrays the move kernels work on: CSR, positions, envelope starts, marks, part labels."""
    n = graph.n
    indptr = np.ascontiguousarray(graph.indptr, dtype=np.int64)
    indices = _indices32(graph)
    pos = np.empty(n, dtype=np.int64)
    pos[order] = np.arange(n)
    first = _first_columns(indptr, indices, pos)
    mark = np.zeros(n, dtype=np.int64)
    label = component_labels(graph)[1]
    return indptr, indices, pos, first, mark, label


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
    if graph.n < 3 or passes <= 0:
        return order
    indptr, indices, pos, first, mark, label = _move_state(graph, order)
    stamp = 0
    t0 = time.perf_counter()
    for _ in range(passes):
        gain, stamp = _move_pass(indptr, indices, order, pos, first, mark, stamp, reach, label)
        if gain <= 0 or (seconds is not None and time.perf_counter() - t0 > seconds):
            break
    return order


@numba.njit(cache=True, nogil=True)
def _anneal(indptr, indices, order, pos, first, mark, stamp, label, reach, done, steps,
            total_steps, t_start, t_end, current, best, best_order):  # pragma: no cover
    """Steps ``done .. done + steps - 1`` of the annealing; returns ``(current, best, stamp)``.

    ``current`` and ``best`` are profiles relative to the start; the order
    of profile ``best`` is copied into ``best_order`` whenever it improves.
    """
    n = order.size
    log_start = np.log(t_start)
    log_end = np.log(t_end)
    for s in range(done, done + steps):
        temperature = np.exp(log_start + (log_end - log_start) * s / total_steps)
        v = np.random.randint(n)
        p = pos[v]
        d = np.random.randint(1, reach + 1)
        change = 0
        q = p
        if np.random.random() < 0.5:
            while q < n - 1 and q - p < d and label[order[q + 1]] == label[v]:
                stamp += 1
                change += _swap(indptr, indices, order, pos, first, mark, stamp, q)
                q += 1
        else:
            while q > 0 and p - q < d and label[order[q - 1]] == label[v]:
                stamp += 1
                change += _swap(indptr, indices, order, pos, first, mark, stamp, q - 1)
                q -= 1
        if change <= 0 or np.random.random() < np.exp(-change / temperature):
            current += change
            if current < best:
                best = current
                best_order[:] = order
        else:                                        # rejected: carry the node back
            _, stamp = _carry(indptr, indices, order, pos, first, mark, stamp, q, p)
    return current, best, stamp


@numba.njit(cache=True, nogil=True)
def _seed(seed):  # pragma: no cover - compiled
    """Seed the compiled code's own random generator (separate from numpy's)."""
    np.random.seed(seed)


def annealed(graph: NodeGraph, perm: NDArray[np.integer], steps: int,
             reach: int = ANNEAL_REACH,
             temperatures: tuple[float, float] = ANNEAL_TEMPERATURES,
             seed: int = 0, seconds: float | None = None) -> NDArray[np.int64]:
    """Simulated annealing of single-node moves for a smaller profile.

    Lewis (1994) showed that annealing started from a conventional
    ordering lowers the profile of the Harwell-Boeing matrices well below
    what the constructive orderings reach (to about 0.8 of theirs, at a much
    higher cost).  Here a step takes a node at random and carries it a
    random distance of 1 to ``reach`` positions, up or down, inside its part
    (so parts stay contiguous); a move that raises the profile by ``c`` is
    kept with probability ``exp(-c / T)``, ``T`` falling geometrically from
    ``temperatures[0]`` to ``temperatures[1]`` times the mean degree over
    the steps.  Each move is scored by the adjacent exchanges of
    :func:`local_exchange` (O(degree) each).  The least profile met is
    returned, so the result is never worse than ``perm``; the same seed gives
    the same result.

    Parameters
    ----------
    graph
        The node graph.
    perm
        Starting ordering (``perm[new] = old``).
    steps
        Moves tried.
    reach
        Longest move, in positions.
    temperatures
        Start and end temperatures, in units of the mean degree.
    seed
        Seed of the random choices.
    seconds
        Stop after about this long (None: no limit).

    References
    ----------
    R. R. Lewis, "Simulated annealing for profile and fill reduction of
    sparse matrices", Int. J. Numer. Meth. Eng. 37 (1994) 905-925 (volume
    and pages from memory).
    """
    order = check_permutation(perm, graph.n).copy()
    if graph.n < 3 or steps <= 0 or graph.indptr[-1] == 0:
        return order
    indptr, indices, pos, first, mark, label = _move_state(graph, order)
    scale = graph.indptr[-1] / graph.n
    t_start, t_end = temperatures[0] * scale, temperatures[1] * scale
    best_order = order.copy()
    _seed(seed)
    current = best = stamp = done = 0
    chunk = max(10_000, steps // 20)
    t0 = time.perf_counter()
    while done < steps:
        k = min(chunk, steps - done)
        current, best, stamp = _anneal(indptr, indices, order, pos, first, mark, stamp, label,
                                       reach, done, k, steps, t_start, t_end, current, best,
                                       best_order)
        done += k
        if seconds is not None and time.perf_counter() - t0 > seconds:
            break
    return best_order


def _sloan_rounds(graph: NodeGraph, start: NDArray[np.int64], start_prof: int,
                  pairs: tuple[tuple[float, float], ...], rounds: int,
                  out_of_time: Callable[[], bool]) -> tuple[NDArray[np.int64], int, int, str]:
    """Rounds of Sloan steered by ``start``: ``(best, its profile, trials, why stopped)``."""
    best, best_prof = start, start_prof
    trials = 0
    for _ in range(rounds):
        gained = False
        key = position_key(graph, best)
        round_best = best
        for key_sign in (1.0, -1.0):
            for w1, w2 in pairs:
                if out_of_time():
                    return round_best, best_prof, trials, "time"
                candidate = sloan(graph, w1=w1, w2=w2, key=key_sign * key)
                trials += 1
                prof = metrics(graph, candidate).profile
                if prof < best_prof:
                    best_prof, round_best, gained = prof, candidate, True
        best = round_best
        if not gained:
            return best, best_prof, trials, "no gain"
    return best, best_prof, trials, "rounds"


def refined(graph: NodeGraph, perm: NDArray[np.integer], effort: str = "balanced",
            seconds: float | None = None,
            others: Sequence[NDArray[np.integer]] = ()) -> Refinement:
    """Refinement of ``perm`` (and runners-up) for a smaller profile (module notes).

    Parameters
    ----------
    graph
        The node graph.
    perm
        The ordering to refine (``perm[new] = old``), in practice the best one.
    effort
        A key of :data:`EFFORTS`: the weight pairs and rounds, and of
        :data:`STARTS`, :data:`MOVES` and :data:`ANNEAL_STEPS`.
    seconds
        Stop starting new work after this long (None: no limit).
    others
        Runners-up, best first: the first ``STARTS[effort] - 1`` are refined
        by Sloan's rounds too, and the least profile of all is kept.

    Returns
    -------
    Refinement
        The best numbering found (never of larger profile than ``perm``).

    Notes
    -----
    Cost: per trial one Sloan numbering, O((n + nnz) log n), and a profile
    count, O(n + nnz); ``2 * pairs * rounds`` trials at most per start; then
    the moves, O(passes * n * reach * degree), and the annealing,
    O(steps * reach * degree).
    """
    if effort not in EFFORTS:
        raise ValueError(f"unknown effort {effort!r}; valid: {', '.join(EFFORTS)}")
    t0 = time.perf_counter()

    def left() -> float | None:
        return None if seconds is None else max(0.0, seconds - (time.perf_counter() - t0))

    def out_of_time() -> bool:
        return seconds is not None and time.perf_counter() - t0 > seconds

    pairs, rounds = EFFORTS[effort]
    given = check_permutation(perm, graph.n).copy()
    before = best_prof = metrics(graph, given).profile
    best = given
    starts = [given] + [check_permutation(p, graph.n) for p in list(others)[:STARTS[effort] - 1]]
    trials = 0
    stopped = "rounds"
    for k, start in enumerate(starts):
        start_prof = best_prof if k == 0 else metrics(graph, start).profile
        found, prof, done, why = _sloan_rounds(graph, start, start_prof, pairs, rounds,
                                               out_of_time)
        trials += done
        if k == 0 or why == "time":
            stopped = why
        if prof < best_prof:
            best, best_prof = found, prof
        if why == "time":
            break

    def keep(candidate: NDArray[np.int64]) -> None:
        nonlocal best, best_prof
        prof = metrics(graph, candidate).profile
        if prof < best_prof:
            best, best_prof = candidate, prof

    passes, reach = MOVES[effort]
    if passes and stopped != "time":
        keep(local_exchange(graph, best, passes, reach, seconds=left()))
        steps = min(ANNEAL_STEPS[effort] * graph.n, ANNEAL_MAX_STEPS)
        if steps and not out_of_time():
            keep(annealed(graph, best, steps, seconds=left()))
            if not out_of_time():
                keep(local_exchange(graph, best, passes, reach, seconds=left()))
        if out_of_time():
            stopped = "time"
    return Refinement(best, before, best_prof, trials, time.perf_counter() - t0, stopped)
