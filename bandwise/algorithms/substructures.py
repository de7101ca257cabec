"""The null space of a large stiffness matrix, counted piece by piece.

What
    The dimension of the null space of ``K = sum_s K_s``, where each piece
    ``K_s`` is the stiffness of a group of elements (a substructure) over the
    DOFs those elements touch, and every ``K_s`` is positive semi-definite.

Why
    Factoring a whole three-dimensional stiffness of a million DOFs takes
    more memory and time than this tool may spend (the factor of a compact
    solid of 10^6 DOFs holds about 2 x 10^9 values).  Its pieces are small.

How
    For semi-definite terms, ``u^T K u = sum_s u^T K_s u`` is zero exactly
    when every term is, so ``null(K)`` is the set of displacements whose
    restriction to every piece lies in that piece's null space and which
    agree at the DOFs pieces share.  Each piece's null space comes from
    :func:`bandwise.algorithms.inertia.zero_modes` (inertia count and a
    basis ``N_s``, orthonormal); a displacement of the null space is then
    ``u|_s = N_s c_s`` with one equation per shared DOF and extra piece,
    ``N_s[d] c_s - N_t[d] c_t = 0``.  With ``C`` those equations,
    ``dim null(K) = dim null(C)`` (``N_s`` has full column rank), counted by
    the same inertia method on the small matrix ``C^T C``.  DOFs that no
    piece touches are null vectors by themselves.  This is the null space of
    floating substructures as FETI methods find it (Farhat and Roux 1991;
    Farhat and Geradin 1998), used here to count rather than to solve.

Cost
    One small factorisation per piece (a few thousand DOFs each) and
    one for the coarse matrix, whose order is the sum of the pieces' null
    space dimensions (six per floating piece of a solid).  Memory: the
    largest piece's factor plus the bases, ``O(n)`` overall.  The pieces are
    worked one at a time on one BLAS thread: for factors this small more
    threads only wait for each other.

References
----------
C. Farhat and F.-X. Roux, "A method of finite element tearing and
interconnecting and its parallel solution algorithm", Int. J. Numer. Meth.
Engng 32 (1991) 1205-1227.
C. Farhat and M. Geradin, "On the general solution by a direct method of a
large-scale singular system of linear equations: application to the analysis
of floating structures", Int. J. Numer. Meth. Engng 41 (1998) 675-696.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray
from threadpoolctl import threadpool_limits

from .inertia import ZeroModes, zero_modes

__all__ = ["GluedZeroModes", "glued_zero_modes"]


@dataclass(frozen=True)
class GluedZeroModes:
    """The null space of a sum of semi-definite pieces, counted piece by piece.

    Attributes
    ----------
    count
        Dimension of the null space of the sum.
    pieces
        Number of pieces.
    piece_modes
        Sum of the pieces' own null-space dimensions (order of the coarse problem).
    untouched
        DOFs no piece touches (null vectors by themselves).
    interface_equations
        Equations of agreement at shared DOFs.
    coarse
        The inertia count of the coarse matrix ``C^T C``.
    smallest_gap
        Smallest gap met (pieces and coarse matrix); see :class:`ZeroModes`.
    certain
        True when every count was certain.
    """

    count: int
    pieces: int
    piece_modes: int
    untouched: int
    interface_equations: int
    coarse: ZeroModes | None
    smallest_gap: float
    certain: bool

    @property
    def method(self) -> str:
        """One line saying how the count was made."""
        return (f"inertia, piece by piece ({self.pieces} pieces, {self.piece_modes} piece "
                f"modes, {self.interface_equations:,} interface equations), smallest gap "
                f"{self.smallest_gap:.1e}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"count": self.count, "pieces": self.pieces, "piece_modes": self.piece_modes,
                "untouched": self.untouched, "interface_equations": self.interface_equations,
                "coarse": None if self.coarse is None else self.coarse.to_dict(),
                "smallest_gap": self.smallest_gap, "certain": self.certain}


def glued_zero_modes(pieces: Iterable[tuple[NDArray[np.int64], sp.spmatrix]],
                     n: int) -> GluedZeroModes:
    """Dimension of ``null(sum_s K_s)`` from the pieces' null spaces (see the module notes).

    Parameters
    ----------
    pieces
        ``(dofs, K_s)`` pairs, consumed one at a time: ``dofs`` the sorted,
        distinct global indices (0..n-1) of the piece's DOFs, ``K_s`` its
        positive semi-definite matrix over them, in that order.
    n
        Order of the whole matrix.

    Returns
    -------
    GluedZeroModes

    Raises
    ------
    bandwise.algorithms.inertia.InertiaError
        When a factorisation fails its checks.

    Examples
    --------
    Two bars in a line, each a piece: one rigid translation is left.

    >>> import numpy as np, scipy.sparse as sp
    >>> bar = sp.csr_matrix(np.array([[1.0, -1.0], [-1.0, 1.0]]))
    >>> glued_zero_modes([(np.array([0, 1]), bar), (np.array([1, 2]), bar)], 3).count
    1
    """
    dofs: list[NDArray[np.int64]] = []
    bases: list[NDArray[np.float64]] = []
    gaps = [np.inf]
    certain = True
    # many small factorisations: BLAS threads only spin (measured 2.5x slower with two)
    with threadpool_limits(limits=1, user_api="blas"):
        for g, k in pieces:
            z = zero_modes(k, basis=True)
            dofs.append(np.asarray(g, dtype=np.int64))
            bases.append(z.basis if z.basis is not None else np.zeros((len(g), 0)))
            gaps.append(z.gap)
            certain &= z.certain
    covered = np.zeros(n, dtype=bool)
    for g in dofs:
        covered[g] = True
    untouched = int(n - np.count_nonzero(covered))
    widths = np.array([b.shape[1] for b in bases], dtype=np.int64)
    col_off = np.r_[0, np.cumsum(widths)]
    n_cols = int(col_off[-1])
    c_matrix, n_eq = _interface_equations(dofs, bases, col_off)
    coarse = None
    count = 0
    if n_cols:
        if n_eq:
            gram = (c_matrix.T @ c_matrix).tocsr()
            coarse = zero_modes(gram)
            count = coarse.count
            gaps.append(coarse.gap)
            certain &= coarse.certain
        else:
            count = n_cols
    return GluedZeroModes(count + untouched, len(dofs), n_cols, untouched, n_eq, coarse,
                          float(min(gaps)), bool(certain))


def _interface_equations(dofs: list[NDArray[np.int64]], bases: list[NDArray[np.float64]],
                         col_off: NDArray[np.int64]) -> tuple[sp.csr_matrix, int]:
    """``C``: one row per shared DOF and extra piece, ``N_first[d] c_first - N_other[d] c_other``."""
    if not dofs:
        return sp.csr_matrix((0, 0)), 0
    sizes = np.array([g.size for g in dofs], dtype=np.int64)
    dof = np.concatenate(dofs)
    piece = np.repeat(np.arange(len(dofs), dtype=np.int64), sizes)
    local = np.arange(dof.size, dtype=np.int64) - np.repeat(np.r_[0, np.cumsum(sizes)[:-1]], sizes)
    order = np.argsort(dof, kind="stable")
    dof, piece, local = dof[order], piece[order], local[order]
    first = np.r_[True, dof[1:] != dof[:-1]]
    head = np.maximum.accumulate(np.where(first, np.arange(dof.size), 0))
    other = np.flatnonzero(~first)
    n_eq = other.size
    rows_l, cols_l, vals_l = [], [], []
    for side, occ in ((1.0, head[other]), (-1.0, other)):
        eq = np.arange(n_eq, dtype=np.int64)
        p = piece[occ]
        for s in np.unique(p):
            sel = p == s
            block = bases[s][local[occ[sel]]]        # (equations of this piece, modes)
            if block.shape[1] == 0:
                continue
            rows_l.append(np.repeat(eq[sel], block.shape[1]))
            cols_l.append(np.tile(col_off[s] + np.arange(block.shape[1]), int(sel.sum())))
            vals_l.append(side * block.ravel())
    n_cols = int(col_off[-1])
    if not rows_l:
        return sp.csr_matrix((n_eq, n_cols)), n_eq
    c = sp.coo_matrix((np.concatenate(vals_l), (np.concatenate(rows_l), np.concatenate(cols_l))),
                      shape=(n_eq, n_cols)).tocsr()
    return c, n_eq
