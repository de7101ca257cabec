"""Coincident nodes, weak joints, cracks and hanging nodes, on meshes built by construction.

Expected answers follow from how each mesh is built (two blocks meshed
apart with coincident interface nodes, a block and a copy touching at a
node or along an edge, a plate with a slit); that a single shared node or
edge carries no moment between displacement elements is common practice.
"""

from __future__ import annotations

import numpy as np
import pytest

from bandwise.algorithms.checks import CheckOptions, run_checks
from bandwise.core.errors import InputError
from bandwise.core.generate import hex_grid, quad_grid
from bandwise.core.model import CellBlock, Model


def _codes(model, **opts):
    return {f.code: f for f in run_checks(model, options=CheckOptions(**opts))}


def two_plates(gap: float = 0.0) -> Model:
    """Two 3 x 2 quad plates side by side, meshed apart: x in [0, 3] and [3 + gap, 6 + gap]."""
    a = quad_grid(4, 3)
    right = a.points.copy()
    right[:, 0] += 3.0 + gap
    return Model(points=np.r_[a.points, right],
                 cells=[CellBlock("quad", np.r_[a.cells[0].data, a.cells[0].data + 12])])


def test_unmerged_seam_two_parts_one_if_merged():
    found = _codes(two_plates())
    seam = found["nodes.coincident_seam"]
    assert found["parts.disconnected"].count == 2
    assert seam.count == 3 and seam.details[0]["parts_after_merge"] == 1
    assert set(seam.node_ids) == {4, 8, 12, 13, 17, 21}  # 1-based positions
    assert found["facets.coincident_free"].count == 2  # the two edges of the seam


@pytest.mark.parametrize("tol,seen", [(0.011, True), (0.009, False)])
def test_tolerance_just_above_and_below_the_gap(tol, seen):
    found = _codes(two_plates(gap=0.01), tolerance=tol)
    assert ("nodes.coincident_seam" in found) is seen


def test_default_tolerance_is_relative_to_the_shortest_edge():
    # 1/1000 of the shortest edge (1.0): a gap of 1e-4 is merged, 1e-2 is not
    assert "nodes.coincident_seam" in _codes(two_plates(gap=1e-4))
    assert "nodes.coincident_seam" not in _codes(two_plates(gap=1e-2))
    assert "nodes.coincident_seam" in _codes(two_plates(gap=1e-2), relative_tolerance=0.02)


@pytest.mark.parametrize("bad", [0.0, -1.0])
def test_bad_tolerance_is_refused(bad):
    with pytest.raises(InputError):
        CheckOptions(tolerance=bad)
    with pytest.raises(InputError):
        CheckOptions(relative_tolerance=bad)


def _cube_and_copy(shift, glue) -> Model:
    a = hex_grid(2, 2, 2)
    second = a.cells[0].data + 8
    for k, v in glue.items():
        second[second == k + 8] = v
    return Model(points=np.r_[a.points, a.points + np.array(shift, float)],
                 cells=[CellBlock("hexahedron", np.r_[a.cells[0].data, second])])


def test_cubes_touching_at_one_node_form_a_hinge():
    found = _codes(_cube_and_copy((1, 1, 1), {0: 7}))
    joint = found["joints.single_node"]
    assert joint.severity == "error" and joint.node_ids == (8,)
    assert joint.details[0]["regions"] == [1, 2]
    assert found["nodes.articulation"].node_ids == (8,)
    assert "parts.disconnected" not in found


def test_cubes_sharing_an_edge_form_a_hinge_line():
    # copy shifted by (1, 1, 0): its edge x = y = 0 lies on the first's x = y = 1 edge
    found = _codes(_cube_and_copy((1, 1, 0), {0: 3, 4: 7}))
    joint = found["joints.edge_only"]
    assert joint.severity == "error" and set(joint.node_ids) == {4, 8}
    assert "joints.single_node" not in found


def test_line_attached_by_one_node_to_a_solid():
    a = hex_grid(2, 2, 2)
    pts = np.r_[a.points, [[3.0, 1.0, 1.0]]]
    m = Model(points=pts, cells=[a.cells[0], CellBlock("line", np.array([[7, 8]]))])
    assert _codes(m)["joints.line_one_node"].node_ids == (8,)


def test_plate_with_a_slit():
    # A 4 x 2 quad plate cut along y = 1 between x = 0 and x = 2: the nodes on
    # the slit are doubled, so the two lips are free edges lying on each other.
    m = quad_grid(5, 3)
    pts = m.points.copy()
    data = m.cells[0].data.copy()
    lip = np.array([5, 6])  # nodes (0, 1) and (1, 1); node 7 (2, 1) is the slit tip
    new = np.arange(len(pts), len(pts) + 2)
    pts = np.r_[pts, pts[lip]]
    above = np.flatnonzero(m.points[data].mean(axis=1)[:, 1] > 1)  # quads above the slit
    for old, nw in zip(lip, new):
        data[above] = np.where(data[above] == old, nw, data[above])
    found = _codes(Model(points=pts, cells=[CellBlock("quad", data)]))
    assert found["facets.coincident_free"].count == 2  # two slit segments
    assert found["nodes.coincident"].count == 2  # inside one part: a crack, not a seam
    assert "parts.disconnected" not in found


def test_hanging_nodes_between_coarse_and_fine():
    # a 1 x 1 coarse quad beside two 0.5-high fine quads: node (1, 0.5) hangs
    pts = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],
                    [2, 0, 0], [2, 0.5, 0], [1, 0.5, 0], [2, 1, 0]], float)
    quads = np.array([[0, 1, 2, 3], [1, 4, 5, 6], [6, 5, 7, 2]])
    found = _codes(Model(points=pts, cells=[CellBlock("quad", quads)]))
    assert found["nodes.hanging"].node_ids == (7,)
    assert found["joints.nonconforming"].count == 1


def test_only_vertex_cells():
    m = Model(points=np.zeros((2, 3)), cells=[CellBlock("vertex", np.array([[0], [1]]))])
    found = _codes(m)
    assert found["mesh.no_elements"].severity == "error"
    assert found["nodes.point_only"].count == 2


def test_orphans_and_point_only_nodes():
    m = quad_grid(3, 3)
    pts = np.r_[m.points, [[9.0, 9, 0], [8.0, 8, 0]]]
    model = Model(points=pts, cells=[m.cells[0], CellBlock("vertex", np.array([[10]]))])
    found = _codes(model)
    assert found["nodes.orphan"].node_ids == (10,)
    assert found["nodes.point_only"].node_ids == (11,)
    model.node_ids = np.arange(101, 113)
    found = _codes(model)
    assert found["nodes.orphan"].node_ids == (110,)
    assert found["nodes.orphan"].node_id_kind == "original node id"


def test_unanalysed_blocks_are_listed_not_dropped():
    m = quad_grid(3, 3)
    poly = np.empty(1, dtype=object)
    poly[0] = np.array([0, 1, 4, 3, 0, 1])
    model = Model(points=m.points, cells=[m.cells[0], CellBlock("polyhedron6", poly)])
    found = _codes(model)
    assert found["mesh.skipped_blocks"].where == ("polyhedron6 (1 cells)",)


def test_facet_table_built_on_a_second_thread_gives_the_same_findings(monkeypatch):
    # Same mesh, same findings (and order) whether the facet table is built
    # alongside the other checks or before them: the run order of the checks
    # must not leak into the result (common practice for a concurrent step).
    import bandwise.algorithms.checks as checks

    model = _cube_and_copy((1, 1, 1), {0: 7})
    before = [f.to_dict() for f in run_checks(model)]
    monkeypatch.setattr(checks, "BACKGROUND_TABLE_CELLS", 0)
    threaded = [f.to_dict() for f in run_checks(model)]
    assert threaded == before
    assert "joints.single_node" in [f["code"] for f in threaded]
