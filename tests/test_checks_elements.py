"""Element checks: measures against exact formulas, orientation by the right-hand rule.

Sources: triangle area = |(b - a) x (c - a)| / 2 and tetrahedron volume =
(b - a) . ((c - a) x (d - a)) / 6 (common practice); positive orientation
of each cell type from the VTK cell node ordering (Kitware, "VTK File
Formats"): counter-clockwise plane cells, tetrahedron 0-1-2 counter-clockwise
seen from node 3, hexahedron bottom face 0-1-2-3 counter-clockwise seen from
the top 4-5-6-7; reversing the node order of a solid gives a negative volume
(right-hand rule, common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from bandwise.algorithms.checks import run_checks
from bandwise.algorithms.checks.measures import (
    corner_jacobians,
    plane_signed_area,
    solid_measures,
    solid_volume,
)
from bandwise.core.generate import hex_grid, quad_grid, tet_grid, triangle_grid
from bandwise.core.model import CellBlock, Model

coords = arrays(np.float64, (4, 3), elements=st.floats(-10, 10, allow_nan=False))


@given(coords)
def test_tetra_volume_is_one_sixth_of_the_triple_product(p):
    a, b, c, d = p
    exact = np.dot(b - a, np.cross(c - a, d - a)) / 6.0
    v = solid_volume("tetra", p[None])[0]
    vk, low, _ = solid_measures("tetra", p, np.arange(4)[None])
    assert v == pytest.approx(exact, abs=1e-9)
    assert vk[0] == pytest.approx(exact, abs=1e-9)
    assert low[0] == pytest.approx(6 * exact, abs=1e-8)


@given(coords)
def test_triangle_area_is_half_the_cross_product(p):
    q = p[:3].copy()
    q[:, 2] = 0.0
    exact = 0.5 * np.cross(q[1] - q[0], q[2] - q[0])[2]
    assert plane_signed_area(q[None])[0] == pytest.approx(exact, abs=1e-9)


def test_hexahedron_volume_of_a_sheared_brick():
    # A parallelepiped spanned by u, v, w has volume u . (v x w) (common practice).
    u, v, w = np.array([2.0, 0, 0]), np.array([0.5, 1.5, 0]), np.array([0.3, 0.2, 1.2])
    corners = np.array([0 * u, u, u + v, v, w, u + w, u + v + w, v + w])
    expect = np.dot(u, np.cross(v, w))
    assert solid_volume("hexahedron", corners[None])[0] == pytest.approx(expect)
    assert corner_jacobians("hexahedron", corners[None]).min() == pytest.approx(expect)
    vk, low, _ = solid_measures("hexahedron", corners, np.arange(8)[None])
    assert vk[0] == pytest.approx(expect) and low[0] == pytest.approx(expect)


def test_wedge_and_pyramid_volumes():
    # unit right prism over a half square: 1/2; pyramid on the unit square, height 1: 1/3
    wedge = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [0, 1, 1]], float)
    pyramid = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0.3, 0.6, 1]], float)
    assert solid_volume("wedge", wedge[None])[0] == pytest.approx(0.5)
    assert solid_volume("pyramid", pyramid[None])[0] == pytest.approx(1 / 3)


def test_generated_meshes_are_clean():
    # the generators build positively oriented, non-degenerate cells (by construction)
    for model in (tet_grid(3, 3, 3), hex_grid(3, 3, 3), quad_grid(4, 3), triangle_grid(4, 3)):
        codes = {f.code for f in run_checks(model)}
        assert not any(c.startswith("elements.") for c in codes), codes


def _codes(model):
    return {f.code: f for f in run_checks(model)}


def test_reversed_tetrahedron_is_inverted():
    m = tet_grid(3, 3, 3)
    data = m.cells[0].data.copy()
    data[5] = data[5, [0, 2, 1, 3]]  # one swap: the right-hand rule gives V < 0
    f = _codes(Model(points=m.points, cells=[CellBlock("tetra", data)]))["elements.inverted"]
    assert f.count == 1 and f.element_ids == (6,) and f.severity == "error"


def test_mirrored_hexahedron_is_inverted_and_a_twisted_one_distorted():
    m = hex_grid(3, 2, 2)
    data = m.cells[0].data.copy()
    data[0] = data[0, [4, 5, 6, 7, 0, 1, 2, 3]]  # top and bottom swapped: mirrored
    pts = m.points.copy()
    found = _codes(Model(points=pts, cells=[CellBlock("hexahedron", data)]))
    assert found["elements.inverted"].element_ids == (1,)
    # push one top corner of the second cell far down through its bottom face
    twisted = m.points.copy()
    top = m.cells[0].data[1, 6]
    twisted[top, 2] = -0.9
    found = _codes(Model(points=twisted, cells=[CellBlock("hexahedron", m.cells[0].data)]))
    assert 2 in found["elements.distorted"].element_ids


def test_clockwise_quad_and_collapsed_cells():
    m = quad_grid(3, 3)
    data = m.cells[0].data.copy()
    data[0] = data[0, ::-1]  # clockwise seen from +z
    data[1] = [data[1, 0], data[1, 0], data[1, 2], data[1, 3]]  # a node listed twice
    pts = m.points.copy()
    found = _codes(Model(points=pts, cells=[CellBlock("quad", data)]))
    assert found["elements.clockwise"].element_ids == (1,)
    assert found["elements.repeated_nodes"].element_ids == (2,)


def test_zero_area_triangle():
    pts = np.array([[0, 0, 0], [1, 0, 0], [2, 0, 0], [0, 1, 0]], float)  # 0, 1, 2 collinear
    m = Model(points=pts, cells=[CellBlock("triangle", np.array([[0, 1, 3], [0, 1, 2]]))])
    assert _codes(m)["elements.zero_measure"].element_ids == (2,)


def test_duplicate_elements_across_blocks():
    m = tet_grid(3, 3, 3)
    copy = m.cells[0].data[[2, 9]][:, [1, 2, 3, 0]]  # same node sets, other order
    found = _codes(Model(points=m.points, cells=[m.cells[0], CellBlock("tetra", copy)]))
    f = found["elements.duplicate"]
    assert f.count == 2 and f.element_ids == (len(m.cells[0]) + 1, len(m.cells[0]) + 2)


def test_beam_inside_a_plate_has_another_dimension_but_tag_edges_do_not():
    m = quad_grid(3, 3)
    pts = np.r_[m.points, [[3.0, 0, 0]]]
    beam = np.array([[2, 9]])  # sticks out of the plate: a structural line element
    edge = np.array([[0, 1]])  # lies on the plate: a boundary/tag cell, not reported
    model = Model(points=pts, cells=[m.cells[0], CellBlock("line", beam),
                                     CellBlock("line", edge)])
    f = _codes(model)["elements.mixed_dimension"]
    assert f.count == 1 and f.element_ids == (5,)


def test_a_block_inverted_throughout_points_at_the_node_order_convention():
    m = tet_grid(3, 3, 3)
    data = m.cells[0].data[:, [0, 2, 1, 3]]  # every tetrahedron mirrored
    f = _codes(Model(points=m.points, cells=[CellBlock("tetra", data)]))["elements.inverted"]
    assert f.count == len(data) and "node-order convention" in f.message
    one = m.cells[0].data.copy()
    one[0] = one[0, [0, 2, 1, 3]]
    f = _codes(Model(points=m.points, cells=[CellBlock("tetra", one)]))["elements.inverted"]
    assert "node-order convention" not in f.message
