"""The constraint system over body coordinates, and its null space.

Concern: a DOF shared by two bodies that both stiffen it is an equality
between their motions; a held DOF is a constraint to zero.  Rows are built
vectorised as COO triplets; the null space comes from an SVD (tall systems
compressed by blockwise QR), or for parts of very many bodies from
shift-invert Lanczos on the sparse Gram matrix.

Sources: S. Pellegrino and C. R. Calladine, "Matrix analysis of statically
and kinematically indeterminate frameworks", Int. J. Solids Struct. 22
(1986) 409-428 (the null space of the compatibility matrix);
scipy.sparse.linalg.eigsh (ARPACK shift-invert mode).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
from numpy.typing import NDArray

from bandwise.core.dofs import DofLayout

from .bodies import Bodies
from .geometry import _Frames
from .motions import _BIT, _n_motions, _space_dofs, motion_rows

#: Singular values below this fraction of the largest count as zero.
RANK_RTOL = 1e-8
#: Most modes the sparse eigen-solver looks for in one part (see analysis.MAX_SPARSE_COORDINATES).
MAX_SPARSE_MODES = 400


def _pair_rows(space: str, dof: str, pts: NDArray[np.float64], frames: _Frames,
               node: NDArray[np.int64], body: NDArray[np.int64]) -> NDArray[np.float64]:
    """Rows (in each body's reduced coordinates) of one DOF at (node, body) pairs."""
    r = (pts[node] - frames.centroid[body]) / frames.size[body][:, None]
    rows = motion_rows(space, dof, r)
    if dof[0] == "r":   # coordinate q = rotation x body size (r is scaled): a rotation is q / size
        rows = rows / frames.size[body][:, None]
    return np.einsum("pm,pmk->pk", rows, frames.basis[body])


def _constraints(space: str, pts: NDArray[np.float64], bodies: Bodies, frames: _Frames,
                 layout: DofLayout, fixed: NDArray[np.int64],
                 ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.float64], int]:
    """COO rows of the constraint system over body coordinates ``body * nmot + j``.

    Returns (row, column, value, number of rows).
    """
    nm = _n_motions(space)
    node, body = bodies.node, bodies.body
    rows_r, rows_c, rows_v = [], [], []
    n_rows = 0
    for dof in _space_dofs(space):
        bit = _BIT[dof]
        owns = ((layout.masks[node] & bit) != 0) & ((bodies.own[body] & bit) != 0)
        if not owns.any():
            continue
        pn, pb = node[owns], body[owns]
        lead = np.r_[True, pn[1:] != pn[:-1]]        # first owning body of each node
        lead_idx = np.maximum.accumulate(np.where(lead, np.arange(pn.size), 0))
        follower = np.flatnonzero(~lead)             # every further owner equals the first
        first = lead_idx[follower]
        held = np.flatnonzero(lead & ((fixed[pn] & bit) != 0))   # the first owner's is zero
        # the motions are evaluated only where a constraint needs them
        needed = np.concatenate([first, follower, held])
        vals = _pair_rows(space, dof, pts, frames, pn[needed], pb[needed])
        nf = follower.size
        blocks = ((first, vals[:nf], 0), (follower, -vals[nf:2 * nf], 0),
                  (held, vals[2 * nf:], nf))
        for sel, v, shift in blocks:
            if sel.size:
                r = n_rows + shift + np.arange(sel.size)
                rows_r.append(np.repeat(r, nm))
                rows_c.append((pb[sel][:, None] * nm + np.arange(nm)).ravel())
                rows_v.append(v.ravel())
        n_rows += nf + held.size
    if not rows_r:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, np.zeros(0), 0
    return (np.concatenate(rows_r), np.concatenate(rows_c), np.concatenate(rows_v), n_rows)


def _null_space(a: NDArray[np.float64] | sp.csr_matrix, n_cols: int) -> NDArray[np.float64]:
    """Orthonormal basis of the null space of ``a`` (dense or sparse).

    A tall matrix is first compressed, block of rows by block of rows, to its
    triangular QR factor (same null space), so a part with many held DOFs
    never needs all its rows as a dense array.
    """
    if a.shape[0] == 0:
        return np.eye(n_cols)
    chunk = max(4 * n_cols, 20000)
    if a.shape[0] > chunk or sp.issparse(a):
        r = np.zeros((0, n_cols))
        for start in range(0, a.shape[0], chunk):
            block = a[start:start + chunk]
            block = block.toarray() if sp.issparse(block) else block
            r = la.qr(np.vstack([r, block]), mode="r")[0][:n_cols]
        a = r
    # a tall matrix needs only its right singular vectors: never form the m x m U
    _, s, vt = la.svd(a, full_matrices=a.shape[0] < n_cols)
    # every row has an entry of size 1 (a translation or rotation coefficient) and
    # lever arms scaled by the body size: an absolute floor of 1 keeps a nearly
    # zero matrix (all constraints satisfied by construction) rank-deficient
    tol = RANK_RTOL * max(float(s[0]) if s.size else 0.0, 1.0)
    rank = int(np.count_nonzero(s > tol))
    return vt[rank:].T.copy()


def _sparse_null_space(a: sp.csr_matrix) -> NDArray[np.float64] | None:
    """Null space of a large sparse constraint matrix from its Gram matrix ``A^T A``.

    The smallest eigenpairs come from shift-invert Lanczos (``eigsh`` with
    sigma slightly below zero, so the shifted matrix is definite), asking for
    more until one eigenvalue is clearly nonzero; an eigenvalue of ``A^T A``
    counts as zero below ``RANK_RTOL**2`` times the largest (bounded by the
    largest absolute row sum), the square of the dense rule.  None when there
    are more than :data:`MAX_SPARSE_MODES`.
    """
    from scipy.sparse.linalg import eigsh

    gram = (a.T @ a).tocsc()
    n = gram.shape[0]
    top = max(float(abs(gram).sum(axis=1).max()), 1.0)
    tol = RANK_RTOL**2 * top
    k = min(n - 1, 12)
    while True:
        w, v = eigsh(gram, k=k, sigma=-1e-6 * top, which="LM", tol=1e-12)
        zero = w <= tol
        if not zero.all():
            basis, _ = la.qr(v[:, zero], mode="economic")
            return basis
        if k >= min(n - 1, MAX_SPARSE_MODES):
            return None
        k = min(n - 1, MAX_SPARSE_MODES, 2 * k)
