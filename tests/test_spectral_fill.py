"""Spectral and fill-reducing orderings, and the symbolic Cholesky counts.

Checks against things outside bandwise: Fiedler's theorem and the closed-form
Laplacian spectrum of a path, networkx's algebraic connectivity, numeric
Cholesky factorisations (numpy) of random SPD matrices with the same pattern,
the DOF matrix expanded with ``scipy.sparse.kron``, and the published
minimum-degree fill of the open Harwell-Boeing matrices.
"""

from __future__ import annotations

import csv

import networkx as nx
import numpy as np
import pytest
import scipy.io
import scipy.sparse as sp
from conftest import shared_path
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.sparse.csgraph import connected_components

from bandwise.algorithms.orderings import ORDERINGS
from bandwise.algorithms.orderings.nested_dissection import nested_dissection
from bandwise.algorithms.orderings.sloan import sloan
from bandwise.algorithms.orderings.spectral import DENSE_LIMIT, fiedler_vector, spectral
from bandwise.algorithms.orderings.spectral_sloan import spectral_key, spectral_sloan
from bandwise.algorithms.orderings.symbolic import (
    cholesky_nnz,
    column_counts,
    elimination_tree,
    factor_flops,
)
from bandwise.core import generate
from bandwise.core.graph import NodeGraph, graph_from_cells, graph_from_matrix, node_graph
from bandwise.core.metrics import metrics
from bandwise.core.model import CellBlock, Model

ORDERING_NAMES = ["spectral", "spectral-sloan", "nd"]


# ---------------------------------------------------------------- helpers

def path_graph(n: int, seed: int) -> tuple[NodeGraph, np.ndarray]:
    """A path whose k-th node along the path is node ``labels[k]``."""
    labels = np.random.default_rng(seed).permutation(n)
    return graph_from_cells([np.column_stack([labels[:-1], labels[1:]])], n), labels


def holed_mesh(kind: str, size: int, keep: list[bool]) -> NodeGraph:
    """A generated grid with some cells removed (orphans and several parts appear)."""
    model = {"quad": lambda: generate.quad_grid(size, size),
             "triangle": lambda: generate.triangle_grid(size, size),
             "tetra": lambda: generate.tet_grid(3, 3, size)}[kind]()
    cells = model.cells[0].data
    mask = np.resize(np.asarray(keep, dtype=bool), len(cells))
    return node_graph(Model(points=model.points, cells=[CellBlock(model.cells[0].type, cells[mask])]))


def random_spd(graph: NodeGraph, seed: int) -> np.ndarray:
    """A random symmetric positive definite matrix with exactly the graph's pattern."""
    rng = np.random.default_rng(seed)
    a = sp.triu(graph.to_scipy().astype(np.float64), 1).tocoo()
    a.data = rng.uniform(0.5, 1.5, a.nnz) * rng.choice([-1.0, 1.0], a.nnz)
    m = (a + a.T).toarray()
    np.fill_diagonal(m, np.abs(m).sum(axis=1) + 1.0)   # strictly diagonally dominant
    return m


def numeric_factor(m: np.ndarray, perm: np.ndarray) -> np.ndarray:
    """Dense Cholesky factor (numpy) of ``m[perm][:, perm]``."""
    return np.linalg.cholesky(m[np.ix_(perm, perm)])


def expanded_perm(perm: np.ndarray, d: np.ndarray) -> np.ndarray:
    """DOF permutation for DOFs numbered node after node, ``d`` DOFs per (old) node."""
    off = np.concatenate([[0], np.cumsum(d)])
    return np.concatenate([np.arange(off[v], off[v + 1]) for v in perm]).astype(np.int64)


def expanded_pattern(graph: NodeGraph, d: np.ndarray) -> sp.csr_matrix:
    """The DOF matrix pattern: node (u, v) coupled -> a dense d_u x d_v block."""
    a = graph.to_scipy().astype(np.float64) + sp.identity(graph.n)
    node_of_dof = np.repeat(np.arange(graph.n), d)
    return sp.csr_matrix(a[node_of_dof][:, node_of_dof])


# ------------------------------------------------------------ orderings

@pytest.mark.parametrize("name", ORDERING_NAMES)
@given(kind=st.sampled_from(["quad", "triangle", "tetra"]), size=st.integers(2, 7),
       keep=st.lists(st.booleans(), min_size=1, max_size=12))
def test_every_ordering_is_a_permutation_with_parts_kept_together(name, kind, size, keep):
    # An ordering is a permutation, each index once (George and Liu 1981, ch. 1); the
    # contract of bandwise.algorithms.orderings puts each connected part in one block of new numbers.
    graph = holed_mesh(kind, size, keep)
    perm = ORDERINGS[name].func(graph)
    assert perm.dtype == np.int64
    assert np.array_equal(np.sort(perm), np.arange(graph.n))
    _, labels = connected_components(graph.to_scipy(), directed=False)
    runs = np.count_nonzero(np.diff(labels[perm])) + 1 if graph.n else 0
    assert runs == len(np.unique(labels))


@pytest.mark.parametrize("n, seed", [(12, 0), (300, 1), (2 * DENSE_LIMIT + 17, 2), (6000, 3)])
def test_spectral_order_of_a_path_is_the_path(n, seed):
    # Theorem (M. Fiedler, "A property of eigenvectors of nonnegative symmetric matrices
    # and its application to graph theory", Czech. Math. J. 25 (1975) 619-633): the
    # Fiedler vector of a path is strictly monotone along it, so sorting by it gives
    # the path order or its reverse.  The path Laplacian's eigenvalues are
    # 2 - 2 cos(k pi / n), k = 0..n-1 (closed form, e.g. F. R. K. Chung, Spectral Graph
    # Theory, AMS 1997, ch. 1, from memory), so lambda_2 = 2 - 2 cos(pi / n).
    graph, labels = path_graph(n, seed)
    perm = spectral(graph)
    assert np.array_equal(perm, labels) or np.array_equal(perm, labels[::-1])
    lam, _ = fiedler_vector(graph)
    exact = 2 - 2 * np.cos(np.pi / n)
    rel = 1e-9 if n <= DENSE_LIMIT else 0.01     # multilevel: refined to a few % residual
    assert lam == pytest.approx(exact, rel=rel)


def test_spectral_sign_follows_the_current_numbering():
    # A path numbered 0..n-1 along itself: the sign rule (values rise with the current
    # numbers) makes the spectral order the identity, not its reverse (common practice:
    # a deterministic sign).
    graph, _ = path_graph(40, 0)
    ordered = graph_from_cells([np.column_stack([np.arange(39), np.arange(1, 40)])], 40)
    assert np.array_equal(spectral(ordered), np.arange(40))
    assert np.array_equal(spectral(graph), spectral(graph))


@pytest.mark.parametrize("side", [6, 11])
def test_fiedler_value_matches_networkx(side):
    # Reference library: networkx.algebraic_connectivity (second Laplacian eigenvalue);
    # side 11 gives 1331 nodes, above the dense limit: the multilevel path.
    graph = node_graph(generate.scrambled(generate.tet_grid(side, side, side), 5))
    g = nx.from_scipy_sparse_array(graph.to_scipy())
    reference = nx.algebraic_connectivity(g, method="lanczos", tol=1e-10, seed=1)
    lam, x = fiedler_vector(graph)
    assert lam == pytest.approx(reference, rel=0.02 if graph.n > DENSE_LIMIT else 1e-7)
    assert abs(x.sum()) <= 1e-6 * np.abs(x).sum()  # orthogonal to the constants


def test_spectral_beats_the_scrambled_numbering_on_a_mesh():
    # Barnard, Pothen and Simon (1995), tables of envelope sizes: the spectral order has
    # envelopes comparable to RCM on meshes.  Here: within 1.5x of scipy's reverse
    # Cuthill-McKee profile and far below the scrambled one (measured: 0.89x RCM, 0.09x the
    # scrambled numbering).
    from scipy.sparse.csgraph import reverse_cuthill_mckee

    graph = node_graph(generate.scrambled(generate.quad_grid(30, 20), 4))
    rcm = reverse_cuthill_mckee(graph.to_scipy().tocsr(), symmetric_mode=True).astype(np.int64)
    p_spec = metrics(graph, spectral(graph)).profile
    assert p_spec <= 1.5 * metrics(graph, rcm).profile
    assert p_spec < 0.2 * metrics(graph).profile


def test_spectral_key_starts_at_the_spectral_start_and_spans_the_local_range():
    # Kumfert and Pothen (1997), sec. 5 (normalisation from memory): the global key
    # falls along the spectral order, from (k - 1) / floor(k / D) at its first node to 0.
    graph = node_graph(generate.scrambled(generate.quad_grid(12, 9), 2))
    key = spectral_key(graph)
    order = spectral(graph)
    assert np.all(np.diff(key[order]) < 0)
    assert key[order[-1]] == 0
    d_max = int(graph.degrees().max())
    assert key[order[0]] == pytest.approx((graph.n - 1) / (graph.n // d_max))


def test_hybrid_improves_on_sloan_and_on_spectral_for_the_everstine_set():
    # G. Kumfert and A. Pothen, BIT 37 (1997) 559-590, abstract and tables: the hybrid
    # reduces the envelope and the mean-square wavefront of the Sloan ordering.  On
    # Everstine's problems (dwt_*, n <= 1100; G. C. Everstine, IJNME 14 (1979) 837-853),
    # measured with w1 = w2 = 1: profile geometric mean 0.911x Sloan's and 0.897x the
    # spectral one's, never above spectral (worst 0.984x); rms wavefront 0.911x Sloan.
    ratios_sloan, ratios_spectral, ratios_front = [], [], []
    for row in published_rows():
        if not row["name"].startswith("dwt") or int(row["n"]) > 1100:
            continue
        graph = graph_from_matrix(scipy.io.mmread(shared_path("matrices", f"{row['name']}.mtx")))
        hybrid = metrics(graph, spectral_sloan(graph))
        by_sloan = metrics(graph, sloan(graph))
        ratios_sloan.append(hybrid.profile / by_sloan.profile)
        ratios_spectral.append(hybrid.profile / metrics(graph, spectral(graph)).profile)
        ratios_front.append(hybrid.rms_wavefront / by_sloan.rms_wavefront)
    assert len(ratios_sloan) == 25
    assert geometric_mean(ratios_sloan) <= 0.95
    assert geometric_mean(ratios_spectral) <= 0.95
    assert max(ratios_spectral) <= 1.0
    assert geometric_mean(ratios_front) <= 0.95


def test_nd_puts_the_star_centre_last():
    # pymetis returns (perm, iperm) of METIS_NodeND; the first must be perm[new] = old.
    # A star's centre eliminated first fills the factor completely, n(n+1)/2; last, the
    # factor has no fill, 2n - 1 (the elimination-graph model: S. Parter, "The use of
    # linear graphs in Gauss elimination", SIAM Review 3 (1961) 119-130).
    n = 30
    star = graph_from_cells([np.column_stack([np.zeros(n - 1, dtype=np.int64),
                                              np.arange(1, n)])], n)
    perm = nested_dissection(star)
    assert perm[-1] == 0
    assert cholesky_nnz(star, perm) == 2 * n - 1
    assert cholesky_nnz(star) == n * (n + 1) // 2


# ------------------------------------------------------- symbolic counts

SMALL_GRAPHS = {
    "quad 6x5 holed": lambda: holed_mesh("quad", 6, [True, True, False, True]),
    "tet 3x3x4": lambda: node_graph(generate.tet_grid(3, 3, 4)),
    "frame": lambda: graph_from_cells([np.array([[0, 1], [1, 2], [2, 0], [3, 4], [4, 5]])], 7),
    "can_24": lambda: graph_from_matrix(scipy.io.mmread(shared_path("matrices", "can_24.mtx"))),
}


@pytest.mark.parametrize("name", SMALL_GRAPHS)
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_symbolic_counts_match_a_numeric_cholesky(name, seed):
    # nnz(L), the column counts and the elimination tree (Liu 1990: parent[j] = the row
    # of the first off-diagonal nonzero of column j) against numpy's dense Cholesky of a
    # random SPD matrix with the same pattern, under random orderings.  No cancellation
    # with random values, so the numeric pattern is the symbolic one (George and Liu
    # 1981, ch. 5).
    graph = SMALL_GRAPHS[name]()
    perm = np.random.default_rng(seed).permutation(graph.n).astype(np.int64)
    low = numeric_factor(random_spd(graph, seed), perm) != 0
    assert cholesky_nnz(graph, perm) == np.count_nonzero(low)
    assert np.array_equal(column_counts(graph, perm), low.sum(axis=0))
    below = np.tril(low, -1)
    first = np.where(below.any(axis=0), below.argmax(axis=0), -1)
    assert np.array_equal(elimination_tree(graph, perm), first)
    assert factor_flops(graph, perm) == int((low.sum(axis=0) ** 2).sum())


@settings(max_examples=25)
@given(kind=st.sampled_from(["quad", "triangle", "tetra"]), size=st.integers(2, 6),
       keep=st.lists(st.booleans(), min_size=1, max_size=9), seed=st.integers(0, 2**16))
def test_fill_of_random_holed_meshes_matches_a_numeric_cholesky(kind, size, keep, seed):
    # As above, on random generated meshes with cells removed (orphans, several parts)
    # and random orderings: nnz(L) against numpy's dense Cholesky (George and Liu 1981,
    # ch. 5: without cancellation the numeric pattern is the symbolic one).
    graph = holed_mesh(kind, size, keep)
    perm = np.random.default_rng(seed).permutation(graph.n).astype(np.int64)
    low = numeric_factor(random_spd(graph, seed), perm) != 0
    assert cholesky_nnz(graph, perm) == np.count_nonzero(low)
    assert np.array_equal(column_counts(graph, perm), low.sum(axis=0))


@pytest.mark.parametrize("d", [2, 3, 6])
def test_dof_level_count_matches_the_kron_expanded_matrix(d):
    # DOF matrix = kron(A, ones((d, d))) with node-blocked numbering (common practice);
    # its symbolic count must equal the numeric Cholesky count of that expanded matrix.
    graph = holed_mesh("triangle", 5, [True, False, True])
    perm = np.random.default_rng(d).permutation(graph.n).astype(np.int64)
    big = sp.kron(graph.to_scipy() + sp.identity(graph.n), np.ones((d, d))).tocsr()
    big_graph = graph_from_matrix(big)
    dof_perm = expanded_perm(perm, np.full(graph.n, d))
    low = numeric_factor(random_spd(big_graph, d), dof_perm) != 0
    assert cholesky_nnz(graph, perm, d) == np.count_nonzero(low)
    assert cholesky_nnz(graph, perm, d) == cholesky_nnz(big_graph, dof_perm)
    assert factor_flops(graph, perm, d) == int((low.sum(axis=0) ** 2).sum())


def test_mixed_dof_counts_including_nodes_without_dofs():
    # Per-node DOF counts (a solid meeting a shell: 3 and 6; orphans carrying none) give
    # the numeric count of the expanded matrix, in which a node without DOFs is absent.
    graph = node_graph(generate.tet_grid(3, 3, 3))
    d = np.random.default_rng(9).choice([0, 1, 3, 6], graph.n).astype(np.int64)
    perm = np.random.default_rng(10).permutation(graph.n).astype(np.int64)
    pattern_graph = graph_from_matrix(expanded_pattern(graph, d))
    dof_perm = expanded_perm(perm, d)
    low = numeric_factor(random_spd(pattern_graph, 3), dof_perm) != 0
    assert cholesky_nnz(graph, perm, d) == np.count_nonzero(low)
    assert factor_flops(graph, perm, d) == int((low.sum(axis=0) ** 2).sum())


def test_dof_layout_of_a_solid_gives_the_three_dof_count():
    # A 3D solid carries ux uy uz at every node (common practice, bandwise.core.dofs): the
    # layout-driven count equals the uniform 3-DOF count, 9 nnz(L) - 3n (module formula,
    # checked against kron above).
    from bandwise.core.dofs import dof_layout

    model = generate.scrambled(generate.tet_grid(4, 3, 3), 1)
    graph = node_graph(model)
    perm = nested_dissection(graph)
    assert cholesky_nnz(graph, perm, dof_layout(model)) == cholesky_nnz(graph, perm, 3)
    assert cholesky_nnz(graph, perm, 3) == 9 * cholesky_nnz(graph, perm) - 3 * graph.n


def test_fill_of_a_tridiagonal_and_a_full_matrix():
    # Closed forms: a tridiagonal (path) matrix in path order has no fill, nnz(L) = 2n - 1;
    # a full matrix has n(n+1)/2 (George and Liu 1981, ch. 2).
    graph, labels = path_graph(50, 4)
    assert cholesky_nnz(graph, labels) == 99
    full = graph_from_matrix(sp.csr_matrix(np.ones((9, 9))))
    assert cholesky_nnz(full) == 45
    assert cholesky_nnz(NodeGraph(np.zeros(1, dtype=np.int64), np.zeros(0, dtype=np.int32))) == 0


# ------------------------------------------------- published fill figures

def geometric_mean(ratios: list[float]) -> float:
    return float(np.exp(np.log(ratios).mean()))


def published_rows() -> list[dict[str, str]]:
    with open(shared_path("matrices", "published.csv"), newline="") as fh:
        return list(csv.DictReader(fh))


def test_nd_fill_against_published_minimum_degree_fill():
    # SuiteSparse Matrix Collection index (T. A. Davis and Y. Hu, "The University of
    # Florida Sparse Matrix Collection", ACM TOMS 38(1), 2011): nnz(L) incl. diagonal
    # after AMD (column cholesky_nnz_amd_incl_diag).  Measured over the 77 matrices with
    # scripts/bench_fill.py: nd / AMD geometric mean 1.083, worst 1.48 (dwt_66); the
    # file's own numbering gives at least the nd fill on 71 of 77 (geometric mean 2.75x
    # AMD).  Bounds asserted with a margin for METIS version changes.
    ratios, identity_not_better = [], 0
    rows = published_rows()
    for row in rows:
        graph = graph_from_matrix(scipy.io.mmread(shared_path("matrices", f"{row['name']}.mtx")))
        assert graph.n == int(row["n"])
        ours = cholesky_nnz(graph, nested_dissection(graph))
        ratios.append(ours / int(row["cholesky_nnz_amd_incl_diag"]))
        identity_not_better += cholesky_nnz(graph) >= ours
    ratios = np.array(ratios)
    assert np.exp(np.log(ratios).mean()) <= 1.15
    assert ratios.max() <= 1.7
    assert identity_not_better >= 0.85 * len(rows)
