"""The node graph against a brute-force reference built with scipy.

Reference: every pair of nodes of an element is coupled (an element
stiffness block is full; common practice of finite-element assembly), so the
adjacency must equal the pattern of sum over elements of B_e^T B_e with the
diagonal removed, where B_e selects the element's nodes.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from conftest import MESHES, shared_path
from hypothesis import given
from hypothesis import strategies as st

from bandwise.core.generate import hex_grid, tet_grid
from bandwise.core.graph import graph_from_cells, graph_from_matrix, node_graph
from bandwise.core.model import CellBlock, Model
from bandwise.formats import read_model


def reference_adjacency(blocks, n):
    """Pattern of sum_e B_e^T B_e, diagonal dropped (scipy, element by element)."""
    rows, cols = [], []
    for data in blocks:
        for cell in np.asarray(data):
            rr, cc = np.meshgrid(cell, cell, indexing="ij")
            rows.append(rr.ravel())
            cols.append(cc.ravel())
    if not rows:
        return sp.csr_matrix((n, n))
    r, c = np.concatenate(rows), np.concatenate(cols)
    a = sp.csr_matrix((np.ones(r.size), (r, c)), shape=(n, n))
    a.setdiag(0)
    a.eliminate_zeros()
    a.data[:] = 1
    return a


def assert_same_graph(graph, reference):
    got = graph.to_scipy().astype(float)
    assert (got != reference).nnz == 0
    # symmetric, sorted rows, no self loops
    assert (got != got.T).nnz == 0
    for v in range(graph.n):
        nb = graph.neighbours(v)
        assert np.all(np.diff(nb) > 0) and v not in nb


@given(seed=st.integers(0, 10_000), keep=st.floats(0.2, 1.0))
def test_random_meshes_match_reference(seed, keep):
    rng = np.random.default_rng(seed)
    model = tet_grid(4, 3, 3)
    tets = model.cells[0].data
    tets = tets[rng.random(len(tets)) < keep]
    lines = rng.integers(0, model.n_nodes, size=(3, 2))
    blocks = [tets, lines]
    assert_same_graph(graph_from_cells(blocks, model.n_nodes),
                      reference_adjacency(blocks, model.n_nodes))


def test_vertex_cells_couple_nothing_and_orphans_are_isolated():
    base = hex_grid(3, 2, 2)
    pts = np.vstack([base.points, [[9.0, 9.0, 9.0], [8.0, 8.0, 8.0]]])
    model = Model(points=pts, cells=[base.cells[0], CellBlock("vertex", np.array([[12]]))])
    g = node_graph(model)
    assert g.n == 14 and g.degrees()[12] == 0 and g.degrees()[13] == 0
    assert set(g.degrees()[:12]) == {7, 11}  # corner of one hexahedron: 7; on the shared face: 11
    assert_same_graph(g, reference_adjacency([base.cells[0].data], 14))


def test_repeated_node_in_an_element_adds_no_self_loop():
    g = graph_from_cells([np.array([[0, 1, 1, 2]])], 3)
    assert g.n_edges == 3 and all(v not in g.neighbours(v) for v in range(3))


@pytest.mark.parametrize("name", ["bracket.msh", "gusset.vtu", "frame.inp"])
def test_demo_meshes_match_reference(name):
    model = read_model(MESHES / name)
    blocks = [b.data for b in model.cells if b.type != "vertex"]
    assert_same_graph(node_graph(model), reference_adjacency(blocks, model.n_nodes))


def test_real_mixed_mesh_matches_reference():
    model = read_model(shared_path("meshes-real", "meshio", "flac3d_mesh_ex.f3grid"))
    blocks = [b.data for b in model.cells]
    assert_same_graph(node_graph(model), reference_adjacency(blocks, model.n_nodes))


def test_matrix_pattern_graph_keeps_explicit_zeros():
    # Explicit zeros are structure (the pattern is what a solver stores).
    a = sp.coo_matrix((np.array([1.0, 0.0, 2.0]), (np.array([0, 2, 1]), np.array([0, 0, 1]))),
                      shape=(3, 3))
    g = graph_from_matrix(a)
    assert list(g.neighbours(0)) == [2] and list(g.neighbours(2)) == [0]
    assert g.degrees()[1] == 0


@given(seed=st.integers(0, 10_000), keep=st.floats(0.05, 0.6))
def test_component_labels_match_scipy(seed, keep):
    # Reference library: scipy.sparse.csgraph.connected_components.
    from scipy.sparse.csgraph import connected_components

    from bandwise.core.graph import component_labels

    rng = np.random.default_rng(seed)
    model = tet_grid(4, 4, 3)
    tets = model.cells[0].data
    graph = graph_from_cells([tets[rng.random(len(tets)) < keep]], model.n_nodes)
    count, labels = component_labels(graph)
    ref_count, ref = connected_components(graph.to_scipy(), directed=False)
    assert count == ref_count
    # same partition: the label pairs correspond one to one
    pairs = set(zip(labels.tolist(), ref.tolist()))
    assert len(pairs) == count
