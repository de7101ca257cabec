"""Zero eigenvalues of a sparse symmetric matrix, counted by inertia (Sylvester's law).

What
    The number of zero eigenvalues (the dimension of the null space) of a
    symmetric matrix ``A``, such as a stiffness matrix with its supports, and
    on request a basis of that null space.

How
    *Sylvester's law of inertia*: a congruence ``X^T A X`` (X nonsingular)
    keeps the number of negative, zero and positive eigenvalues.  An
    ``LDL^T`` factorisation is such a congruence, so the number of negative
    pivots of ``A - sigma I`` is the number of eigenvalues of ``A`` below
    ``sigma``, exactly, whatever their multiplicity (spectrum slicing).  A
    repeated zero eigenvalue cannot be missed, as an iterative eigen-solver
    can miss it.

    1. Rows and columns without any stored value (a DOF no element stiffens)
       are null vectors by themselves; they are counted and set aside.
    2. The rest is scaled symmetrically to a unit diagonal,
       ``B = S A S`` with ``S = |diag A|^(-1/2)`` (again a congruence: the
       null space keeps its dimension).  Eigenvalues are then measured
       against the stiffness of the DOFs themselves, so translations and
       rotations in mixed units, or a soft and a stiff member, do not set a
       false scale.
    3. The inertia ``n(UPPER_CUT)`` counts the eigenvalues of ``B`` below
       :data:`UPPER_CUT`.  Subspace iteration with that factor gives Ritz
       values, which bound those eigenvalues from above (Poincare
       separation); when all of them are below :data:`LOWER_CUT`, the zero
       eigenvalues are separated from the rest by a gap of at least
       ``UPPER_CUT / LOWER_CUT`` (four decades): the count is certain, from
       one factorisation.  (For a matrix not known to be semi-definite the
       same is shown by counts at plus and minus both cuts.)
    4. When they differ, eigenvalues lie in that band.  The lowest
       eigenvalues are estimated by subspace (block inverse) iteration with
       the factor already made, and the cut is placed in the widest relative
       gap of that low spectrum that leaves only eigenvalues below
       ``LOWER_CUT`` under it (from the round-off floor up: the cut can move
       down into a gap, never up past a small but real eigenvalue); the
       inertia at the middle of the gap gives the count.  The width of the
       gap is reported; a gap under :data:`SURE_GAP` marks the count as
       uncertain.

    "Zero" thus means below ``LOWER_CUT`` of the diagonal stiffness: far
    above the round-off of an assembled matrix (about ``1e-16`` to
    ``1e-13``), far below any stiffness a solver in double precision can
    still use.

    For a matrix not known to be semi-definite the count is
    ``n(s) - n(-s)`` (eigenvalues with ``|lambda| < s``), and ``n(-s)`` is
    its number of clearly negative eigenvalues.

Factorisation
    SciPy's SuperLU (Demmel et al. 1999) with a diagonal pivot threshold of
    zero, symmetric mode, and a symmetric fill-reducing order given
    beforehand (METIS nested dissection, Karypis and Kumar 1998).  SuperLU
    then takes every pivot on the diagonal unless one is exactly zero; with
    row and column permutations equal, ``P A P^T = L U`` and, ``A`` being
    symmetric, ``U = D L^T``: this is an ``LDL^T`` factorisation and the
    signs of ``diag(U)`` are the inertia.  Both conditions are checked on
    every factor (equal permutations; a solve's backward error, which must
    stay at round-off: pivoting on the diagonal of an indefinite matrix is
    not stable in general, but the shifts used here are tiny against the
    diagonal, so the matrix stays close to a semi-definite one, whose
    diagonal pivots are stable); a failed check raises
    :class:`InertiaError`, never a wrong count.

Cost
    One sparse factorisation (four for a matrix not known to be
    semi-definite, one or two more when the band holds eigenvalues) and a
    few block solves.  Memory is that of the ``L`` and ``U`` factors: fine for a whole
    matrix of tens of thousands of rows, or for the pieces of
    :mod:`bandwise.algorithms.substructures`, which counts the null space of
    a million-DOF stiffness piece by piece.

References
----------
J. J. Sylvester, "A demonstration of the theorem that every homogeneous
quadratic polynomial is reducible by real orthogonal substitutions to the form
of a sum of positive and negative squares", Philosophical Magazine (4th
series) 4 (1852) 138-142.
J. W. Demmel, S. C. Eisenstat, J. R. Gilbert, X. S. Li and J. W. H. Liu,
"A supernodal approach to sparse partial pivoting", SIAM J. Matrix Anal. Appl.
20 (1999) 720-755 (SuperLU).
T. Ericsson and A. Ruhe, "The spectral transformation Lanczos method for the
numerical solution of large sparse generalized symmetric eigenvalue problems",
Math. Comp. 35 (1980) 1251-1268 (inertia counts to check that no eigenvalue
of an interval was missed).
G. Karypis and V. Kumar, "A fast and high quality multilevel scheme for
partitioning irregular graphs", SIAM J. Sci. Comput. 20 (1998) 359-392.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from numpy.typing import NDArray

from bandwise.core.errors import BandwiseError
from bandwise.core.graph import graph_from_matrix

from .orderings.nested_dissection import nested_dissection
from .orderings.symbolic import cholesky_nnz

__all__ = ["InertiaError", "ShiftedFactor", "ZeroModes", "factor_shifted", "zero_modes",
           "LOWER_CUT", "UPPER_CUT", "SURE_GAP"]

#: Eigenvalues of the unit-diagonal matrix below this are zero for sure.
LOWER_CUT = 1e-11
#: With no eigenvalue between the two cuts, the count is certain.
UPPER_CUT = 1e-7
#: A gap (ratio of the eigenvalues on both sides of the cut) below this is uncertain.
SURE_GAP = 1e3
#: Round-off floor of the scaled eigenvalue estimates.
NOISE_FLOOR = 64 * float(np.finfo(np.float64).eps)
#: A factor whose solve has a larger backward error is refused.
BACKWARD_ERROR_LIMIT = 1e-8
#: Largest ``rows x block`` of the subspace iteration (memory: 8 bytes each).
MAX_BLOCK_ENTRIES = 40_000_000
#: Extra vectors of the subspace iteration beyond the wanted ones.
EXTRA_VECTORS = 4
#: Subspace iterations for eigenvalue estimates, and for a null basis behind a
#: certified gap (each shrinks the other components by the gap, 10^4 or more).
ITERATIONS = 5
BASIS_ITERATIONS = 3


class InertiaError(BandwiseError):
    """The factorisation could not be made a symmetric ``LDL^T`` at round-off accuracy."""


@dataclass(frozen=True)
class ShiftedFactor:
    """An ``LDL^T`` factorisation of ``A - shift I`` and its inertia.

    Attributes
    ----------
    shift
        The shift.
    below
        Negative pivots: the number of eigenvalues of ``A`` below ``shift``.
    pivots
        The pivots ``d`` of ``D``, in the order of the rows of ``A``.
    backward_error
        Normwise backward error of one solve with a seeded right-hand side.
    """

    shift: float
    below: int
    pivots: NDArray[np.float64] = field(repr=False, compare=False)
    backward_error: float = 0.0
    _lu: Any = field(default=None, repr=False, compare=False)

    def solve(self, rhs: NDArray[np.float64]) -> NDArray[np.float64]:
        """``(A - shift I)^(-1) rhs`` (a vector or a block of columns)."""
        return self._lu.solve(np.asarray(rhs, dtype=np.float64))


def _one_factor(a: sp.csc_matrix, shift: float) -> ShiftedFactor:
    n = a.shape[0]
    m = (a - shift * sp.identity(n, format="csc")).tocsc()
    try:
        lu = spla.splu(m, permc_spec="NATURAL", diag_pivot_thresh=0.0,
                       options={"SymmetricMode": True})
    except RuntimeError as exc:  # exactly singular: a zero column
        raise InertiaError(f"the factorisation stopped: {exc}") from None
    if not np.array_equal(lu.perm_r, lu.perm_c):
        raise InertiaError("the factorisation needed an off-diagonal pivot (an exactly zero "
                           "diagonal pivot), so it is not an LDL^T")
    u_diag = lu.U.diagonal()
    pivots = u_diag[lu.perm_c]
    rng = np.random.default_rng(12345)
    rhs = rng.standard_normal(n)
    x = lu.solve(rhs)
    norm_m = float(abs(m).sum(axis=1).max()) if n else 0.0
    res = m @ x - rhs
    denom = norm_m * float(np.abs(x).max(initial=0.0)) + float(np.abs(rhs).max(initial=0.0))
    eta = float(np.abs(res).max(initial=0.0) / denom) if denom > 0 else 0.0
    if not np.isfinite(eta) or eta > BACKWARD_ERROR_LIMIT:
        raise InertiaError(f"the factorisation is not accurate (backward error {eta:.1e})")
    return ShiftedFactor(float(shift), int(np.count_nonzero(u_diag < 0)), pivots, eta, lu)


def factor_shifted(matrix: sp.spmatrix, shift: float) -> ShiftedFactor:
    """``LDL^T`` of ``A - shift I`` through SuperLU, with its inertia.

    The matrix is taken as symmetric and should already be in a
    fill-reducing order (the factorisation keeps the order given).  A shift
    nudged by one part in a thousand is tried once if a pivot is exactly zero.

    Parameters
    ----------
    matrix
        Square, symmetric.
    shift
        The shift ``sigma``.

    Returns
    -------
    ShiftedFactor

    Raises
    ------
    InertiaError
        When no symmetric factorisation at round-off accuracy was found.

    Examples
    --------
    >>> import numpy as np, scipy.sparse as sp
    >>> a = sp.csc_matrix(np.diag([1.0, 2.0, 3.0, 4.0]))
    >>> factor_shifted(a, 2.5).below
    2
    """
    a = sp.csc_matrix(matrix, dtype=np.float64)
    try:
        return _one_factor(a, shift)
    except InertiaError:
        nudged = shift * 1.001 if shift else 1e-300
        return _one_factor(a, nudged)


@dataclass(frozen=True)
class ZeroModes:
    """The zero eigenvalues of a symmetric matrix, counted by inertia.

    Attributes
    ----------
    count
        Dimension of the null space: eigenvalues in the zero cluster,
        rows without any value included.
    empty_rows
        Rows (and columns) with no stored value: null vectors by themselves.
    negative
        Eigenvalues clearly below zero (below minus the cut, unit-diagonal
        scale); None when the matrix was taken as semi-definite and not asked.
    cut
        Where the zero cluster ends, relative to the diagonal: an eigenvalue of
        ``S A S`` (unit diagonal) below it counts as zero.
    gap
        Ratio of the first eigenvalue above the cut to the last one below
        (the round-off floor when none is below); at least
        ``UPPER_CUT / LOWER_CUT`` when certified by two inertia counts.
    certain
        True when the gap is at least :data:`SURE_GAP`.
    smallest_nonzero
        Estimate of the smallest eigenvalue above the cut (unit-diagonal
        scale), when the band held eigenvalues; otherwise None (it is then
        above :data:`UPPER_CUT`).
    pivot_ratio
        Smallest over largest absolute pivot of the ``LDL^T`` of
        ``A + LOWER_CUT |diag A|`` (fill-reducing order; computed when the
        matrix is not taken as semi-definite, else None).
    factorisations
        Sparse factorisations made.
    basis
        Orthonormal null-space basis (rows x count), when asked.
    """

    count: int
    order: int
    empty_rows: int
    negative: int | None
    cut: float
    gap: float
    certain: bool
    smallest_nonzero: float | None = None
    pivot_ratio: float | None = None
    factorisations: int = 0
    basis: NDArray[np.float64] | None = field(default=None, repr=False, compare=False)

    @property
    def method(self) -> str:
        """One line saying how the count was made."""
        return (f"inertia of LDL^T factorisations ({self.factorisations}), cut at "
                f"{self.cut:.1e} of the diagonal, gap {self.gap:.1e}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (without the basis)."""
        return {"count": self.count, "order": self.order, "empty_rows": self.empty_rows,
                "negative": self.negative, "cut": self.cut, "gap": self.gap,
                "certain": self.certain, "smallest_nonzero": self.smallest_nonzero,
                "pivot_ratio": self.pivot_ratio, "factorisations": self.factorisations}


def _symmetric_part(a: sp.csr_matrix) -> sp.csr_matrix:
    """``(A + A^T) / 2`` over the union of both patterns, explicit zeros kept."""
    c = a.tocoo()
    out = sp.coo_matrix((np.r_[c.data, c.data] * 0.5, (np.r_[c.row, c.col], np.r_[c.col, c.row])),
                        shape=a.shape).tocsr()
    out.sort_indices()
    return out


def _scaled(a: sp.csr_matrix) -> tuple[sp.csr_matrix, NDArray[np.float64], NDArray[np.bool_]]:
    """``S A S`` over the rows with a value, the scales ``S``, and the empty-row mask.

    The stored structure is kept (explicit zeros included), so the rows of one
    node keep equal patterns for the ordering.
    """
    absa = abs(a)
    row_max = np.asarray(absa.max(axis=1).todense()).ravel() if a.nnz else np.zeros(a.shape[0])
    empty = row_max == 0
    keep = np.flatnonzero(~empty)
    sub = a[keep][:, keep].tocsr()
    d = np.abs(sub.diagonal())
    # a zero diagonal beside nonzero entries: scale by the row's largest entry
    d = np.where(d > 0, d, row_max[keep])
    s = 1.0 / np.sqrt(d)
    rows = np.repeat(np.arange(keep.size), np.diff(sub.indptr))
    sub.data = sub.data * s[rows] * s[sub.indices]
    return sub, s, empty


def _fill_order(b: sp.csr_matrix) -> NDArray[np.int64]:
    """Nested dissection of the rows, rows of equal pattern (a node's DOFs) kept together.

    Rows whose patterns (diagonal included) hash alike form one vertex of a
    quotient graph, which METIS orders; a hash collision only makes the
    order a little worse, never wrong.
    """
    n = b.shape[0]
    if n <= 2:
        return np.arange(n, dtype=np.int64)
    pat = sp.csr_matrix((np.ones(b.nnz, dtype=np.int8), b.indices, b.indptr), shape=b.shape)
    pat = sp.csr_matrix(pat + sp.identity(n, dtype=np.int8, format="csr"))
    pat.sort_indices()
    with np.errstate(over="ignore"):
        keys = (pat.indices.astype(np.uint64) + np.uint64(1)) * np.uint64(0x9E3779B97F4A7C15)
        keys ^= keys >> np.uint64(29)
        h = np.add.reduceat(keys, pat.indptr[:-1])
    _, label = np.unique(np.stack([h, np.diff(pat.indptr).astype(np.uint64)], axis=1), axis=0,
                         return_inverse=True)
    label = label.ravel()
    groups = int(label.max()) + 1
    q = sp.csr_matrix((np.ones(pat.nnz, dtype=np.int8),
                       (label[np.repeat(np.arange(n), np.diff(pat.indptr))], label[pat.indices])),
                      shape=(groups, groups))
    group_order = nested_dissection(graph_from_matrix(q)) if groups > 2 else np.arange(groups)
    rank = np.empty(groups, dtype=np.int64)
    rank[group_order] = np.arange(groups)
    return np.lexsort((np.arange(n), rank[label])).astype(np.int64)


def _low_ritz(b: sp.csr_matrix, factor: ShiftedFactor, k: int, iterations: int = ITERATIONS,
              ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Ritz values and vectors of ``b`` for the ``k`` eigenvalues nearest the factor's shift."""
    n = b.shape[0]
    k = min(k, n)
    rng = np.random.default_rng(2024)
    x = rng.standard_normal((n, k))
    for _ in range(iterations):
        x = factor.solve(x)
        x, _ = np.linalg.qr(x)
    h = x.T @ (b @ x)
    theta, v = np.linalg.eigh((h + h.T) / 2)
    return theta, x @ v


def _counted(factors: dict[float, ShiftedFactor], b: sp.csc_matrix, shift: float) -> int:
    """Eigenvalues of ``b`` below ``shift`` (factors cached by shift)."""
    if shift not in factors:
        factors[shift] = factor_shifted(b, shift)
    return factors[shift].below


def _widest_gap(mags: NDArray[np.float64], top: int) -> tuple[int, float, float]:
    """Cut position c <= top at the widest ratio of the sorted magnitudes: (c, gap, cut).

    Every value left below the cut must itself be below ``LOWER_CUT``: the
    cut may move down into a gap under it, never up past a small but real
    eigenvalue.
    """
    mags = np.sort(np.maximum(mags, NOISE_FLOOR))
    top = min(top, mags.size - 1, int(np.count_nonzero(mags <= LOWER_CUT)))
    below = np.r_[NOISE_FLOOR, mags[:-1]]
    ratios = mags[:top + 1] / below[:top + 1]
    c = int(np.argmax(ratios))
    return c, float(ratios[c]), float(np.sqrt(mags[c] * below[c]))


@dataclass(frozen=True)
class _Count:
    count: int
    cut: float
    gap: float
    smallest: float | None
    vectors: NDArray[np.float64] | None
    negative: int | None = None


def _count_semidefinite(bp: sp.csc_matrix, factors: dict[float, ShiftedFactor],
                        want_basis: bool) -> _Count:
    """One factorisation at ``UPPER_CUT``; the Ritz values bound the eigenvalues below it.

    By the Poincare separation theorem the j-th Ritz value from any subspace
    is at least the j-th eigenvalue, so when the ``nu`` Ritz values under the
    shift are all below ``LOWER_CUT``, the ``nu`` eigenvalues are too, and the
    next one is at least ``UPPER_CUT`` (inertia): the gap is certified.
    """
    nu = _counted(factors, bp, UPPER_CUT)
    if nu == 0:
        return _Count(0, UPPER_CUT, UPPER_CUT / NOISE_FLOOR, None, None)
    if bp.shape[0] * (nu + EXTRA_VECTORS) > MAX_BLOCK_ENTRIES:
        raise InertiaError(f"{nu:,} eigenvalues lie near zero, too many to bound")
    theta, x = _low_ritz(bp, factors[UPPER_CUT], nu + EXTRA_VECTORS, BASIS_ITERATIONS)
    if theta[nu - 1] <= LOWER_CUT:
        gap = UPPER_CUT / max(float(theta[nu - 1]), NOISE_FLOOR)
        return _Count(nu, UPPER_CUT, gap, None, x[:, :nu] if want_basis else None)
    # eigenvalues in the band: estimate them, cut at the widest gap, count there
    theta, _ = _low_ritz(bp, factors[UPPER_CUT], nu + EXTRA_VECTORS, ITERATIONS)
    c, gap, cut = _widest_gap(np.abs(theta), nu)
    count = _counted(factors, bp, cut)
    smallest = float(np.sort(np.abs(theta))[min(c, theta.size - 1)])
    vectors = None
    if want_basis and count:
        theta, x = _low_ritz(bp, factors[cut], count + EXTRA_VECTORS, BASIS_ITERATIONS)
        vectors = x[:, np.argsort(np.abs(theta))[:count]]
    return _Count(count, cut, gap, smallest, vectors)


def _count_indefinite(bp: sp.csc_matrix, factors: dict[float, ShiftedFactor],
                      want_basis: bool) -> _Count:
    """Counts at plus and minus both cuts: zero when both windows between them are empty."""
    inner = _counted(factors, bp, LOWER_CUT) - _counted(factors, bp, -LOWER_CUT)
    outer = _counted(factors, bp, UPPER_CUT) - _counted(factors, bp, -UPPER_CUT)
    count, cut, gap, smallest = inner, LOWER_CUT, UPPER_CUT / LOWER_CUT, None
    if outer != inner:
        if bp.shape[0] * (outer + EXTRA_VECTORS) > MAX_BLOCK_ENTRIES:
            raise InertiaError(f"{outer:,} eigenvalues lie near zero, too many to place the cut")
        theta, _ = _low_ritz(bp, factors[LOWER_CUT], outer + EXTRA_VECTORS, ITERATIONS)
        c, gap, cut = _widest_gap(np.abs(theta), outer)
        count = _counted(factors, bp, cut) - _counted(factors, bp, -cut)
        smallest = float(np.sort(np.abs(theta))[min(c, theta.size - 1)])
    vectors = None
    if want_basis and count:
        theta, x = _low_ritz(bp, factors[cut], count + EXTRA_VECTORS, BASIS_ITERATIONS)
        vectors = x[:, np.argsort(np.abs(theta))[:count]]
    return _Count(count, cut, gap, smallest, vectors, factors[-cut].below)


def zero_modes(matrix: sp.spmatrix, *, semidefinite: bool = True, basis: bool = False,
               max_factor_entries: int | None = None) -> ZeroModes:
    """Count the zero eigenvalues of a symmetric matrix by inertia (see the module notes).

    Parameters
    ----------
    matrix
        Square and symmetric (only its symmetric part is used); a stiffness
        matrix with its held DOFs removed, or an assembled matrix from a file.
    semidefinite
        True when the matrix is known to be positive semi-definite (an
        assembled stiffness): one factorisation at ``UPPER_CUT`` and a Ritz
        bound suffice.  False for a matrix of unknown origin: counts at
        plus and minus both cuts, and the clearly negative eigenvalues.
    basis
        Also return an orthonormal basis of the null space.
    max_factor_entries
        Refuse (raise) when the factor's predicted size, counted by a
        symbolic factorisation in the chosen order, exceeds this.

    Returns
    -------
    ZeroModes

    Raises
    ------
    InertiaError
        When the factorisation cannot be made a symmetric LDL^T at round-off
        accuracy (the count is then unknown, never guessed), or would exceed
        ``max_factor_entries``.

    Examples
    --------
    >>> import numpy as np, scipy.sparse as sp
    >>> bar = sp.csr_matrix(np.array([[1.0, -1, 0], [-1, 2, -1], [0, -1, 1]]))
    >>> zero_modes(bar).count
    1
    """
    a = sp.csr_matrix(matrix, dtype=np.float64)
    if a.shape[0] != a.shape[1]:
        raise ValueError(f"the matrix must be square, got {a.shape}")
    a = _symmetric_part(a)
    n = a.shape[0]
    b, scale, empty = _scaled(a)
    n_empty = int(np.count_nonzero(empty))
    perm = _fill_order(b)
    if max_factor_entries is not None:
        predicted = cholesky_nnz(graph_from_matrix(b), perm)
        if predicted > max_factor_entries:
            raise InertiaError(f"the factor would hold about {predicted:,} entries, over the "
                               f"limit of {max_factor_entries:,}")
    bp = b[perm][:, perm].tocsc()
    factors: dict[float, ShiftedFactor] = {}
    if bp.shape[0] == 0:
        got = _Count(0, UPPER_CUT, np.inf, None, np.zeros((0, 0)) if basis else None,
                     None if semidefinite else 0)
    elif semidefinite:
        got = _count_semidefinite(bp, factors, basis)
    else:
        got = _count_indefinite(bp, factors, basis)
    vecs = _null_basis(got.vectors, perm, scale, empty) if basis else None
    pivot_ratio = None
    if not semidefinite and bp.shape[0]:
        d = np.empty(bp.shape[0])
        d[perm] = np.abs(factors[-LOWER_CUT].pivots)
        d /= scale ** 2
        pivot_ratio = float(d.min() / d.max()) if d.max() > 0 else 0.0
    return ZeroModes(got.count + n_empty, n, n_empty, got.negative, got.cut, got.gap,
                     got.gap >= SURE_GAP, got.smallest, pivot_ratio, len(factors), vecs)


def _null_basis(vectors: NDArray[np.float64] | None, perm: NDArray[np.int64],
                scale: NDArray[np.float64], empty: NDArray[np.bool_]) -> NDArray[np.float64]:
    """Orthonormal null-space basis in the original rows (empty rows as unit vectors)."""
    n = empty.size
    count = 0 if vectors is None else vectors.shape[1]
    n_empty = int(np.count_nonzero(empty))
    out = np.zeros((n, count + n_empty))
    if count:
        z = np.empty_like(vectors)
        z[perm] = vectors                    # back to the rows of the scaled matrix
        z *= scale[:, None]                  # null vectors of A = S (null vectors of S A S)
        out[np.flatnonzero(~empty), :count], _ = np.linalg.qr(z)
    out[np.flatnonzero(empty), count + np.arange(n_empty)] = 1.0
    return out
