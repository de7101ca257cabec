"""Equation numbering and the reduced system against the definitions on the explicit matrix.

The reduced system's figures are checked against the envelope definitions of
A. George and J. W. H. Liu, *Computer Solution of Large Sparse Positive
Definite Systems*, Prentice-Hall, 1981 (bandwidth, envelope/profile) and the
wavefront of S. W. Sloan, Int. J. Numer. Meth. Eng. 23 (1986) 239-251,
evaluated on the explicitly expanded DOF matrix with the held rows and
columns deleted, a slow obvious reference beside the fast path.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given
from hypothesis import strategies as st

from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.core.dofs import dof_layout
from bandwise.core.equations import equation_numbering
from bandwise.core.errors import InputError, MeshWriteError
from bandwise.core.generate import hex_grid, line_frame, quad_grid
from bandwise.core.graph import node_graph
from bandwise.core.metrics import metrics
from bandwise.core.model import CellBlock, Model
from bandwise.formats.node_map import write_dof_map


def _reference_figures(graph, layout, fixed, perm):
    """Bandwidth, profile, max wavefront by definition on the expanded, reduced matrix."""
    n = graph.n
    a = graph.to_scipy().toarray().astype(bool) | np.eye(n, dtype=bool)
    dofs = []                               # (node, bit) in new order, node-blocked
    for old in perm:
        for k in range(7):
            bit = 1 << k
            if layout.masks[old] & bit and not fixed[old] & bit:
                dofs.append(old)
    dofs = np.array(dofs, dtype=np.int64)
    m = a[np.ix_(dofs, dofs)]               # full coupling between DOFs of adjacent nodes
    first = np.array([int(np.argmax(m[i, :i + 1])) for i in range(len(dofs))])
    rows = np.arange(len(dofs))
    bandwidth = int((rows - first).max()) if len(dofs) else 0
    profile = int((rows - first).sum())
    front = [int(np.count_nonzero((first <= i) & (rows >= i))) for i in rows]
    return len(dofs), bandwidth, profile, max(front, default=0)


@given(st.integers(min_value=0, max_value=10**6), st.sampled_from(["quad", "hex", "mixed"]))
def test_reduced_figures_equal_the_definitions(seed: int, mesh: str) -> None:
    rng = np.random.default_rng(seed)
    if mesh == "quad":
        model = quad_grid(4, 3)
    elif mesh == "hex":
        model = hex_grid(3, 2, 2)
    else:  # a beam on a solid: nodes with 3 and with 6 DOFs
        solid = hex_grid(2, 2, 2)
        model = Model(points=np.vstack([solid.points, [[0.5, 0.5, 3.0]]]),
                      cells=[solid.cells[0], CellBlock("line", np.array([[6, 8]]))])
    layout = dof_layout(model)
    graph = node_graph(model)
    fixed = layout.masks & rng.integers(0, 128, size=model.n_nodes)
    fixed[rng.random(model.n_nodes) < 0.3] = 0
    full = rng.random(model.n_nodes) < 0.25        # some nodes wholly held
    fixed[full] = layout.masks[full]
    perm = rng.permutation(model.n_nodes)
    numbering = equation_numbering(layout, fixed, perm, graph)
    n_eq, band, prof, front = _reference_figures(graph, layout, fixed, perm)
    assert numbering.n_equations == n_eq == numbering.reduced.n_rows
    assert numbering.reduced.bandwidth == band
    assert numbering.reduced.profile == prof
    assert numbering.reduced.max_wavefront == front


def test_counts_and_node_order() -> None:
    model = quad_grid(3, 2)                         # 6 nodes, 12 DOFs
    layout = dof_layout(model)
    held = apply_supports(model, layout, [parse_support("plane x=0:fixed"),
                                          parse_support("node 3:uy")])
    perm = np.array([5, 4, 3, 2, 1, 0])
    numbering = equation_numbering(layout, held.fixed, perm)
    assert (numbering.n_dofs, numbering.n_fixed, numbering.n_equations) == (12, 5, 7)
    # DOFs listed in the new node order, within a node ux before uy
    assert numbering.node.tolist() == [5, 5, 4, 4, 3, 3, 2, 2, 1, 1, 0, 0]
    assert numbering.dof_names()[:2] == ["ux", "uy"]
    free = numbering.equation[numbering.equation >= 0]
    assert free.tolist() == list(range(7))          # consecutive, in listing order
    assert numbering.equation[numbering.node == 0].tolist() == [-1, -1]
    assert numbering.reduced is None


def test_no_held_dofs_equals_plain_metrics() -> None:
    model = hex_grid(3, 3, 2)
    layout = dof_layout(model)
    graph = node_graph(model)
    perm = np.random.default_rng(3).permutation(model.n_nodes)
    numbering = equation_numbering(layout, None, perm, graph)
    assert numbering.reduced == metrics(graph, perm, layout)
    assert numbering.n_fixed == 0


def test_whole_figures_are_reused_only_when_nothing_is_held() -> None:
    """With no DOF held the reduced system is the whole one; with one held it is measured."""
    model = hex_grid(3, 3, 2)
    layout = dof_layout(model)
    graph = node_graph(model)
    perm = np.random.default_rng(4).permutation(model.n_nodes)
    whole = metrics(graph, perm, layout)
    free = equation_numbering(layout, None, perm, graph, whole=whole)
    assert free.reduced is whole
    held = apply_supports(model, layout, [parse_support("plane x=0:fixed")])
    supported = equation_numbering(layout, held.fixed, perm, graph, whole=whole)
    assert supported.reduced == equation_numbering(layout, held.fixed, perm, graph).reduced
    assert supported.reduced.n_rows < whole.n_rows


def test_bad_input_is_an_input_error() -> None:
    model = quad_grid(2, 2)
    layout = dof_layout(model)
    with pytest.raises(InputError):
        equation_numbering(layout, np.zeros(3, dtype=np.int64))
    with pytest.raises(InputError):
        equation_numbering(layout, np.full(4, 4, dtype=np.int64))   # uz is not carried
    with pytest.raises(InputError):
        equation_numbering(layout, None, np.array([0, 0, 1, 2]))


def test_dof_map_csv(tmp_path) -> None:
    model = line_frame(np.array([[0.0, 0], [1, 0], [2, 0]]), np.array([[0, 1], [1, 2]]))
    model.node_ids = np.array([10, 20, 30])
    layout = dof_layout(model)                      # plane frame: ux uy rz
    held = apply_supports(model, layout, [parse_support("node 10:fixed")])
    numbering = equation_numbering(layout, held.fixed, np.array([2, 1, 0]))
    out = tmp_path / "map.csv"
    write_dof_map(out, numbering, model.node_ids, "node_id")
    rows = list(csv.reader(out.open()))
    assert rows[0] == ["node_id", "dof", "equation"]
    assert rows[1:4] == [["30", "ux", "1"], ["30", "uy", "2"], ["30", "rz", "3"]]
    assert rows[-1] == ["10", "rz", "fixed"] and len(rows) == 10
    assert [p.name for p in tmp_path.iterdir()] == ["map.csv"]   # no temporary left
    with pytest.raises(MeshWriteError):
        write_dof_map(tmp_path / "missing" / "map.csv", numbering)


def test_reduced_pattern_drops_wholly_held_nodes() -> None:
    # a chain of 4 nodes (1 DOF each) holding the 2nd node: rows of nodes 1 and 3
    # are no longer coupled, so the reduced 3 x 3 matrix is diagonal plus (3,4)
    model = line_frame(np.array([[0.0, 0], [1, 0], [2, 0], [3, 0]]),
                       np.array([[0, 1], [1, 2], [2, 3]]))
    layout = dof_layout(model, dofs_per_node=1)
    fixed = np.array([0, layout.masks[1], 0, 0])
    numbering = equation_numbering(layout, fixed, None, node_graph(model))
    reduced = sp.csr_matrix(np.array([[1, 0, 0], [0, 1, 1], [0, 1, 1]]))
    first = [int(row.indices.min()) for row in reduced]      # f_i of each row
    assert numbering.reduced.bandwidth == max(i - f for i, f in enumerate(first)) == 1
    assert numbering.reduced.profile == sum(i - f for i, f in enumerate(first)) == 1
    assert numbering.reduced.n_rows == reduced.shape[0]
