"""Element stiffness matrices with unit material, assembly, and the zero-eigenvalue count.

The kinematic analysis of :mod:`bandwise.algorithms.rigid` is checked, on request, by
the assembled stiffness itself: hold the supported DOFs, count the zero
eigenvalues of the free-free block, and compare.  The count is made by
inertia (:mod:`bandwise.algorithms.inertia`: Sylvester's law on LDL^T
factorisations, every repeated zero counted, the cut placed by the gap in
the spectrum), on the whole matrix up to :data:`WHOLE_DOFS` free DOFs and
piece by piece above (:mod:`bandwise.algorithms.substructures`).  The count
must equal the kinematic count; a difference is reported, never hidden.

Elements (unit material E = 1, nu = 0.3, A = 1, I = 1/12, J = 0.1406,
thickness 1; common practice for a stiffness pattern check):

==========================  ==================================================
``line`` without rotations  bar (truss), (EA/L) [[1, -1], [-1, 1]] on the axis
``line``, plane frame       Euler-Bernoulli beam with axial force (ux uy rz)
``line``, space frame       Euler-Bernoulli beam, axial, torsion (6 DOFs/node)
``triangle`` (plane)        constant-strain triangle (CST), plane stress
``quad`` (plane)            bilinear quadrilateral, 2 x 2 Gauss, plane stress
``tetra``                   linear tetrahedron
``hexahedron``              trilinear hexahedron, 2 x 2 x 2 Gauss
scalar field (``t``)        the same shapes with the Laplace operator
==========================  ==================================================

Other cell types (higher order, wedges, pyramids, shells) are not covered:
the check then says so instead of guessing.

References
----------
R. D. Cook, D. S. Malkus, M. E. Plesha, R. J. Witt, *Concepts and Applications
of Finite Element Analysis*, 4th ed., Wiley, 2002 (bar, beam, CST, Q4, tetrahedron,
hexahedron; Gauss quadrature).
D. L. Logan, *A First Course in the Finite Element Method*, 4th ed., Thomson,
2007 (plane frame, space frame element matrices).
J. S. Przemieniecki, *Theory of Matrix Structural Analysis*, McGraw-Hill, 1968
(space frame element in local axes).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from bandwise.core.dofs import DOF_NAMES, DofLayout
from bandwise.core.errors import InputError
from bandwise.core.model import Model, as_xyz

from .inertia import InertiaError, zero_modes
from .rigid import ZeroEnergyAnalysis, motion_space
from .substructures import glued_zero_modes
from .supports import SupportSet

_BIT = {name: 1 << k for k, name in enumerate(DOF_NAMES)}

#: Unit material and section (common practice for a pattern and rank check).
YOUNG, POISSON = 1.0, 0.3
AREA, INERTIA, TORSION = 1.0, 1.0 / 12.0, 0.1406
#: Largest number of free DOFs the verification accepts (a mesh of a million nodes).
MAX_VERIFY_DOFS = 3_000_000
#: Up to this many free DOFs the whole supported stiffness is factored; above, piece by piece.
WHOLE_DOFS = 20_000
#: Free DOFs per piece when counting piece by piece.
PIECE_DOFS = 3_000


# --------------------------------------------------------------------------- elements


def bar_stiffness(x: NDArray[np.float64], ea: float = YOUNG * AREA) -> NDArray[np.float64]:
    """Stiffness of 2-node bars in global axes (closed form (EA/L) [n n^T, -n n^T; ...]).

    Parameters
    ----------
    x
        ``(m, 2, d)`` end coordinates (d = 2 or 3).

    Returns
    -------
    ``(m, 2d, 2d)`` matrices over (u1, u2), each ``u`` with ``d`` components.
    """
    d = x[:, 1] - x[:, 0]
    length = np.linalg.norm(d, axis=1)
    n = d / length[:, None]
    nn = np.einsum("mi,mj->mij", n, n) * (ea / length)[:, None, None]
    return np.block([[nn, -nn], [-nn, nn]])


def plane_frame_stiffness(x: NDArray[np.float64], ea: float = YOUNG * AREA,
                          ei: float = YOUNG * INERTIA) -> NDArray[np.float64]:
    """Plane frame (beam-column) element over (ux1, uy1, rz1, ux2, uy2, rz2), global axes.

    Local matrix: axial EA/L and Euler-Bernoulli bending (12EI/L^3, 6EI/L^2,
    4EI/L, 2EI/L), rotated by the direction cosines (Logan 2007, chapter on frames).
    """
    d = x[:, 1, :2] - x[:, 0, :2]
    length = np.linalg.norm(d, axis=1)
    c, s = d[:, 0] / length, d[:, 1] / length
    k = np.zeros((len(x), 6, 6))
    a = ea / length
    b12, b6, b4, b2 = 12 * ei / length**3, 6 * ei / length**2, 4 * ei / length, 2 * ei / length
    k[:, 0, 0] = k[:, 3, 3] = a
    k[:, 0, 3] = k[:, 3, 0] = -a
    bend = np.stack([[b12, b6, -b12, b6], [b6, b4, -b6, b2],
                     [-b12, -b6, b12, -b6], [b6, b2, -b6, b4]])  # (4, 4, m)
    idx = [1, 2, 4, 5]
    for a_, ia in enumerate(idx):
        for b_, ib in enumerate(idx):
            k[:, ia, ib] = bend[a_, b_]
    t = np.zeros((len(x), 6, 6))
    for o in (0, 3):
        t[:, o, o], t[:, o, o + 1] = c, s
        t[:, o + 1, o], t[:, o + 1, o + 1] = -s, c
        t[:, o + 2, o + 2] = 1.0
    return np.einsum("mji,mjk,mkl->mil", t, k, t)


def space_frame_local(length: NDArray[np.float64], ea: float = YOUNG * AREA,
                      gj: float = YOUNG / (2 * (1 + POISSON)) * TORSION,
                      eiy: float = YOUNG * INERTIA, eiz: float = YOUNG * INERTIA,
                      ) -> NDArray[np.float64]:
    """Space frame element in local axes over (u, v, w, rx, ry, rz) at both ends.

    Axial, torsion, and bending in the local x-y (v, rz) and x-z (w, ry)
    planes (Przemieniecki 1968; Logan 2007, chapter on frames).
    """
    m = len(length)
    k = np.zeros((m, 12, 12))
    L = length
    for i, val in ((0, ea / L), (3, gj / L)):
        k[:, i, i] = k[:, i + 6, i + 6] = val
        k[:, i, i + 6] = k[:, i + 6, i] = -val
    for ei, (v, r), sign in ((eiz, (1, 5), 1.0), (eiy, (2, 4), -1.0)):
        blk = np.stack([[12 / L**3, sign * 6 / L**2, -12 / L**3, sign * 6 / L**2],
                        [sign * 6 / L**2, 4 / L, -sign * 6 / L**2, 2 / L],
                        [-12 / L**3, -sign * 6 / L**2, 12 / L**3, -sign * 6 / L**2],
                        [sign * 6 / L**2, 2 / L, -sign * 6 / L**2, 4 / L]]) * ei
        idx = [v, r, v + 6, r + 6]
        for a_, ia in enumerate(idx):
            for b_, ib in enumerate(idx):
                k[:, ia, ib] = blk[a_, b_]
    return k


def space_frame_stiffness(x: NDArray[np.float64], ea: float = YOUNG * AREA,
                          gj: float = YOUNG / (2 * (1 + POISSON)) * TORSION,
                          eiy: float = YOUNG * INERTIA, eiz: float = YOUNG * INERTIA,
                          ) -> NDArray[np.float64]:
    """Space frame element in global axes over (ux, uy, uz, rx, ry, rz) at both ends.

    The local y axis is normal to the member and to global z (to global y for
    a vertical member); with equal bending inertias the choice does not change
    the matrix's rank. ``ea``, ``gj``, ``eiy``, ``eiz`` are the section
    rigidities of :func:`space_frame_local` (default: unit material).
    """
    d = x[:, 1] - x[:, 0]
    length = np.linalg.norm(d, axis=1)
    ex = d / length[:, None]
    ref = np.tile([0.0, 0.0, 1.0], (len(x), 1))
    vertical = np.abs(ex[:, 2]) > 0.999
    ref[vertical] = [0.0, 1.0, 0.0]
    ey = np.cross(ref, ex)
    ey /= np.linalg.norm(ey, axis=1)[:, None]
    ez = np.cross(ex, ey)
    lam = np.stack([ex, ey, ez], axis=1)          # rows: local axes in global coordinates
    t = np.zeros((len(x), 12, 12))
    for o in range(0, 12, 3):
        t[:, o:o + 3, o:o + 3] = lam
    k = space_frame_local(length, ea=ea, gj=gj, eiy=eiy, eiz=eiz)
    return np.einsum("mji,mjk,mkl->mil", t, k, t)


def elasticity_matrix(dim: int, young: float = YOUNG, poisson: float = POISSON) -> NDArray[np.float64]:
    """Isotropic elasticity matrix: plane stress (dim 2) or 3D, engineering shear strains."""
    if dim == 2:
        f = young / (1 - poisson**2)
        return f * np.array([[1, poisson, 0], [poisson, 1, 0], [0, 0, (1 - poisson) / 2]])
    lam = young * poisson / ((1 + poisson) * (1 - 2 * poisson))
    mu = young / (2 * (1 + poisson))
    d = np.zeros((6, 6))
    d[:3, :3] = lam
    d[np.arange(3), np.arange(3)] += 2 * mu
    d[np.arange(3, 6), np.arange(3, 6)] = mu
    return d


_QUAD_CORNERS = np.array([[-1, -1], [1, -1], [1, 1], [-1, 1]], dtype=float)
_HEX_CORNERS = np.array([[-1, -1, -1], [1, -1, -1], [1, 1, -1], [-1, 1, -1],
                         [-1, -1, 1], [1, -1, 1], [1, 1, 1], [-1, 1, 1]], dtype=float)


def _gauss_points(dim: int) -> list[NDArray[np.float64]]:
    g = 1 / np.sqrt(3.0)
    if dim == 2:
        return [np.array([a, b]) * g for a in (-1, 1) for b in (-1, 1)]
    return [np.array([a, b, c]) * g for a in (-1, 1) for b in (-1, 1) for c in (-1, 1)]


def _shape_gradients(shape: str, xi: NDArray[np.float64] | None) -> NDArray[np.float64]:
    """Derivatives of the shape functions w.r.t. the reference coordinates, (nodes, dim)."""
    if shape == "triangle":
        return np.array([[-1.0, -1.0], [1.0, 0.0], [0.0, 1.0]])
    if shape == "tetra":
        return np.array([[-1.0, -1.0, -1.0], [1.0, 0, 0], [0, 1.0, 0], [0, 0, 1.0]])
    corners = _QUAD_CORNERS if shape == "quad" else _HEX_CORNERS
    dim = corners.shape[1]
    grads = np.empty(corners.shape)
    for a in range(dim):
        g = corners[:, a] / 2 ** dim
        for b in range(dim):
            if b != a:
                g = g * (1 + corners[:, b] * xi[b])
        grads[:, a] = g
    return grads


def _physical_gradients(shape: str, x: NDArray[np.float64],
                        ) -> list[tuple[NDArray[np.float64], NDArray[np.float64]]]:
    """(dN/dx of shape (m, nodes, dim), weight * |det J| of shape (m,)) per integration point."""
    if shape in ("triangle", "tetra"):
        points, weights = [None], [0.5 if shape == "triangle" else 1.0 / 6.0]
    else:
        dim = 2 if shape == "quad" else 3
        points, weights = _gauss_points(dim), [1.0] * 2 ** dim
    out = []
    for xi, w in zip(points, weights):
        dn = _shape_gradients(shape, xi)
        jac = np.einsum("mni,nj->mij", x, dn)       # dx_i / dxi_j
        det = np.linalg.det(jac)
        inv = np.linalg.inv(jac)
        grad = np.einsum("nj,mji->mni", dn, inv)
        out.append((grad, w * np.abs(det)))
    return out


def _strain_matrix(grad: NDArray[np.float64]) -> NDArray[np.float64]:
    """Strain-displacement matrices B, (m, 3 or 6, nodes*dim), node-blocked columns."""
    m, nn, dim = grad.shape
    if dim == 2:
        b = np.zeros((m, 3, 2 * nn))
        b[:, 0, 0::2] = grad[:, :, 0]
        b[:, 1, 1::2] = grad[:, :, 1]
        b[:, 2, 0::2] = grad[:, :, 1]
        b[:, 2, 1::2] = grad[:, :, 0]
        return b
    b = np.zeros((m, 6, 3 * nn))
    for i in range(3):
        b[:, i, i::3] = grad[:, :, i]
    # engineering shear strains: xy, yz, zx
    for row, (i, j) in zip((3, 4, 5), ((0, 1), (1, 2), (2, 0))):
        b[:, row, i::3] = grad[:, :, j]
        b[:, row, j::3] = grad[:, :, i]
    return b


def continuum_stiffness(shape: str, x: NDArray[np.float64], scalar: bool = False,
                        elasticity: NDArray[np.float64] | None = None) -> NDArray[np.float64]:
    """Stiffness of triangles, quads (plane stress), tetrahedra or hexahedra, unit material.

    Parameters
    ----------
    shape
        ``"triangle"``, ``"quad"``, ``"tetra"`` or ``"hexahedron"``.
    x
        ``(m, nodes, dim)`` node coordinates (dim 2 for plane cells, 3 for solids).
    scalar
        True for the Laplace (conduction) matrix ``int grad N^T grad N``.
    elasticity
        Elasticity matrix; default :func:`elasticity_matrix` (unit material).

    Returns
    -------
    ``(m, k, k)`` element matrices, DOFs node-blocked (ux, uy[, uz] per node).
    """
    dim = x.shape[2]
    d = elasticity_matrix(dim) if elasticity is None else np.asarray(elasticity)
    k = None
    for grad, w in _physical_gradients(shape, x):
        if scalar:
            term = np.matmul(grad, grad.transpose(0, 2, 1))
        else:
            b = _strain_matrix(grad)
            term = np.matmul(b.transpose(0, 2, 1), np.matmul(d, b))   # B^T D B
        term = term * w[:, None, None]
        k = term if k is None else k + term
    return k


def line_conduction(x: NDArray[np.float64]) -> NDArray[np.float64]:
    """Laplace matrix of 2-node lines: (1/L) [[1, -1], [-1, 1]] (closed form)."""
    length = np.linalg.norm(x[:, 1] - x[:, 0], axis=1)
    return np.array([[1.0, -1.0], [-1.0, 1.0]])[None] / length[:, None, None]


# --------------------------------------------------------------------------- assembly


@dataclass(frozen=True)
class StiffnessMatrix:
    """An assembled stiffness matrix, or why none could be built."""

    matrix: sp.csr_matrix | None
    reason: str = ""


def dof_offsets(layout: DofLayout) -> NDArray[np.int64]:
    """First global DOF of each node, DOFs numbered node after node."""
    off = np.zeros(layout.masks.size + 1, dtype=np.int64)
    np.cumsum(layout.per_node, out=off[1:])
    return off


def _dof_index(masks: NDArray[np.int64], off: NDArray[np.int64], nodes: NDArray[np.int64],
               bit: int) -> NDArray[np.int64]:
    below = masks[nodes] & (bit - 1)
    pos = np.zeros(nodes.shape, dtype=np.int64)
    for k in range(len(DOF_NAMES)):
        pos += (below >> k) & 1
    return off[nodes] + pos


def _element_dofs(masks, off, data, names):
    """Global DOF numbers (m, nodes*len(names)), node-blocked, or None if a DOF is missing."""
    cols = []
    for a in range(data.shape[1]):
        for name in names:
            bit = _BIT[name]
            if ((masks[data[:, a]] & bit) == 0).any():
                return None
            cols.append(_dof_index(masks, off, data[:, a], bit))
    return np.stack(cols, axis=1)


@dataclass(frozen=True)
class _Elements:
    """The coupling cells of a model and what their element matrices need."""

    blocks: tuple[tuple[str, NDArray[np.int64]], ...]
    pts: NDArray[np.float64]
    space: str
    planar: bool
    masks: NDArray[np.int64]
    off: NDArray[np.int64]


class _NotCovered(Exception):
    """An element the stiffness cannot be built for (the message says which)."""


def _elements(model: Model, layout: DofLayout) -> _Elements:
    from .topology import coupling_cells

    space = motion_space(model, layout)
    if space is None:
        raise _NotCovered("the DOFs have no standard names")
    pts = as_xyz(model.points)
    blocks = tuple((block.type, block.data[use])
                   for block, use in zip(model.cells, coupling_cells(model)) if use.any())
    return _Elements(blocks, pts, space, model.is_planar(), layout.masks, dof_offsets(layout))


def _element_matrices(els: _Elements, cell_type: str, data: NDArray[np.int64],
                      ) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
    """Element matrices ``(m, k, k)`` of some cells of one type and their global DOFs ``(m, k)``."""
    try:
        with np.errstate(all="ignore"):
            got = _block_matrices(cell_type, data, els.pts, els.space, els.planar, els.masks)
    except np.linalg.LinAlgError:
        got = f"degenerate {cell_type} elements (zero length, area or volume)"
    if isinstance(got, str):
        raise _NotCovered(got)
    ke, names = got
    if not np.isfinite(ke).all():
        raise _NotCovered(f"degenerate {cell_type} elements (zero length, area or volume)")
    dofs = _element_dofs(els.masks, els.off, data, names)
    if dofs is None:
        raise _NotCovered(f"{cell_type} elements need {' '.join(names)}, "
                          "which some of their nodes do not carry")
    return ke, dofs


def _triplets(ke: NDArray[np.float64], dofs: NDArray[np.int64],
              ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.float64]]:
    """Rows, columns and values of element matrices, for a COO assembly."""
    k = dofs.shape[1]
    return np.repeat(dofs, k, axis=1).ravel(), np.tile(dofs, (1, k)).ravel(), ke.ravel()


def assemble_stiffness(model: Model, layout: DofLayout) -> StiffnessMatrix:
    """Assemble the unit-material stiffness of a model, DOFs numbered node after node.

    Returns
    -------
    StiffnessMatrix
        The sparse matrix, or None with the reason when an element type is
        not covered (see the module table).
    """
    n = int(dof_offsets(layout)[-1])
    rows, cols, vals = [], [], []
    try:
        els = _elements(model, layout)
        for cell_type, data in els.blocks:
            r, c, v = _triplets(*_element_matrices(els, cell_type, data))
            rows.append(r)
            cols.append(c)
            vals.append(v)
    except _NotCovered as exc:
        return StiffnessMatrix(None, str(exc))
    if not rows:
        return StiffnessMatrix(sp.csr_matrix((n, n)))
    mat = sp.coo_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                        shape=(n, n)).tocsr()
    return StiffnessMatrix(mat)


def _block_matrices(cell_type: str, data: NDArray[np.int64], pts: NDArray[np.float64],
                    space: str, planar: bool, masks: NDArray[np.int64]) -> Any:
    """Element matrices of one block and the DOF names they act on, or a reason string."""
    x = pts[data]
    if space == "scalar":
        if cell_type == "line":
            return line_conduction(x), ("t",)
        if cell_type in ("triangle", "quad") and planar:
            return continuum_stiffness(cell_type, x[:, :, :2], scalar=True), ("t",)
        if cell_type in ("tetra", "hexahedron"):
            return continuum_stiffness(cell_type, x, scalar=True), ("t",)
        return f"no scalar element for {cell_type} cells" + ("" if planar else " out of a plane")
    if cell_type == "line":
        rot = _BIT["rz"] if space == "plane" else _BIT["rx"] | _BIT["ry"] | _BIT["rz"]
        has = (masks[data] & rot) == rot
        if not has.any():
            if space == "plane":
                return bar_stiffness(x[:, :, :2]), ("ux", "uy")
            return bar_stiffness(x), ("ux", "uy", "uz")
        if not has.all():
            return "line elements with rotations at one end only are not covered"
        if space == "plane":
            return plane_frame_stiffness(x), ("ux", "uy", "rz")
        return space_frame_stiffness(x), ("ux", "uy", "uz", "rx", "ry", "rz")
    if cell_type in ("triangle", "quad"):
        if space != "plane" and not planar:
            return "shell elements (2D cells out of a plane) are not covered"
        return continuum_stiffness(cell_type, x[:, :, :2]), ("ux", "uy")
    if cell_type in ("tetra", "hexahedron"):
        return continuum_stiffness(cell_type, x), ("ux", "uy", "uz")
    return f"{cell_type} elements are not covered"


# --------------------------------------------------------------------------- verification


@dataclass(frozen=True)
class StiffnessCheck:
    """The stiffness null-space count against the kinematic count.

    Attributes
    ----------
    verified
        True when the stiffness could be built and its zero eigenvalues counted.
    zero_eigenvalues
        Zero eigenvalues of the free-free stiffness block (None if not verified).
    kinematic
        Zero-energy modes from :mod:`bandwise.algorithms.rigid`.
    free_dofs
        Order of the free-free block.
    method
        How the count was made (:mod:`bandwise.algorithms.inertia`, whole or
        piece by piece), or the reason for no check.
    smallest_nonzero
        Estimate of the smallest eigenvalue above the zero cluster, relative
        to the diagonal stiffness, when one lies close (below ``UPPER_CUT``
        of :mod:`~bandwise.algorithms.inertia`); None when it lies above.
    gap
        Ratio of the eigenvalues on both sides of the cut (the smallest met,
        piece by piece).
    certain
        True when the gap is wide (see :data:`bandwise.algorithms.inertia.SURE_GAP`).
    """

    verified: bool
    zero_eigenvalues: int | None
    kinematic: int
    free_dofs: int
    method: str
    smallest_nonzero: float | None = None
    gap: float | None = None
    certain: bool | None = None

    @property
    def agrees(self) -> bool | None:
        """True when both counts are equal; None when not verified."""
        return None if not self.verified else self.zero_eigenvalues == self.kinematic

    @property
    def message(self) -> str:
        """One line for the report."""
        if not self.verified:
            return f"stiffness check not run: {self.method}"
        doubt = "" if self.certain else (
            f" (the zero eigenvalues are not clearly apart from the others: gap "
            f"{self.gap:.1e}; a nearly singular stiffness)")
        if self.agrees:
            return (f"stiffness check: {self.zero_eigenvalues} zero eigenvalue(s) of the "
                    f"supported stiffness ({self.free_dofs:,} free DOFs), as the kinematic "
                    f"analysis says{doubt}")
        return (f"stiffness check DISAGREES: {self.zero_eigenvalues} zero eigenvalue(s) of the "
                f"supported stiffness, kinematic analysis {self.kinematic}: inspect the "
                f"elements (distorted, inverted or unsupported types) before trusting "
                f"either{doubt}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        gap = None if self.gap is None or not np.isfinite(self.gap) else self.gap
        return {"verified": self.verified, "zero_eigenvalues": self.zero_eigenvalues,
                "kinematic": self.kinematic, "agrees": self.agrees, "free_dofs": self.free_dofs,
                "method": self.method, "smallest_nonzero_relative": self.smallest_nonzero,
                "gap": gap, "certain": self.certain, "message": self.message}


def _held_mask(layout: DofLayout, fixed: NDArray[np.int64]) -> NDArray[np.bool_]:
    """True at every held DOF (DOFs numbered node after node)."""
    held = np.zeros(int(layout.total), dtype=bool)
    off = dof_offsets(layout)
    for name in DOF_NAMES:
        bit = _BIT[name]
        nodes = np.flatnonzero((fixed & bit) != 0)
        if nodes.size:
            held[_dof_index(layout.masks, off, nodes, bit)] = True
    return held


def free_block(matrix: sp.csr_matrix, layout: DofLayout, fixed: NDArray[np.int64],
               ) -> sp.csr_matrix:
    """The free-free block of a stiffness matrix: rows and columns of held DOFs removed."""
    free = np.flatnonzero(~_held_mask(layout, fixed))
    return matrix[free][:, free].tocsr()


def _node_parts(model: Model, layout: DofLayout, held: NDArray[np.bool_],
                n_pieces: int) -> NDArray[np.int64]:
    """A piece number per node: METIS partition of the node graph, free DOFs as weights."""
    if n_pieces <= 1:
        return np.zeros(model.n_nodes, dtype=np.int64)
    import pymetis

    from bandwise.core.graph import node_graph

    graph = node_graph(model)
    free_per_node = np.add.reduceat(~held, dof_offsets(layout)[:-1]) \
        if held.size else np.zeros(model.n_nodes, dtype=np.int64)
    free_per_node = np.where(layout.per_node > 0, free_per_node, 0)
    xadj = np.ascontiguousarray(graph.indptr, dtype=np.int64)
    adjncy = np.ascontiguousarray(graph.indices, dtype=np.int64)
    weights = np.maximum(free_per_node, 1).astype(np.int64)
    if hasattr(pymetis, "CSRAdjacency"):          # pymetis 2025.2 and later
        _, parts = pymetis.part_graph(n_pieces, pymetis.CSRAdjacency(xadj, adjncy),
                                      vweights=weights)
    else:                                         # earlier releases: plain CSR keywords
        _, parts = pymetis.part_graph(n_pieces, xadj=xadj, adjncy=adjncy, vweights=weights)
    return np.asarray(parts, dtype=np.int64)


def stiffness_pieces(model: Model, layout: DofLayout, fixed: NDArray[np.int64],
                     n_pieces: int) -> Iterator[tuple[NDArray[np.int64], sp.csr_matrix]]:
    """The supported unit-material stiffness as pieces, one group of elements at a time.

    The nodes are split into ``n_pieces`` groups by METIS (weighted by free
    DOFs), each element goes with its first node, and each piece is the
    free-free stiffness of its elements over the free DOFs they touch.
    The sum of the pieces is :func:`free_block` of :func:`assemble_stiffness`.

    Yields
    ------
    (dofs, matrix)
        Sorted free-DOF numbers (positions among the free DOFs) and the
        piece's matrix over them.

    Raises
    ------
    _NotCovered
        When an element type is not covered (the message says which).
    """
    els = _elements(model, layout)
    held = _held_mask(layout, fixed)
    free_index = np.cumsum(~held) - 1
    free_index[held] = -1
    node_part = _node_parts(model, layout, held, n_pieces)
    groups = []
    for cell_type, data in els.blocks:
        part = node_part[data[:, 0]]
        order = np.argsort(part, kind="stable")
        bounds = np.searchsorted(part[order], np.arange(n_pieces + 1))
        groups.append((cell_type, data[order], bounds))
    local = np.full(free_index.size and int(free_index.max()) + 1, -1, dtype=np.int64)
    for s in range(n_pieces):
        rows, cols, vals, touched = [], [], [], []
        for cell_type, data, bounds in groups:
            cells = data[bounds[s]:bounds[s + 1]]
            if len(cells):
                ke, dofs = _element_matrices(els, cell_type, cells)
                fd = free_index[dofs]
                touched.append(fd.ravel())
                r, c, v = _triplets(ke, fd)
                keep = (r >= 0) & (c >= 0)
                rows.append(r[keep])
                cols.append(c[keep])
                vals.append(v[keep])
        if not rows:
            continue
        g = np.unique(np.concatenate(touched))
        g = g[g >= 0]
        local[g] = np.arange(g.size)
        k = sp.coo_matrix((np.concatenate(vals), (local[np.concatenate(rows)],
                                                  local[np.concatenate(cols)])),
                          shape=(g.size, g.size)).tocsr()
        local[g] = -1
        yield g, k


def verify_stiffness(model: Model, layout: DofLayout, supports: SupportSet,
                     analysis: ZeroEnergyAnalysis, max_dofs: int = MAX_VERIFY_DOFS,
                     whole_dofs: int = WHOLE_DOFS, piece_dofs: int = PIECE_DOFS,
                     ) -> StiffnessCheck:
    """Count the zero eigenvalues of the supported stiffness and compare with the kinematics.

    The count is by inertia (:func:`bandwise.algorithms.inertia.zero_modes`):
    of the whole free-free stiffness up to ``whole_dofs`` free DOFs, and
    above that piece by piece (:func:`bandwise.algorithms.substructures.glued_zero_modes`
    over :func:`stiffness_pieces` of about ``piece_dofs`` free DOFs each).

    Parameters
    ----------
    model, layout, supports
        The mesh, its DOFs and its held DOFs.
    analysis
        The kinematic result (:func:`bandwise.algorithms.rigid.zero_energy_modes`).
    max_dofs
        Largest number of free DOFs checked (default :data:`MAX_VERIFY_DOFS`).
    whole_dofs, piece_dofs
        Where the count goes piece by piece, and the size of a piece.

    Raises
    ------
    InputError
        If a limit is not positive.
    """
    if min(max_dofs, whole_dofs, piece_dofs) < 1:
        raise InputError("the verification limits must be positive, got "
                         f"{max_dofs}, {whole_dofs}, {piece_dofs}")
    kinematic = analysis.total
    n_free = layout.total - supports.n_fixed_dofs
    if n_free > max_dofs:
        return StiffnessCheck(False, None, kinematic, n_free,
                              f"{n_free:,} free DOFs exceed the limit of {max_dofs:,}")
    if not analysis.complete:
        return StiffnessCheck(False, None, kinematic, n_free,
                              "the kinematic analysis did not cover every part")
    try:
        if n_free <= whole_dofs:
            built = assemble_stiffness(model, layout)
            if built.matrix is None:
                raise _NotCovered(built.reason)
            z = zero_modes(free_block(built.matrix, layout, supports.fixed))
            return StiffnessCheck(True, z.count, kinematic, n_free,
                                  f"whole supported stiffness: {z.method}", z.smallest_nonzero,
                                  z.gap, z.certain)
        n_pieces = -(-n_free // piece_dofs)
        glued = glued_zero_modes(stiffness_pieces(model, layout, supports.fixed, n_pieces),
                                 n_free)
        return StiffnessCheck(True, glued.count, kinematic, n_free, glued.method, None,
                              glued.smallest_gap, glued.certain)
    except _NotCovered as exc:
        return StiffnessCheck(False, None, kinematic, n_free, str(exc))
    except InertiaError as exc:
        return StiffnessCheck(False, None, kinematic, n_free, f"the count failed: {exc}")
