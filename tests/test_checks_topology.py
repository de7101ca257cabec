"""Facets and face-connected blocks (bandwise.algorithms.topology), checked by construction.

A slow, obvious reference implementation (facets in a dict, blocks by
networkx connected components) checks the compiled facet table on random
tetrahedra.  Face tables follow the VTK cell node ordering (Kitware, "VTK File Formats");
that a face listed in that order has its normal pointing out of a
positively oriented cell is the right-hand rule (common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from bandwise.algorithms import topology
from bandwise.algorithms.topology import (
    block_nodes,
    face_connected_blocks,
    facet_table,
    facets,
    group_node_sets,
    local_facets,
)
from bandwise.core.generate import hex_grid, quad_grid, tet_grid, triangle_grid
from bandwise.core.model import CellBlock, Model

UNIT = {
    "tetra": np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], float),
    "hexahedron": np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],
                            [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], float),
    # gmsh prism order, which meshio uses for "wedge"
    "wedge": np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [0, 1, 1]], float),
    "pyramid": np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0.5, 0.5, 1]], float),
}


@pytest.mark.parametrize("shape", sorted(UNIT))
def test_faces_point_outward(shape):
    # Right-hand rule: the normal of each face, in its listed order, points away
    # from the cell centroid (common practice; VTK File Formats node ordering).
    p = UNIT[shape]
    centre = p.mean(axis=0)
    for face in local_facets(shape):
        q = p[list(face)]
        normal = np.cross(q[1] - q[0], q[2] - q[0])
        assert normal @ (q.mean(axis=0) - centre) > 0, (shape, face)


@pytest.mark.parametrize("shape,n_faces,area", [("tetra", 4, 1.5 + np.sqrt(3) / 2),
                                                ("hexahedron", 6, 6.0)])
def test_faces_close_the_cell(shape, n_faces, area):
    # A closed surface: the vector areas of the outward faces sum to zero
    # (divergence theorem, common practice), and the unit cells' surface areas
    # are 3/2 + sqrt(3)/2 (tetrahedron) and 6 (cube).
    p = UNIT[shape]
    faces = local_facets(shape)
    assert len(faces) == n_faces
    vec = np.zeros(3)
    total = 0.0
    for face in faces:
        q = p[list(face)]
        a = 0.5 * sum(np.cross(q[i], q[(i + 1) % len(q)]) for i in range(len(q)))
        vec += a
        total += np.linalg.norm(a)
    assert np.allclose(vec, 0)
    assert total == pytest.approx(area)


def test_facets_array_layout():
    nodes, owner = facets("quad", np.array([[0, 1, 2, 3], [1, 4, 5, 2]]))
    assert nodes.tolist() == [[0, 1], [1, 2], [2, 3], [3, 0], [1, 4], [4, 5], [5, 2], [2, 1]]
    assert owner.tolist() == [0, 0, 0, 0, 1, 1, 1, 1]
    wedge, _ = facets("wedge15", np.arange(15)[None])
    assert wedge.shape == (5, 4) and (wedge[:2, 3] == -1).all()  # two padded triangles


@pytest.mark.parametrize("nx,ny,nz", [(3, 3, 3), (4, 3, 2)])
def test_free_faces_of_boxes(nx, ny, nz):
    # A box of (nx-1)(ny-1)(nz-1) cubes has 2[(nx-1)(ny-1) + (ny-1)(nz-1) + (nx-1)(nz-1)]
    # boundary squares; Kuhn's split gives two triangles per square (by construction).
    squares = 2 * ((nx - 1) * (ny - 1) + (ny - 1) * (nz - 1) + (nx - 1) * (nz - 1))
    hexes = facet_table(hex_grid(nx, ny, nz))
    assert int(hexes.is_free.sum()) == squares
    assert set(np.unique(hexes.multiplicity)) == {1, 2}
    tets = facet_table(tet_grid(nx, ny, nz))
    assert int(tets.is_free.sum()) == 2 * squares
    assert tets.n_blocks == hexes.n_blocks == 1


def test_plane_free_edges():
    # the boundary of an (nx-1) x (ny-1) grid has 2(nx-1) + 2(ny-1) edges
    t = facet_table(triangle_grid(5, 4))
    assert int(t.is_free.sum()) == 2 * 4 + 2 * 3


def _two_cubes(shift: tuple[float, float, float], glue: dict[int, int]) -> Model:
    """Two unit hexahedra, the second shifted; its node k replaced by node glue[k]."""
    a = hex_grid(2, 2, 2)
    second = a.cells[0].data + 8
    for k, v in glue.items():
        second[second == k + 8] = v
    pts = np.r_[a.points, a.points + np.array(shift)]
    return Model(points=pts, cells=[CellBlock("hexahedron", np.r_[a.cells[0].data, second])])


def test_cubes_touching_at_a_node_are_two_blocks():
    m = _two_cubes((1, 1, 1), {0: 7})  # node 0 (0,0,0) of the copy on node 7 (1,1,1)
    n, labels = face_connected_blocks(m)
    assert n == 2 and labels[0].tolist() == [0, 1]
    shared = np.intersect1d(*block_nodes(m, labels))
    assert shared.tolist() == [7]


def test_cubes_sharing_a_face_are_one_block():
    # hex_grid numbers nodes x fastest: the x = 0 nodes 0, 2, 4, 6 of the copy
    # land on the x = 1 nodes 1, 3, 5, 7 of the first cube
    m = _two_cubes((1, 0, 0), {0: 1, 2: 3, 4: 5, 6: 7})
    assert face_connected_blocks(m)[0] == 1


def test_tag_cells_get_no_block():
    # A triangle lying on a tetrahedron's face is a boundary/tag cell (rule of
    # bandwise.core.dofs): label -1, like a vertex cell.
    m = tet_grid(2, 2, 2)
    face = m.cells[0].data[0, :3]
    m = Model(points=m.points, cells=[m.cells[0], CellBlock("triangle", face[None]),
                                      CellBlock("vertex", np.array([[0]]))])
    n, labels = face_connected_blocks(m)
    assert n == 1
    assert labels[1].tolist() == [-1] and labels[2].tolist() == [-1]


def test_hashed_keys_match_packed_keys():
    # 35,937 nodes: four 16-bit corner ids no longer pack into 63 bits, so the
    # hashed path runs; it must give the same grouping as the closed formula.
    t = facet_table(hex_grid(33, 33, 33))
    assert int(t.is_free.sum()) == 6 * 32 * 32
    assert len(t.multiplicity) == 3 * 33 * 32 * 32


def test_group_node_sets_ignores_order():
    group, size = group_node_sets(np.array([[1, 2, 3], [3, 2, 1], [4, 5, 6], [2, 1, 3]]))
    assert group.tolist() == [0, 0, 1, 0] and size.tolist() == [3, 1]


def test_nodes_of_recovers_facets():
    m = quad_grid(3, 2)
    t = facet_table(m)
    nodes = t.nodes_of(np.arange(t.n_facets))
    expect, _ = facets("quad", m.cells[0].data)
    assert (nodes[:, :2] == expect).all() and (nodes[:, 2:] == -1).all()


def _reference_blocks(cells: np.ndarray, shape: str) -> tuple[dict, list[set]]:
    """Slow, obvious reference: facet multiplicities by dict, blocks by networkx."""
    import networkx as nx

    owners: dict[frozenset, list[int]] = {}
    for c, row in enumerate(cells):
        for face in local_facets(shape):
            owners.setdefault(frozenset(row[list(face)].tolist()), []).append(c)
    g = nx.Graph()
    g.add_nodes_from(range(len(cells)))
    for cs in owners.values():
        g.add_edges_from((cs[0], other) for other in cs[1:])
    return owners, [set(comp) for comp in nx.connected_components(g)]


@given(st.integers(0, 2**31 - 1), st.integers(1, 25), st.integers(5, 9))
def test_facets_and_blocks_match_a_slow_reference(seed, n_cells, n_nodes):
    rng = np.random.default_rng(seed)
    cells = np.array([rng.choice(n_nodes, 4, replace=False) for _ in range(n_cells)])
    model = Model(points=rng.random((n_nodes, 3)), cells=[CellBlock("tetra", cells)])
    owners, comps = _reference_blocks(cells, "tetra")
    t = facet_table(model)
    assert sorted(t.multiplicity.tolist()) == sorted(len(v) for v in owners.values())
    assert len(t.free) == sum(1 for v in owners.values() if len(v) == 1)
    n, labels = face_connected_blocks(model, t)
    assert n == len(comps)
    assert {frozenset(np.flatnonzero(labels[0] == k).tolist()) for k in range(n)} == \
        {frozenset(c) for c in comps}


@given(st.integers(0, 2**31 - 1), st.integers(1, 12), st.integers(1, 12), st.booleans())
def test_mixed_facets_match_a_slow_reference_packed_or_not(seed, n_hex, n_wedge, packed):
    # The facet table against a brute-force dictionary of facet node sets
    # (networkx for the blocks), for hexahedra and wedges sharing random
    # nodes, with the facets' corner ranks packed into one word or kept as
    # rows of ranks (the path of hexahedral meshes of over 2**21 nodes).
    import networkx as nx

    rng = np.random.default_rng(seed)
    n_nodes = 10
    hexes = np.array([rng.choice(n_nodes, 8, replace=False) for _ in range(n_hex)])
    wedges = np.array([rng.choice(n_nodes, 6, replace=False) for _ in range(n_wedge)])
    model = Model(points=rng.random((n_nodes, 3)),
                  cells=[CellBlock("hexahedron", hexes), CellBlock("wedge", wedges)])
    owners: dict[frozenset, list[int]] = {}
    for offset, (shape, cells) in enumerate((("hexahedron", hexes), ("wedge", wedges))):
        base = 0 if offset == 0 else n_hex
        for c, row in enumerate(cells):
            for face in local_facets(shape):
                owners.setdefault(frozenset(row[list(face)].tolist()), []).append(base + c)
    g = nx.Graph()
    g.add_nodes_from(range(n_hex + n_wedge))
    for cs in owners.values():
        g.add_edges_from((cs[0], other) for other in cs[1:])
    comps = {frozenset(c) for c in nx.connected_components(g)}
    saved = topology._PACKED_BITS
    topology._PACKED_BITS = 63 if packed else 0
    try:
        t = facet_table(model)
    finally:
        topology._PACKED_BITS = saved
    assert sorted(t.multiplicity.tolist()) == sorted(len(v) for v in owners.values())
    assert len(t.free) == sum(1 for v in owners.values() if len(v) == 1)
    labels = np.concatenate(face_connected_blocks(model, t)[1])
    assert {frozenset(np.flatnonzero(labels == k).tolist()) for k in range(t.n_blocks)} == comps
