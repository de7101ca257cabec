"""Bandwidth, profile, wavefront and storage against their definitions.

Reference: the definitions of A. George and J. W. H. Liu, *Computer Solution
of Large Sparse Positive Definite Systems*, Prentice-Hall 1981 (envelope,
bandwidth, frontwidth), as restated in S. W. Sloan, IJNME 23 (1986) 239-251:
f_i = min{j : a_ij != 0}, b_i = i - f_i, bandwidth = max b_i, profile =
sum b_i, wavefront_i = #{k >= i : f_k <= i}.  Each figure is checked against
a direct evaluation of these definitions on the explicitly assembled (and
explicitly DOF-expanded, permuted) scipy matrix.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given
from hypothesis import strategies as st

from bandwise.core.generate import hex_grid, quad_grid, tet_grid, triangle_grid
from bandwise.core.graph import node_graph
from bandwise.core.metrics import column_heights, metrics, wavefront_profile


def definition_figures(matrix: sp.spmatrix) -> dict[str, float]:
    """The figures straight from the definitions, on an explicit matrix."""
    a = sp.csr_matrix(matrix)
    n = a.shape[0]
    r, c = a.nonzero()
    low = c <= r
    f = np.arange(n)
    np.minimum.at(f, r[low], c[low])
    b = np.arange(n) - f
    front = np.array([np.count_nonzero(f[i:] <= i) for i in range(n)])
    return {
        "bandwidth": int(b.max()),
        "profile": int(b.sum()),
        "max_wavefront": int(front.max()),
        "rms_wavefront": float(np.sqrt(np.mean(front**2.0))),
        "envelope_ops": int(np.sum(b * (b + 3) // 2)),
    }


def expanded(graph, perm, dofs):
    """The DOF-level matrix, built by brute force: permute nodes, expand blocks."""
    a = (graph.to_scipy() + sp.eye(graph.n)).tocsr()
    a = a[perm][:, perm]
    d = np.asarray(dofs)[perm] if np.ndim(dofs) else np.full(graph.n, dofs)
    blocks = [[sp.csr_matrix(np.ones((d[i], d[j]))) if a[i, j] else None
               for j in range(graph.n)] for i in range(graph.n)]
    return sp.bmat(blocks, format="csr")


def assert_matches(m, ref):
    assert m.bandwidth == ref["bandwidth"]
    assert m.profile == ref["profile"]
    assert m.max_wavefront == ref["max_wavefront"]
    assert m.rms_wavefront == pytest.approx(ref["rms_wavefront"], rel=1e-12)
    assert m.envelope_ops == ref["envelope_ops"]


@pytest.mark.parametrize("make", [lambda: quad_grid(6, 4), lambda: triangle_grid(5, 5),
                                  lambda: hex_grid(3, 3, 4), lambda: tet_grid(3, 4, 3)])
@pytest.mark.parametrize("d", [1, 2, 3])
def test_node_and_dof_figures_equal_the_definitions(make, d):
    model = make()
    graph = node_graph(model)
    perm = np.random.default_rng(7).permutation(graph.n)
    for p in (np.arange(graph.n), perm):
        ref = definition_figures(sp.kron((graph.to_scipy() + sp.eye(graph.n)).tocsr()[p][:, p],
                                         np.ones((d, d))))
        assert_matches(metrics(graph, p, dofs=d), ref)


def test_mixed_dofs_per_node_equal_the_expanded_matrix():
    graph = node_graph(tet_grid(3, 3, 3))
    rng = np.random.default_rng(3)
    dofs = rng.choice([1, 3, 6], size=graph.n)
    perm = rng.permutation(graph.n)
    assert_matches(metrics(graph, perm, dofs=dofs), definition_figures(expanded(graph, perm, dofs)))


@given(nx=st.integers(2, 9), ny=st.integers(2, 9), d=st.integers(1, 6))
def test_uniform_dof_closed_forms(nx, ny, d):
    # Closed forms for node-blocked numbering (DESIGN notes, from the definitions):
    # b_dof = d*b + d - 1 and P_dof = sum_i (d^2 b_i + d(d-1)/2).
    graph = node_graph(quad_grid(nx, ny))
    node, dof = metrics(graph), metrics(graph, dofs=d)
    assert dof.bandwidth == d * node.bandwidth + d - 1
    assert dof.profile == d * d * node.profile + graph.n * d * (d - 1) // 2
    assert dof.n_rows == d * graph.n


@given(nx=st.integers(2, 12), ny=st.integers(2, 12))
def test_row_by_row_quad_grid_closed_form(nx, ny):
    # A grid of nx x ny nodes numbered row by row (x fastest): node (x, y)
    # couples back to (x-1, y-1), so b = nx + 1 inside, nx on the first
    # column, 1 on the first row (common practice: it follows from the
    # definition of the envelope).
    m = metrics(node_graph(quad_grid(nx, ny)))
    assert m.bandwidth == nx + 1
    assert m.profile == (ny - 1) * ((nx - 1) * (nx + 1) + nx) + (nx - 1)


@given(n=st.integers(2, 6))
def test_row_by_row_tet_box_bandwidth(n):
    # Kuhn's split couples corner 0 to the opposite corner 6 of each cube:
    # node i to i + 1 + nx + nx*ny, so b = nx*ny + nx + 1 (common practice).
    m = metrics(node_graph(tet_grid(n, n, n)))
    assert m.bandwidth == n * n + n + 1


def test_tridiagonal_worked_example():
    # A path of 5 nodes numbered in order is tridiagonal: b = 1, P = n - 1,
    # every wavefront 2 except the last row (1); envelope work sum b(b+3)/2 = 2(n-1)
    # (George and Liu 1981, envelope method on a band matrix).
    from bandwise.core.generate import line_frame

    pts = np.column_stack([np.arange(5.0), np.zeros(5)])
    g = node_graph(line_frame(pts, np.array([[0, 1], [1, 2], [2, 3], [3, 4]])))
    m = metrics(g)
    assert (m.bandwidth, m.profile, m.max_wavefront) == (1, 4, 2)
    assert m.envelope_ops == 8
    assert list(wavefront_profile(g)) == [2, 2, 2, 2, 1]
    assert list(column_heights(g)) == [0, 1, 1, 1, 1]
    assert m.rms_wavefront == pytest.approx(np.sqrt((4 * 4 + 1) / 5))
    # storage: band n(b+1) doubles; skyline P+n doubles and n+1 pointers
    assert m.banded_bytes == 5 * 2 * 8
    assert m.skyline_bytes == (4 + 5) * 8 + 6 * 8


def test_plot_curves_agree_with_the_figures():
    graph = node_graph(tet_grid(4, 3, 3))
    perm = np.random.default_rng(1).permutation(graph.n)
    m = metrics(graph, perm, dofs=3)
    heights = column_heights(graph, perm, dofs=3)
    front = wavefront_profile(graph, perm, dofs=3)
    assert heights.max() == m.bandwidth and heights.sum() == m.profile
    assert front.max() == m.max_wavefront
    assert np.sqrt(np.mean(front**2.0)) == pytest.approx(m.rms_wavefront)


def test_bad_permutation_is_refused():
    from bandwise.core.errors import InputError

    graph = node_graph(quad_grid(3, 3))
    with pytest.raises(InputError):
        metrics(graph, np.zeros(graph.n, dtype=int))
    with pytest.raises(InputError):
        metrics(graph, np.arange(graph.n - 1))
