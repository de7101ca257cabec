"""The pieces of the multilevel Fiedler solver, each against an outside reference.

- The breadth-first renumbered graph against scipy's explicitly permuted matrix.
- The aggregation's coarse graph against the Galerkin product ``P^T A P`` (its
  definition), and its aggregates as connected sets (P. Vanek, J. Mandel, M. Brezina,
  "Algebraic multigrid by smoothed aggregation for second and fourth order elliptic
  problems", Computing 56 (1996) 179-196; from memory).
- The fused LOBPCG against scipy's dense generalized eigensolver (A. V. Knyazev, "Toward
  the optimal preconditioned eigensolver", SIAM J. Sci. Comput. 23 (2001) 517-541).
- The exact bucket ranking against numpy's lexsort.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg as sla
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from bandwise.algorithms.orderings._parts import parts_in_order, renumbered_parts
from bandwise.algorithms.orderings.spectral import (
    DENSE_LIMIT,
    _coarse_graph,
    _heavy_edge_aggregates,
    _lobpcg,
    _neighbourhood_aggregates,
    _ranked,
    fiedler_vector,
    spectral,
)
from bandwise.core import generate
from bandwise.core.graph import NodeGraph, graph_from_cells, node_graph


def _mesh_with_parts() -> NodeGraph:
    """A scrambled plate, a scrambled box and two isolated nodes in one graph."""
    plate = generate.scrambled(generate.quad_grid(9, 7), 1)
    box = generate.scrambled(generate.tet_grid(4, 4, 3), 2)
    a, b = node_graph(plate).to_scipy(), node_graph(box).to_scipy()
    whole = sp.block_diag([a, sp.csr_matrix((2, 2)), b]).tocsr()
    perm = np.random.default_rng(3).permutation(whole.shape[0])
    whole = whole[perm][:, perm].tocsr()
    whole.sort_indices()
    return NodeGraph(whole.indptr.astype(np.int64), whole.indices.astype(np.int32))


def test_renumbered_rows_are_the_explicitly_permuted_graph():
    graph = _mesh_with_parts()
    order, part_ptr, indptr, indices = renumbered_parts(graph)
    ref_order, ref_ptr = parts_in_order(graph, sort=False)
    assert np.array_equal(order, ref_order) and np.array_equal(part_ptr, ref_ptr)
    mine = sp.csr_matrix((np.ones(indices.size), indices, indptr), shape=(graph.n, graph.n))
    mine.sort_indices()
    a = graph.to_scipy().astype(np.float64)
    ref = a[order][:, order].tocsr()
    ref.sort_indices()
    assert np.array_equal(mine.indptr, ref.indptr) and np.array_equal(mine.indices, ref.indices)
    # every part is a diagonal block: no edge leaves its rows
    for p in range(part_ptr.size - 1):
        rows = indices[indptr[part_ptr[p]]:indptr[part_ptr[p + 1]]]
        assert rows.size == 0 or (rows.min() >= part_ptr[p] and rows.max() < part_ptr[p + 1])


def _prolongation(agg: np.ndarray, n_coarse: int) -> sp.csr_matrix:
    n = agg.size
    return sp.csr_matrix((np.ones(n), (np.arange(n), agg)), shape=(n, n_coarse))


@pytest.mark.parametrize("aggregate", ["neighbourhood", "heavy edge"])
def test_coarse_graph_is_the_galerkin_product(aggregate):
    # The coarse Laplacian of the aggregates is P^T L P (definition of the Galerkin
    # coarse operator): off the diagonal that is -P^T A P, and the masses are P^T m.
    graph = node_graph(generate.scrambled(generate.tet_grid(6, 5, 4), 7))
    _, _, indptr, indices = renumbered_parts(graph)
    empty = np.empty(0)
    if aggregate == "neighbourhood":
        agg, nc = _neighbourhood_aggregates(indptr, indices)
    else:
        agg, nc = _heavy_edge_aggregates(indptr, indices, empty, True)
    assert agg.min() == 0 and agg.max() == nc - 1 and np.unique(agg).size == nc
    c_ptr, c_idx, c_w, c_mass = _coarse_graph(indptr, indices, empty, True, empty, agg, nc)
    a = sp.csr_matrix((np.ones(indices.size), indices, indptr), shape=(graph.n,) * 2)
    p = _prolongation(agg, nc)
    galerkin = (p.T @ a @ p).toarray()
    np.fill_diagonal(galerkin, 0.0)
    mine = sp.csr_matrix((c_w, c_idx, c_ptr), shape=(nc, nc)).toarray()
    assert np.array_equal(mine, galerkin)
    assert np.array_equal(c_mass, np.bincount(agg, minlength=nc).astype(float))
    # a second level, now weighted, against the same product
    agg2, nc2 = _heavy_edge_aggregates(c_ptr, c_idx, c_w, False)
    c2 = _coarse_graph(c_ptr, c_idx, c_w, False, c_mass, agg2, nc2)
    p2 = _prolongation(agg2, nc2)
    galerkin2 = (p2.T @ sp.csr_matrix((c_w, c_idx, c_ptr), shape=(nc, nc)) @ p2).toarray()
    np.fill_diagonal(galerkin2, 0.0)
    assert np.allclose(sp.csr_matrix((c2[2], c2[1], c2[0]), shape=(nc2, nc2)).toarray(),
                       galerkin2, rtol=0, atol=1e-12)
    assert np.allclose(c2[3], p2.T @ c_mass)


def test_neighbourhood_aggregates_are_connected_and_shrink_a_mesh():
    graph = node_graph(generate.scrambled(generate.tet_grid(8, 8, 8), 4))
    _, _, indptr, indices = renumbered_parts(graph)
    agg, nc = _neighbourhood_aggregates(indptr, indices)
    a = sp.csr_matrix((np.ones(indices.size), indices, indptr), shape=(graph.n,) * 2)
    for c in range(nc):
        members = np.flatnonzero(agg == c)
        parts, _ = connected_components(a[members][:, members], directed=False)
        assert parts == 1
    # a tetrahedral mesh has about 14 neighbours per node: one pass shrinks it far more
    # than pairing would (measured: 13.1 nodes per aggregate on this 512-node box)
    assert graph.n / nc > 4


def test_lobpcg_matches_the_dense_generalized_eigensolver():
    # Weighted graph with masses: L x = lambda M x, second eigenpair from scipy.linalg.eigh.
    graph = node_graph(generate.scrambled(generate.quad_grid(14, 11), 2))
    _, _, indptr, indices = renumbered_parts(graph)
    rng = np.random.default_rng(5)
    a = sp.csr_matrix((np.ones(indices.size), indices, indptr), shape=(graph.n,) * 2)
    upper = sp.triu(a, 1).tocoo()
    weights = sp.coo_matrix((rng.uniform(0.5, 2.0, upper.nnz), (upper.row, upper.col)),
                            shape=a.shape)
    w = (weights + weights.T).tocsr()
    w.sort_indices()
    mass = rng.uniform(1.0, 3.0, graph.n)
    dense = w.toarray()
    lap = np.diag(dense.sum(axis=1)) - dense
    vals, vecs = sla.eigh(lap, np.diag(mass))
    x = rng.standard_normal(graph.n)
    lam, _, res = _lobpcg(w.indptr.astype(np.int64), w.indices.astype(np.int32), w.data,
                             False, mass, x, 400, 0, 0.0)
    assert lam == pytest.approx(vals[1], rel=1e-8)
    assert res < 1e-6
    cos = abs(x @ np.diag(mass) @ vecs[:, 1]) / np.sqrt(x @ (mass * x))
    assert cos == pytest.approx(1.0, abs=1e-6)
    assert abs(np.dot(mass, x)) <= 1e-9 * np.abs(x).sum()   # M-orthogonal to the constants


@pytest.mark.parametrize("kind", ["distinct", "ties", "all equal", "long runs"])
def test_ranked_is_lexsort(kind):
    rng = np.random.default_rng(11)
    n = 5000
    x = {"distinct": rng.standard_normal(n),
         "ties": rng.integers(0, 300, n).astype(float),
         "all equal": np.full(n, 2.5),
         "long runs": np.repeat(rng.standard_normal(40), n // 40)}[kind]
    tie = rng.permutation(n).astype(np.int64)
    assert np.array_equal(_ranked(x, tie), np.lexsort((tie, x)))


def test_a_star_does_not_coarsen_and_still_gets_its_fiedler_value():
    # The star K_{1,n-1} has Laplacian eigenvalues 0, 1 (n - 2 times) and n (common
    # practice; e.g. B. Mohar, "The Laplacian spectrum of graphs", 1991, from memory).
    # Every aggregation gathers it into one node, so the solver works on it uncoarsened.
    n = 3 * DENSE_LIMIT
    star = graph_from_cells([np.column_stack([np.zeros(n - 1, int), np.arange(1, n)])], n)
    lam, _ = fiedler_vector(star)
    assert lam == pytest.approx(1.0, rel=1e-6)
    perm = spectral(star)
    assert np.array_equal(np.sort(perm), np.arange(n))


def _random_connected(k: int, seed: int) -> NodeGraph:
    """The Delaunay triangulation of k random points: connected, generally no symmetry."""
    from scipy.spatial import Delaunay

    points = np.random.default_rng(seed).random((k, 2))
    return graph_from_cells([Delaunay(points).simplices.astype(np.int64)], k)


@pytest.mark.parametrize("seed", range(12))
def test_small_parts_order_as_the_general_dense_path(seed):
    # The compiled loop over small parts (numpy's eigh inside numba) against the path
    # every larger part takes (scipy's dense eigensolver, _signed, _ranked): the same
    # order whenever the Fiedler value is simple (an eigenvector is then unique up to
    # sign; common practice) and no two entries nearly tie.
    from bandwise.algorithms.orderings.spectral import SMALL_PART, _block_vector, _signed

    k = 12 + 4 * seed
    assert k <= SMALL_PART
    graph = _random_connected(k, seed)
    order, _, indptr, indices = renumbered_parts(graph)
    lap = np.diag(graph.degrees().astype(float)) - graph.to_scipy().toarray()
    vals, vecs = sla.eigh(lap)
    assert vals[2] - vals[1] > 1e-6 * vals[2]
    assert np.min(np.diff(np.sort(vecs[:, 1]))) > 1e-9
    _, x = _block_vector(indptr, indices, settle=True)
    general = order[_ranked(_signed(x, order), order)]
    assert np.array_equal(spectral(graph), general)


def test_an_unmerged_mesh_is_ordered_part_by_part():
    # Every tetrahedron its own part (a mesh whose coincident nodes were never merged):
    # each part is K4, whose Laplacian eigenvalue 4 is triple, so any order of a part is
    # a spectral order; the order must still be a permutation with parts contiguous and
    # in the driver's part order.
    cells = np.random.default_rng(2).permutation(4000).reshape(1000, 4)
    graph = graph_from_cells([cells], 4003)            # and three isolated nodes
    perm = spectral(graph)
    ref_order, ref_ptr = parts_in_order(graph)
    assert np.array_equal(np.sort(perm), np.arange(graph.n))
    for p in range(ref_ptr.size - 1):
        assert np.array_equal(np.sort(perm[ref_ptr[p]:ref_ptr[p + 1]]),
                              ref_order[ref_ptr[p]:ref_ptr[p + 1]])
