"""Zero eigenvalues by inertia against dense eigen-solves and Sylvester's law.

Sources: J. J. Sylvester, "A demonstration of the theorem that every
homogeneous quadratic polynomial is reducible by real orthogonal substitutions
to the form of a sum of positive and negative squares", Phil. Mag. 4 (1852)
138-142: the inertia of a congruence is the inertia of the matrix, so the
negative pivots of LDL^T of A - s I count the eigenvalues below s.  The
reference counts come from numpy's dense symmetric eigen-solver (LAPACK
syevd), outside bandwise; a matrix built as Q diag(w) Q^T with Q orthogonal
has the eigenvalues w by construction.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from bandwise.algorithms.inertia import (
    LOWER_CUT,
    UPPER_CUT,
    InertiaError,
    factor_shifted,
    zero_modes,
)
from bandwise.algorithms.stiffness import assemble_stiffness
from bandwise.core.dofs import dof_layout
from bandwise.core.generate import hex_grid, line_frame, quad_grid, tet_grid


def _stiffness(model, **opts) -> sp.csr_matrix:
    return assemble_stiffness(model, dof_layout(model, **opts)).matrix


def _orthogonal(n: int, seed: int) -> np.ndarray:
    q, _ = np.linalg.qr(np.random.default_rng(seed).standard_normal((n, n)))
    return q


def _with_eigenvalues(w) -> sp.csr_matrix:
    """Q diag(w) Q^T: a dense symmetric matrix whose eigenvalues are w (by construction)."""
    w = np.asarray(w, dtype=float)
    q = _orthogonal(w.size, 7)
    return sp.csr_matrix((q * w) @ q.T)


@pytest.mark.parametrize("model, opts", [
    (tet_grid(4, 4, 3), {}), (quad_grid(12, 10), {}), (hex_grid(4, 3, 3), {"physics": "scalar"}),
    (line_frame(np.array([[0.0, 0], [1, 0], [2, 0.5], [3, 0], [2, -1]]),
                np.array([[0, 1], [1, 2], [2, 3], [1, 4], [4, 3]])), {}),
])
def test_negative_pivots_count_eigenvalues_below_the_shift(model, opts) -> None:
    # Sylvester (1852): negative pivots of LDL^T of K - s I = eigenvalues of K below s,
    # at shifts from round-off up to one hundredth of the largest eigenvalue
    k = _stiffness(model, **opts)
    w = np.linalg.eigvalsh(k.toarray())
    for rel in (1e-12, 1e-6, 1e-3, 1e-2):
        s = rel * w[-1]
        if np.min(np.abs(w - s)) < 1e-9 * w[-1]:
            continue                                   # an eigenvalue at the shift: ambiguous
        f = factor_shifted(k, s)
        assert f.below == int((w < s).sum()), rel
        assert f.backward_error < 1e-12


def test_factor_solves_the_shifted_system() -> None:
    k = _stiffness(quad_grid(6, 5))
    f = factor_shifted(k, -1e-3)
    b = np.arange(k.shape[0], dtype=float)
    x = f.solve(b)
    np.testing.assert_allclose(k @ x + 1e-3 * x, b, rtol=0, atol=1e-8 * np.abs(b).max())


def test_repeated_zeros_are_all_counted() -> None:
    # five loose free solids: 5 x 6 = 30 equal zero eigenvalues (rigid-body kinematics),
    # the multiplicity an iterative eigen-solver tends to miss
    block = _stiffness(tet_grid(3, 3, 3))
    k = sp.block_diag([block] * 5).tocsr()
    w = np.linalg.eigvalsh(k.toarray())
    assert int((w < 1e-9 * w[-1]).sum()) == 30
    z = zero_modes(k)
    assert z.count == 30 and z.certain


def test_prescribed_spectrum_with_a_clear_gap() -> None:
    # eigenvalues by construction: three zeros (to round-off), then 1e-4 and up
    w = np.r_[0.0, 0.0, 0.0, np.geomspace(1e-4, 10.0, 37)]
    z = zero_modes(_with_eigenvalues(w))
    assert z.count == 3 and z.certain and z.factorisations == 1


def test_eigenvalue_in_the_band_moves_the_cut_to_the_gap() -> None:
    # Q diag(w) Q^T has a nearly unit diagonal; an eigenvalue of 1e-9 lies between the
    # cuts: it is small but real (far above round-off), so the cut goes to the gap under
    # it (two zeros below, 1e-9 above), never above it
    w = np.r_[0.0, 0.0, 1e-9, np.geomspace(1e-3, 2.0, 30)]
    a = _with_eigenvalues(w)
    z = zero_modes(a)
    assert LOWER_CUT < 1e-9 < UPPER_CUT
    assert z.count == 2 and z.certain
    # the estimate is on the unit-diagonal scale: the third eigenvalue of D^-1/2 A D^-1/2
    d = np.sqrt(a.diagonal())
    scaled = np.linalg.eigvalsh(a.toarray() / np.outer(d, d))
    assert z.smallest_nonzero == pytest.approx(scaled[2], rel=0.05)
    # the same at 1e-13: below the round-off of the zeros' estimates the gap is that to
    # 1e-3, and the eigenvalue counts as zero
    w2 = np.r_[0.0, 0.0, 1e-13, np.geomspace(1e-3, 2.0, 30)]
    assert zero_modes(_with_eigenvalues(w2)).count == 3


def test_no_gap_is_reported_uncertain() -> None:
    # eigenvalues spread evenly in log scale through the band: no clear cut
    w = np.r_[np.geomspace(1e-12, 1e-6, 13), np.geomspace(1e-3, 2.0, 20)]
    z = zero_modes(_with_eigenvalues(w))
    assert not z.certain and z.gap < 1e3
    assert z.count == int((w < z.cut).sum())       # whatever the cut, the count below it is exact


def test_indefinite_matrix_counts_zeros_and_negatives_apart() -> None:
    w = np.r_[-2.0, -0.5, 0.0, 0.0, 1e-3, np.linspace(1.0, 3.0, 20)]
    a = _with_eigenvalues(w)
    z = zero_modes(a, semidefinite=False, basis=True)
    assert z.count == 2 and z.negative == 2 and z.factorisations == 4
    assert z.basis.shape == (a.shape[0], 2) and np.abs(a @ z.basis).max() < 1e-10


def test_empty_rows_are_null_vectors_and_basis_spans_the_null_space() -> None:
    k = _stiffness(quad_grid(5, 4))
    n = k.shape[0]
    padded = sp.block_diag([k, sp.csr_matrix((3, 3))]).tocsr()   # three loose DOFs
    z = zero_modes(padded, basis=True)
    assert z.count == 6 and z.empty_rows == 3
    b = z.basis
    assert b.shape == (n + 3, 6)
    np.testing.assert_allclose(b.T @ b, np.eye(6), atol=1e-10)
    assert np.abs(padded @ b).max() < 1e-10 * abs(k).max()
    # and it is the dense null space: projecting it out leaves rank n + 3 - 6
    w, v = np.linalg.eigh(padded.toarray())
    dense_null = v[:, w < 1e-9 * w[-1]]
    assert dense_null.shape[1] == 6
    np.testing.assert_allclose(np.linalg.svd(b.T @ dense_null, compute_uv=False), 1.0, atol=1e-8)


def test_mixed_units_do_not_set_a_false_scale() -> None:
    # a plane frame in SI units (E = 210 GPa, A = 1e-2 m^2, I = 1e-6 m^4): translations
    # and rotations differ by orders of magnitude; the free frame has 3 rigid motions
    from bandwise.algorithms.stiffness import plane_frame_stiffness

    x = np.array([[0.0, 0, 0], [4, 0, 0], [4, 3, 0], [8, 3, 0], [12, 0, 0]])
    k = np.zeros((15, 15))
    for i, j in [(0, 1), (1, 2), (2, 3), (3, 4)]:
        ke = plane_frame_stiffness(x[[i, j]][None], ea=210e9 * 1e-2, ei=210e9 * 1e-6)[0]
        d = np.r_[3 * i:3 * i + 3, 3 * j:3 * j + 3]
        k[np.ix_(d, d)] += ke
    w = np.linalg.eigvalsh(k)
    assert int((w < 1e-9 * w[-1]).sum()) == 3
    assert zero_modes(sp.csr_matrix(k)).count == 3


def test_factor_size_limit_is_a_refusal_not_a_guess() -> None:
    k = _stiffness(tet_grid(4, 4, 4))
    with pytest.raises(InertiaError, match="over the limit"):
        zero_modes(k, max_factor_entries=100)


def test_superlu_with_diagonal_pivots_is_an_ldlt() -> None:
    # the claim the method rests on: with a diagonal pivot threshold of zero and equal
    # row and column orders, SuperLU's P A P^T = L U has U = D L^T, so diag(U) holds the
    # pivots of an LDL^T (checked here to round-off on a shifted, indefinite stiffness)
    k = _stiffness(tet_grid(5, 5, 4))
    s = 1e-2 * abs(k).sum(axis=1).max()
    f = factor_shifted(k, s)
    lu = f._lu
    assert np.array_equal(lu.perm_r, lu.perm_c)
    d = lu.U.diagonal()
    err = abs(lu.U.T - lu.L @ sp.diags(d)).max() / abs(lu.U).max()
    assert err < 1e-12
    assert f.below == int((np.linalg.eigvalsh(k.toarray()) < s).sum()) > 6
