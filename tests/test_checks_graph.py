"""Parts and articulation nodes against reference libraries, on random meshes.

References: scipy.sparse.csgraph.connected_components; networkx
articulation_points (J. Hopcroft, R. Tarjan, "Algorithm 447: efficient
algorithms for graph manipulation", CACM 16(6), 1973).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
from hypothesis import given
from hypothesis import strategies as st
from scipy.sparse.csgraph import connected_components

from bandwise.algorithms.checks import CheckOptions, articulation_nodes, run_checks
from bandwise.algorithms.checks.context import CheckContext
from bandwise.core.graph import node_graph
from bandwise.core.model import CellBlock, Model


@st.composite
def random_meshes(draw):
    """Up to 40 nodes, random triangles and lines (some nodes left unused)."""
    n = draw(st.integers(3, 40))
    rng = np.random.default_rng(draw(st.integers(0, 2**31 - 1)))
    n_tri = draw(st.integers(1, 30))
    tri = np.array([rng.choice(n, 3, replace=False) for _ in range(n_tri)], dtype=np.int64)
    n_line = draw(st.integers(0, 10))
    lines = np.array([rng.choice(n, 2, replace=False) for _ in range(n_line)],
                     dtype=np.int64).reshape(-1, 2)
    cells = [CellBlock("triangle", tri)]
    if len(lines):
        cells.append(CellBlock("line", lines))
    pts = np.column_stack([rng.random((n, 2)), np.zeros(n)])
    return Model(points=pts, cells=cells)


@given(random_meshes())
def test_parts_match_scipy_components(model):
    graph = node_graph(model)
    ctx = CheckContext(model, graph, CheckOptions())
    n_parts, part = ctx.parts
    _, comp = connected_components(graph.to_scipy(), directed=False)
    used = np.zeros(model.n_nodes, dtype=bool)
    for b in model.cells:
        used[b.data.ravel()] = True
    assert (part >= 0).tolist() == used.tolist()
    # the same partition of the used nodes: a bijection between labels
    pairs = set(zip(part[used].tolist(), comp[used].tolist()))
    assert len(pairs) == n_parts == len(set(comp[used].tolist()))


@given(random_meshes())
def test_articulation_nodes_match_networkx(model):
    graph = node_graph(model)
    g = nx.from_scipy_sparse_array(graph.to_scipy())
    expect = sorted(nx.articulation_points(g))
    assert articulation_nodes(graph).tolist() == expect


def test_articulation_nodes_of_a_path_and_a_bow_tie():
    # a path a-b-c-d: b and c are cut vertices; two triangles sharing a node: that node
    path = Model(points=np.zeros((4, 3)), cells=[CellBlock("line", np.array([[0, 1], [1, 2],
                                                                             [2, 3]]))])
    assert articulation_nodes(node_graph(path)).tolist() == [1, 2]
    bow = Model(points=np.zeros((5, 3)),
                cells=[CellBlock("triangle", np.array([[0, 1, 2], [2, 3, 4]]))])
    assert articulation_nodes(node_graph(bow)).tolist() == [2]


def test_two_parts_reported_with_sizes():
    pts = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [5, 0, 0], [6, 0, 0], [5, 1, 0]], float)
    m = Model(points=pts, cells=[CellBlock("triangle", np.array([[0, 1, 2], [3, 4, 5]]))],
              point_sets={"load": np.array([4])})
    found = {f.code: f for f in run_checks(m)}
    f = found["parts.disconnected"]
    assert f.severity == "error" and f.count == 2
    assert [d["nodes"] for d in f.details] == [3, 3]
    assert f.details[1]["bounding_box"] == [[5.0, 0.0, 0.0], [6.0, 1.0, 0.0]]
    assert "node set load" in f.details[1]["sets"] and f.details[0]["sets"] == []
