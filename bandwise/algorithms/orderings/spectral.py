"""Spectral ordering: nodes sorted by the Fiedler vector of the graph Laplacian.

The Laplacian ``L = D - A`` of a connected graph (D the degrees, A the
adjacency) has the constant vector as null vector; the eigenvector of its
second-smallest eigenvalue (the Fiedler vector) minimises
``sum over edges (x_u - x_v)^2`` over unit vectors orthogonal to the
constants, a continuous relaxation of the minimum 2-sum layout problem.
Sorting the nodes by their Fiedler values therefore keeps neighbours close
in the numbering, which gives small envelopes (Barnard, Pothen and Simon
1995), often smaller than RCM's on meshes.

The eigenvector is computed per connected part:

- parts of up to :data:`DENSE_LIMIT` nodes: a dense symmetric eigensolver;
- larger parts: a multilevel scheme in the manner of Barnard and Simon's
  multilevel spectral bisection (and of Hu and Scott's multilevel
  wavefront code).  The graph is coarsened by heavy-edge matching into a
  hierarchy of weighted graphs (each coarse node carries the count of the
  fine nodes it stands for as its mass, each coarse edge the summed weight
  of the fine edges it stands for, so its Laplacian is the Galerkin product
  ``P^T L P``), the coarsest problem ``L x = lambda M x`` is solved densely,
  and the vector is carried up level by level and refined there by a few
  iterations of single-vector LOBPCG (Knyazev 2001) with a Jacobi
  preconditioner, the constants projected out.  Everything is compiled
  (one pass over the edges per coarsening and per iteration).  On the
  finest graph the iteration stops when the *ordering* stops improving
  (the profile of the sorted vector, checked every few iterations), not at
  a residual tolerance: the order settles long before the vector does.

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
from ._parts import _indices32, ordered_by_parts, parts_in_order

__all__ = ["fiedler_vector", "laplacian", "spectral"]

#: Largest part whose Fiedler vector is computed by a dense eigensolver.
DENSE_LIMIT = 500
#: Size at which coarsening stops (dense solve; larger dense solves wait on threaded
#: LAPACK on a busy machine).
COARSEST = 200
#: LOBPCG iterations at each coarse level.
COARSE_ITERATIONS = 3
#: On the finest graph: iterations between two looks at the profile, the most in all,
#: and the relative gain in profile below which the ordering counts as settled.
CHECK_EVERY = 2
FINE_ITERATIONS = 12
SETTLED = 0.005
#: Parts up to this size are refined to a small residual instead (cheap at that size).
SETTLE_ABOVE = 20_000
#: LOBPCG iterations on the finest graph of a part of at most SETTLE_ABOVE nodes.
SMALL_ITERATIONS = 60


def laplacian(graph: NodeGraph) -> sp.csr_matrix:
    """The graph Laplacian ``L = D - A`` as a float64 CSR matrix."""
    a = graph.to_scipy().astype(np.float64)
    return (sp.diags(graph.degrees().astype(np.float64)) - a).tocsr()


@numba.njit(cache=True, nogil=True)
def _heavy_edge_aggregates(indptr, indices, weights, unit):  # pragma: no cover - compiled
    """Pair each node with its unmatched neighbour of heaviest edge.

    A node whose neighbours are all matched joins the aggregate of its
    heaviest neighbour, so every level at least halves the number of nodes
    of a connected graph.  ``unit``: every edge weighs 1 (``weights`` unused).
    """
    n = indptr.size - 1
    agg = np.full(n, -1, dtype=np.int64)
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
    edges between their members; a coarse node's mass is its members' mass.
    """
    n = indptr.size - 1
    count = np.zeros(n_coarse + 1, dtype=np.int64)
    for v in range(n):
        count[agg[v] + 1] += 1
    for c in range(n_coarse):
        count[c + 1] += count[c]
    members = np.empty(n, dtype=np.int64)
    fill = count[:-1].copy()
    for v in range(n):
        members[fill[agg[v]]] = v
        fill[agg[v]] += 1
    c_ptr = np.zeros(n_coarse + 1, dtype=np.int64)
    c_idx = np.empty(indices.size, dtype=np.int32)
    c_w = np.empty(indices.size, dtype=np.float64)
    c_mass = np.zeros(n_coarse, dtype=np.float64)
    slot = np.full(n_coarse, -1, dtype=np.int64)
    top = 0
    for c in range(n_coarse):
        row = top
        for m in range(count[c], count[c + 1]):
            v = members[m]
            c_mass[c] += mass[v]
            for t in range(indptr[v], indptr[v + 1]):
                b = agg[indices[t]]
                if b == c:
                    continue
                w = 1.0 if unit else weights[t]
                if slot[b] >= row:
                    c_w[slot[b]] += w
                else:
                    slot[b] = top
                    c_idx[top] = b
                    c_w[top] = w
                    top += 1
        c_ptr[c + 1] = top
    return c_ptr, c_idx[:top].copy(), c_w[:top].copy(), c_mass


@numba.njit(cache=True, nogil=True)
def _laplacian_times(indptr, indices, weights, unit, diag, x, out):  # pragma: no cover
    """``out = L x`` for the weighted Laplacian (``diag``: the weighted degrees)."""
    for v in range(indptr.size - 1):
        acc = diag[v] * x[v]
        for t in range(indptr[v], indptr[v + 1]):
            acc -= (1.0 if unit else weights[t]) * x[indices[t]]
        out[v] = acc


@numba.njit(cache=True, nogil=True)
def _mdot(a, mass, b):  # pragma: no cover - compiled
    """``a^T M b`` for a diagonal M, as a plain loop (no threaded BLAS call)."""
    acc = 0.0
    for v in range(a.size):
        acc += a[v] * mass[v] * b[v]
    return acc


@numba.njit(cache=True, nogil=True)
def _deflated(x, mass):  # pragma: no cover - compiled
    """``x`` made M-orthogonal to the constants, in place."""
    total = 0.0
    acc = 0.0
    for v in range(x.size):
        acc += mass[v] * x[v]
        total += mass[v]
    mean = acc / total
    for v in range(x.size):
        x[v] -= mean


@numba.njit(cache=True, nogil=True)
def _lobpcg_steps(indptr, indices, weights, unit, mass, x, steps):  # pragma: no cover
    """``steps`` iterations of single-vector LOBPCG for ``L x = lambda M x`` from ``x``.

    Knyazev (2001): the new iterate minimises the Rayleigh quotient over
    ``span{x, T r, p}`` (``r`` the residual, ``T`` the Jacobi preconditioner,
    ``p`` the previous step), by a 3 x 3 Rayleigh-Ritz problem; every basis
    vector is kept M-orthogonal to the constants.  Returns
    ``(lambda, relative residual)``; ``x`` is updated in place.
    """
    n = x.size
    diag = np.zeros(n)
    for v in range(n):
        if unit:
            diag[v] = indptr[v + 1] - indptr[v]
        else:
            for t in range(indptr[v], indptr[v + 1]):
                diag[v] += weights[t]
    ones = np.ones(n)
    _deflated(x, mass)
    x /= np.sqrt(_mdot(x, mass, x))
    lx = np.empty(n)
    _laplacian_times(indptr, indices, weights, unit, diag, x, lx)
    lam = _mdot(x, ones, lx)
    p = np.zeros(n)
    lp = np.zeros(n)
    w = np.empty(n)
    lw = np.empty(n)
    have_p = False
    res = 1.0
    for _ in range(steps):
        for v in range(n):
            w[v] = (lx[v] - lam * mass[v] * x[v]) / diag[v]
        res = np.sqrt(_mdot(w, diag, w)) / max(lam, 1e-300)
        _deflated(w, mass)
        w /= np.sqrt(_mdot(w, mass, w))
        _laplacian_times(indptr, indices, weights, unit, diag, w, lw)
        k = 3 if have_p else 2
        basis = (x, w, p)
        lbasis = (lx, lw, lp)
        a = np.empty((k, k))
        b = np.empty((k, k))
        for i in range(k):
            for j in range(i, k):
                a[i, j] = _mdot(basis[i], ones, lbasis[j])
                b[i, j] = _mdot(basis[i], mass, basis[j])
                a[j, i] = a[i, j]
                b[j, i] = b[i, j]
        try:
            chol = np.linalg.cholesky(b)
        except Exception:  # noqa: BLE001 - p has become dependent: restart without it
            have_p = False
            continue
        inv = np.linalg.inv(chol)
        vals, vecs = np.linalg.eigh(inv @ a @ inv.T)
        c = inv.T @ vecs[:, 0]
        lam = vals[0]
        cp = c[2] if k == 3 else 0.0
        for v in range(n):
            pv = c[1] * w[v] + cp * p[v]
            lpv = c[1] * lw[v] + cp * lp[v]
            x[v] = c[0] * x[v] + pv
            lx[v] = c[0] * lx[v] + lpv
            p[v] = pv
            lp[v] = lpv
        scale = np.sqrt(_mdot(x, mass, x))
        x /= scale
        lx /= scale
        have_p = True
    return lam, res


@numba.njit(cache=True, nogil=True)
def _profile_of_sorted(indptr, indices, x, pos):  # pragma: no cover - compiled
    """Profile of the numbering by increasing ``x``, the sort done by buckets.

    The values are cut into ``n`` equal intervals and counted into place
    (two passes, no comparison sort); nodes in one interval keep their
    index order.  Close enough to the exact order to tell whether the
    ordering still improves, at a fraction of the cost of a sort.
    """
    n = x.size
    lo = x.min()
    span = x.max() - lo
    scale = (n - 1) / span if span > 0 else 0.0
    start = np.zeros(n + 1, dtype=np.int64)
    for v in range(n):
        start[int((x[v] - lo) * scale) + 1] += 1
    for b in range(n):
        start[b + 1] += start[b]
    for v in range(n):
        b = int((x[v] - lo) * scale)
        pos[v] = start[b]
        start[b] += 1
    total = 0
    for v in range(n):
        first = pos[v]
        for t in range(indptr[v], indptr[v + 1]):
            first = min(first, pos[indices[t]])
        total += pos[v] - first
    return total


@numba.njit(cache=True, nogil=True)
def _settled_steps(indptr, indices, x, every, most, settled):  # pragma: no cover - compiled
    """LOBPCG on the unweighted graph until the profile of the sorted vector settles.

    Every ``every`` iterations the profile of ``argsort(x)`` is measured; the
    iteration stops at the first look that gains less than ``settled``
    (relative), or after ``most`` iterations.  The best vector seen is kept.
    Returns ``(lambda, iterations)``.
    """
    n = x.size
    mass = np.ones(n)
    empty = np.empty(0)
    pos = np.empty(n, dtype=np.int64)
    best = x.copy()
    best_prof = _profile_of_sorted(indptr, indices, x, pos)
    done = 0
    lam = 0.0
    while done < most:
        lam, _ = _lobpcg_steps(indptr, indices, empty, True, mass, x, every)
        done += every
        prof = _profile_of_sorted(indptr, indices, x, pos)
        if prof < best_prof:
            gain = (best_prof - prof) / best_prof
            best_prof = prof
            best[:] = x
            if gain < settled:
                break
        else:
            break
    x[:] = best
    return lam, done


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


@numba.njit(cache=True, nogil=True)
def _permuted(indptr, indices, perm):  # pragma: no cover - compiled
    """The graph renumbered by ``perm`` (``perm[new] = old``), as CSR arrays."""
    n = perm.size
    inv = np.empty(n, dtype=np.int32)
    for i in range(n):
        inv[perm[i]] = i
    new_ptr = np.empty(n + 1, dtype=np.int64)
    new_ptr[0] = 0
    for i in range(n):
        v = perm[i]
        new_ptr[i + 1] = new_ptr[i] + indptr[v + 1] - indptr[v]
    new_idx = np.empty(indices.size, dtype=np.int32)
    for i in range(n):
        v = perm[i]
        top = new_ptr[i]
        for t in range(indptr[v], indptr[v + 1]):
            new_idx[top] = inv[indices[t]]
            top += 1
    return new_ptr, new_idx


def _multilevel(graph: NodeGraph, settle: bool,
                fine_steps: int = FINE_ITERATIONS) -> tuple[float, NDArray[np.float64]]:
    """The multilevel Fiedler vector (module notes); ``settle``: stop on the ordering.

    The work is done on the graph renumbered breadth first: every pass over
    the edges then reads the vector within a band instead of all over
    memory, which on a scrambled mesh of a million nodes makes the whole
    scheme several times faster than the one search it costs.
    """
    local = parts_in_order(graph, sort=False)[0]
    lam, y = _multilevel_on(*_permuted(graph.indptr, _indices32(graph), local), settle,
                            fine_steps)
    x = np.empty_like(y)
    x[local] = y
    return lam, x


def _multilevel_on(indptr: NDArray[np.int64], indices: NDArray[np.int32], settle: bool,
                   fine_steps: int) -> tuple[float, NDArray[np.float64]]:
    """:func:`_multilevel` on CSR arrays."""
    empty = np.empty(0)
    levels = [(indptr, indices, empty, True, np.ones(indptr.size - 1), None)]
    while levels[-1][0].size - 1 > COARSEST:
        ptr, idx, w, unit, mass, _ = levels[-1]
        agg, n_coarse = _heavy_edge_aggregates(ptr, idx, w, unit)
        if n_coarse > 0.8 * (ptr.size - 1):
            break
        c_ptr, c_idx, c_w, c_mass = _coarse_graph(ptr, idx, w, unit, mass, agg, n_coarse)
        levels.append((c_ptr, c_idx, c_w, False, c_mass, agg))
    ptr, idx, w, unit, mass, _ = levels[-1]
    lam, x = _dense_fiedler(ptr, idx, None if unit else w, mass)
    for k in range(len(levels) - 1, 0, -1):
        x = x[levels[k][5]]
        ptr, idx, w, unit, mass, _ = levels[k - 1]
        if k > 1 or not settle:
            lam, _ = _lobpcg_steps(ptr, idx, w, unit, mass, x,
                                   COARSE_ITERATIONS if k > 1 else fine_steps)
        else:
            lam, _ = _settled_steps(ptr, idx, x, CHECK_EVERY, fine_steps, SETTLED)
    return float(lam), x


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
    return _multilevel(graph, settle=False, fine_steps=SMALL_ITERATIONS)


def _signed(x: NDArray[np.float64]) -> NDArray[np.float64]:
    """``x`` or ``-x``: the one whose values rise with the current node numbers."""
    trend = float(np.dot(x - x.mean(), np.arange(x.size) - (x.size - 1) / 2))
    if trend == 0.0:
        trend = float(x[np.argmax(np.abs(x))])
    return x if trend >= 0 else -x


def spectral_part(graph: NodeGraph) -> NDArray[np.int64]:
    """Spectral order of one connected part: nodes by increasing Fiedler value.

    On large parts the refinement stops when the order stops improving
    (module notes).  The last order computed is remembered, so that the
    spectral-Sloan hybrid on the same graph does not compute it again.
    """
    with _LAST_LOCK:
        if _LAST and _LAST[0]() is graph:
            return _LAST[1].copy()
        if graph.n <= DENSE_LIMIT:
            _, x = fiedler_vector(graph)
        elif graph.n <= SETTLE_ABOVE:
            _, x = _multilevel(graph, settle=False, fine_steps=SMALL_ITERATIONS)
        else:
            _, x = _multilevel(graph, settle=True)
        order = np.argsort(_signed(x), kind="stable").astype(np.int64)
        _LAST[:] = [weakref.ref(graph), order]
        return order.copy()


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

    References
    ----------
    S. T. Barnard, A. Pothen, H. Simon, "A spectral algorithm for envelope
    reduction of sparse matrices", Numer. Linear Algebra Appl. 2 (1995)
    317-334.
    """
    return ordered_by_parts(graph, spectral_part)
