"""Zero-energy modes against rigid-body kinematics, Maxwell/Calladine counting, the stiffness.

Sources: rigid-body kinematics (a free body in space has 6 rigid motions, in
the plane 3; holding the translations of one point leaves the 3 rotations
about it, of two distinct points the rotation about the line through them,
of three non-collinear points none); J. C. Maxwell, Phil. Mag. 27 (1864)
294-299 and C. R. Calladine, "Buckminster Fuller's 'Tensegrity' structures and
Clerk Maxwell's rules for the construction of stiff frames", Int. J. Solids
Struct. 14 (1978) 161-172: for a pin-jointed frame, mechanisms - states of
self-stress = 3j - b - 6 in 3D, 2j - b - 3 in the plane, with
mechanisms = (DOFs - rigid motions) - rank(equilibrium matrix).
"""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from bandwise.algorithms.rigid import zero_energy_modes
from bandwise.algorithms.stiffness import verify_stiffness
from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.core.dofs import dof_layout
from bandwise.core.generate import hex_grid, line_frame, quad_grid, tet_grid, triangle_grid
from bandwise.core.model import CellBlock, Model


def _analyse(model, supports=(), **opts):
    layout = dof_layout(model, **opts)
    held = apply_supports(model, layout, [parse_support(s) for s in supports])
    return zero_energy_modes(model, layout, held), layout, held


def _merged(*models: Model) -> Model:
    """One model from several, coincident nodes merged."""
    pts = np.vstack([m.points for m in models])
    cells, off = [], 0
    for m in models:
        cells.append(m.cells[0].data + off)
        off += m.n_nodes
    unique, inverse = np.unique(np.round(pts, 9), axis=0, return_inverse=True)
    return Model(points=unique, cells=[CellBlock(models[0].cells[0].type,
                                                 inverse.ravel()[np.vstack(cells)])])


def _shifted(model: Model, offset) -> Model:
    return Model(points=model.points + np.asarray(offset, dtype=float), cells=model.cells)


def test_free_bodies_have_their_rigid_motions() -> None:
    # a free 3D solid: 6; a free plane body: 3; a free scalar problem: 1 per part
    assert _analyse(hex_grid(3, 3, 3))[0].total == 6
    assert _analyse(tet_grid(3, 2, 2))[0].total == 6
    assert _analyse(quad_grid(4, 3))[0].total == 3
    assert _analyse(triangle_grid(3, 3))[0].total == 3
    two = Model(points=np.vstack([hex_grid(2, 2, 2).points, hex_grid(2, 2, 2).points + 5]),
                cells=[CellBlock("hexahedron", np.vstack([np.arange(8), np.arange(8) + 8]))])
    scalar = _analyse(two, physics="scalar")[0]
    assert scalar.total == 2 and [p.n_modes for p in scalar.parts] == [1, 1]
    assert "constant t" in scalar.parts[0].modes[0].description


def test_free_body_reads_as_axes_in_a_tidy_basis() -> None:
    analysis = _analyse(hex_grid(3, 3, 3))[0]
    words = sorted(m.description for m in analysis.modes())
    assert words == sorted([f"translation along {a} of part 1" for a in "xyz"]
                           + [f"rotation about the axis through (1, 1, 1) along {a} of part 1"
                              for a in "xyz"])
    assert all(m.kind == "rigid" for m in analysis.modes())


def test_holding_one_two_three_points() -> None:
    model = hex_grid(3, 3, 3)                      # nodes 1, 3, 7, 27: corners
    one = _analyse(model, ["node 1:pinned"])[0]
    assert one.total == 3
    assert all("through node 1 along" in m.description for m in one.modes())
    two = _analyse(model, ["node 1:pinned", "node 27:pinned"])[0]
    assert two.total == 1
    assert "through nodes 1 and 27" in two.modes()[0].description
    three = _analyse(model, ["node 1:pinned", "node 3:pinned", "node 7:pinned"])[0]
    assert three.total == 0 and three.suggested == ()
    # collinear points leave the rotation about their line (nodes 1, 2, 3 on y = z = 0)
    line = _analyse(model, ["node 1:pinned", "node 2:pinned", "node 3:pinned"])[0]
    assert line.total == 1 and "along x" in line.modes()[0].description


def test_plane_body_held_at_one_point_turns_about_it() -> None:
    analysis = _analyse(quad_grid(3, 3), ["node 5:pinned"])[0]
    assert analysis.total == 1
    assert analysis.modes()[0].description == \
        "rotation about the axis through node 5 along z of part 1"


def _frame_2d(points, bars):
    return line_frame(np.asarray(points, dtype=float), np.asarray(bars))


def _calladine_mechanisms(points: np.ndarray, bars: np.ndarray, dim: int) -> int:
    """Inextensional mechanisms from the rank of the equilibrium matrix (Calladine 1978)."""
    j = len(points)
    a = np.zeros((dim * j, len(bars)))
    for k, (p, q) in enumerate(bars):
        n = (points[q, :dim] - points[p, :dim])
        n = n / np.linalg.norm(n)
        a[dim * p:dim * p + dim, k] = -n
        a[dim * q:dim * q + dim, k] = n
    rigid = 3 if dim == 2 else 6
    return dim * j - rigid - np.linalg.matrix_rank(a)


def test_square_of_four_bars_has_one_mechanism_and_a_diagonal_removes_it() -> None:
    # Maxwell's rule in the plane: 2j - b - 3 = 8 - 4 - 3 = 1 mechanism; with a diagonal, 0
    square = [[0, 0], [1, 0], [1, 1], [0, 1]]
    bars = [[0, 1], [1, 2], [2, 3], [3, 0]]
    analysis = _analyse(_frame_2d(square, bars), dofs_per_node=2)[0]
    rigid = sum(p.n_rigid for p in analysis.parts)
    assert (rigid, analysis.total - rigid) == (3, 1)
    braced = _analyse(_frame_2d(square, bars + [[0, 2]]), dofs_per_node=2)[0]
    assert braced.total == 3 and all(m.kind == "rigid" for m in braced.modes())
    # both diagonals: m - s = 2j - b - 3 = -1, so one state of self-stress and no mechanism
    over = _analyse(_frame_2d(square, bars + [[0, 2], [1, 3]]), dofs_per_node=2)[0]
    assert over.total == 3
    # the same square of beams (rotations at the nodes) is a rigid frame
    assert _analyse(_frame_2d(square, bars))[0].total == 3


def test_space_truss_counts_follow_maxwell_calladine() -> None:
    # tetrahedron of 6 bars: 3j - b - 6 = 0; one bar removed: 1 mechanism
    p = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    bars = np.array([[0, 1], [0, 2], [0, 3], [1, 2], [1, 3], [2, 3]])
    full = _analyse(line_frame(p, bars), dofs_per_node=3)[0]
    assert full.total == 6 and all(m.kind == "rigid" for m in full.modes())
    assert any("spin of a bar" in n for n in full.notes)
    cut = _analyse(line_frame(p, bars[:5]), dofs_per_node=3)[0]
    assert cut.total == 7 and sum(m.kind == "mechanism" for m in cut.modes()) == 1


@given(st.integers(min_value=4, max_value=7), st.integers(min_value=0, max_value=10**6),
       st.booleans())
def test_random_frameworks_match_calladine_rank_count(j: int, seed: int, space: bool) -> None:
    rng = np.random.default_rng(seed)
    dim = 3 if space else 2
    pts = rng.uniform(0, 1, size=(j, 3))
    if not space:
        pts[:, 2] = 0.0
    # a connected set of bars: a spanning chain plus random extra bars
    order = rng.permutation(j)
    bars = {tuple(sorted((int(order[k]), int(order[k + 1])))) for k in range(j - 1)}
    for _ in range(int(rng.integers(0, 2 * j))):
        a, b = rng.choice(j, 2, replace=False)
        bars.add(tuple(sorted((int(a), int(b)))))
    bars_arr = np.array(sorted(bars))
    analysis = _analyse(line_frame(pts, bars_arr), dofs_per_node=dim)[0]
    rigid = sum(p.n_rigid for p in analysis.parts)
    assert rigid == (6 if space else 3)
    assert analysis.total - rigid == _calladine_mechanisms(pts, bars_arr, dim)


def test_two_solid_blocks_sharing_an_edge_have_a_hinge() -> None:
    a = hex_grid(2, 2, 2)
    model = _merged(a, _shifted(a, [1, 0, 1]))      # cubes touching along x = 1, z = 1
    analysis, layout, held = _analyse(model)
    assert analysis.total == 7
    mech = [m for m in analysis.modes() if m.kind == "mechanism"]
    assert len(mech) == 1 and mech[0].description.startswith("hinge rotation about the edge")
    check = verify_stiffness(model, layout, held, analysis)
    assert check.verified and check.zero_eigenvalues == 7 and check.agrees
    # held on one side, only the hinge is left
    clamped = _analyse(model, ["plane x=0:fixed"])[0]
    assert clamped.total == 1 and "hinge" in clamped.modes()[0].description


def test_blocks_sharing_one_node_turn_about_it() -> None:
    a = hex_grid(2, 2, 2)
    model = _merged(a, _shifted(a, [1, 1, 1]))
    analysis = _analyse(model, ["plane x=0:fixed"])[0]
    assert analysis.total == 3
    assert all("joined there at a single node" in m.description for m in analysis.modes())


def test_suggested_holds_remove_every_mode() -> None:
    a = hex_grid(2, 2, 2)
    cases = [(hex_grid(3, 3, 3), {}), (quad_grid(3, 4), {}), (_merged(a, _shifted(a, [1, 0, 1])), {}),
             (_frame_2d([[0, 0], [1, 0], [1, 1], [0, 1]], [[0, 1], [1, 2], [2, 3], [3, 0]]),
              {"dofs_per_node": 2}), (tet_grid(2, 2, 3), {"physics": "scalar"})]
    for model, opts in cases:
        analysis = _analyse(model, **opts)[0]
        assert analysis.suggested
        held = sum(len(h.dofs.split()) for h in analysis.suggested)
        assert held == analysis.total                        # as many holds as modes
        after = _analyse(model, [h.as_option for h in analysis.suggested], **opts)[0]
        assert after.total == 0


def test_free_solid_gets_the_3_2_1_holds() -> None:
    # common practice: hold 3 DOFs at one node, 2 at a second, 1 at a third
    holds = _analyse(hex_grid(3, 3, 3))[0].suggested
    assert sorted(len(h.dofs.split()) for h in holds) == [1, 2, 3]


def test_node_ids_label_the_descriptions() -> None:
    model = hex_grid(2, 2, 2)
    model.node_ids = np.arange(101, 109)
    analysis = _analyse(model, ["node 101:pinned"])[0]
    assert all("through node 101 along" in m.description for m in analysis.modes())
    assert all(set(m.moving_nodes) <= set(range(101, 109)) for m in analysis.modes())
    assert analysis.node_label_word == "original node id"


def test_orphan_nodes_and_unstiffened_rotations_are_counted_apart() -> None:
    model = quad_grid(3, 3)
    model.points = np.vstack([model.points, [[9.0, 9.0, 0.0]]])     # one orphan node
    analysis, layout, held = _analyse(model)
    assert analysis.dofs_without_stiffness == 2 and analysis.total == 5
    check = verify_stiffness(model, layout, held, analysis)
    assert check.agrees


def test_plane_mesh_with_three_dofs_per_node() -> None:
    # plane elements stiffen ux, uy only: 3 rigid motions, and uz of every node is a
    # DOF without stiffness; the assembled stiffness has the same null space
    model = quad_grid(3, 3)
    analysis, layout, held = _analyse(model, dofs_per_node=3)
    assert sum(p.n_rigid for p in analysis.parts) == 3
    assert analysis.dofs_without_stiffness == 9 and analysis.total == 12
    assert verify_stiffness(model, layout, held, analysis).agrees


def test_frame_welded_to_solid_is_a_moment_release() -> None:
    solid = hex_grid(2, 2, 2)
    pts = np.vstack([solid.points, [[0.5, 0.5, 3.0]]])
    model = Model(points=pts, cells=[CellBlock("hexahedron", solid.cells[0].data),
                                     CellBlock("line", np.array([[6, 8]]))])
    analysis, layout, held = _analyse(model)
    assert analysis.moment_release is not None and analysis.moment_release.nodes == (7,)
    # the beam end node's rotations are stiffened by the beam only: a free rotation
    # about the beam's attachment point remains beyond the 6 (the joint is a ball)
    assert analysis.total == 6 + 3
    assert verify_stiffness(model, layout, held, analysis).agrees


def _random_supports(model: Model, layout, rng) -> list[str]:
    out = []
    for _ in range(int(rng.integers(0, 4))):
        node = int(rng.integers(1, model.n_nodes + 1))
        names = layout.names(node - 1)
        pick = [n for n in names if rng.random() < 0.5] or [names[0]]
        out.append(f"node {node}:{','.join(pick)}")
    return out


_MESHES = {
    "hex": lambda: hex_grid(3, 2, 2), "tet": lambda: tet_grid(2, 2, 2),
    "quad": lambda: quad_grid(3, 3), "tri": lambda: triangle_grid(3, 2),
    "hinge": lambda: _merged(hex_grid(2, 2, 2), _shifted(hex_grid(2, 2, 2), [1, 0, 1])),
    "truss": lambda: _frame_2d([[0, 0], [1, 0], [2, 0], [0.5, 1], [1.5, 1]],
                               [[0, 1], [1, 2], [0, 3], [1, 3], [1, 4], [2, 4], [3, 4]]),
    "frame": lambda: line_frame(np.array([[0.0, 0, 0], [1, 0, 0], [1, 1, 0], [1, 1, 1]]),
                                np.array([[0, 1], [1, 2], [2, 3]])),
}


@given(st.sampled_from(sorted(_MESHES)), st.sampled_from([None, "pin", "scalar"]),
       st.integers(min_value=0, max_value=10**6))
def test_kinematic_count_equals_stiffness_null_space(name: str, variant, seed: int) -> None:
    model = _MESHES[name]()
    opts = {}
    if variant == "scalar":
        opts = {"physics": "scalar"}
    elif variant == "pin" and name in ("truss", "frame"):
        opts = {"dofs_per_node": 2 if name == "truss" else 3}
    layout = dof_layout(model, **opts)
    rng = np.random.default_rng(seed)
    held = apply_supports(model, layout, [parse_support(s)
                                          for s in _random_supports(model, layout, rng)])
    analysis = zero_energy_modes(model, layout, held)
    check = verify_stiffness(model, layout, held, analysis)
    assert check.verified, check.method
    assert check.zero_eigenvalues == analysis.total


def test_json_form_has_totals_per_part_and_modes() -> None:
    analysis = _analyse(hex_grid(2, 2, 2), ["node 1:pinned"])[0]
    doc = analysis.to_dict()
    assert doc["total"] == 3 and doc["rigid"] == 3 and doc["mechanisms"] == 0
    part = doc["per_part"][0]
    assert part["modes"] == 3 and len(part["details"]) == 3
    assert all(d["moving_nodes"] for d in part["details"])     # rotations: the far nodes
    free = _analyse(hex_grid(2, 2, 2))[0]
    shift = [m for m in free.modes() if m.description.startswith("translation")]
    assert len(shift) == 3 and all(m.moving_nodes == () for m in shift)  # all alike


def test_large_truss_takes_the_sparse_path_and_matches_calladine() -> None:
    # a 10 x 10 panel grid truss: 121 joints; braced (one diagonal per panel) it is rigid,
    # unbraced its mechanisms are 2j - 3 - rank(equilibrium matrix) (Calladine 1978)
    from bandwise.algorithms.rigid import MAX_PART_COORDINATES

    grid = quad_grid(11, 11)
    c = grid.cells[0].data
    sides = np.unique(np.sort(np.vstack([c[:, [0, 1]], c[:, [1, 2]], c[:, [2, 3]],
                                         c[:, [3, 0]]]), axis=1), axis=0)
    braced = np.vstack([sides, c[:, [0, 2]]])
    assert 3 * len(braced) > MAX_PART_COORDINATES            # beyond the dense limit
    analysis = _analyse(line_frame(grid.points[:, :2], braced), dofs_per_node=2)[0]
    assert analysis.complete and analysis.total == 3
    loose = _analyse(line_frame(grid.points[:, :2], sides), dofs_per_node=2)[0]
    rigid = sum(p.n_rigid for p in loose.parts)
    assert rigid == 3
    assert loose.total - rigid == _calladine_mechanisms(grid.points, sides, 2)


def test_hold_choice_ends_when_no_candidate_removes_a_mode():
    # Found by fuzzing (a damaged VTK file): candidate DOFs whose motions in the
    # free modes are all below the rank threshold (but not zero) made the
    # node-by-node choice loop for ever. Each pick must remove at least one mode.
    import threading

    from bandwise.algorithms.rigid import _pick_holds

    w = 1e-9 * np.random.default_rng(3).random((12, 3))
    node_of = np.repeat(np.arange(4), 3)
    out: list = []
    worker = threading.Thread(target=lambda: out.append(_pick_holds(w, node_of, 3)), daemon=True)
    worker.start()
    worker.join(10)
    assert out == [[]]
    # and a well-posed case still holds every mode: one node per translation
    w = np.kron(np.eye(3), np.ones((1, 1)))
    assert sorted(_pick_holds(w, np.arange(3), 3)) == [0, 1, 2]
