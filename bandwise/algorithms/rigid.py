"""Zero-energy modes: the rigid-body and mechanism motions the supports leave free.

Method (exact for sound elements, and cheap).  Every face-connected block of
elements (:func:`bandwise.algorithms.topology.face_connected_blocks`) moves as a rigid
body: 6 motions in 3D (translations, rotations about the block centroid),
3 in a plane (two translations, the rotation about z), 1 for a scalar field
(a constant).  Pin-jointed line elements (nodes without rotational DOFs) are
each a body of their own, whose spin about its own axis is left out: it moves
no DOF, it is a trivial zero mode of no practical interest.  Line elements
whose nodes carry rotations are joined rigidly through the beam's bending, so
a frame chain is one body.  A DOF shared by two bodies that both stiffen it is
an equality constraint between them; a held DOF is a constraint to zero.
The null space of that small system (SVD, rows scaled by body size so that
the tolerance is relative; shift-invert Lanczos on the sparse Gram matrix for
parts of very many bodies) counts rigid and mechanism modes together; the
rigid part of each connected part is separated from its mechanisms and both
are given in a tidy basis (reduced row-echelon form, rotations about and
translations along the axes where possible), described in words with the
nodes that move most.  Parts are numbered by their lowest node.  A small
set of holds that removes every mode is suggested (greedy, node by node, or
pivoted QR), never applied.

The motions are evaluated only at held DOFs and at nodes shared by bodies,
so the system is small even for a mesh of millions of nodes.

A DOF that a node carries but no element stiffens (an orphan node, the
rotations of a node of solid elements only) is a zero-energy mode by itself;
those are counted apart, as ``dofs_without_stiffness``.

References
----------
J. C. Maxwell, "On the calculation of the equilibrium and stiffness of
frames", Phil. Mag. 27 (1864) 294-299.
C. R. Calladine, "Buckminster Fuller's 'Tensegrity' structures and Clerk
Maxwell's rules for the construction of stiff frames", Int. J. Solids Struct.
14 (1978) 161-172 (mechanisms - states of self-stress = 3j - b - 6).
S. Pellegrino and C. R. Calladine, "Matrix analysis of statically and
kinematically indeterminate frameworks", Int. J. Solids Struct. 22 (1986)
409-428.
P. Businger and G. H. Golub, "Linear least squares solutions by Householder
transformations", Numer. Math. 7 (1965) 269-276 (column pivoting).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numba
import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
from numpy.typing import NDArray
from scipy.sparse.csgraph import connected_components

from bandwise.core.dofs import (
    DOF_NAMES,
    PLANE,
    PLANE_FRAME,
    SCALAR,
    SOLID,
    SPACE,
    DofLayout,
    mask_names,
)
from bandwise.core.elements import cell_dimension
from bandwise.core.graph import NodeGraph
from bandwise.core.model import Model

from .supports import SupportSet, model_extent, no_supports

_BIT = {name: 1 << k for k, name in enumerate(DOF_NAMES)}
ROTATIONS = _BIT["rx"] | _BIT["ry"] | _BIT["rz"]
#: Singular values below this fraction of the largest count as zero.
RANK_RTOL = 1e-8
#: Largest number of body coordinates of one part the dense analysis accepts.
MAX_PART_COORDINATES = 600
#: Above it, a sparse eigen-solver is used, up to this many coordinates and modes.
MAX_SPARSE_COORDINATES = 300_000
MAX_SPARSE_MODES = 400
#: Nodes listed as moving most, per mode.
MOVING_NODES = 5
_AXES = "xyz"


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class ZeroEnergyMode:
    """One zero-energy mode of one part.

    Attributes
    ----------
    part
        1-based part number (parts numbered by their lowest node index).
    kind
        ``"rigid"`` (the part moves as one body) or ``"mechanism"``.
    description
        What moves, in words an engineer reads.
    moving_nodes
        Labels (original ids, else 1-based positions) of the nodes that move most.
    """

    part: int
    kind: str
    description: str
    moving_nodes: tuple[int, ...]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"part": self.part, "kind": self.kind, "description": self.description,
                "moving_nodes": list(self.moving_nodes)}


@dataclass(frozen=True)
class PartModes:
    """The zero-energy modes of one connected part.

    Attributes
    ----------
    part
        1-based part number.
    n_nodes, n_bodies
        Nodes of the part, and rigid bodies it was split into.
    modes
        The modes, rigid ones first; empty when the part is held.
    analysed
        False when the part was too large for the dense analysis (see ``note``).
    """

    part: int
    n_nodes: int
    n_bodies: int
    modes: tuple[ZeroEnergyMode, ...]
    analysed: bool = True
    note: str = ""

    @property
    def n_modes(self) -> int:
        """Number of zero-energy modes of the part."""
        return len(self.modes)

    @property
    def n_rigid(self) -> int:
        """Rigid-body modes among them."""
        return sum(m.kind == "rigid" for m in self.modes)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"part": self.part, "nodes": self.n_nodes, "bodies": self.n_bodies,
                "analysed": self.analysed, "modes": self.n_modes, "rigid": self.n_rigid,
                "mechanisms": self.n_modes - self.n_rigid, "note": self.note,
                "details": [m.to_dict() for m in self.modes]}


@dataclass(frozen=True)
class SuggestedHold:
    """DOFs at one node whose holding (with the other suggestions) removes every free mode."""

    node: int
    dofs: str

    @property
    def as_option(self) -> str:
        """The suggestion in ``--support`` syntax."""
        return f"node {self.node}:{self.dofs.replace(' ', ',')}"

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"node": self.node, "dofs": self.dofs, "option": self.as_option}


@dataclass(frozen=True)
class ZeroEnergyAnalysis:
    """Zero-energy modes of a supported model, per part and in total.

    Attributes
    ----------
    space
        ``"space"`` (6 rigid motions), ``"plane"`` (3) or ``"scalar"`` (1).
    parts
        One :class:`PartModes` per connected part.
    dofs_without_stiffness
        Free DOFs that no element stiffens (orphan nodes, rotations at nodes
        of solid elements only); each is a zero-energy mode by itself.
    suggested
        A small set of holds that removes every rigid and mechanism mode
        (offered, never applied).
    notes
        Plain-language remarks (bar spins ignored, parts not analysed ...).
    """

    space: str
    parts: tuple[PartModes, ...]
    dofs_without_stiffness: int
    suggested: tuple[SuggestedHold, ...]
    notes: tuple[str, ...] = ()
    node_label_word: str = "1-based node position"
    moment_release: MomentRelease | None = None

    @property
    def n_body_modes(self) -> int:
        """Rigid and mechanism modes over all analysed parts."""
        return sum(p.n_modes for p in self.parts)

    @property
    def total(self) -> int:
        """All zero-energy modes: rigid, mechanism, and DOFs without stiffness."""
        return self.n_body_modes + self.dofs_without_stiffness

    @property
    def complete(self) -> bool:
        """True when every part was analysed."""
        return all(p.analysed for p in self.parts)

    def modes(self) -> list[ZeroEnergyMode]:
        """Every mode of every part, in part order."""
        return [m for p in self.parts for m in p.modes]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the ``zero_energy_modes`` entry of ``check --json``)."""
        return {
            "total": self.total,
            "rigid": sum(p.n_rigid for p in self.parts),
            "mechanisms": sum(p.n_modes - p.n_rigid for p in self.parts),
            "dofs_without_stiffness": self.dofs_without_stiffness,
            "complete": self.complete,
            "motion_space": self.space,
            "node_labels": self.node_label_word,
            "per_part": [p.to_dict() for p in self.parts],
            "notes": list(self.notes),
            "moment_release": None if self.moment_release is None
            else self.moment_release.to_dict(),
        }

    def __repr__(self) -> str:
        return (f"ZeroEnergyAnalysis({self.total} zero-energy modes over {len(self.parts)} "
                f"parts, {self.dofs_without_stiffness} DOFs without stiffness)")


@dataclass(frozen=True)
class MomentRelease:
    """Nodes where frame or shell elements meet solid (or plane) elements.

    Solid elements give a node no rotational stiffness, so the joint passes
    forces but no moment from the frame or shell into the solid: often not
    what the analyst meant.  A warning, not an error.
    """

    nodes: tuple[int, ...]
    n_nodes: int
    message: str = field(default="")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"severity": "warning", "nodes": self.n_nodes, "first_nodes": list(self.nodes),
                "message": self.message}


# --------------------------------------------------------------------------- motion space


def motion_space(model: Model, layout: DofLayout) -> str | None:
    """Which rigid motions apply: ``"space"``, ``"plane"``, ``"scalar"``, or None.

    None when the layout has no DOF names or mixes a scalar field with
    displacements (nothing sensible to say about rigid motions then).
    """
    if layout.unnamed is not None or layout.masks.size == 0:
        return None
    used = int(np.bitwise_or.reduce(layout.masks))
    if used & SCALAR:
        return "scalar" if used == SCALAR else None
    out_of_plane = _BIT["uz"] | _BIT["rx"] | _BIT["ry"]
    if _is_planar(model) and not used & out_of_plane:
        return "plane"
    return "space"


def _is_planar(model: Model, rtol: float = 1e-9) -> bool:
    """``Model.is_planar`` computed column by column (the same rule, faster)."""
    pts = model.points
    if pts.shape[1] < 3 or pts.shape[0] == 0:
        return True
    z = pts[:, 2]
    return bool(z.max() - z.min() <= rtol * (model_extent(pts) or 1.0))


def _n_motions(space: str) -> int:
    return {"space": 6, "plane": 3, "scalar": 1}[space]


def _motion_rows(space: str, dof: str, r: NDArray[np.float64]) -> NDArray[np.float64]:
    """Rows of the rigid motions evaluated at one DOF of points ``r`` (body frame, scaled).

    Coordinates: space (tx, ty, tz, qx, qy, qz), plane (tx, ty, qz), scalar (c);
    the displacement is ``u = t + q x r`` and a rotational DOF equals ``q``.
    """
    m = len(r)
    if space == "scalar":
        return np.ones((m, 1))
    rows = np.zeros((m, _n_motions(space)))
    x, y, z = r[:, 0], r[:, 1], r[:, 2]
    if space == "plane":
        if dof == "ux":
            rows[:, 0], rows[:, 2] = 1.0, -y
        elif dof == "uy":
            rows[:, 1], rows[:, 2] = 1.0, x
        elif dof == "rz":
            rows[:, 2] = 1.0
        return rows
    if dof == "ux":
        rows[:, 0], rows[:, 4], rows[:, 5] = 1.0, z, -y
    elif dof == "uy":
        rows[:, 1], rows[:, 3], rows[:, 5] = 1.0, -z, x
    elif dof == "uz":
        rows[:, 2], rows[:, 3], rows[:, 4] = 1.0, y, -x
    else:
        rows[:, 3 + "xyz".index(dof[1])] = 1.0
    return rows


def _space_dofs(space: str) -> tuple[str, ...]:
    return {"space": ("ux", "uy", "uz", "rx", "ry", "rz"), "plane": ("ux", "uy", "rz"),
            "scalar": ("t",)}[space]


# --------------------------------------------------------------------------- bodies


@dataclass(frozen=True)
class Bodies:
    """The rigid bodies of a model and their incidence with nodes.

    Attributes
    ----------
    n
        Number of bodies.
    own
        DOF mask each body stiffens (before intersecting with its nodes' DOFs).
    node, body
        Distinct (node, body) incidences, sorted by node.
    is_bar
        True for a pin-jointed line element body.
    """

    n: int
    own: NDArray[np.int64]
    node: NDArray[np.int64]
    body: NDArray[np.int64]
    is_bar: NDArray[np.bool_]


@numba.njit(cache=True, nogil=True)
def _first_body(data, body, first, multi):  # pragma: no cover - compiled
    """first[v] = the first body seen at node v; multi[v] = v is in two bodies or more."""
    for e in range(data.shape[0]):
        b = body[e]
        if b < 0:
            continue
        for a in range(data.shape[1]):
            v = data[e, a]
            f = first[v]
            if f == -1:
                first[v] = b
            elif f != b:
                multi[v] = True


def _own_mask(space: str, dim: int, planar: bool) -> int:
    if space == "scalar":
        return SCALAR
    if dim == 3:
        return SOLID
    if dim == 2:
        return PLANE if planar else SPACE
    return PLANE_FRAME if planar else SPACE


def make_bodies(model: Model, layout: DofLayout, space: str,
                labels: list[NDArray[np.int64]] | None = None) -> Bodies:
    """Split the coupling elements into rigid bodies (see the module docstring).

    Parameters
    ----------
    model, layout, space
        The mesh, its DOFs, and its motion space (:func:`motion_space`).
    labels
        Face-connected block of every cell (from
        :func:`bandwise.algorithms.topology.face_connected_blocks`), if already known.
    """
    if labels is None:
        from .topology import face_connected_blocks

        _, labels = face_connected_blocks(model)
    planar = space == "plane" or _is_planar(model)   # as the DOF layout decides families
    rot_needed = _BIT["rz"] if space == "plane" else ROTATIONS
    n_blocks = max((int(lab.max()) + 1 for lab in labels if lab.size), default=0)
    dim_of_block = np.zeros(n_blocks, dtype=np.int64)
    block_pinned = np.zeros(n_blocks, dtype=bool)
    for b, lab in zip(model.cells, labels):
        keep = lab >= 0
        if not keep.any():
            continue
        dim = cell_dimension(b.type) or 0
        dim_of_block[lab[keep]] = dim
        if dim == 1 and space != "scalar":
            lacks = (layout.masks[b.data[keep]] & rot_needed) != rot_needed
            block_pinned[np.unique(lab[keep][lacks.any(axis=1)])] = True
    # pin-jointed line blocks: one body per element
    body_labels, extra_own, extra_bar = [], [], []
    next_id = n_blocks
    for b, lab in zip(model.cells, labels):
        lab = lab.copy()
        split = (lab >= 0) & block_pinned[np.maximum(lab, 0)] if lab.size else lab >= 0
        if split.any():
            k = int(np.count_nonzero(split))
            lab[split] = np.arange(next_id, next_id + k)
            next_id += k
            extra_own.append(np.full(k, _own_mask(space, 1, planar), dtype=np.int64))
            extra_bar.append(np.ones(k, dtype=bool))
        body_labels.append(lab)
    own = np.array([_own_mask(space, int(d), planar) for d in dim_of_block], dtype=np.int64)
    own = np.concatenate([own, *extra_own]) if extra_own else own
    is_bar = np.concatenate([np.zeros(n_blocks, dtype=bool), *extra_bar])
    node, body = _incidence(model, body_labels)
    # bodies that only existed as a whole pin-jointed block are empty now: keep ids, no nodes
    return Bodies(next_id, own, node, body, is_bar)


def _incidence(model: Model, labels: list[NDArray[np.int64]]) -> tuple[NDArray[np.int64], ...]:
    """Distinct (node, body) pairs sorted by node, with a compiled pass for big meshes."""
    n = model.n_nodes
    first = np.full(n, -1, dtype=np.int64)
    multi = np.zeros(n, dtype=bool)
    regular = [(b.data, lab) for b, lab in zip(model.cells, labels)
               if lab.size and (lab >= 0).any()]
    for data, lab in regular:
        _first_body(np.ascontiguousarray(data, dtype=np.int64), lab, first, multi)
    single = np.flatnonzero((first >= 0) & ~multi)
    nodes, bodies = [single], [first[single]]
    if multi.any():
        mn, mb = [], []
        for data, lab in regular:
            touch = (lab >= 0) & multi[data].any(axis=1)
            if touch.any():
                d = data[touch]
                sel = multi[d]
                mn.append(d[sel])
                mb.append(np.broadcast_to(lab[touch][:, None], d.shape)[sel])
        nb = int(max(first.max(), max(int(x.max()) for x in mb))) + 1
        key = np.unique(np.concatenate(mn) * nb + np.concatenate(mb))
        nodes.append(key // nb)
        bodies.append(key % nb)
    node = np.concatenate(nodes)
    body = np.concatenate(bodies)
    order = np.lexsort((body, node))
    return node[order], body[order]


# --------------------------------------------------------------------------- geometry


@dataclass(frozen=True)
class _Frames:
    """Centroid, size and coordinate basis of every body."""

    centroid: NDArray[np.float64]   # (nb, 3)
    size: NDArray[np.float64]       # (nb,)
    basis: NDArray[np.float64]      # (nb, nmot, nmot); kept columns first
    rank: NDArray[np.int64]         # (nb,) number of kept coordinates


def _coordinates(model: Model) -> NDArray[np.float64]:
    pts = model.points
    if pts.shape[1] < 3:
        pts = np.column_stack([pts, np.zeros((pts.shape[0], 3 - pts.shape[1]))])
    return pts


def _frames(pts: NDArray[np.float64], bodies: Bodies, layout: DofLayout, space: str,
            fallback_size: float) -> _Frames:
    nb = bodies.n
    count = np.bincount(bodies.body, minlength=nb).astype(np.float64)
    safe = np.maximum(count, 1.0)
    p = pts[bodies.node]
    centroid = np.stack([np.bincount(bodies.body, p[:, k], nb) / safe for k in range(3)], 1)
    r = p - centroid[bodies.body]
    second = np.empty((nb, 3, 3))
    for i in range(3):
        for j in range(i, 3):
            second[:, i, j] = second[:, j, i] = np.bincount(bodies.body, r[:, i] * r[:, j], nb)
    size = np.sqrt(np.trace(second, axis1=1, axis2=2) / safe)
    size = np.where(size > 1e-12 * fallback_size, size, fallback_size)
    nm = _n_motions(space)
    basis = np.zeros((nb, nm, nm))
    rank = np.full(nb, nm, dtype=np.int64)
    if space == "scalar":
        basis[:, 0, 0] = 1.0
        return _Frames(centroid, size, basis, rank)
    rot_bits = _BIT["rz"] if space == "plane" else ROTATIONS
    has_rot = np.zeros(nb, dtype=bool)
    carried = layout.masks[bodies.node] & bodies.own[bodies.body] & rot_bits
    has_rot[np.unique(bodies.body[carried != 0])] = True
    inertia = (np.trace(second, axis1=1, axis2=2)[:, None, None] * np.eye(3) - second)
    inertia /= (safe * size * size)[:, None, None]
    nt = 2 if space == "plane" else 3
    basis[:, :nt, :nt] = np.eye(nt)
    if space == "plane":
        keep = has_rot | (inertia[:, 2, 2] > 1e-9)
        basis[keep, 2, 2] = 1.0
        rank[:] = 2 + keep
        return _Frames(centroid, size, basis, rank)
    w, v = np.linalg.eigh(inertia)                   # ascending eigenvalues
    kept = (w > 1e-9) | has_rot[:, None]
    order = np.argsort(~kept, axis=1, kind="stable")  # kept eigenvectors first
    v_sorted = np.take_along_axis(v, order[:, None, :], axis=2)
    kept_sorted = np.take_along_axis(kept, order, axis=1)
    basis[:, 3:, 3:] = v_sorted * kept_sorted[:, None, :]
    basis[has_rot, 3:, 3:] = np.eye(3)
    rank[:] = 3 + kept_sorted.sum(axis=1)
    rank[has_rot] = 6
    # plane elements in a 3D layout stiffen ux uy (rz) only: their motions are tx, ty, qz
    in_plane = (bodies.own & _BIT["uz"]) == 0
    if in_plane.any():
        plane_basis = np.zeros((nm, nm))
        plane_basis[0, 0] = plane_basis[1, 1] = plane_basis[5, 2] = 1.0
        basis[in_plane] = plane_basis
        rank[in_plane] = 3
    return _Frames(centroid, size, basis, rank)


# --------------------------------------------------------------------------- constraints


def _pair_rows(space: str, dof: str, pts: NDArray[np.float64], frames: _Frames,
               node: NDArray[np.int64], body: NDArray[np.int64]) -> NDArray[np.float64]:
    """Rows (in each body's reduced coordinates) of one DOF at (node, body) pairs."""
    r = (pts[node] - frames.centroid[body]) / frames.size[body][:, None]
    rows = _motion_rows(space, dof, r)
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


# --------------------------------------------------------------------------- analysis


# --------------------------------------------------------------------------- links


@dataclass(frozen=True)
class Link:
    """A rigid link or multi-point constraint of the input, for the analysis.

    Attributes
    ----------
    kind
        ``"rigid"`` (the nodes move as one rigid body in ``components``),
        ``"average"`` (the reference follows a weighted average of the
        others) or ``"general"`` (a linear equation between DOFs).
    card
        The card or keyword it came from (for notes).
    nodes
        0-based node indices, reference (independent) node first.
    components
        DOF mask the link ties (all DOFs by default).
    """

    kind: str
    card: str
    nodes: NDArray[np.int64]
    components: int = SPACE


def link_layout(model: Model, layout: DofLayout, links: tuple[Link, ...] | list[Link]) -> DofLayout:
    """The layout with DOFs of their own at nodes that only rigid links use.

    A node in no element (a reference node alone, which the DOF layout
    gives translations only, as an orphan) gets 6 DOFs in 3D, 3 in
    the plane (two translations and the in-plane rotation), as a solver
    gives such a node (common practice).
    """
    rigid = [ln.nodes for ln in links if ln.kind == "rigid" and ln.nodes.size > 1]
    if not rigid:
        return layout
    nodes = np.unique(np.concatenate(rigid))
    in_cell = np.zeros(model.n_nodes, dtype=bool)
    for b in model.cells:
        in_cell[b.data.ravel()] = True
    bare = nodes[~in_cell[nodes]]
    if not bare.size:
        return layout
    masks = layout.masks.copy()
    masks[bare] = PLANE_FRAME if _is_planar(model) else SPACE
    return DofLayout(masks, layout.rule + f"; {bare.size} node(s) used only by rigid links "
                     "carry their own DOFs", layout.unnamed)


def _add_link_bodies(bodies: Bodies, links: list[Link], space: str, planar: bool) -> Bodies:
    """One rigid body per rigid link, owning the link's components.

    Shared nodes then give the equality constraints of the link exactly:
    the dependent nodes follow the rigid motion of the link body in the
    tied components, and the reference node does too.
    """
    full = PLANE_FRAME if space == "plane" or planar else SPACE
    if space == "scalar":
        full = SCALAR
    nodes, ids, own = [bodies.node], [bodies.body], [bodies.own]
    for k, ln in enumerate(links):
        u = np.unique(ln.nodes)
        nodes.append(u)
        ids.append(np.full(u.size, bodies.n + k, dtype=np.int64))
        own.append(np.array([int(ln.components) & full], dtype=np.int64))
    node = np.concatenate(nodes)
    body = np.concatenate(ids)
    order = np.lexsort((body, node))
    return Bodies(bodies.n + len(links), np.concatenate(own), node[order], body[order],
                  np.concatenate([bodies.is_bar, np.zeros(len(links), dtype=bool)]))


def zero_energy_modes(model: Model, layout: DofLayout, supports: SupportSet | None = None,
                      graph: NodeGraph | None = None,
                      labels: list[NDArray[np.int64]] | None = None,
                      links: tuple[Link, ...] | list[Link] = ()) -> ZeroEnergyAnalysis:
    """Rigid-body and mechanism modes left free by the supports, per connected part.

    Parameters
    ----------
    model
        The mesh.
    layout
        DOFs of each node (:func:`bandwise.core.dofs.dof_layout`).
    supports
        Held DOFs (:func:`bandwise.algorithms.supports.apply_supports`); None: no supports.
    graph
        Not needed (the parts follow from the bodies); accepted so that
        callers holding the node graph may pass it.
    labels
        Face-connected block of every cell, if already computed.
    links
        Rigid links and constraints of the input (:class:`Link`).  Rigid
        links join the analysis as rigid bodies of their own (exact);
        averaging links and general equations are left out with a note.
        Nodes used only by links need DOFs in ``layout`` (:func:`link_layout`).

    Returns
    -------
    ZeroEnergyAnalysis

    Notes
    -----
    Cost O(n + number of cells) for the incidence and body moments, then an
    SVD per part of a matrix with one column per body coordinate and one row
    per held or shared DOF (compressed by QR when tall).  Parts with more
    than :data:`MAX_PART_COORDINATES` body coordinates (large pin-jointed
    trusses) use shift-invert Lanczos on the sparse Gram matrix instead, up
    to :data:`MAX_SPARSE_COORDINATES` coordinates and :data:`MAX_SPARSE_MODES`
    modes; larger ones are reported as not analysed.
    """
    labels_word = model.node_labels()[1]
    if supports is None:
        supports = no_supports(model.n_nodes)
    space = motion_space(model, layout)
    if space is None:
        note = ("zero-energy modes not analysed: the DOFs have no standard names or mix a "
                "scalar field with displacements")
        return ZeroEnergyAnalysis("none", (), 0, (), (note,), labels_word)
    pts = _coordinates(model)
    extent = model_extent(pts) or 1.0
    bodies = make_bodies(model, layout, space, labels)
    rigid_links = [ln for ln in links if ln.kind == "rigid" and np.unique(ln.nodes).size > 1]
    if rigid_links:
        bodies = _add_link_bodies(bodies, rigid_links, space, _is_planar(model))
    frames = _frames(pts, bodies, layout, space, extent)
    fixed = supports.fixed
    without = _dofs_without_stiffness(layout, bodies, fixed)
    part_of_node, n_parts = _parts(bodies, model.n_nodes)
    nm = _n_motions(space)
    r, c, v, _ = _constraints(space, pts, bodies, frames, layout, fixed)
    valid_col = (np.arange(nm)[None, :] < frames.rank[:, None]).ravel()
    body_part = np.full(bodies.n, -1, dtype=np.int64)
    body_part[bodies.body] = part_of_node[bodies.node]
    row_part = body_part[c // nm] if c.size else c
    notes = []
    if bodies.is_bar.any() and space == "space":
        notes.append("pin-jointed bars: the spin of a bar about its own axis moves no DOF "
                     "and is not counted (a trivial zero mode of no practical interest)")
    left_out: dict[str, int] = {}
    for ln in links:
        if ln.kind != "rigid":
            left_out[ln.card] = left_out.get(ln.card, 0) + 1
    for card, count in sorted(left_out.items()):
        notes.append(f"{count} {card} link(s) not modelled in the zero-energy count (only rigid "
                     "links are): the count may be off where they carry or hold a part")
    labels_arr = model.node_labels()[0]
    ctx = _Context(space, pts, bodies, frames, fixed, labels_arr, layout)
    parts, null_spaces = [], []
    row_order = np.argsort(row_part, kind="stable")
    row_bounds = np.searchsorted(row_part[row_order], np.arange(n_parts + 1))
    body_order = np.argsort(body_part, kind="stable")
    body_bounds = np.searchsorted(body_part[body_order], np.arange(n_parts + 1))
    nodes_per_part = np.bincount(part_of_node[part_of_node >= 0], minlength=n_parts)
    for p in range(n_parts):
        pb = body_order[body_bounds[p]:body_bounds[p + 1]]
        sel = row_order[row_bounds[p]:row_bounds[p + 1]]
        part, null = _part_modes(ctx, p, pb, r[sel], c[sel], v[sel], valid_col,
                                 int(nodes_per_part[p]))
        parts.append(part)
        null_spaces.append(null)
    parts_t = tuple(parts)
    for pm in parts_t:
        if not pm.analysed:
            notes.append(f"part {pm.part}: {pm.note}")
    if without:
        notes.append(f"{without} free DOF(s) have no stiffness from any element "
                     "(orphan nodes, or rotations at nodes of solid elements only)")
    suggested = _suggest(ctx, parts_t, null_spaces)
    release = moment_release(bodies, layout, labels_arr)
    return ZeroEnergyAnalysis(space, parts_t, without, suggested, tuple(notes), labels_word,
                              release)


def moment_release(bodies: Bodies, layout: DofLayout,
                   labels: NDArray[np.int64]) -> MomentRelease | None:
    """Nodes where frame or shell elements (rotations) meet solid or plane elements (none).

    At such a node only the frame or shell stiffens the rotations: the joint
    passes forces into the solid but no moment.  None when there is no such node.
    """
    n = layout.masks.size
    rot_pair = (bodies.own[bodies.body] & ROTATIONS) != 0
    with_rot = np.zeros(n, dtype=bool)
    without_rot = np.zeros(n, dtype=bool)
    with_rot[bodies.node[rot_pair]] = True
    without_rot[bodies.node[~rot_pair]] = True
    hit = np.flatnonzero(with_rot & without_rot & ((layout.masks & ROTATIONS) != 0))
    if hit.size == 0:
        return None
    first = tuple(int(v) for v in labels[hit[:10]])
    message = (f"{hit.size} node(s) join frame or shell elements to solid elements, which "
               "give no rotational stiffness: these joints pass forces but no moment into "
               f"the solid (first: node {first[0]}); tie the rotations if a rigid joint is meant")
    return MomentRelease(first, int(hit.size), message)


def _dofs_without_stiffness(layout: DofLayout, bodies: Bodies, fixed: NDArray[np.int64]) -> int:
    owned = np.zeros(layout.masks.size, dtype=np.int64)
    if bodies.node.size:                            # pairs are sorted by node
        starts = np.flatnonzero(np.r_[True, bodies.node[1:] != bodies.node[:-1]])
        owned[bodies.node[starts]] = np.bitwise_or.reduceat(bodies.own[bodies.body], starts)
    lacking = layout.masks & ~owned & ~fixed
    count = np.zeros(lacking.shape, dtype=np.int64)
    for k in range(len(DOF_NAMES)):
        count += (lacking >> k) & 1
    return int(count.sum())


def _parts(bodies: Bodies, n_nodes: int) -> tuple[NDArray[np.int64], int]:
    """Connected part of each node (-1 for nodes of no element), numbered by lowest node.

    Bodies sharing a node are in one part: the same parts as the node graph's
    connected components (without its isolated nodes), found on the much
    smaller body graph.
    """
    part = np.full(n_nodes, -1, dtype=np.int64)
    if bodies.node.size == 0:
        return part, 0
    node, body = bodies.node, bodies.body
    lead = np.r_[True, node[1:] != node[:-1]]
    lead_idx = np.maximum.accumulate(np.where(lead, np.arange(node.size), 0))
    follower = np.flatnonzero(~lead)
    links = sp.coo_matrix((np.ones(follower.size, dtype=np.int8),
                           (body[lead_idx[follower]], body[follower])),
                          shape=(bodies.n, bodies.n))
    _, body_comp = connected_components(links, directed=False)
    comp_of_pair = body_comp[body]
    # number the parts by their lowest node (pairs are sorted by node)
    seen, first = np.unique(comp_of_pair, return_index=True)
    order = np.empty(int(body_comp.max()) + 1, dtype=np.int64)
    order[seen[np.argsort(first)]] = np.arange(seen.size)
    part[node] = order[comp_of_pair]
    return part, int(seen.size)


@dataclass(frozen=True)
class _Context:
    space: str
    pts: NDArray[np.float64]
    bodies: Bodies
    frames: _Frames
    fixed: NDArray[np.int64]
    labels: NDArray[np.int64]
    layout: DofLayout


def _part_modes(ctx: _Context, p: int, part_bodies: NDArray[np.int64], r: NDArray[np.int64],
                c: NDArray[np.int64], v: NDArray[np.float64], valid_col: NDArray[np.bool_],
                n_nodes: int) -> tuple[PartModes, tuple[NDArray[np.int64], NDArray[np.float64]]]:
    """Null space of one part's constraints, split into rigid and mechanism modes."""
    nm = _n_motions(ctx.space)
    cols_all = (part_bodies[:, None] * nm + np.arange(nm)).ravel()
    cols = cols_all[valid_col[cols_all]]
    if cols.size > MAX_SPARSE_COORDINATES:
        return PartModes(p + 1, n_nodes, int(part_bodies.size), (), False,
                         f"{part_bodies.size} bodies ({cols.size} coordinates) exceed the "
                         f"limit of {MAX_SPARSE_COORDINATES}; not analysed"), \
            (cols, np.zeros((cols.size, 0)))
    local = np.full(int(cols_all.max()) + 1 if cols_all.size else 0, -1, dtype=np.int64)
    local[cols] = np.arange(cols.size)
    _, row_local = np.unique(r, return_inverse=True)
    keep = local[c] >= 0 if c.size else np.zeros(0, bool)
    a = sp.csr_matrix((v[keep], (row_local[keep], local[c[keep]])),
                      shape=(int(row_local.max()) + 1 if r.size else 0, cols.size))
    if cols.size > MAX_PART_COORDINATES:
        null = _sparse_null_space(a)
        if null is None:
            return PartModes(p + 1, n_nodes, int(part_bodies.size), (), False,
                             f"more than {MAX_SPARSE_MODES} zero-energy modes among "
                             f"{part_bodies.size} bodies; not analysed"), \
                (cols, np.zeros((cols.size, 0)))
    else:
        null = _null_space(a, cols.size)
    if null.shape[1] == 0:
        return PartModes(p + 1, n_nodes, int(part_bodies.size), ()), (cols, null)
    q, centre, size = _part_rigid_motions(ctx, part_bodies, cols, nm)
    rigid_coef = _free_rigid_motions(a, q)
    modes: list[ZeroEnergyMode] = []
    rigid_vecs = q @ rigid_coef if rigid_coef.shape[1] else np.zeros((cols.size, 0))
    for k in range(rigid_coef.shape[1]):
        vec = rigid_vecs[:, k]
        modes.append(ZeroEnergyMode(p + 1, "rigid", _describe_rigid(ctx, rigid_coef[:, k], centre,
                                                                    size, p + 1),
                                    _moving_nodes(ctx, part_bodies, cols, vec, nm)))
    mech = _mechanisms(null, rigid_vecs, ctx, part_bodies, cols, nm)
    for k in range(mech.shape[1]):
        modes.append(ZeroEnergyMode(p + 1, "mechanism",
                                    _describe_mechanism(ctx, part_bodies, cols, mech[:, k], nm,
                                                        p + 1, size),
                                    _moving_nodes(ctx, part_bodies, cols, mech[:, k], nm)))
    return PartModes(p + 1, n_nodes, int(part_bodies.size), tuple(modes)), (cols, null)


def _part_rigid_motions(ctx: _Context, part_bodies: NDArray[np.int64], cols: NDArray[np.int64],
                        nm: int) -> tuple[NDArray[np.float64], NDArray[np.float64], float]:
    """Body coordinates of the part's own rigid motions (about its centroid), one column each."""
    f = ctx.frames
    w = np.bincount(ctx.bodies.body, minlength=ctx.bodies.n)[part_bodies].astype(float)
    centre = (f.centroid[part_bodies] * w[:, None]).sum(0) / max(w.sum(), 1.0)
    spread = np.sqrt((((f.centroid[part_bodies] - centre) ** 2).sum(1) + f.size[part_bodies] ** 2)
                     @ w / max(w.sum(), 1.0))
    size = float(spread) if spread > 0 else 1.0
    q_full = np.zeros((part_bodies.size * nm, nm))
    eye = np.eye(nm)
    for k in range(nm):
        motion = _body_motion_of_part_motion(ctx.space, eye[k], centre, size,
                                             f.centroid[part_bodies], f.size[part_bodies])
        z = np.einsum("bmk,bm->bk", f.basis[part_bodies], motion)  # basis is orthonormal
        q_full[:, k] = z.ravel()
    index = (part_bodies[:, None] * nm + np.arange(nm)).ravel()
    pos = {int(cc): i for i, cc in enumerate(index)}
    q = q_full[[pos[int(cc)] for cc in cols]]
    return q, centre, size


def _body_motion_of_part_motion(space: str, a: NDArray[np.float64], centre: NDArray[np.float64],
                                size: float, centroids: NDArray[np.float64],
                                sizes: NDArray[np.float64]) -> NDArray[np.float64]:
    """Each body's (t, q*L_b) for the part motion ``a`` = (t, q*L_part) about ``centre``."""
    nb = centroids.shape[0]
    if space == "scalar":
        return np.full((nb, 1), a[0])
    d = centroids - centre
    if space == "plane":
        t, q = a[:2], a[2] / size
        tb = t[None, :] + q * np.column_stack([-d[:, 1], d[:, 0]])
        return np.column_stack([tb, q * sizes])
    t, q = a[:3], a[3:] / size
    tb = t[None, :] + np.cross(np.broadcast_to(q, d.shape), d)
    return np.column_stack([tb, q[None, :] * sizes[:, None]])


def _free_rigid_motions(a: sp.csr_matrix, q: NDArray[np.float64]) -> NDArray[np.float64]:
    """Coefficients (part motion coordinates) of the rigid motions the constraints leave free.

    Directions that move no DOF (a lone bar's spin) are removed; the rest is
    put in reduced row-echelon form with rotations first, so that a free body
    reads as rotations about x, y, z and translations along x, y, z.
    """
    nm = q.shape[1]
    _, s, vt = la.svd(q, full_matrices=True)
    rank_q = int(np.count_nonzero(s > 1e-9 * (s[0] if s.size else 1.0)))
    trivial = vt[rank_q:].T                       # motions that move nothing
    n_free = _null_space(np.asarray(a @ q), nm) if a.shape[0] else np.eye(nm)
    if trivial.shape[1]:
        n_free = n_free - trivial @ (trivial.T @ n_free)
    if n_free.shape[1] == 0:
        return n_free
    uu, ss, _ = la.svd(n_free, full_matrices=False)
    basis = uu[:, ss > 1e-6]
    return _tidy(basis, nm)


def _tidy(basis: NDArray[np.float64], nm: int) -> NDArray[np.float64]:
    """Reduced row-echelon form of the span of ``basis`` columns, rotation coordinates first."""
    if nm == 1:
        return basis / basis[0:1, :]
    order = np.r_[np.arange(nm // 2 if nm == 6 else 2, nm), np.arange(nm // 2 if nm == 6 else 2)]
    m = basis.T[:, order].copy()                  # rows = modes
    k, ncol = m.shape
    row = 0
    for col in range(ncol):
        if row == k:
            break
        piv = row + int(np.argmax(np.abs(m[row:, col])))
        if abs(m[piv, col]) < 1e-8:
            continue
        m[[row, piv]] = m[[piv, row]]
        m[row] /= m[row, col]
        others = np.arange(k) != row
        m[others] -= np.outer(m[others, col], m[row])
        row += 1
    m[np.abs(m) < 1e-12] = 0.0
    out = np.empty_like(m)
    out[:, order] = m
    return out.T


def _mechanisms(null: NDArray[np.float64], rigid: NDArray[np.float64], ctx: _Context,
                part_bodies: NDArray[np.int64], cols: NDArray[np.int64],
                nm: int) -> NDArray[np.float64]:
    """Mechanism modes: the null space beyond the free rigid motions, localised.

    Each mode is taken modulo free rigid motions so that the largest body
    stays still, then the set is rotated so that each mode has one pivot
    coordinate (pivoted QR) and vanishes at the others'.
    """
    n_mech = null.shape[1] - rigid.shape[1]
    if n_mech <= 0:
        return np.zeros((null.shape[0], 0))
    if rigid.shape[1]:
        qr_r, _ = la.qr(rigid, mode="economic")
        rest = null - qr_r @ (qr_r.T @ null)
    else:
        rest = null
    uu = la.svd(rest, full_matrices=False)[0]
    mech = uu[:, :n_mech]
    if rigid.shape[1]:
        nodes_of = np.bincount(ctx.bodies.body, minlength=ctx.bodies.n)[part_bodies]
        ref = part_bodies[int(np.argmax(nodes_of))]
        ref_rows = np.flatnonzero(cols // nm == ref)
        if ref_rows.size:
            coef, *_ = la.lstsq(rigid[ref_rows], mech[ref_rows])
            mech = mech - rigid @ coef
    _, _, piv = la.qr(mech.T, pivoting=True, mode="economic")
    pivots = piv[:n_mech]
    return mech @ la.inv(mech[pivots])


def _body_motions(ctx: _Context, part_bodies: NDArray[np.int64], cols: NDArray[np.int64],
                  vec: NDArray[np.float64], nm: int) -> tuple[NDArray[np.float64], ...]:
    """Translation at the centroid and rotation vector of each body of the part for a mode."""
    z = np.zeros((ctx.bodies.n, nm))
    z.reshape(-1)[cols] = vec
    zb = z[part_bodies]
    motion = np.einsum("bmk,bk->bm", ctx.frames.basis[part_bodies], zb)
    sizes = ctx.frames.size[part_bodies]
    if ctx.space == "scalar":
        return motion, np.zeros((part_bodies.size, 3))
    if ctx.space == "plane":
        t = np.column_stack([motion[:, :2], np.zeros(part_bodies.size)])
        q = np.column_stack([np.zeros((part_bodies.size, 2)), motion[:, 2] / sizes])
        return t, q
    return motion[:, :3], motion[:, 3:] / sizes[:, None]


def _moving_nodes(ctx: _Context, part_bodies: NDArray[np.int64], cols: NDArray[np.int64],
                  vec: NDArray[np.float64], nm: int) -> tuple[int, ...]:
    """Labels of the nodes with the largest displacement in a mode."""
    t, q = _body_motions(ctx, part_bodies, cols, vec, nm)
    where = np.full(ctx.bodies.n, -1, dtype=np.int64)
    where[part_bodies] = np.arange(part_bodies.size)
    sel = where[ctx.bodies.body] >= 0
    node, body = ctx.bodies.node[sel], where[ctx.bodies.body[sel]]
    if ctx.space == "scalar":
        amp = np.abs(t[body, 0])
    else:
        d = ctx.pts[node] - ctx.frames.centroid[part_bodies][body]
        u = t[body] + np.cross(q[body], d)
        amp = np.linalg.norm(u, axis=1) + np.linalg.norm(q[body], axis=1) * 1e-9
    if amp.size == 0 or np.ptp(amp) <= 1e-9 * amp.max():
        return ()                                   # every node moves alike
    # one amplitude per node (a joint belongs to several bodies; pairs sorted by node)
    starts = np.flatnonzero(np.r_[True, node[1:] != node[:-1]])
    node, amp = node[starts], np.maximum.reduceat(amp, starts)
    k = min(MOVING_NODES, amp.size)
    top = np.argpartition(-amp, k - 1)[:k]
    top = top[np.argsort(-amp[top], kind="stable")]
    return tuple(int(ctx.labels[node[i]]) for i in top if amp[i] > 1e-9 * amp.max())


def _fmt_point(p: NDArray[np.float64], scale: float) -> str:
    vals = [0.0 if abs(x) < 1e-9 * scale else float(x) for x in p]
    return "(" + ", ".join(f"{x:.6g}" for x in vals) + ")"


def _direction(d: NDArray[np.float64]) -> str:
    d = d / np.linalg.norm(d)
    axis = int(np.argmax(np.abs(d)))
    if abs(abs(d[axis]) - 1.0) < 1e-6:
        return _AXES[axis]
    return _fmt_point(d * np.sign(d[axis]), 1.0)


def _held_nodes_on_axis(ctx: _Context, point: NDArray[np.float64], axis: NDArray[np.float64],
                        tol: float) -> list[int]:
    held = np.flatnonzero(ctx.fixed != 0)
    if held.size == 0 or held.size > 200000:
        return []
    d = ctx.pts[held] - point
    dist = np.linalg.norm(d - np.outer(d @ axis, axis), axis=1)
    on = held[dist <= tol]
    if on.size <= 2:
        return [int(ctx.labels[i]) for i in on]
    s = (ctx.pts[on] - point) @ axis
    return [int(ctx.labels[on[np.argmin(s)]]), int(ctx.labels[on[np.argmax(s)]])]


def _describe_rigid(ctx: _Context, a: NDArray[np.float64], centre: NDArray[np.float64],
                    size: float, part: int) -> str:
    """Words for a rigid motion ``a`` = (t, q*L) of a part about ``centre``."""
    if ctx.space == "scalar":
        return f"constant t over part {part} (no prescribed value of t in it)"
    if ctx.space == "plane":
        t = np.array([a[0], a[1], 0.0])
        q = np.array([0.0, 0.0, a[2] / size])
    else:
        t, q = np.asarray(a[:3]), np.asarray(a[3:]) / size
    qn = float(np.linalg.norm(q))
    if qn * size < 1e-9 * max(float(np.linalg.norm(t)), 1e-300):
        return f"translation along {_direction(t)} of part {part}"
    axis = q / qn
    point = centre + np.cross(q, t) / qn**2
    pitch = float(t @ q) / qn**2
    on_axis = _held_nodes_on_axis(ctx, point, axis, 1e-6 * size)
    word = "node"
    if len(on_axis) == 2:
        where = f"through {word}s {on_axis[0]} and {on_axis[1]}"
    elif len(on_axis) == 1:
        where = f"through {word} {on_axis[0]}"
    else:
        where = f"through {_fmt_point(point, size)}"
    what = "rotation" if abs(pitch) < 1e-9 * size else f"screw motion (pitch {pitch:.3g})"
    return f"{what} about the axis {where} along {_direction(axis)} of part {part}"


def _describe_mechanism(ctx: _Context, part_bodies: NDArray[np.int64], cols: NDArray[np.int64],
                        vec: NDArray[np.float64], nm: int, part: int, size: float) -> str:
    """Words for a mechanism: a hinge, a joint at one node, or a general mechanism."""
    t, q = _body_motions(ctx, part_bodies, cols, vec, nm)
    d = ctx.frames.centroid[part_bodies]
    amp = np.linalg.norm(t, axis=1) + np.linalg.norm(q, axis=1) * ctx.frames.size[part_bodies]
    moving = amp > 1e-6 * amp.max()
    n_moving = int(moving.sum())
    kind = "bars" if ctx.bodies.is_bar[part_bodies].all() else "element blocks"
    generic = (f"mechanism of part {part}: {n_moving} of {part_bodies.size} {kind} move "
               "relative to each other")
    if ctx.space == "scalar" or moving.all():
        return generic
    # do all moving bodies share one rigid motion?
    ref = int(np.argmax(amp))
    qr, tr, cr = q[ref], t[ref], d[ref]
    same_q = np.linalg.norm(q[moving] - qr, axis=1) <= 1e-6 * np.linalg.norm(qr) + 1e-12
    pred = tr + np.cross(np.broadcast_to(qr, d[moving].shape), d[moving] - cr)
    same_t = np.linalg.norm(t[moving] - pred, axis=1) <= 1e-6 * amp.max()
    qn = float(np.linalg.norm(qr))
    if not (same_q.all() and same_t.all()) or qn == 0 or ctx.bodies.is_bar[part_bodies].any():
        return generic
    axis = qr / qn
    point = cr + np.cross(qr, tr) / qn**2
    interface = _interface_nodes(ctx, part_bodies[moving], part_bodies[~moving])
    if interface.size == 0:
        return generic
    dd = ctx.pts[interface] - point
    dist = np.linalg.norm(dd - np.outer(dd @ axis, axis), axis=1)
    if dist.max() > 1e-6 * size:
        return generic
    word = "node"
    if interface.size == 1 or np.ptp(dd @ axis) < 1e-9 * size:
        node = int(ctx.labels[interface[0]])
        return (f"rotation about the axis through {word} {node} along {_direction(axis)}: "
                f"{n_moving} block(s) of part {part} joined there at a single node")
    s = dd @ axis
    a, b = int(ctx.labels[interface[np.argmin(s)]]), int(ctx.labels[interface[np.argmax(s)]])
    return (f"hinge rotation about the edge between {word}s {a} and {b} "
            f"({n_moving} block(s) of part {part} turn about it)")


def _interface_nodes(ctx: _Context, moving: NDArray[np.int64],
                     still: NDArray[np.int64]) -> NDArray[np.int64]:
    is_moving = np.zeros(ctx.bodies.n, dtype=bool)
    is_moving[moving] = True
    is_still = np.zeros(ctx.bodies.n, dtype=bool)
    is_still[still] = True
    n = ctx.pts.shape[0]
    in_moving = np.zeros(n, dtype=bool)
    in_still = np.zeros(n, dtype=bool)
    in_moving[ctx.bodies.node[is_moving[ctx.bodies.body]]] = True
    in_still[ctx.bodies.node[is_still[ctx.bodies.body]]] = True
    return np.flatnonzero(in_moving & in_still)


# --------------------------------------------------------------------------- suggestions


def _candidate_nodes(ctx: _Context, body_ids: NDArray[np.int64]) -> NDArray[np.int64]:
    """A few well-spread nodes per body: extreme in x, y, z and the one nearest the centroid."""
    sel = np.isin(ctx.bodies.body, body_ids)
    node, body = ctx.bodies.node[sel], ctx.bodies.body[sel]
    picks = []
    p = ctx.pts[node] - ctx.frames.centroid[body]
    order = np.argsort(body, kind="stable")
    body_s = body[order]
    bounds = np.flatnonzero(np.r_[True, body_s[1:] != body_s[:-1], True])
    scores = [p[:, 0], -p[:, 0], p[:, 1], -p[:, 1], p[:, 2], -p[:, 2],
              -np.linalg.norm(p, axis=1)]
    for s in scores:
        s_sorted = s[order]
        # index of the max of each body's segment
        seg_max = np.maximum.reduceat(s_sorted, bounds[:-1])
        hit = s_sorted == np.repeat(seg_max, np.diff(bounds))
        first = np.flatnonzero(hit)
        seg = np.searchsorted(bounds, first, side="right") - 1
        _, one = np.unique(seg, return_index=True)
        picks.append(node[order][first[one]])
    return np.unique(np.concatenate(picks))


def _suggest(ctx: _Context, parts: tuple[PartModes, ...],
             null_spaces: list[tuple[NDArray[np.int64], NDArray[np.float64]]],
             ) -> tuple[SuggestedHold, ...]:
    """Holds at a few nodes that remove every free rigid and mechanism mode.

    Candidates are a few well-spread nodes of every body of a part with free
    modes; the motion of each candidate DOF in every mode forms a matrix whose
    pivoted QR (Businger and Golub 1965) picks as many DOFs as there are modes,
    the most independent first.
    """
    holds: dict[int, int] = {}
    nm = _n_motions(ctx.space)
    for part, (cols, modes) in zip(parts, null_spaces):
        if not part.n_modes or modes.shape[1] == 0:
            continue
        bodies_here = np.unique(cols // nm)
        local = {int(cc): i for i, cc in enumerate(cols)}
        cand = _candidate_nodes(ctx, bodies_here)
        sel = np.isin(ctx.bodies.node, cand) & np.isin(ctx.bodies.body, bodies_here)
        rows, names = [], []
        for dof in _space_dofs(ctx.space):
            bit = _BIT[dof]
            pn, pb = ctx.bodies.node[sel], ctx.bodies.body[sel]
            ok = ((ctx.layout.masks[pn] & bit) != 0) & ((ctx.bodies.own[pb] & bit) != 0) \
                & ((ctx.fixed[pn] & bit) == 0)
            pn, pb = pn[ok], pb[ok]
            if pn.size == 0:
                continue
            vals = _pair_rows(ctx.space, dof, ctx.pts, ctx.frames, pn, pb)
            z = np.zeros((pn.size, cols.size))
            for j in range(nm):
                idx = np.array([local.get(int(b) * nm + j, -1) for b in pb])
                ok_j = idx >= 0
                z[np.flatnonzero(ok_j), idx[ok_j]] = vals[ok_j, j]
            rows.append(z @ modes)
            names.extend((int(v), bit) for v in pn)
        if not rows:
            continue
        w = np.vstack(rows)
        for i in _pick_holds(w, np.array([n for n, _ in names]), modes.shape[1]):
            node, bit = names[i]
            holds[node] = holds.get(node, 0) | bit
    return tuple(SuggestedHold(int(ctx.labels[v]), mask_names(m)) for v, m in sorted(holds.items()))


#: Up to this many modes (and candidate nodes) the holds are chosen node by node.
GREEDY_MODES, GREEDY_NODES = 12, 300


def _pick_holds(w: NDArray[np.float64], node_of: NDArray[np.int64], n_modes: int) -> list[int]:
    """Rows of ``w`` (candidate DOFs x modes) to hold so that no mode is left.

    Few modes: node by node, each time the node whose DOFs remove the most
    remaining modes (ties: the larger motion), so a free solid gets the
    familiar 3-2-1 pattern of three nodes.  Many: one pivoted QR over all rows.
    """
    nodes = np.unique(node_of)
    if n_modes > GREEDY_MODES or nodes.size > GREEDY_NODES:
        _, _, piv = la.qr(w.T, pivoting=True, mode="economic")
        return [int(i) for i in piv[:n_modes]]
    picked: list[int] = []
    basis = np.zeros((0, n_modes))
    while len(picked) < n_modes:
        rest = w - (w @ basis.T) @ basis
        best, best_score = None, (0, 0.0)
        for v in nodes:
            rows = np.flatnonzero(node_of == v)
            sv = la.svd(rest[rows], compute_uv=False)
            score = (int(np.count_nonzero(sv > 1e-6 * max(sv.max(initial=0), 1.0))),
                     float(sv.sum()))
            if score[0] and score > best_score:     # a node that removes no mode is no pick
                best, best_score = rows, score
        if best is None:
            break                                   # the candidates cannot hold the rest
        _, _, piv = la.qr(rest[best].T, pivoting=True, mode="economic")
        picked.extend(int(best[i]) for i in piv[:best_score[0]])
        basis = la.orth(w[picked].T).T
    return picked
