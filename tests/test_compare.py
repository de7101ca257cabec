"""Choosing the best numbering, and element order for a frontal solver.

The orderings used here are registered by the tests themselves (scipy's
reverse Cuthill-McKee wrapped, a seeded shuffle, a deliberate failure), so
these checks do not depend on bandwise's own orderings.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import reverse_cuthill_mckee

import bandwise.algorithms.orderings.compare as compare_mod
from bandwise.algorithms.orderings import OrderingInfo
from bandwise.algorithms.orderings.compare import OBJECTIVES, compare_orderings
from bandwise.algorithms.orderings.frontal import (
    element_order,
    front_width,
    frontal_reordering,
    reordered_elements,
    stiffness_cells,
)
from bandwise.core.dofs import dof_layout
from bandwise.core.errors import InputError
from bandwise.core.generate import hex_grid, quad_grid, scrambled, triangle_grid
from bandwise.core.graph import NodeGraph, node_graph
from bandwise.core.metrics import metrics
from bandwise.core.model import CellBlock, Model


def _scipy_rcm(graph: NodeGraph) -> np.ndarray:
    return reverse_cuthill_mckee(graph.to_scipy().tocsr(), symmetric_mode=True).astype(np.int64)


def _shuffle(graph: NodeGraph, seed: int = 0) -> np.ndarray:
    return np.random.default_rng(seed).permutation(graph.n)


def _broken(graph: NodeGraph) -> np.ndarray:
    raise RuntimeError("no luck on this graph")


def _same(graph: NodeGraph) -> np.ndarray:
    return np.arange(graph.n)


@pytest.fixture
def registry(monkeypatch):
    """A registry holding only the test's orderings."""
    reg = {
        "scipy-rcm": OrderingInfo("scipy-rcm", _scipy_rcm, "scipy RCM", "bandwidth"),
        "shuffle": OrderingInfo("shuffle", _shuffle, "seeded shuffle", "none"),
        "broken": OrderingInfo("broken", _broken, "always fails", "none"),
        "same": OrderingInfo("same", _same, "identity", "none"),
        "tiny-only": OrderingInfo("tiny-only", _same, "limited", "none", max_nodes=5),
    }
    monkeypatch.setattr(compare_mod, "ORDERINGS", reg)
    monkeypatch.setattr(compare_mod, "_fill_counter", lambda: _elimination_fill)
    return reg


def _elimination_fill(graph: NodeGraph, perm, dofs=1) -> int:
    """nnz(L) incl. diagonal by playing the elimination game on a dense matrix.

    George and Liu (1981), ch. 5: eliminating a node joins its later
    neighbours into a clique; L's column k holds k and those neighbours.
    Slow and obvious, for small graphs only; node level, or uniform d DOFs
    expanded explicitly.
    """
    d = int(dofs) if np.isscalar(dofs) else None
    a = graph.to_scipy().toarray().astype(bool)[np.ix_(perm, perm)]
    if d and d > 1:
        a = np.kron(a | np.eye(len(a), dtype=bool), np.ones((d, d), dtype=bool))
    a = a | np.eye(len(a), dtype=bool)
    n = len(a)
    total = 0
    for k in range(n):
        later = np.flatnonzero(a[k, k + 1:]) + k + 1
        total += 1 + later.size
        a[np.ix_(later, later)] = True
    return total


def _bandwidth_by_definition(graph: NodeGraph, perm) -> tuple[int, int]:
    """(bandwidth, profile) of P A P^T straight from the definition.

    George and Liu (1981): b = max over nonzeros of i - j (j <= i);
    P = sum over rows of i - f_i, f_i the first nonzero column of row i.
    """
    a = sp.csr_matrix(graph.to_scipy() + sp.identity(graph.n))[perm][:, perm].tocoo()
    low = a.row >= a.col
    rows, cols = a.row[low], a.col[low]
    first = np.full(graph.n, graph.n)
    np.minimum.at(first, rows, cols)
    return int((rows - cols).max()), int((np.arange(graph.n) - first).sum())


GRAPH = node_graph(scrambled(quad_grid(12, 7), seed=4))


def test_original_is_always_first_and_every_row_is_measured(registry):
    comp = compare_orderings(GRAPH, ["scipy-rcm", "shuffle"], "profile")
    assert [r.method for r in comp.rows] == ["original", "scipy-rcm", "shuffle"]
    assert comp.original.improvement == 1.0
    for r in comp.rows:
        assert np.array_equal(np.sort(r.perm), np.arange(GRAPH.n))  # a permutation
        assert r.nodes == metrics(GRAPH, r.perm)
        assert (r.nodes.bandwidth, r.nodes.profile) == _bandwidth_by_definition(GRAPH, r.perm)
        assert r.improvement == pytest.approx(comp.original.nodes.profile / r.nodes.profile)


@pytest.mark.parametrize("objective", ["bandwidth", "profile", "wavefront"])
def test_chosen_is_never_worse_than_the_original(registry, objective):
    for seed in range(3):
        graph = node_graph(scrambled(triangle_grid(9, 6), seed=seed))
        comp = compare_orderings(graph, ["scipy-rcm", "shuffle"], objective)
        assert comp.best.value(objective) <= comp.original.value(objective)
        assert comp.best.value(objective) == min(r.value(objective) for r in comp.rows)


def test_a_good_original_numbering_is_kept(registry):
    # A grid numbered row by row along its short side is already near the
    # best bandwidth (common practice); a random shuffle can only lose.
    graph = node_graph(quad_grid(4, 30))
    comp = compare_orderings(graph, ["shuffle"], "profile")
    assert comp.best.method == "original"


def test_ties_go_to_the_original_deterministically(registry):
    comp = compare_orderings(GRAPH, ["same", "scipy-rcm"], "bandwidth")
    same = comp.rows[1]
    assert same.value("bandwidth") == comp.original.value("bandwidth")
    again = compare_orderings(GRAPH, ["same", "scipy-rcm"], "bandwidth")
    assert comp.best.method == again.best.method
    only_ties = compare_orderings(GRAPH, ["same"], "profile")
    assert only_ties.best.method == "original"


def test_wavefront_objective_uses_rms_then_max(registry):
    comp = compare_orderings(GRAPH, ["scipy-rcm", "shuffle"], "wavefront")
    key = min((r.dofs.rms_wavefront, r.dofs.max_wavefront) for r in comp.rows)
    assert (comp.best.dofs.rms_wavefront, comp.best.dofs.max_wavefront) == key


def test_fill_objective_picks_the_smallest_factor(registry):
    comp = compare_orderings(GRAPH, ["scipy-rcm", "shuffle"], "fill")
    for r in comp.rows:
        assert r.fill == _elimination_fill(GRAPH, r.perm)
    assert comp.best.fill == min(r.fill for r in comp.rows)


def test_fill_without_the_symbolic_module_is_a_clear_error(registry, monkeypatch):
    monkeypatch.setattr(compare_mod, "_fill_counter", lambda: None)
    with pytest.raises(InputError, match="symbolic"):
        compare_orderings(GRAPH, ["scipy-rcm"], "fill")
    comp = compare_orderings(GRAPH, ["scipy-rcm"], "profile")  # other objectives still run
    assert all(r.fill is None for r in comp.rows) and "not available" in comp.fill_note


def test_fill_is_skipped_on_large_graphs_unless_it_is_the_objective(registry):
    comp = compare_orderings(GRAPH, ["scipy-rcm"], "profile", fill_max_nodes=10)
    assert all(r.fill is None for r in comp.rows) and "not counted" in comp.fill_note
    comp = compare_orderings(GRAPH, ["scipy-rcm"], "fill", fill_max_nodes=10)
    assert all(r.fill is not None for r in comp.rows)


def test_dof_level_figures_follow_the_closed_form(registry):
    # b_dof = d*b + d - 1 for d DOFs per node numbered node after node
    # (bandwise.core.metrics, from the definitions of George and Liu 1981).
    model = scrambled(quad_grid(8, 5), seed=1)
    layout = dof_layout(model)             # plane quads: 2 DOFs per node
    comp = compare_orderings(node_graph(model), ["scipy-rcm"], "bandwidth", layout)
    for r in comp.rows:
        assert r.dofs.bandwidth == 2 * r.nodes.bandwidth + 1
        assert r.dofs.n_rows == 2 * model.n_nodes
        assert r.fill == _elimination_fill(node_graph(model), r.perm, 2)


def test_unknown_method_or_objective_lists_the_valid_ones(registry):
    with pytest.raises(InputError) as info:
        compare_orderings(GRAPH, ["nope"])
    assert "scipy-rcm" in str(info.value) and "auto" in str(info.value)
    with pytest.raises(InputError) as info:
        compare_orderings(GRAPH, "auto", "speed")
    assert all(o in str(info.value) for o in OBJECTIVES)


def test_a_failing_method_is_a_row_not_a_crash(registry):
    comp = compare_orderings(GRAPH, ["broken", "scipy-rcm"])
    broken = comp.rows[1]
    assert broken.error is not None and "no luck" in broken.error
    assert broken.perm is None and broken.improvement is None
    assert comp.best.method == "scipy-rcm"


def test_auto_tries_what_admits_the_graph(registry):
    comp = compare_orderings(GRAPH, "auto")
    names = [r.method for r in comp.rows]
    # with the default effort a small graph's best profile numbering is refined too
    assert names == ["original", "broken", "same", "scipy-rcm", "shuffle", "refined"]
    assert "tiny-only" in comp.skipped
    small = node_graph(quad_grid(2, 2))
    assert "tiny-only" in [r.method for r in compare_orderings(small, "auto").rows]


def test_options_reach_the_method(registry):
    registry["seeded"] = OrderingInfo("seeded", _shuffle, "seeded shuffle", "none")
    a = compare_orderings(GRAPH, ["seeded"], options={"seeded": {"seed": 1}})
    b = compare_orderings(GRAPH, ["seeded"], options={"seeded": {"seed": 2}})
    assert np.array_equal(a.rows[1].perm, _shuffle(GRAPH, 1))
    assert not np.array_equal(a.rows[1].perm, b.rows[1].perm)


def test_table_and_dict_are_plain_data(registry):
    comp = compare_orderings(GRAPH, ["scipy-rcm", "broken"])
    table = comp.table()
    assert [t["method"] for t in table] == ["original", "scipy-rcm", "broken"]
    assert sum(t["chosen"] for t in table) == 1
    assert table[1]["profile"] == comp.rows[1].dofs.profile
    doc = json.loads(json.dumps(comp.to_dict()))
    assert doc["chosen"] == comp.best.method and len(doc["methods"]) == 3
    assert "best=" in repr(comp)


# ---------------------------------------------------------------- frontal order

def test_front_of_a_strip_is_four_nodes():
    # A 1 x n strip of quads assembled along its length: at every step the
    # front holds the two nodes of the edge behind and the two of the edge
    # ahead, 4 nodes (common practice; Irons 1970's front definition).
    for n in (1, 2, 7, 40):
        strip = quad_grid(n + 1, 2)
        front = front_width(strip, dofs=2)
        assert (front.steps, front.max_nodes, front.rms_nodes) == (n, 4, 4.0)
        assert (front.max_dofs, front.rms_dofs) == (8, 8.0)


@pytest.mark.parametrize("nx, ny", [(6, 2), (8, 3), (5, 5)])
def test_front_of_a_grid_assembled_across_is_ny_plus_3(nx, ny):
    # nx x ny quads, elements taken column by column (ny per column): at the
    # element in row j of column i the front holds the nodes of line i with
    # y >= j and those of line i + 1 with y <= j + 1, so ny + 3 nodes once
    # past the first column (counted from the definition; Irons 1970).
    grid = quad_grid(nx + 1, ny + 1)      # elements stored row by row (x fastest)
    across = np.arange(nx * ny).reshape(ny, nx).T.ravel()
    front = front_width(grid, [across])
    assert front.max_nodes == ny + 3
    # row by row instead: the front spans a whole row of nodes, nx + 3
    assert front_width(grid).max_nodes == nx + 3


def test_element_order_is_a_permutation_of_each_block():
    model = scrambled(hex_grid(4, 3, 3), seed=2)
    model.cells.append(CellBlock("vertex", np.array([[0], [5]])))
    order = element_order(model)
    assert np.array_equal(np.sort(order[0]), np.arange(len(model.cells[0])))
    assert order[1] is None                       # vertex cells are not assembled
    low = model.cells[0].data[order[0]].min(axis=1)
    assert np.all(np.diff(low) >= 0)              # by lowest node


def test_front_never_exceeds_the_nodal_wavefront():
    # With elements sorted by lowest node, node v is in the front exactly from
    # the elements of lowest node f_v to those of lowest node v, so the front
    # is bounded by the matrix wavefront (argued in bandwise.algorithms.orderings.frontal from the
    # definitions of Irons 1970 and George and Liu 1981).
    for seed in range(4):
        model = scrambled(triangle_grid(7, 9), seed=seed)
        front = front_width(model, element_order(model))
        assert front.max_nodes <= metrics(node_graph(model)).max_wavefront


def test_reordered_elements_carry_fields_and_sets():
    model = scrambled(quad_grid(6, 4), seed=3)
    cells = model.cells[0].data
    model.cell_data["material"] = [np.arange(len(cells)) * 10]
    model.cell_data["thickness"] = [np.linspace(1, 2, len(cells))[:, None].repeat(2, axis=1)]
    model.cell_sets["flange"] = [np.array([0, 3, 7, 11])]
    order = element_order(model)
    new = reordered_elements(model, order)
    assert np.array_equal(new.cells[0].data, cells[order[0]])
    for name in model.cell_data:
        assert np.array_equal(new.cell_data[name][0], model.cell_data[name][0][order[0]])
    old_members = {tuple(c) for c in cells[model.cell_sets["flange"][0]]}
    new_members = {tuple(c) for c in new.cells[0].data[new.cell_sets["flange"][0]]}
    assert old_members == new_members
    assert np.array_equal(new.points, model.points)     # nodes untouched
    with pytest.raises(InputError):
        reordered_elements(model, [np.zeros(len(cells), dtype=np.int64)])


def test_reordering_shrinks_a_shuffled_element_order_and_keeps_a_good_one():
    model = quad_grid(12, 5)
    kept = frontal_reordering(model)
    assert kept.kept_file_order and kept.after == kept.before
    shuffled = reordered_elements(model, [np.random.default_rng(0).permutation(44)])
    chosen = frontal_reordering(shuffled)
    assert not chosen.kept_file_order
    assert chosen.after.rms_nodes < chosen.before.rms_nodes
    assert chosen.after.max_nodes == front_width(model).max_nodes  # back to row order's front


def test_boundary_cells_on_solids_are_not_assembled():
    solid = hex_grid(3, 3, 2)
    face = solid.cells[0].data[:, :4]                 # the bottom faces of the hexahedra
    model = Model(solid.points, [solid.cells[0], CellBlock("quad", face)])
    masks = stiffness_cells(model)
    assert masks[0].all() and not masks[1].any()
    assert front_width(model) == front_width(solid)
