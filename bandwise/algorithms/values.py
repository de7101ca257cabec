"""An assembled matrix checked by its values: what a solver will meet when it factors it.

What
    For a matrix read with its values (a global stiffness exported by a
    solver or an analyst's own code):

    - **symmetry**: a stiffness matrix is symmetric by reciprocity (the
      Maxwell-Betti theorem); the largest relative asymmetry
      ``|a_ij - a_ji| / sqrt(|a_ii a_jj|)`` and where it is;
    - **zero modes**: the dimension of the null space, by inertia
      (:func:`bandwise.algorithms.inertia.zero_modes`, the method of
      ``check --stiffness-check``), with the clearly negative eigenvalues
      (negative pivots of ``LDL^T``), so whether the matrix is positive
      definite;
    - **pivot ratio**: smallest over largest absolute pivot of that ``LDL^T``;
    - **diagonal**: the rows whose diagonal is zero or negative (a stiffness
      matrix has a positive diagonal wherever a DOF is stiffened at all);
    - **rigid-body vectors**, given the DOFs per node and the node
      coordinates: every rigid motion ``r`` of the free (unsupported)
      structure stores no energy and makes no force, ``K r = 0``; the check
      reports the largest row residual ``|(K r)_i| / (|K| |r|)_i``.

Each problem is a :class:`~bandwise.algorithms.checks.findings.Finding`.

Cost
    One pass over the entries for symmetry, diagonal and rigid vectors; the
    zero-mode count costs four sparse ``LDL^T`` factorisations (refused,
    with the reason, above :data:`MAX_FACTOR_ENTRIES` predicted entries).

References
----------
E. Betti, "Teoria della elasticita", Il Nuovo Cimento 7-8 (1872) 5-21
(reciprocity of work); J. C. Maxwell, "On the calculation of the equilibrium
and stiffness of frames", Phil. Mag. 27 (1864) 294-299 (reciprocal deflections).
R. D. Cook, D. S. Malkus, M. E. Plesha and R. J. Witt, *Concepts and
Applications of Finite Element Analysis*, 4th ed., Wiley, 2002 (properties of
the stiffness matrix: symmetric, positive diagonal, rigid motions in its null
space).
J. J. Sylvester (1852), see :mod:`bandwise.algorithms.inertia`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray

from bandwise.core.dofs import dof_layout
from bandwise.core.errors import InputError
from bandwise.core.model import Model, as_xyz

from .checks.findings import Finding, counted
from .inertia import InertiaError, ZeroModes, zero_modes
from .rigid.motions import motion_rows  # the rigid motions at a DOF, shared with the kinematics

__all__ = ["RigidBodyCheck", "ValuesCheck", "check_values", "rigid_body_vectors"]

#: Largest relative asymmetry still called symmetric (well above round-off; common practice).
SYMMETRY_RTOL = 1e-8
#: Largest row residual of ``K r`` still called zero (values printed with 6 digits pass;
#: common practice).
RIGID_RTOL = 1e-5
#: A positive definite matrix whose pivot ratio is below this loses most digits in a
#: solve in double precision (common practice).
PIVOT_RATIO_WARN = 1e-12
#: Largest predicted number of entries of the Cholesky-shaped factor for the count.
MAX_FACTOR_ENTRIES = 60_000_000
#: Rows listed in findings and in the JSON.
LISTED = 20


@dataclass(frozen=True)
class RigidBodyCheck:
    """``K r`` for every rigid motion ``r`` of the nodes.

    Attributes
    ----------
    dofs
        DOF names per node, in the order the matrix numbers them.
    motions
        Names of the rigid motions checked.
    residuals
        Largest row residual ``|(K r)_i| / (|K| |r|)_i`` per motion.
    worst_rows
        1-based rows of the largest residuals (at most :data:`LISTED`), over all motions.
    note
        Why the check was not made (then ``residuals`` is empty).
    """

    dofs: tuple[str, ...]
    motions: tuple[str, ...] = ()
    residuals: tuple[float, ...] = ()
    worst_rows: tuple[int, ...] = ()
    note: str = ""

    @property
    def passed(self) -> bool | None:
        """True when every rigid motion makes no force; None when not checked."""
        if not self.residuals:
            return None
        return max(self.residuals) <= RIGID_RTOL

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"dofs": list(self.dofs), "motions": list(self.motions),
                "residuals": list(self.residuals), "passed": self.passed,
                "worst_rows": list(self.worst_rows), "note": self.note}


@dataclass(frozen=True)
class ValuesCheck:
    """What the values of an assembled matrix say (see the module notes).

    Attributes
    ----------
    order
        Rows of the matrix.
    symmetric
        True when the largest relative asymmetry is at most :data:`SYMMETRY_RTOL`.
    largest_asymmetry
        That largest relative asymmetry, and ``asymmetry_at`` its 1-based (row, column).
    zero_modes
        Dimension of the null space (None when not counted: ``not_counted`` says why).
    count
        The inertia count behind it (:class:`~bandwise.algorithms.inertia.ZeroModes`).
    nonpositive_diagonal
        1-based rows whose diagonal is zero or negative (at most :data:`LISTED`),
        and ``n_nonpositive_diagonal`` how many there are.
    rigid
        The rigid-body check, when DOFs per node and coordinates were given.
    """

    order: int
    symmetric: bool
    largest_asymmetry: float
    asymmetry_at: tuple[int, int] | None
    zero_modes: int | None
    count: ZeroModes | None
    not_counted: str
    nonpositive_diagonal: tuple[int, ...]
    n_nonpositive_diagonal: int
    rigid: RigidBodyCheck | None = None

    @property
    def negative_pivots(self) -> int | None:
        """Clearly negative eigenvalues: negative pivots of ``LDL^T`` (Sylvester)."""
        return None if self.count is None else self.count.negative

    @property
    def positive_definite(self) -> bool | None:
        """True when no eigenvalue is zero or negative; None when not counted."""
        if self.count is None:
            return None
        return self.count.count == 0 and self.count.negative == 0

    @property
    def pivot_ratio(self) -> float | None:
        """Smallest over largest absolute pivot of the ``LDL^T`` (None when not counted)."""
        return None if self.count is None else self.count.pivot_ratio

    def to_dict(self) -> dict[str, Any]:
        """The JSON entry ``values``."""
        c = self.count
        return {
            "symmetric": self.symmetric,
            "largest_asymmetry": self.largest_asymmetry,
            "asymmetry_at": None if self.asymmetry_at is None else list(self.asymmetry_at),
            "zero_modes": self.zero_modes,
            "zero_modes_certain": None if c is None else c.certain,
            "zero_modes_gap": None if c is None or not np.isfinite(c.gap) else c.gap,
            "positive_definite": self.positive_definite,
            "negative_pivots": self.negative_pivots,
            "pivot_ratio": self.pivot_ratio,
            "nonpositive_diagonal_rows": list(self.nonpositive_diagonal),
            "nonpositive_diagonal_count": self.n_nonpositive_diagonal,
            "rigid_body": None if self.rigid is None else self.rigid.to_dict(),
            "method": None if c is None else c.method,
            "not_counted": self.not_counted or None,
        }

    def findings(self) -> list[Finding]:
        """Each problem as a finding (codes ``values.*``)."""
        out: list[Finding] = []
        if not self.symmetric and self.asymmetry_at is not None:
            i, j = self.asymmetry_at
            out.append(Finding(
                "values.asymmetric", "error", 1,
                f"the matrix is not symmetric: relative asymmetry {self.largest_asymmetry:.2e} "
                f"at row {i}, column {j}; a stiffness matrix is symmetric by reciprocity "
                "(Maxwell-Betti), so an entry or the assembly is wrong",
                details=({"row": i, "column": j, "asymmetry": self.largest_asymmetry},)))
        if self.n_nonpositive_diagonal:
            n = self.n_nonpositive_diagonal
            out.append(Finding(
                "values.diagonal_not_positive", "error", n,
                f"{counted(n, 'row has', 'rows have')} a zero or negative diagonal (first: "
                f"{', '.join(str(r) for r in self.nonpositive_diagonal[:6])}): a DOF with no "
                "stiffness of its own, or a sign error",
                details=({"rows": list(self.nonpositive_diagonal)},)))
        c = self.count
        if c is not None and c.negative:
            out.append(Finding(
                "values.indefinite", "error", c.negative,
                f"{counted(c.negative, 'negative pivot', 'negative pivots')} in LDL^T: the "
                "matrix has negative eigenvalues, which no stiffness of a stable structure "
                "has (wrong element matrices or material data)"))
        if c is not None and c.count:
            out.append(Finding(
                "values.singular", "warning", c.count,
                f"{counted(c.count, 'zero-energy mode', 'zero-energy modes')} (null space of "
                f"the matrix): a solver meets {'a zero pivot' if c.count == 1 else 'zero pivots'}"
                "; hold the rigid-body and mechanism motions before solving"))
        if c is not None and not c.certain:
            out.append(Finding(
                "values.zero_modes_uncertain", "note", 1,
                f"the zero eigenvalues are not clearly apart from the others (gap "
                f"{c.gap:.1e}): the matrix is nearly singular, and the count of "
                f"{c.count} is where the widest gap lies"))
        if (self.positive_definite and self.pivot_ratio is not None
                and self.pivot_ratio < PIVOT_RATIO_WARN):
            out.append(Finding(
                "values.ill_conditioned", "warning", 1,
                f"the ratio of the smallest to the largest pivot is {self.pivot_ratio:.1e}: "
                "few digits of a solution survive in double precision"))
        if self.not_counted:
            out.append(Finding("values.not_counted", "note", 1,
                               f"zero modes not counted: {self.not_counted}"))
        r = self.rigid
        if r is not None and r.passed is False:
            bad = [m for m, v in zip(r.motions, r.residuals) if v > RIGID_RTOL]
            out.append(Finding(
                "values.rigid_body_force", "warning", len(bad),
                f"rigid motion ({', '.join(bad)}) makes a force, largest row residual "
                f"{max(r.residuals):.1e} (first rows: "
                f"{', '.join(str(v) for v in r.worst_rows[:6])}): K r = 0 fails, so the "
                "element matrices, the DOF order or the coordinates do not match; held DOFs "
                "kept in the matrix do this too",
                details=({"rows": list(r.worst_rows)},)))
        elif r is not None and r.note:
            out.append(Finding("values.rigid_body_not_checked", "note", 1, r.note))
        return out


def _asymmetry(a: sp.csr_matrix, diag: NDArray[np.float64],
               ) -> tuple[float, tuple[int, int] | None]:
    """Largest ``|a_ij - a_ji| / sqrt(|a_ii a_jj|)`` (scale floor: round-off of the largest)."""
    diff = (a - a.T).tocoo()
    if diff.nnz == 0:
        return 0.0, None
    scale = float(np.abs(a.data).max(initial=0.0))
    floor = max(scale * np.finfo(np.float64).eps, np.finfo(np.float64).tiny)
    denom = np.maximum(np.sqrt(np.abs(diag[diff.row] * diag[diff.col])), floor)
    rel = np.abs(diff.data) / denom
    k = int(np.argmax(rel))
    i, j = int(diff.row[k]), int(diff.col[k])
    i, j = max(i, j), min(i, j)                # name the lower-triangle entry
    return float(rel[k]), (i + 1, j + 1)


def rigid_body_vectors(coordinates: ArrayLike, dof_names: tuple[str, ...] | list[str],
                       ) -> tuple[NDArray[np.float64], tuple[str, ...]]:
    """The rigid motions of nodes as columns over DOFs numbered node after node.

    Translations along the axes and rotations about axes through the
    centroid (small rotations: ``u = t + q x r``; a rotational DOF equals
    ``q``); three in a plane (``ux uy`` or ``ux uy rz``), six in space, one
    (a constant) for a scalar field ``t``.  Columns have unit length.

    Parameters
    ----------
    coordinates
        ``(nodes, 2 or 3)`` node coordinates.
    dof_names
        DOF names of every node, in numbering order (``ux uy uz rx ry rz`` or ``t``).

    Returns
    -------
    (vectors, names)
        ``(nodes * len(dof_names), motions)`` and the names of the motions.
    """
    x = np.asarray(coordinates, dtype=np.float64)
    if x.ndim != 2 or x.shape[1] not in (2, 3):
        raise InputError(f"coordinates must have 2 or 3 columns, got shape {x.shape}")
    x = as_xyz(x)
    names = tuple(dof_names)
    if names == ("t",):
        space = "scalar"
    elif not set(names) & {"uz", "rx", "ry"} and np.ptp(x[:, 2]) == 0:
        space = "plane"
    else:
        space = "space"
    centre = x.mean(axis=0) if len(x) else np.zeros(3)
    r = x - centre
    d = len(names)
    first = motion_rows(space, names[0], r)
    out = np.zeros((len(x) * d, first.shape[1]))
    for a, name in enumerate(names):
        out[a::d] = first if a == 0 else motion_rows(space, name, r)
    norms = np.linalg.norm(out, axis=0)
    keep = norms > 0
    motion_names = {"scalar": ("constant t",), "plane": ("tx", "ty", "qz"),
                    "space": ("tx", "ty", "tz", "qx", "qy", "qz")}[space]
    return out[:, keep] / norms[keep], tuple(n for n, k in zip(motion_names, keep) if k)


def _rigid_check(a: sp.csr_matrix, dofs_per_node: int | None,
                 coordinates: ArrayLike | None) -> RigidBodyCheck | None:
    if coordinates is None:
        return None
    x = np.asarray(coordinates, dtype=np.float64)
    n = a.shape[0]
    if dofs_per_node is None:
        if len(x) == 0 or n % len(x):
            return RigidBodyCheck((), note=f"{n:,} rows are not a whole number of DOFs per node "
                                           f"over {len(x):,} nodes: give the DOFs per node")
        dofs_per_node = n // len(x)
    layout = dof_layout(Model(points=as_xyz(x), cells=[]), dofs_per_node=dofs_per_node)
    if layout.unnamed is not None:
        return RigidBodyCheck((), note=f"{dofs_per_node} DOFs per node have no standard names "
                                       "(1, 2, 3 or 6 do): rigid motions not checked")
    names = tuple(layout.names(0)) if len(x) else ()
    if n != len(x) * dofs_per_node:
        return RigidBodyCheck(names, note=(
            f"the matrix has {n:,} rows, not {len(x):,} nodes x {dofs_per_node} DOFs = "
            f"{len(x) * dofs_per_node:,}: the rigid-body check needs the matrix before held "
            "DOFs are removed"))
    vecs, motions = rigid_body_vectors(x, names)
    kr = np.abs(a @ vecs)
    ref = abs(a) @ np.abs(vecs)
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(ref > 0, kr / np.where(ref > 0, ref, 1.0), 0.0)
    worst_per_row = rel.max(axis=1)
    order = np.argsort(-worst_per_row, kind="stable")
    bad = order[worst_per_row[order] > RIGID_RTOL][:LISTED]
    return RigidBodyCheck(names, motions, tuple(float(v) for v in rel.max(axis=0)),
                          tuple(int(i) + 1 for i in bad))


def check_values(matrix: sp.spmatrix, *, dofs_per_node: int | None = None,
                 coordinates: ArrayLike | None = None,
                 max_factor_entries: int = MAX_FACTOR_ENTRIES) -> ValuesCheck:
    """Check an assembled matrix by its values (see the module notes).

    Parameters
    ----------
    matrix
        Square real matrix, both triangles stored (as
        :func:`bandwise.formats.matrix_io.read_matrix_data` gives).
    dofs_per_node
        DOFs per node, numbered node after node, named by the rule of
        ``--dofs-per-node`` (1: ``t``; 2: ``ux uy``; 3: ``ux uy uz``; 6: all
        six); by default rows over nodes.  Used with ``coordinates`` only.
    coordinates
        ``(nodes, 2 or 3)`` coordinates of the nodes the matrix numbers (a
        mesh given alongside): enables the rigid-body check.
    max_factor_entries
        Largest predicted factor size for the zero-mode count.

    Returns
    -------
    ValuesCheck

    Raises
    ------
    InputError
        If the matrix is not square or holds complex values.

    Examples
    --------
    >>> import numpy as np, scipy.sparse as sp
    >>> bars = sp.csr_matrix(np.array([[1.0, -1, 0], [-1, 2, -1], [0, -1, 1]]))
    >>> v = check_values(bars)
    >>> v.symmetric, v.zero_modes, v.positive_definite
    (True, 1, False)
    """
    a = sp.csr_matrix(matrix)
    if a.shape[0] != a.shape[1]:
        raise InputError(f"the matrix must be square, got {a.shape[0]} x {a.shape[1]}")
    if np.iscomplexobj(a.data):
        raise InputError("complex matrices are not checked by value")
    a = sp.csr_matrix(a, dtype=np.float64)
    a.sort_indices()
    diag = a.diagonal()
    rel, where = _asymmetry(a, diag)
    symmetric = rel <= SYMMETRY_RTOL
    bad_diag = np.flatnonzero(~(diag > 0))
    count, reason = None, ""
    try:
        count = zero_modes(a, semidefinite=False, max_factor_entries=max_factor_entries)
    except InertiaError as exc:
        reason = str(exc)
    return ValuesCheck(
        order=a.shape[0], symmetric=bool(symmetric), largest_asymmetry=rel,
        asymmetry_at=where if rel > 0 else None,
        zero_modes=None if count is None else count.count, count=count, not_counted=reason,
        nonpositive_diagonal=tuple(int(i) + 1 for i in bad_diag[:LISTED]),
        n_nonpositive_diagonal=int(bad_diag.size),
        rigid=_rigid_check(a, dofs_per_node, coordinates))
