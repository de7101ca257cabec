"""Element stiffness matrices against closed forms, published matrices and invariants.

Invariants every element matrix obeys (Cook, Malkus, Plesha and Witt,
*Concepts and Applications of Finite Element Analysis*, 4th ed., Wiley 2002,
ch. 3 and 6): symmetric, positive semi-definite, every rigid motion in its
null space and nothing else (the same invariant pyamg's elasticity tests use),
and the patch test: a linear displacement field stores exactly the strain
energy V * eps^T D eps (B. M. Irons and A. Razzaque, "Experience with the patch
test for convergence of finite elements", 1972).
"""

from __future__ import annotations

import numpy as np
import pytest

from bandwise.algorithms.inertia import zero_modes
from bandwise.algorithms.rigid import zero_energy_modes
from bandwise.algorithms.stiffness import (
    assemble_stiffness,
    bar_stiffness,
    continuum_stiffness,
    elasticity_matrix,
    line_conduction,
    plane_frame_stiffness,
    space_frame_local,
    space_frame_stiffness,
    verify_stiffness,
)
from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.core.dofs import dof_layout
from bandwise.core.generate import hex_grid, line_frame, quad_grid, tet_grid, triangle_grid

NU = 0.3


def _rigid_motions(x: np.ndarray, rotations: bool = False) -> np.ndarray:
    """Columns: rigid motions at the nodes x (m, d), node-blocked (plus rotations if asked)."""
    m, d = x.shape
    if d == 2:
        cols = [np.tile([1.0, 0.0], m), np.tile([0.0, 1.0], m),
                np.column_stack([-x[:, 1], x[:, 0]]).ravel()]
        if rotations:  # (ux, uy, rz) per node
            out = np.zeros((3 * m, 3))
            for k, c in enumerate(cols):
                out[np.r_[0:3 * m:3], k] = c[0::2]
                out[np.r_[1:3 * m:3], k] = c[1::2]
            out[2::3, 2] = 1.0
            return out
        return np.column_stack(cols)
    cols = []
    for k in range(3):
        t = np.zeros(3)
        t[k] = 1
        cols.append((np.tile(t, (m, 1)), np.zeros((m, 3))))
    for k in range(3):
        w = np.zeros(3)
        w[k] = 1
        cols.append((np.cross(w, x), np.tile(w, (m, 1))))
    if rotations:
        return np.column_stack([np.column_stack([u, r]).ravel() for u, r in cols])
    return np.column_stack([u.ravel() for u, _ in cols])


def _check_invariants(k: np.ndarray, rigid: np.ndarray) -> None:
    scale = np.abs(k).max()
    assert np.allclose(k, k.T, atol=1e-12 * scale)
    w = np.linalg.eigvalsh(k)
    assert w.min() > -1e-10 * scale                       # positive semi-definite
    assert np.abs(k @ rigid).max() < 1e-10 * scale        # rigid motions store no energy
    n_zero = int((w < 1e-9 * w.max()).sum())
    assert n_zero == np.linalg.matrix_rank(rigid)         # and nothing else does


def test_bar_closed_form() -> None:
    # closed form: (EA/L) [[1, -1], [-1, 1]] along the axis (Cook et al. 2002, the bar element)
    k = bar_stiffness(np.array([[[0.0, 0.0, 0.0], [2.0, 0.0, 0.0]]]), ea=3.0)[0]
    assert k[0, 0] == pytest.approx(1.5) and k[0, 3] == pytest.approx(-1.5)
    assert np.count_nonzero(np.abs(k) > 1e-15) == 4
    x = np.array([[0.0, 0.0, 0.0], [1.0, 2.0, 2.0]])
    k = bar_stiffness(x[None])[0]
    _check_invariants(k, np.column_stack([_rigid_motions(x)]))
    # an inclined bar: n n^T / L with n = (1, 2, 2) / 3, L = 3
    n = np.array([1, 2, 2]) / 3
    assert np.allclose(k[:3, :3], np.outer(n, n) / 3)


def test_line_conduction_closed_form() -> None:
    # closed form (1/L) [[1, -1], [-1, 1]]
    k = line_conduction(np.array([[[0.0, 0, 0], [0.5, 0, 0]]]))[0]
    assert np.allclose(k, [[2, -2], [-2, 2]])


def test_plane_frame_closed_form_and_rotation() -> None:
    # closed form of the Euler-Bernoulli beam-column in local axes: EA/L, 12EI/L^3,
    # 6EI/L^2, 4EI/L, 2EI/L (D. L. Logan, A First Course in the Finite Element Method, 4th ed., 2007,
    # the plane frame element)
    L, ea, ei = 2.0, 5.0, 3.0
    k = plane_frame_stiffness(np.array([[[0.0, 0, 0], [L, 0, 0]]]), ea=ea, ei=ei)[0]
    assert k[0, 0] == pytest.approx(ea / L) and k[0, 3] == pytest.approx(-ea / L)
    assert k[1, 1] == pytest.approx(12 * ei / L**3) and k[1, 4] == pytest.approx(-12 * ei / L**3)
    assert k[1, 2] == pytest.approx(6 * ei / L**2) and k[2, 2] == pytest.approx(4 * ei / L)
    assert k[2, 5] == pytest.approx(2 * ei / L) and k[4, 5] == pytest.approx(-6 * ei / L**2)
    # a vertical member: the axial stiffness moves to uy (direction cosines c=0, s=1)
    kv = plane_frame_stiffness(np.array([[[0.0, 0, 0], [0, L, 0]]]), ea=ea, ei=ei)[0]
    assert kv[1, 1] == pytest.approx(ea / L) and kv[0, 0] == pytest.approx(12 * ei / L**3)
    x = np.array([[0.0, 0.0], [3.0, 4.0]])
    k = plane_frame_stiffness(np.column_stack([x, [0, 0]])[None])[0]
    _check_invariants(k, _rigid_motions(x, rotations=True))


def test_space_frame_closed_form_and_invariants() -> None:
    # closed form in local axes (J. S. Przemieniecki, Theory of Matrix Structural
    # Analysis, 1968, the space frame element): axial EA/L, torsion GJ/L, bending 12EI/L^3, 6EI/L^2, 4EI/L, 2EI/L
    L = np.array([2.0])
    k = space_frame_local(L, ea=1.0, gj=0.5, eiy=2.0, eiz=3.0)[0]
    assert k[0, 6] == pytest.approx(-0.5) and k[3, 3] == pytest.approx(0.25)
    assert k[1, 1] == pytest.approx(12 * 3 / 8) and k[1, 5] == pytest.approx(6 * 3 / 4)
    assert k[2, 2] == pytest.approx(12 * 2 / 8) and k[2, 4] == pytest.approx(-6 * 2 / 4)
    assert k[5, 11] == pytest.approx(2 * 3 / 2) and k[4, 4] == pytest.approx(4 * 2 / 2)
    for x in (np.array([[0.0, 0, 0], [1.0, 2.0, -0.5]]), np.array([[1.0, 1, 0], [1.0, 1, 3]])):
        k = space_frame_stiffness(x[None])[0]
        _check_invariants(k, _rigid_motions(x, rotations=True))


def test_cst_hand_evaluated_unit_triangle() -> None:
    # Closed form, evaluated by hand from the CST formulation K = t A B^T D B
    # (Cook et al. 2002, the constant-strain triangle) for the triangle (0,0), (1,0), (0,1), E = 1, nu = 0,
    # t = 1, plane stress: B = [[-1,0,1,0,0,0], [0,-1,0,0,0,1], [-1,-1,0,1,1,0]], A = 1/2.
    expected = np.array([
        [0.75, 0.25, -0.5, -0.25, -0.25, 0.0],
        [0.25, 0.75, 0.0, -0.25, -0.25, -0.5],
        [-0.5, 0.0, 0.5, 0.0, 0.0, 0.0],
        [-0.25, -0.25, 0.0, 0.25, 0.25, 0.0],
        [-0.25, -0.25, 0.0, 0.25, 0.25, 0.0],
        [0.0, -0.5, 0.0, 0.0, 0.0, 0.5]])
    x = np.array([[[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]])
    k = continuum_stiffness("triangle", x, elasticity=elasticity_matrix(2, 1.0, 0.0))[0]
    assert np.allclose(k, expected, atol=1e-14)


def test_q4_matches_published_closed_form() -> None:
    # O. Sigmund, "A 99 line topology optimization code written in Matlab",
    # Struct. Multidisc. Optim. 21 (2001) 120-127: the unit-square bilinear element,
    # plane stress, full 2 x 2 Gauss: KE = E/(1-nu^2) k[index], nodes counter-clockwise.
    nu = NU
    kv = np.array([1 / 2 - nu / 6, 1 / 8 + nu / 8, -1 / 4 - nu / 12, -1 / 8 + 3 * nu / 8,
                   -1 / 4 + nu / 12, -1 / 8 - nu / 8, nu / 6, 1 / 8 - 3 * nu / 8])
    index = np.array([[1, 2, 3, 4, 5, 6, 7, 8], [2, 1, 8, 7, 6, 5, 4, 3],
                      [3, 8, 1, 6, 7, 4, 5, 2], [4, 7, 6, 1, 8, 3, 2, 5],
                      [5, 6, 7, 8, 1, 2, 3, 4], [6, 5, 4, 3, 2, 1, 8, 7],
                      [7, 4, 5, 2, 3, 8, 1, 6], [8, 3, 2, 5, 4, 7, 6, 1]]) - 1
    published = kv[index] / (1 - nu**2)
    k = continuum_stiffness("quad", np.array([[[0.0, 0], [1, 0], [1, 1], [0, 1]]]))[0]
    assert np.allclose(k, published, atol=1e-14)
    # the published formula at nu = 0.3: k1 = 0.45 / 0.91, k2 = 0.1625 / 0.91
    assert k[0, 0] * (1 - nu**2) == pytest.approx(0.45)
    assert k[0, 1] * (1 - nu**2) == pytest.approx(0.1625)


def _tensor_laplace(dim: int) -> np.ndarray:
    """Closed form of the multilinear Laplace matrix on the unit square/cube:
    sum over axes of K1 (x) M1 (x) M1, with the 1D linear element stiffness
    K1 = [[1,-1],[-1,1]] and consistent mass M1 = [[1/3,1/6],[1/6,1/3]]
    (2 x 2 (x 2) Gauss integrates it exactly)."""
    k1 = np.array([[1.0, -1.0], [-1.0, 1.0]])
    m1 = np.array([[1 / 3, 1 / 6], [1 / 6, 1 / 3]])
    total = 0
    for axis in range(dim):
        mats = [k1 if a == axis else m1 for a in range(dim)]
        out = mats[-1]
        for mm in reversed(mats[:-1]):
            out = np.kron(mm, out)
        total = total + out
    # kron order: last axis fastest -> node (i, j[, k]) index i*2^(d-1)+...; map to VTK corners
    corners = [[0, 0], [1, 0], [1, 1], [0, 1]] if dim == 2 else \
        [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]]
    idx = [int(sum(c[a] * 2 ** (dim - 1 - a) for a in range(dim))) for c in corners]
    return total[np.ix_(idx, idx)]


def test_scalar_quad_and_hex_closed_forms() -> None:
    q = continuum_stiffness("quad", np.array([[[0.0, 0], [1, 0], [1, 1], [0, 1]]]), scalar=True)[0]
    assert np.allclose(q, _tensor_laplace(2))
    # printed values of the same closed form: diagonal 2/3, edge -1/6, diagonal node -1/3
    assert q[0, 0] == pytest.approx(2 / 3) and q[0, 1] == pytest.approx(-1 / 6)
    assert q[0, 2] == pytest.approx(-1 / 3)
    cube = np.array([[0.0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],
                     [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]])
    h = continuum_stiffness("hexahedron", cube[None], scalar=True)[0]
    assert np.allclose(h, _tensor_laplace(3))
    # diagonal 1/3, edge neighbour 0, face diagonal -1/12, body diagonal -1/12
    assert h[0, 0] == pytest.approx(1 / 3) and h[0, 1] == pytest.approx(0, abs=1e-15)
    assert h[0, 2] == pytest.approx(-1 / 12) and h[0, 6] == pytest.approx(-1 / 12)


def test_scalar_tetra_hand_closed_form() -> None:
    # closed form V grad N grad N^T of the unit right tetrahedron (V = 1/6,
    # gradients (-1,-1,-1), e1, e2, e3), evaluated by hand
    x = np.array([[[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]]])
    k = continuum_stiffness("tetra", x, scalar=True)[0]
    expected = np.array([[3, -1, -1, -1], [-1, 1, 0, 0], [-1, 0, 1, 0], [-1, 0, 0, 1]]) / 6
    assert np.allclose(k, expected)


_SHAPES = {
    # distorted but affine (parallelogram / parallelepiped) shapes: exact patch test
    "triangle": np.array([[0.1, 0.0], [2.0, 0.3], [0.7, 1.4]]),
    "quad": np.array([[0.0, 0.0], [2.0, 0.5], [2.6, 1.7], [0.6, 1.2]]),
    "tetra": np.array([[0.0, 0, 0], [1.5, 0.2, 0], [0.3, 1.1, 0.1], [0.2, 0.4, 1.3]]),
    "hexahedron": (np.array([[0.0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],
                             [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]])
                   @ np.array([[1.2, 0.2, 0.1], [0.3, 0.9, 0.0], [0.1, 0.2, 1.4]])),
}


@pytest.mark.parametrize("shape", sorted(_SHAPES))
def test_continuum_invariants_and_patch_test(shape: str) -> None:
    x = _SHAPES[shape]
    k = continuum_stiffness(shape, x[None])[0]
    _check_invariants(k, _rigid_motions(x))
    dim = x.shape[1]
    rng = np.random.default_rng(1)
    grad = rng.normal(size=(dim, dim))            # u(x) = G x, constant strain
    u = (x @ grad.T).ravel()
    strain = np.r_[np.diag(grad), grad[0, 1] + grad[1, 0]] if dim == 2 else \
        np.r_[np.diag(grad), grad[0, 1] + grad[1, 0], grad[1, 2] + grad[2, 1],
              grad[2, 0] + grad[0, 2]]
    if shape == "triangle":
        volume = 0.5 * abs(np.linalg.det(np.c_[x[1] - x[0], x[2] - x[0]]))
    elif shape == "quad":
        d1, d2 = x[2] - x[0], x[3] - x[1]
        volume = 0.5 * abs(d1[0] * d2[1] - d1[1] * d2[0])
    elif shape == "tetra":
        volume = abs(np.linalg.det(np.c_[x[1] - x[0], x[2] - x[0], x[3] - x[0]])) / 6
    else:
        volume = abs(np.linalg.det(np.c_[x[1] - x[0], x[3] - x[0], x[4] - x[0]]))
    energy = volume * strain @ elasticity_matrix(dim) @ strain
    assert u @ k @ u == pytest.approx(energy, rel=1e-12)


def test_assembled_stiffness_null_space_counts() -> None:
    # a free body: 6 rigid motions in 3D, 3 in the plane, 1 for a scalar field
    # (rigid-body kinematics); the dense eigen-solve agrees
    cases = [(hex_grid(3, 2, 2), {}, 6), (tet_grid(2, 3, 2), {}, 6),
             (quad_grid(3, 3), {}, 3), (triangle_grid(3, 2), {}, 3),
             (hex_grid(3, 3, 2), {"physics": "scalar"}, 1)]
    for model, opts, expected in cases:
        layout = dof_layout(model, **opts)
        k = assemble_stiffness(model, layout).matrix
        w = np.linalg.eigvalsh(k.toarray())
        assert int((w < 1e-9 * w[-1]).sum()) == expected
        assert zero_modes(k).count == expected


def test_larger_solid_count_is_certain() -> None:
    model = hex_grid(9, 9, 11)                     # 891 nodes, 2673 DOFs
    layout = dof_layout(model)
    k = assemble_stiffness(model, layout).matrix
    z = zero_modes(k)
    assert z.count == 6 and z.certain and z.factorisations == 1


def test_unsupported_elements_are_reported_not_guessed() -> None:
    model = tet_grid(2, 2, 2)
    from bandwise.core.model import CellBlock, Model

    wedge = Model(points=model.points, cells=[CellBlock("wedge", np.array([[0, 1, 2, 4, 5, 6]]))])
    layout = dof_layout(wedge)
    built = assemble_stiffness(wedge, layout)
    assert built.matrix is None and "wedge" in built.reason
    analysis = zero_energy_modes(wedge, layout)
    check = verify_stiffness(wedge, layout, apply_supports(wedge, layout, []), analysis)
    assert not check.verified and check.agrees is None and "wedge" in check.message


def test_verify_limit_is_stated() -> None:
    model = quad_grid(4, 4)
    layout = dof_layout(model)
    supports = apply_supports(model, layout, [parse_support("plane x=0:fixed")])
    analysis = zero_energy_modes(model, layout, supports)
    check = verify_stiffness(model, layout, supports, analysis, max_dofs=10)
    assert not check.verified and "limit of 10" in check.method
    check = verify_stiffness(model, layout, supports, analysis)
    assert check.verified and check.agrees and check.zero_eigenvalues == 0


def test_two_bar_line_pinned_at_one_end() -> None:
    # two axial bars in a line, one DOF per node, held at one end: no zero mode left,
    # and the reduced 2 x 2 stiffness (EA/L)[[2, -1], [-1, 1]] has determinant 1 > 0
    # (closed form; Logan 2007, the assembled two-bar system)
    model = line_frame(np.array([[0.0, 0], [1, 0], [2, 0]]), np.array([[0, 1], [1, 2]]))
    layout = dof_layout(model, dofs_per_node=1)
    supports = apply_supports(model, layout, [parse_support("node 1:fixed")])
    assert zero_energy_modes(model, layout, supports).total == 0
    k = assemble_stiffness(model, layout).matrix.toarray()[1:, 1:]
    assert np.allclose(k, [[2, -1], [-1, 1]])
    assert np.linalg.det(k) == pytest.approx(1.0)


def test_degenerate_elements_are_reported_not_crashed() -> None:
    from bandwise.core.model import CellBlock, Model

    flat = Model(points=np.array([[0.0, 0, 0], [1, 0, 0], [2, 0, 0], [0, 1, 0], [0, 0, 1.0]]),
                 cells=[CellBlock("tetra", np.array([[0, 1, 2, 3], [0, 1, 3, 4]]))])
    built = assemble_stiffness(flat, dof_layout(flat))
    assert built.matrix is None and "degenerate tetra" in built.reason
    bar = line_frame(np.array([[0.0, 0], [0.0, 0], [1, 0]]), np.array([[0, 1], [1, 2]]))
    built = assemble_stiffness(bar, dof_layout(bar, dofs_per_node=2))
    assert built.matrix is None and "degenerate line" in built.reason
