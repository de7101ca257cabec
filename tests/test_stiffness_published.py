"""Element stiffness against published worked examples, to their printed digits.

Each check assembles bandwise's element matrices (real E, A, I) into a small
structure, solves K u = f with numpy and compares the printed displacements
and reactions with a tolerance of half a unit in the last printed digit.
Invariants (symmetry, PSD, rigid motions) live in tests/test_stiffness.py.

Element types with no published example reproduced here: the scalar
conduction line, triangle, tetrahedron and hexahedron (their closed forms and
hand evaluations are in tests/test_stiffness.py); the scalar quad matches
Sigmund (2001) below. The elastic Q4 matches Sigmund (2001) there. The space frame
reproduces the plane beam example in both bending planes; the tetrahedron is
checked against a reference library's expected matrix.
"""

from __future__ import annotations

import numpy as np

from bandwise.algorithms.stiffness import (
    bar_stiffness,
    continuum_stiffness,
    elasticity_matrix,
    plane_frame_stiffness,
    space_frame_stiffness,
)


def _solve(k: np.ndarray, free: list[int], f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Displacements (zero at held DOFs) and reactions r = K u - f."""
    u = np.zeros(len(f))
    u[free] = np.linalg.solve(k[np.ix_(free, free)], f[free])
    return u, k @ u - f


def _half_unit(printed: float, decimals: int) -> float:
    """Half a unit in the last printed decimal place of ``printed``."""
    del printed
    return 0.5 * 10.0 ** (-decimals)


def test_space_truss_three_bars() -> None:
    # A. J. M. Ferreira, "MATLAB Codes for Finite Element Analysis", Springer,
    # 2009 (Solid Mechanics and Its Applications 157), section 5.2, p. 69: the
    # 3D truss of D. L. Logan, "A First Course in the Finite Element Method",
    # 4th ed., 2007, Example 3.8. E = 1.2e6 psi, A = 0.302, 0.729, 0.187 in^2,
    # 1000 lb down at node 1, which is held in y. Digits read from a
    # transcription of the book's results in the test suite of a public
    # open-source structural code (SharpFE, TrussIn3DModel), not the book itself.
    x = np.array([[72.0, 0, 0], [0, 36, 0], [0, 36, 72], [0, 0, -48]])
    k = np.zeros((12, 12))
    for j, area in zip((1, 2, 3), (0.302, 0.729, 0.187)):
        ke = bar_stiffness(x[[0, j]][None], ea=1.2e6 * area)[0]
        dofs = np.r_[0:3, 3 * j:3 * j + 3]
        k[np.ix_(dofs, dofs)] += ke
    f = np.zeros(12)
    f[2] = -1000.0
    u, r = _solve(k, [0, 2], f)
    # printed displacements of node 1 (in), 4 decimals
    assert abs(u[0] - (-0.0711)) <= _half_unit(-0.0711, 4)
    assert abs(u[2] - (-0.2662)) <= _half_unit(-0.2662, 4)
    # printed reactions (lb), 4 decimals: node 1 (y), nodes 2, 3, 4 (x, y, z)
    printed = {1: -223.1632, 3: 256.1226, 4: -128.0613, 5: 0.0,
               6: -702.4491, 7: 351.2245, 8: 702.4491,
               9: 446.3264, 10: 0.0, 11: 297.5509}
    for dof, val in printed.items():
        assert abs(r[dof] - val) <= _half_unit(val, 4), (dof, r[dof], val)
    # equilibrium (common practice): the reactions balance the 1000 lb load
    np.testing.assert_allclose(r.reshape(4, 3).sum(axis=0), [0.0, 0.0, 1000.0], atol=1e-9)


def test_plane_frame_fixed_fixed_beam() -> None:
    # D. L. Logan, "A First Course in the Finite Element Method", 4th ed.,
    # Thomson, 2007, Example 4.4: two-span beam, both ends fixed, L = 3 m per
    # element, E = 210 GPa, I = 4e-4 m^4, 10 kN down and a 20 kN m moment at the
    # middle node. Digits read from a transcription of the example (SharpFE
    # Beam1DIn2DModel test suite), not the book itself. The transcription notes
    # that its rotation sign is the reverse of the book's, so the rotation and
    # the end moments are compared in magnitude; bandwise takes rz positive
    # counterclockwise and the moment is applied clockwise (-20 kN m).
    x = np.array([[0.0, 0.0], [3.0, 0.0], [6.0, 0.0]])
    k = np.zeros((9, 9))
    for e in range(2):
        ke = plane_frame_stiffness(x[[e, e + 1]][None], ea=210e9 * 1.0, ei=210e9 * 4e-4)[0]
        dofs = np.r_[3 * e:3 * e + 6]
        k[np.ix_(dofs, dofs)] += ke
    f = np.zeros(9)
    f[4], f[5] = -10000.0, -20000.0
    u, r = _solve(k, [3, 4, 5], f)
    # axial DOF unloaded: no axial displacement
    assert abs(u[3]) < 1e-15
    # printed: v2 = -0.0001339 m (7 decimals), phi2 = 0.00008928 rad (8 decimals)
    assert abs(u[4] - (-0.0001339)) <= _half_unit(-0.0001339, 7)
    # the exact value is 8.92857e-5 ,
    # so the printed 0.00008928 is truncated, not rounded: the printed digits
    # are those of the value cut after the 8th decimal
    assert int(abs(u[5]) * 1e8) == 8928
    # printed reactions: 10000 N and 0 N; end moments 12500 and 2500 N m
    assert sorted(np.round(np.abs([r[1], r[7]]))) == [0.0, 10000.0]
    assert sorted(np.round(np.abs([r[2], r[8]]))) == [2500.0, 12500.0]
    # the end carrying the whole shear is the one with the 12500 N m moment
    heavy = 1 if abs(r[1]) > abs(r[7]) else 7
    assert abs(abs(r[heavy + 1]) - 12500.0) <= 0.5


def test_hexahedron_matches_liu_tovar_coefficients() -> None:
    # K. Liu and A. Tovar, "An efficient 3D topology optimization code written
    # in Matlab", Struct. Multidisc. Optim. 50 (2014) 1175-1196, the 8-node
    # hexahedron of the unit cube with 2 x 2 x 2 Gauss points: every entry of
    # KE * (1 + nu)(1 - 2 nu) / E is one of 14 coefficients
    # k = (1/144) [a + b nu] with the integer pairs (a, b) below. Integers read
    # from a transcription of the paper's lk_H8 routine in a public repository.
    # The paper's node order and DOF order differ from bandwise's, so the check
    # compares the sets of distinct entries (each coefficient must occur, and
    # no other value may), for several Poisson ratios.
    a = np.array([32, 6, -8, 6, -6, 4, 3, -6, -10, 3, -3, -3, -4, -8], dtype=float)
    b = np.array([-48, 0, 0, -24, 24, 0, 0, 0, 12, -12, 0, 12, 12, 12], dtype=float)
    x = np.array([[0.0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],
                  [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]])
    for nu in (0.0, 0.25, 0.3, 0.45):
        young = 7.0
        coeff = (a + b * nu) / 144.0
        ke = continuum_stiffness("hexahedron", x[None],
                                 elasticity=elasticity_matrix(3, young, nu))[0]
        scaled = ke * (1 + nu) * (1 - 2 * nu) / young
        entries = np.unique(np.round(scaled.ravel(), 12))
        expected = np.unique(np.round(coeff, 12))
        assert len(entries) == len(expected)
        np.testing.assert_allclose(entries, expected, rtol=0, atol=1e-12)
    # the diagonal is the first coefficient (32 - 48 nu)/144 for every DOF
    nu = 0.3
    ke = continuum_stiffness("hexahedron", x[None], elasticity=elasticity_matrix(3, 1.0, nu))[0]
    np.testing.assert_allclose(np.diag(ke) * (1 + nu) * (1 - 2 * nu),
                               (32 - 48 * nu) / 144.0, rtol=1e-12)


def test_cst_plate_in_tension() -> None:
    # D. L. Logan, "A First Course in the Finite Element Method", 4th ed.,
    # Thomson, 2007, chapter 7 (plane stress), the thin plate in tension solved
    # with two constant-strain triangles: 20 in x 10 in, t = 1 in, E = 30e6 psi,
    # nu = 0.3, left edge held, 5000 lb at each right corner. The same setup is
    # A. J. M. Ferreira, "MATLAB Codes for Finite Element Analysis", Springer,
    # 2009, the T3 thin plate problem; the setup was confirmed in a public
    # transcription of that code, the printed displacements (in units of
    # 1e-6 in, one decimal) and the example's place in the book are from memory.
    # Thickness 1 in: bandwise's unit thickness applies as is.
    x = np.array([[0.0, 0.0], [0.0, 10.0], [20.0, 10.0], [20.0, 0.0]])
    cells = [[0, 2, 1], [0, 3, 2]]
    ke = continuum_stiffness("triangle", x[cells], elasticity=elasticity_matrix(2, 30e6, 0.3))
    k = np.zeros((8, 8))
    for cell, kc in zip(cells, ke):
        dofs = np.ravel([[2 * n, 2 * n + 1] for n in cell])
        k[np.ix_(dofs, dofs)] += kc
    f = np.zeros(8)
    f[4] = f[6] = 5000.0
    u, r = _solve(k, [4, 5, 6, 7], f)
    printed = {4: 609.6, 5: 4.2, 6: 663.7, 7: 104.1}   # 1e-6 in, from memory
    for dof, val in printed.items():
        assert abs(u[dof] * 1e6 - val) <= _half_unit(val, 1), (dof, u[dof], val)
    # equilibrium (common practice): the held edge carries the 10000 lb pull
    assert abs(r[0] + r[2] + 10000.0) < 1e-6
    assert abs(r[1] + r[3]) < 1e-6


def test_space_frame_beam_example_in_both_bending_planes() -> None:
    # The beam of D. L. Logan, "A First Course in the Finite Element Method",
    # 4th ed., 2007, Example 4.4 (see test_plane_frame_fixed_fixed_beam; digits
    # from the same transcription), built from space frame elements along x
    # and loaded at once in the x-y plane (Fy, Mz; bending by EIz) and the x-z
    # plane (Fz, My; bending by EIy). With the right-hand rule dw/dx = -ry, so
    # the x-z moment is +20 kN m for the same sense as -20 kN m about z.
    x = np.array([[0.0, 0, 0], [3.0, 0, 0], [6.0, 0, 0]])
    ei = 210e9 * 4e-4
    k = np.zeros((18, 18))
    for e in range(2):
        ke = space_frame_stiffness(x[[e, e + 1]][None], ea=210e9 * 1.0, gj=1.0e6,
                                   eiy=ei, eiz=ei)[0]
        dofs = np.r_[6 * e:6 * e + 12]
        k[np.ix_(dofs, dofs)] += ke
    f = np.zeros(18)
    f[7], f[11] = -10000.0, -20000.0   # Fy, Mz at the middle node
    f[8], f[10] = -10000.0, 20000.0    # Fz, My at the middle node
    u, r = _solve(k, list(range(6, 12)), f)
    for dof in (7, 8):                 # v2 and w2: printed -0.0001339 m
        assert abs(u[dof] - (-0.0001339)) <= _half_unit(-0.0001339, 7)
    for dof in (10, 11):               # ry2, rz2: printed 0.00008928 (truncated)
        assert int(abs(u[dof]) * 1e8) == 8928
    assert abs(u[10] + u[11]) < 1e-18
    # no axial or torsional response to bending loads
    assert abs(u[6]) < 1e-15 and abs(u[9]) < 1e-15
    # end shears 10000 / 0 N and end moments 12500 / 2500 N m in both planes
    for shear, moment in ((1, 5), (2, 4)):
        assert sorted(np.round(np.abs([r[shear], r[12 + shear]]))) == [0.0, 10000.0]
        assert sorted(np.round(np.abs([r[moment], r[12 + moment]]))) == [2500.0, 12500.0]


def test_tetrahedron_matches_reference_library_integers() -> None:
    # Linear tetrahedron with nodes (2,3,4), (6,3,2), (2,5,1), (4,3,6),
    # E = 96, nu = 1/3: every entry of the 12 x 12 matrix is an integer. The
    # expected matrix is the one in the JuliaFEM test suite ("test tet4
    # stiffness matrix", JuliaFEM.jl, MIT licence), a reference library, read
    # from stored text; the example's textbook origin is not confirmed here.
    # Same node-blocked DOF order (ux, uy, uz per node) and engineering shear.
    expected = np.array([
        [149, 108, 24, -1, 6, 12, -54, -48, 0, -94, -66, -36],
        [108, 344, 54, -24, 104, 42, -24, -216, -12, -60, -232, -84],
        [24, 54, 113, 0, 30, 35, 0, -24, -54, -24, -60, -94],
        [-1, -24, 0, 29, -18, -12, -18, 24, 0, -10, 18, 12],
        [6, 104, 30, -18, 44, 18, 12, -72, -12, 0, -76, -36],
        [12, 42, 35, -12, 18, 29, 0, -24, -18, 0, -36, -46],
        [-54, -24, 0, -18, 12, 0, 36, 0, 0, 36, 12, 0],
        [-48, -216, -24, 24, -72, -24, 0, 144, 0, 24, 144, 48],
        [0, -12, -54, 0, -12, -18, 0, 0, 36, 0, 24, 36],
        [-94, -60, -24, -10, 0, 0, 36, 24, 0, 68, 36, 24],
        [-66, -232, -60, 18, -76, -36, 12, 144, 24, 36, 164, 72],
        [-36, -84, -94, 12, -36, -46, 0, 48, 36, 24, 72, 104],
    ], dtype=float)
    x = np.array([[2.0, 3.0, 4.0], [6.0, 3.0, 2.0], [2.0, 5.0, 1.0], [4.0, 3.0, 6.0]])
    ke = continuum_stiffness("tetra", x[None], elasticity=elasticity_matrix(3, 96.0, 1.0 / 3.0))[0]
    # printed as integers: half a unit would be 0.5; the match is exact to round-off
    np.testing.assert_allclose(ke, expected, rtol=0, atol=1e-9)


def test_scalar_quad_matches_sigmund_heat_conduction_ke() -> None:
    # O. Sigmund, "A 99 line topology optimization code written in Matlab",
    # Struct. Multidisc. Optim. 21 (2001) 120-127, the heat-conduction variant:
    # the unit-square bilinear element's conductivity matrix with unit
    # conductivity is KE = [2/3 -1/6 -1/3 -1/6; ...] (corners in cyclic order).
    # Fractions read from a public transcription of that routine
    # (lk_heat_conduction); its place in the paper is from memory. bandwise's
    # quad corners are also cyclic (counterclockwise), so the matrices coincide.
    expected = np.array([[2 / 3, -1 / 6, -1 / 3, -1 / 6],
                         [-1 / 6, 2 / 3, -1 / 6, -1 / 3],
                         [-1 / 3, -1 / 6, 2 / 3, -1 / 6],
                         [-1 / 6, -1 / 3, -1 / 6, 2 / 3]])
    x = np.array([[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]])
    ke = continuum_stiffness("quad", x[None], scalar=True)[0]
    np.testing.assert_allclose(ke, expected, rtol=0, atol=1e-14)
    # the Laplace matrix does not depend on the square's size in 2D
    ke2 = continuum_stiffness("quad", 2.5 * x[None], scalar=True)[0]
    np.testing.assert_allclose(ke2, expected, rtol=0, atol=1e-14)
