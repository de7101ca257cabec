"""Spectral ordering: nodes sorted by the Fiedler vector of the graph Laplacian.

The Laplacian ``L = D - A`` of a connected graph (D the degrees, A the
adjacency) has the constant vector as null vector; the eigenvector of its
second-smallest eigenvalue (the Fiedler vector) minimises
``sum over edges (x_u - x_v)^2`` over unit vectors orthogonal to the
constants, a continuous relaxation of the minimum 2-sum layout problem.
Sorting the nodes by their Fiedler values therefore keeps neighbours close
in the numbering, which gives small envelopes (Barnard, Pothen and Simon
1995), often smaller than RCM's on meshes.

The graph is first renumbered breadth first, part after part, by one search
that also writes the renumbered rows (:func:`._parts.renumbered_parts`):
every later pass over the edges then reads its vectors within a band
instead of all over memory, several times faster on a scrambled mesh.  The
eigenvector is computed per connected part:

- parts of up to :data:`DENSE_LIMIT` nodes: a dense symmetric eigensolver;
- larger parts: a multilevel scheme in the manner of Barnard and Simon's
  multilevel spectral bisection (and of Hu and Scott's multilevel
  wavefront code).  The graph is coarsened into a hierarchy of weighted
  graphs (each coarse node carries the count of the fine nodes it stands
  for as its mass, each coarse edge the summed weight of the fine edges it
  stands for, so its Laplacian is the Galerkin product ``P^T L P``), the
  coarsest problem ``L x = lambda M x`` is solved densely, and the vector
  is carried up level by level and refined there by a few iterations of
  single-vector LOBPCG (Knyazev 2001) with a Jacobi preconditioner, the
  constants projected out.  The first coarsening takes each node whose
  neighbours are all free together with them (the first phase of the
  aggregation of Vanek, Mandel and Brezina 1996; the rest join a
  neighbouring aggregate): one pass divides a 3-D mesh by about 19, where
  pairwise heavy-edge matching, used on the coarser weighted levels,
  halves it.  On the finest graph the iteration stops when the *ordering*
  stops improving (the profile of the sorted vector, looked at every few
  iterations), not at a residual tolerance: the order settles long before
  the vector does.  Everything is compiled, and one LOBPCG iteration is
  three passes over the vectors, one of them over the edges.

The sign of an eigenvector is arbitrary: it is fixed so that the Fiedler
values correlate positively with the current node numbers (the order keeps
the mesh's general direction; ties broken by the largest entry made
positive), and equal values keep their current relative order, so results
are deterministic.

References
----------
S. T. Barnard, A. Pothen, H. Simon, "A spectral algorithm for envelope
reduction of sparse matrices", Numer. Linear Algebra Appl. 2 (1995) 317-334.
S. T. Barnard, H. D. Simon, "Fast multilevel implementation of recursive
spectral bisection for partitioning unstructured problems", Concurrency:
Practice and Experience 6 (1994) 101-117.
M. Fiedler, "A property of eigenvectors of nonnegative symmetric matrices
and its application to graph theory", Czech. Math. J. 25 (1975) 619-633.
A. V. Knyazev, "Toward the optimal preconditioned eigensolver: locally
optimal block preconditioned conjugate gradient method", SIAM J. Sci.
Comput. 23 (2001) 517-541.
P. Vanek, J. Mandel, M. Brezina, "Algebraic multigrid by smoothed
aggregation for second and fourth order elliptic problems", Computing 56
(1996) 179-196 (the aggregation phases; from memory).
"""

from __future__ import annotations

import threading
import weakref

import numba
import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph

from . import register
from ._parts import renumbered_parts

__all__ = ["fiedler_vector", "laplacian", "spectral"]

#: Largest part whose Fiedler vector is computed by a dense eigensolver: 0.04 s at 1,000
#: nodes, 0.13 s at 1,500 (measured).  The exact vector beats the multilevel one on the
#: 77 test matrices: the best profile of auto, as a geometric mean of networkx's RCM
#: profile, went 0.654 -> 0.650 (fast), 0.621 -> 0.618 (balanced) and 0.616 -> 0.613
#: (thorough) from a limit of 500.
DENSE_LIMIT = 1200
#: Parts up to this size are solved densely inside one compiled loop over the parts.
SMALL_PART = 64
#: Size at which coarsening stops (dense solve; larger dense solves wait on threaded
#: LAPACK on a busy machine).
COARSEST = 200
#: LOBPCG iterations at each coarse level.
COARSE_ITERATIONS = 6
#: On the finest graph: iterations between two looks at the profile, the most in all,
#: and the relative gain in profile below which the ordering counts as settled.
CHECK_EVERY = 2
FINE_ITERATIONS = 12
SETTLED = 0.005
#: Parts up to this size are refined to a small residual instead (cheap at that size).
SETTLE_ABOVE = 20_000
#: LOBPCG iterations on the finest graph of a part of at most SETTLE_ABOVE nodes.
SMALL_ITERATIONS = 60
#: A coarsening that keeps more than this share of the nodes ends the hierarchy.
LEAST_SHRINK = 0.8


def laplacian(graph: NodeGraph) -> sp.csr_matrix:
    """The graph Laplacian ``L = D - A`` as a float64 CSR matrix."""
    a = graph.to_scipy().astype(np.float64)
    return (sp.diags(graph.degrees().astype(np.float64)) - a).tocsr()


@numba.njit(cache=True, nogil=True)
def _neighbourhood_aggregates(indptr, indices):  # pragma: no cover - compiled
    """Aggregates of an unweighted graph: each free node with all its free neighbours.

    Nodes are taken in order; a node whose neighbours are all still free
    founds an aggregate of itself and them (Vanek, Mandel and Brezina 1996,
    first phase); a node left over then joins the aggregate of its first
    aggregated neighbour, and one with none founds its own.  Returns
    ``(agg, n_coarse)``.
    """
    n = indptr.size - 1
    agg = np.full(n, -1, dtype=np.int32)
    n_coarse = 0
    for v in range(n):
        if agg[v] != -1:
            continue
        free = True
        for t in range(indptr[v], indptr[v + 1]):
            if agg[indices[t]] != -1:
                free = False
                break
        if free:
            agg[v] = n_coarse
            for t in range(indptr[v], indptr[v + 1]):
                agg[indices[t]] = n_coarse
            n_coarse += 1
    joined = np.full(n, -1, dtype=np.int32)
    for v in range(n):
        if agg[v] != -1:
            continue
        for t in range(indptr[v], indptr[v + 1]):
            if agg[indices[t]] != -1:
                joined[v] = agg[indices[t]]
                break
    for v in range(n):
        if agg[v] == -1:
            if joined[v] != -1:
                agg[v] = joined[v]
            else:
                agg[v] = n_coarse
                n_coarse += 1
    return agg, n_coarse


@numba.njit(cache=True, nogil=True)
def _heavy_edge_aggregates(indptr, indices, weights, unit):  # pragma: no cover - compiled
    """Pair each node with its unmatched neighbour of heaviest edge.

    A node whose neighbours are all matched joins the aggregate of its
    heaviest neighbour, so every level at least halves the number of nodes
    of a connected graph.  ``unit``: every edge weighs 1 (``weights`` unused).
    """
    n = indptr.size - 1
    agg = np.full(n, -1, dtype=np.int32)
    n_coarse = 0
    for v in range(n):
        if agg[v] != -1:
            continue
        free, free_w, any_, any_w = -1, 0.0, -1, 0.0
        for t in range(indptr[v], indptr[v + 1]):
            u = indices[t]
            w = 1.0 if unit else weights[t]
            if agg[u] == -1 and w > free_w:
                free, free_w = u, w
            if w > any_w:
                any_, any_w = u, w
        if free != -1:
            agg[v] = n_coarse
            agg[free] = n_coarse
            n_coarse += 1
        elif any_ != -1:
            agg[v] = agg[any_]
        else:
            agg[v] = n_coarse
            n_coarse += 1
    return agg, n_coarse


@numba.njit(cache=True, nogil=True)
def _coarse_graph(indptr, indices, weights, unit, mass, agg, n_coarse):  # pragma: no cover
    """The weighted graph of the aggregates: ``(indptr, indices, weights, mass)``.

    Coarse nodes ``a != b`` are joined with the summed weight of the fine
    edges between their members; a coarse node's mass is its members' mass
    (``unit``: every fine edge and node weighs 1).  The row of each coarse
    node is gathered without branching on whether a neighbour is new (a
    mispredicted branch per fine edge costs more than the work): the
    aggregate's own slot points past the rows, where its internal edges
    add up unseen.
    """
    n = indptr.size - 1
    count = np.zeros(n_coarse + 1, dtype=np.int64)
    for v in range(n):
        count[agg[v] + 1] += 1
    for c in range(n_coarse):
        count[c + 1] += count[c]
    members = np.empty(n, dtype=np.int32)
    fill = count[:-1].copy()
    for v in range(n):
        members[fill[agg[v]]] = v
        fill[agg[v]] += 1
    inside = indices.size
    c_ptr = np.zeros(n_coarse + 1, dtype=np.int64)
    c_idx = np.empty(inside + 1, dtype=np.int32)
    c_w = np.empty(inside + 1, dtype=np.float64)
    c_mass = np.zeros(n_coarse, dtype=np.float64)
    slot = np.full(n_coarse, -1, dtype=np.int64)
    top = 0
    for c in range(n_coarse):
        row = top
        slot[c] = inside
        for m in range(count[c], count[c + 1]):
            v = members[m]
            c_mass[c] += 1.0 if unit else mass[v]
            for t in range(indptr[v], indptr[v + 1]):
                b = agg[indices[t]]
                s = slot[b]
                new = s < row
                at = top if new else s
                c_w[at] = (0.0 if new else c_w[at]) + (1.0 if unit else weights[t])
                c_idx[at] = b
                slot[b] = at
                top += new
        slot[c] = -1
        c_ptr[c + 1] = top
    return c_ptr, c_idx[:top].copy(), c_w[:top].copy(), c_mass


@numba.njit(cache=True, nogil=True)
def _bucket_bounds(x):  # pragma: no cover - compiled
    """``(lowest value, buckets per unit)`` that cut ``x``'s range into ``x.size`` intervals."""
    lo = hi = x[0]
    for v in range(1, x.size):
        lo = min(lo, x[v])
        hi = max(hi, x[v])
    return lo, ((x.size - 1) / (hi - lo) if hi > lo else 0.0)


@numba.njit(cache=True, nogil=True)
def _profile_of_sorted(indptr, indices, x, pos):  # pragma: no cover - compiled
    """Profile of the numbering by increasing ``x``, the sort done by buckets.

    The values are cut into ``n`` equal intervals and counted into place
    (two passes, no comparison sort); nodes in one interval keep their
    index order.  Close enough to the exact order to tell whether the
    ordering still improves, at a fraction of the cost of a sort.
    ``pos`` (int32, ``n`` entries) receives the positions.
    """
    n = x.size
    lo, scale = _bucket_bounds(x)
    start = np.zeros(n + 1, dtype=np.int32)
    for v in range(n):
        start[min(int((x[v] - lo) * scale), n - 1) + 1] += 1
    for b in range(n):
        start[b + 1] += start[b]
    for v in range(n):
        b = min(int((x[v] - lo) * scale), n - 1)
        pos[v] = start[b]
        start[b] += 1
    total = 0
    for v in range(n):
        first = pos[v]
        for t in range(indptr[v], indptr[v + 1]):
            first = min(first, pos[indices[t]])
        total += pos[v] - first
    return total


#: Compiler licence for the passes that sum over the nodes: reassociating the sums lets
#: them run in vector registers (about 2x faster); products are not reordered otherwise.
_SUMS = {"reassoc", "contract"}


@numba.njit(cache=True, nogil=True)
def _ritz_step(g, have_p):  # pragma: no cover - compiled
    """Lowest Ritz pair of the 2 x 2 or 3 x 3 pencil of the basis ``(x, w, p)``.

    ``g`` holds ``x'Lx, x'Lw, x'Lp, w'Lw, w'Lp, p'Lp`` then the same six with
    M.  Returns ``(lambda, c)`` with ``c' B c = 1``, or ``(nan, c)`` when the
    basis has become dependent.
    """
    k = 3 if have_p else 2
    a = np.empty((k, k))
    b = np.empty((k, k))
    a[0, 0], a[0, 1], a[1, 1] = g[0], g[1], g[3]
    b[0, 0], b[0, 1], b[1, 1] = g[6], g[7], g[9]
    if k == 3:
        a[0, 2], a[1, 2], a[2, 2] = g[2], g[4], g[5]
        b[0, 2], b[1, 2], b[2, 2] = g[8], g[10], g[11]
    for i in range(k):
        for j in range(i):
            a[i, j] = a[j, i]
            b[i, j] = b[j, i]
    c = np.zeros(3)
    try:
        chol = np.linalg.cholesky(b)
    except Exception:  # noqa: BLE001 - p has become dependent
        return np.nan, c
    inv = np.linalg.inv(chol)
    vals, vecs = np.linalg.eigh(inv @ a @ inv.T)
    c[:k] = inv.T @ vecs[:, 0]
    return vals[0], c


@numba.njit(cache=True, nogil=True)
def _laplacian_times(indptr, indices, weights, unit, diag, x, out, scale):  # pragma: no cover
    """``out = scale * L x`` for the weighted Laplacian (``diag``: the weighted degrees)."""
    for v in range(indptr.size - 1):
        a = diag[v] * x[v]
        if unit:
            for t in range(indptr[v], indptr[v + 1]):
                a -= x[indices[t]]
        else:
            for t in range(indptr[v], indptr[v + 1]):
                a -= weights[t] * x[indices[t]]
        out[v] = a * scale


@numba.njit(cache=True, nogil=True, fastmath=_SUMS)
def _centred(x, mass, unit, total):  # pragma: no cover - compiled
    """``x`` made M-orthogonal to the constants and of unit M-norm, in place."""
    acc = 0.0
    for v in range(x.size):
        acc += (1.0 if unit else mass[v]) * x[v]
    mean = acc / total
    norm = 0.0
    for v in range(x.size):
        x[v] -= mean
        norm += (1.0 if unit else mass[v]) * x[v] * x[v]
    x /= np.sqrt(norm)


@numba.njit(cache=True, nogil=True, fastmath=_SUMS)
def _residual(x, lx, lam, diag, mass, unit, w):  # pragma: no cover - compiled
    """``w = T (L x - lambda M x)`` (T the Jacobi preconditioner): ``(M-sum, M-square sum, r'w)``."""
    s1 = s2 = r2 = 0.0
    for v in range(x.size):
        m = 1.0 if unit else mass[v]
        r = lx[v] - lam * m * x[v]
        wv = r / diag[v]
        w[v] = wv
        s1 += m * wv
        s2 += m * wv * wv
        r2 += r * wv
    return s1, s2, r2


@numba.njit(cache=True, nogil=True, fastmath=_SUMS)
def _gram(x, lx, w, lw, p, lp, mass, unit, mean, scale):  # pragma: no cover - compiled
    """Centre and scale ``w`` in place, and return the twelve inner products of the basis."""
    g0 = g1 = g2 = g3 = g4 = g5 = g6 = g7 = g8 = g9 = g10 = g11 = 0.0
    for v in range(x.size):
        m = 1.0 if unit else mass[v]
        wv = (w[v] - mean) * scale
        w[v] = wv
        xv = x[v]
        pv = p[v]
        g0 += xv * lx[v]
        g1 += xv * lw[v]
        g2 += xv * lp[v]
        g3 += wv * lw[v]
        g4 += wv * lp[v]
        g5 += pv * lp[v]
        g6 += m * xv * xv
        g7 += m * xv * wv
        g8 += m * xv * pv
        g9 += m * wv * wv
        g10 += m * wv * pv
        g11 += m * pv * pv
    return np.array([g0, g1, g2, g3, g4, g5, g6, g7, g8, g9, g10, g11])


@numba.njit(cache=True, nogil=True, fastmath=_SUMS)
def _step(x, lx, w, lw, p, lp, c, lam, diag, mass, unit):  # pragma: no cover - compiled
    """``x, p <- c0 x + c1 w + c2 p, c1 w + c2 p`` (and their products with L), then
    the next residual as in :func:`_residual`, in one pass."""
    s1 = s2 = r2 = 0.0
    c0, c1, c2 = c[0], c[1], c[2]
    for v in range(x.size):
        m = 1.0 if unit else mass[v]
        pv = c1 * w[v] + c2 * p[v]
        lpv = c1 * lw[v] + c2 * lp[v]
        xv = c0 * x[v] + pv
        lxv = c0 * lx[v] + lpv
        x[v] = xv
        lx[v] = lxv
        p[v] = pv
        lp[v] = lpv
        r = lxv - lam * m * xv
        wv = r / diag[v]
        w[v] = wv
        s1 += m * wv
        s2 += m * wv * wv
        r2 += r * wv
    return s1, s2, r2


@numba.njit(cache=True, nogil=True)
def _lobpcg(indptr, indices, weights, unit, mass, x, steps, every, settled):  # pragma: no cover
    """Single-vector LOBPCG for ``L x = lambda M x`` from ``x``, in place.

    Knyazev (2001): the new iterate minimises the Rayleigh quotient over
    ``span{x, T r, p}`` (``r`` the residual, ``T`` the Jacobi preconditioner,
    ``p`` the previous step) by a 3 x 3 Rayleigh-Ritz problem; every basis
    vector is kept M-orthogonal to the constants.  ``unit``: every edge and
    node weighs 1 (``weights`` and ``mass`` unused).  Each iteration is three
    passes: the product ``L w`` (``L`` times a constant is zero, so ``w`` is
    centred only after it), the twelve inner products of the Ritz problem,
    and the update fused with the next residual.

    With ``every > 0``, every ``every`` iterations the profile of the order
    of ``x`` is measured (:func:`_profile_of_sorted`, on an unweighted
    graph): the iteration stops at the first look after the first that
    gains less than ``settled`` (relative), or that loses, and the best
    vector seen is kept.  Returns ``(lambda, iterations, relative residual)``.
    """
    n = x.size
    diag = np.empty(n)
    total = 0.0
    for v in range(n):
        if unit:
            diag[v] = indptr[v + 1] - indptr[v]
        else:
            d = 0.0
            for t in range(indptr[v], indptr[v + 1]):
                d += weights[t]
            diag[v] = d
        total += 1.0 if unit else mass[v]
    _centred(x, mass, unit, total)
    lx = np.empty(n)
    _laplacian_times(indptr, indices, weights, unit, diag, x, lx, 1.0)
    lam = 0.0
    for v in range(n):
        lam += x[v] * lx[v]
    w = np.empty(n)
    p = np.zeros(n)
    lp = np.zeros(n)
    lw = np.empty(n)
    s1, s2, r2 = _residual(x, lx, lam, diag, mass, unit, w)
    looking = every > 0
    pos = np.empty(n if looking else 0, dtype=np.int32)
    best = np.empty(n if looking else 0)
    best_prof = -1
    have_p = False
    res = np.sqrt(max(r2, 0.0)) / max(abs(lam), 1e-300)
    done = 0
    while done < steps:
        mean = s1 / total
        var = s2 - s1 * mean
        if not var > 0.0:
            break  # converged to rounding: the residual is a constant
        scale = 1.0 / np.sqrt(var)
        _laplacian_times(indptr, indices, weights, unit, diag, w, lw, scale)
        g = _gram(x, lx, w, lw, p, lp, mass, unit, mean, scale)
        ritz, c = _ritz_step(g, have_p)
        if np.isnan(ritz) and have_p:  # p has become dependent: this step without it
            ritz, c = _ritz_step(g, False)
        if np.isnan(ritz):
            break
        lam = ritz
        done += 1
        s1, s2, r2 = _step(x, lx, w, lw, p, lp, c, lam, diag, mass, unit)
        res = np.sqrt(max(r2, 0.0)) / max(abs(lam), 1e-300)
        have_p = True
        if looking and done % every == 0:
            prof = _profile_of_sorted(indptr, indices, x, pos)
            if best_prof < 0 or prof < best_prof:
                gain = 1.0 if best_prof < 0 else (best_prof - prof) / best_prof
                best_prof = prof
                best[:] = x
                if gain < settled:
                    break
            else:
                break
    if looking and best_prof >= 0:
        x[:] = best
    return lam, done, res


def _dense_fiedler(indptr: NDArray[np.int64], indices: NDArray[np.integer],
                   weights: NDArray[np.float64] | None,
                   mass: NDArray[np.float64]) -> tuple[float, NDArray[np.float64]]:
    """Second eigenpair of ``L x = lambda M x``, M diagonal, by a dense solver.

    Solved in standard form ``M^-1/2 L M^-1/2 y = lambda y``, ``x = M^-1/2 y``
    (the relatively robust representations driver, fastest for one pair).
    """
    n = indptr.size - 1
    data = np.ones(indices.size) if weights is None else weights
    adj = sp.csr_matrix((data, indices, indptr), shape=(n, n)).toarray()
    lap = np.diag(adj.sum(axis=1)) - adj
    scale = 1.0 / np.sqrt(mass)
    sym = lap * scale[:, None] * scale[None, :]
    w, v = sla.eigh(sym, subset_by_index=[1, 1], driver="evr")
    return float(w[0]), v[:, 0] * scale


def _multilevel(indptr: NDArray[np.int64], indices: NDArray[np.int32], settle: bool,
                fine_steps: int) -> tuple[float, NDArray[np.float64]]:
    """The multilevel Fiedler vector of a connected graph's CSR arrays (module notes).

    ``settle``: on the finest graph stop when the ordering stops improving,
    else run ``fine_steps`` iterations there.  A graph that will not coarsen
    (a star gathers into one aggregate) is solved where the coarsening
    stopped: densely up to :data:`DENSE_LIMIT` nodes, else by LOBPCG from
    the node numbers, which are breadth first here.
    """
    empty = np.empty(0)
    levels = [(indptr, indices, empty, True, empty, None)]
    while levels[-1][0].size - 1 > COARSEST:
        ptr, idx, w, unit, mass, _ = levels[-1]
        n = ptr.size - 1
        agg, n_coarse = _neighbourhood_aggregates(ptr, idx) if unit else (None, 0)
        if not 2 <= n_coarse <= LEAST_SHRINK * n:
            agg, n_coarse = _heavy_edge_aggregates(ptr, idx, w, unit)
        if not 2 <= n_coarse <= LEAST_SHRINK * n:
            break
        c_ptr, c_idx, c_w, c_mass = _coarse_graph(ptr, idx, w, unit, mass, agg, n_coarse)
        levels.append((c_ptr, c_idx, c_w, False, c_mass, agg))
    ptr, idx, w, unit, mass, _ = levels[-1]
    n = ptr.size - 1
    if n <= DENSE_LIMIT:
        lam, x = _dense_fiedler(ptr, idx, None if unit else w, np.ones(n) if unit else mass)
    else:
        x = np.arange(n, dtype=np.float64)
        lam, _, _ = _lobpcg(ptr, idx, w, unit, mass, x, SMALL_ITERATIONS, 0, 0.0)
    for k in range(len(levels) - 1, 0, -1):
        x = x[levels[k][5]]
        ptr, idx, w, unit, mass, _ = levels[k - 1]
        if k > 1:
            lam, _, _ = _lobpcg(ptr, idx, w, unit, mass, x, COARSE_ITERATIONS, 0, 0.0)
        elif settle:
            lam, _, _ = _lobpcg(ptr, idx, w, unit, mass, x, FINE_ITERATIONS, CHECK_EVERY,
                                SETTLED)
        else:
            lam, _, _ = _lobpcg(ptr, idx, w, unit, mass, x, fine_steps, 0, 0.0)
    return float(lam), x


def _block_vector(indptr: NDArray[np.int64], indices: NDArray[np.int32],
                  settle: bool) -> tuple[float, NDArray[np.float64]]:
    """Fiedler pair of one connected part: dense, multilevel refined, or multilevel settled.

    ``settle``: on parts above :data:`SETTLE_ABOVE` nodes stop when the
    ordering stops improving; smaller parts (or ``settle=False``) get
    :data:`SMALL_ITERATIONS` iterations on their finest graph.
    """
    n = indptr.size - 1
    if n <= DENSE_LIMIT:
        return _dense_fiedler(indptr, indices, None, np.ones(n))
    settle = settle and n > SETTLE_ABOVE
    return _multilevel(indptr, indices, settle, SMALL_ITERATIONS)


def fiedler_vector(graph: NodeGraph) -> tuple[float, NDArray[np.float64]]:
    """Second-smallest Laplacian eigenvalue of a connected graph and its eigenvector.

    Parameters
    ----------
    graph
        A connected node graph with at least 2 nodes.

    Returns
    -------
    (float, ndarray)
        The algebraic connectivity ``lambda_2`` and a Fiedler vector (sign
        not fixed); on large graphs the multilevel approximation with
        :data:`SMALL_ITERATIONS` LOBPCG iterations on the finest graph.

    Notes
    -----
    Dense solver up to :data:`DENSE_LIMIT` nodes; above, the multilevel
    scheme of the module notes, O(nnz) per level and per iteration.
    """
    if graph.n <= DENSE_LIMIT:
        return _dense_fiedler(graph.indptr, graph.indices, None, np.ones(graph.n))
    order, _, indptr, indices = renumbered_parts(graph)
    lam, y = _block_vector(indptr, indices, settle=False)
    x = np.empty_like(y)
    x[order] = y
    return lam, x


def _signed(x: NDArray[np.float64], nodes: NDArray[np.int64]) -> NDArray[np.float64]:
    """``x`` or ``-x``: the one whose values rise with the node numbers ``nodes``."""
    trend = float(np.dot(x - x.mean(), nodes - nodes.mean()))
    if trend == 0.0:
        trend = float(x[np.argmax(np.abs(x))])
    return x if trend >= 0 else -x


@numba.njit(cache=True, nogil=True)
def _ranked(x, tie):  # pragma: no cover - compiled
    """Positions in increasing ``(x, tie)`` order (``np.lexsort((tie, x))``), by buckets.

    The values are counted into ``n`` equal intervals, as in
    :func:`_profile_of_sorted`, and each interval is then put in exact order
    (by insertion when it is short, else by two stable sorts), so the cost
    is linear unless many values fall together.
    """
    n = x.size
    out = np.empty(n, dtype=np.int64)
    if n == 0:
        return out
    lo, scale = _bucket_bounds(x)
    start = np.zeros(n + 1, dtype=np.int64)
    for v in range(n):
        start[min(int((x[v] - lo) * scale), n - 1) + 1] += 1
    for b in range(n):
        start[b + 1] += start[b]
    fill = start[:-1].copy()
    for v in range(n):
        b = min(int((x[v] - lo) * scale), n - 1)
        out[fill[b]] = v
        fill[b] += 1
    for b in range(n):
        first, last = start[b], start[b + 1]
        if last - first <= 16:
            for i in range(first + 1, last):
                v = out[i]
                j = i
                while j > first and (x[out[j - 1]] > x[v] or
                                     (x[out[j - 1]] == x[v] and tie[out[j - 1]] > tie[v])):
                    out[j] = out[j - 1]
                    j -= 1
                out[j] = v
        else:
            block = out[first:last]
            block = block[np.argsort(tie[block], kind="mergesort")]
            out[first:last] = block[np.argsort(x[block], kind="mergesort")]
    return out


@numba.njit(cache=True, nogil=True)
def _small_parts(order, part_ptr, indptr, indices, most, perm):  # pragma: no cover - compiled
    """Order every part of 1 to ``most`` nodes in place in ``perm``, in one compiled loop.

    Parts of one or two nodes keep their nodes in increasing number; the
    others go by their dense Fiedler vector (``np.linalg.eigh`` of the part's
    Laplacian), signs and ties settled as by :func:`_signed` and
    :func:`_ranked`.  A mesh whose elements were never merged is thousands
    of such parts; one call per part from Python cost 90 microseconds each.
    """
    for p in range(part_ptr.size - 1):
        first = part_ptr[p]
        k = part_ptr[p + 1] - first
        if k > most:
            continue
        nodes = order[first:first + k]
        idx = np.arange(k)
        if k <= 2:
            if k == 2 and nodes[1] < nodes[0]:
                idx[0], idx[1] = 1, 0
        else:
            lap = np.zeros((k, k))
            for i in range(k):
                for t in range(indptr[first + i], indptr[first + i + 1]):
                    lap[i, indices[t] - first] -= 1.0
                    lap[i, i] += 1.0
            x = np.linalg.eigh(lap)[1][:, 1].copy()
            xm = x.mean()
            nm = nodes.mean()
            trend = 0.0
            for i in range(k):
                trend += (x[i] - xm) * (nodes[i] - nm)
            if trend == 0.0:
                trend = x[np.argmax(np.abs(x))]
            if trend < 0:
                x = -x
            for i in range(1, k):
                j = i
                while j > 0 and (x[idx[j - 1]] > x[idx[j]] or (x[idx[j - 1]] == x[idx[j]]
                                                                and nodes[idx[j - 1]] > nodes[idx[j]])):
                    idx[j - 1], idx[j] = idx[j], idx[j - 1]
                    j -= 1
        for i in range(k):
            perm[first + i] = nodes[idx[i]]


def _spectral_orders(graph: NodeGraph) -> NDArray[np.int64]:
    """``perm[new] = old``: every part by increasing Fiedler value, parts in driver order.

    Parts of up to :data:`SMALL_PART` nodes are ordered by :func:`_small_parts`;
    the others from their block of the breadth-first renumbered graph, signs
    and ties settled by the current node numbers.
    """
    order, part_ptr, indptr, indices = renumbered_parts(graph)
    perm = order.copy()
    _small_parts(order, part_ptr, indptr, indices, SMALL_PART, perm)
    for p in np.flatnonzero(np.diff(part_ptr) > SMALL_PART):
        first, last = int(part_ptr[p]), int(part_ptr[p + 1])
        nodes = order[first:last]
        if first == 0 and last == graph.n:
            block_ptr, block_idx = indptr, indices
        else:
            block_ptr = indptr[first:last + 1] - indptr[first]
            block_idx = indices[indptr[first]:indptr[last]] - np.int32(first)
        _, x = _block_vector(block_ptr, block_idx, settle=True)
        perm[first:last] = nodes[_ranked(_signed(x, nodes), nodes)]
    return perm


#: The last spectral order: (weak reference to its graph, order), under a lock so
#: that two threads asking for the same graph compute it once.
_LAST: list = []
_LAST_LOCK = threading.Lock()


@register("spectral", "Fiedler-vector order of each part (Barnard, Pothen and Simon 1995)",
          "profile")
def spectral(graph: NodeGraph) -> NDArray[np.int64]:
    """Spectral envelope-reducing ordering, part by part.

    Parameters
    ----------
    graph
        The node graph.

    Returns
    -------
    ndarray of int64
        ``perm[new] = old``: each connected part numbered by increasing value
        of its Fiedler vector, parts one after another.

    Notes
    -----
    On large parts the refinement stops when the order stops improving
    (module notes).  The last order computed is remembered, so that the
    spectral-Sloan hybrid on the same graph does not compute it again.

    References
    ----------
    S. T. Barnard, A. Pothen, H. Simon, "A spectral algorithm for envelope
    reduction of sparse matrices", Numer. Linear Algebra Appl. 2 (1995)
    317-334.
    """
    if graph.n == 0:
        return np.zeros(0, dtype=np.int64)
    with _LAST_LOCK:
        if _LAST and _LAST[0]() is graph:
            return _LAST[1].copy()
        perm = _spectral_orders(graph)
        _LAST[:] = [weakref.ref(graph), perm]
        return perm.copy()
