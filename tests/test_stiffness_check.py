"""``--stiffness-check``: the null space of the supported stiffness, whole and piece by piece.

Every count is compared with two things outside the inertia code: the
kinematic count (rigid-body kinematics: 6 rigid motions of a free body in
space, 3 in the plane; each DOF no element stiffens is a zero-energy mode by
itself) and, where the matrix is small enough, the null-space dimension from
numpy's dense symmetric eigen-solver (LAPACK), eigenvalues below 1e-9 of the
largest counted zero, with the gap to the next one checked to be wide.

The three counts the old shift-invert check got wrong (free space frame 5
for 6; plate with 7 loose nodes 11 for 17; plane frame held at one node 1
for 0, its smallest eigenvalue 5.3e-9 of the largest under a fixed cut of
1e-8) are here, each through both paths.
"""

from __future__ import annotations

import numpy as np
import pytest

from bandwise.algorithms.rigid import zero_energy_modes
from bandwise.algorithms.stiffness import (
    assemble_stiffness,
    free_block,
    stiffness_pieces,
    verify_stiffness,
)
from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.core.dofs import dof_layout
from bandwise.core.generate import hex_grid, line_frame, quad_grid, tet_grid
from bandwise.core.model import CellBlock, Model

#: Force the piece-by-piece count on small models, with small pieces.
PIECES = {"whole_dofs": 1, "piece_dofs": 150}


def _grid_frame(n: int, dims: int) -> Model:
    """A frame of unit members along the grid lines of n^dims nodes (x fastest)."""
    idx = np.arange(n ** dims).reshape((n,) * dims)
    pts = np.stack(np.unravel_index(np.arange(n ** dims), idx.shape)[::-1], axis=1).astype(float)
    edges = [np.stack([np.moveaxis(idx, a, 0)[:-1].ravel(), np.moveaxis(idx, a, 0)[1:].ravel()],
                      axis=1) for a in range(dims)]
    return line_frame(pts, np.vstack(edges))


def _with_loose_nodes(model: Model, k: int) -> Model:
    far = np.column_stack([100.0 + np.arange(k), np.zeros(k), np.zeros(k)])
    return Model(points=np.vstack([model.points, far]), cells=model.cells)


def _joined(a: Model, offset) -> Model:
    """Two copies of a model, the second shifted, coincident nodes merged."""
    pts = np.vstack([a.points, a.points + np.asarray(offset, dtype=float)])
    cells = np.vstack([a.cells[0].data, a.cells[0].data + a.n_nodes])
    unique, inverse = np.unique(np.round(pts, 9), axis=0, return_inverse=True)
    return Model(points=unique, cells=[CellBlock(a.cells[0].type, inverse.ravel()[cells])])


def _dense_null(model: Model, layout, held) -> int:
    k = free_block(assemble_stiffness(model, layout).matrix, layout, held.fixed).toarray()
    w = np.linalg.eigvalsh(k)
    zero = w < 1e-9 * w[-1]
    if zero.any() and (~zero).any():           # the reference itself has a clear gap
        assert w[~zero][0] > 1e3 * max(w[zero].max(), 1e-16 * w[-1])
    return int(zero.sum())


def _checks(model: Model, supports=(), **opts):
    layout = dof_layout(model, **opts)
    held = apply_supports(model, layout, [parse_support(s) for s in supports])
    analysis = zero_energy_modes(model, layout, held)
    whole = verify_stiffness(model, layout, held, analysis)
    pieces = verify_stiffness(model, layout, held, analysis, **PIECES)
    return analysis, whole, pieces, layout, held


CASES = {
    # name: (model, supports, dof options, truth)
    "free space frame": (_grid_frame(5, 3), (), {}, 6),
    "plane frame held at one node": (
        line_frame(np.column_stack([np.zeros(101), np.arange(101.0)]),
                   np.column_stack([np.arange(100), np.arange(1, 101)])), ("node 1:fixed",), {}, 0),
    "plate with 7 loose nodes": (_with_loose_nodes(quad_grid(12, 10), 7), (), {}, 17),
    "two separate solids": (Model(points=np.vstack([tet_grid(3, 3, 2).points,
                                                    tet_grid(3, 3, 2).points + 10]),
                                  cells=[CellBlock("tetra", np.vstack(
                                      [tet_grid(3, 3, 2).cells[0].data,
                                       tet_grid(3, 3, 2).cells[0].data + 18]))]), (), {}, 12),
    "cubes joined at a node": (_joined(hex_grid(3, 3, 3), [2, 2, 2]), (), {}, 9),
    "cubes joined along an edge": (_joined(hex_grid(3, 3, 3), [2, 0, 2]), (), {}, 7),
    "plate held on one edge": (quad_grid(12, 10), ("plane x=0:fixed",), {}, 0),
    "pin-jointed plane truss": (
        line_frame(np.array([[0.0, 0], [1, 0], [2, 0], [0.5, 1], [1.5, 1]]),
                   np.array([[0, 1], [1, 2], [0, 3], [1, 3], [1, 4], [2, 4], [3, 4]])),
        (), {"dofs_per_node": 2}, 3),
    "scalar field, two parts": (Model(points=np.vstack([hex_grid(3, 3, 3).points,
                                                        hex_grid(3, 3, 3).points + 5]),
                                      cells=[CellBlock("hexahedron", np.vstack(
                                          [hex_grid(3, 3, 3).cells[0].data,
                                           hex_grid(3, 3, 3).cells[0].data + 27]))]),
                                (), {"physics": "scalar"}, 2),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_count_equals_dense_null_space_and_kinematics(name: str) -> None:
    model, supports, opts, truth = CASES[name]
    analysis, whole, pieces, layout, held = _checks(model, supports, **opts)
    assert _dense_null(model, layout, held) == truth
    assert analysis.total == truth
    for check in (whole, pieces):
        assert check.verified, check.method
        assert check.zero_eigenvalues == truth and check.agrees and check.certain
    assert "whole supported stiffness" in whole.method
    assert "piece by piece" in pieces.method


def test_the_held_plane_frame_is_below_the_old_fixed_cut() -> None:
    # the case that fooled a fixed cut of 1e-8: smallest eigenvalue under 1e-8 of the
    # largest, yet the frame is held (kinematics: a clamped cantilever has no free motion)
    model, supports, opts, _ = CASES["plane frame held at one node"]
    layout = dof_layout(model)
    held = apply_supports(model, layout, [parse_support(s) for s in supports])
    k = free_block(assemble_stiffness(model, layout).matrix, layout, held.fixed).toarray()
    w = np.linalg.eigvalsh(k)
    assert 0 < w[0] / w[-1] < 1e-8


def test_issue_sizes_through_the_whole_path() -> None:
    # the sizes where the old shift-invert path ran (over 2,500 free DOFs)
    frame = _grid_frame(8, 3)                                   # 3,072 DOFs
    plate = _with_loose_nodes(quad_grid(40, 40), 7)             # 3,214 DOFs
    for model, truth in ((frame, 6), (plate, 17)):
        analysis, whole, pieces, _, _ = _checks(model)
        assert analysis.total == truth
        assert whole.zero_eigenvalues == truth and pieces.zero_eigenvalues == truth


def test_tetrahedral_solid_is_verified_piece_by_piece() -> None:
    # a smaller sibling of the 100,000-DOF solid of scripts/bench_stiffness_check.py
    model = tet_grid(12, 12, 12)                                # 5,184 DOFs
    for supports, truth in (((), 6), (("plane x=0:fixed",), 0), (("node 1:pinned",), 3)):
        layout = dof_layout(model)
        held = apply_supports(model, layout, [parse_support(s) for s in supports])
        analysis = zero_energy_modes(model, layout, held)
        check = verify_stiffness(model, layout, held, analysis, whole_dofs=1000,
                                 piece_dofs=1000)
        assert check.verified and "piece by piece" in check.method
        assert check.zero_eigenvalues == truth == analysis.total


def test_pieces_sum_to_the_assembled_free_block() -> None:
    model = _joined(hex_grid(3, 3, 3), [2, 0, 2])
    layout = dof_layout(model)
    held = apply_supports(model, layout, [parse_support("node 1:pinned")])
    kff = free_block(assemble_stiffness(model, layout).matrix, layout, held.fixed)
    total = np.zeros(kff.shape)
    pieces = list(stiffness_pieces(model, layout, held.fixed, 4))
    assert len(pieces) == 4
    for dofs, k in pieces:
        total[np.ix_(dofs, dofs)] += k.toarray()
    np.testing.assert_allclose(total, kff.toarray(), rtol=0, atol=1e-12)


def test_limits_are_stated_not_silent() -> None:
    model = quad_grid(4, 4)
    layout = dof_layout(model)
    held = apply_supports(model, layout, [])
    analysis = zero_energy_modes(model, layout, held)
    check = verify_stiffness(model, layout, held, analysis, max_dofs=10)
    assert not check.verified and "limit of 10" in check.message
    doc = verify_stiffness(model, layout, held, analysis).to_dict()
    assert doc["zero_eigenvalues"] == 3 and doc["certain"] is True and doc["gap"] > 1e3
