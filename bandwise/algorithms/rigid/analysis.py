"""The zero-energy analysis: per part, the free rigid motions and the mechanisms, in words.

Concern: :func:`zero_energy_modes` ties the steps together (bodies, frames,
constraints, parts, null space per part); the rigid part of each null space
is separated from the mechanisms, both are put in a tidy basis and described
with the nodes that move most.  Also the moment-release warning and the
count of DOFs no element stiffens.

Sources: C. R. Calladine (1978), Int. J. Solids Struct. 14, 161-172
(mechanisms - states of self-stress = 3j - b - 6); S. Pellegrino and
C. R. Calladine (1986), Int. J. Solids Struct. 22, 409-428; the screw axis
of a rigid motion (Chasles' theorem, common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
from numpy.typing import NDArray
from scipy.sparse.csgraph import connected_components

from bandwise.core.dofs import DofLayout, popcount
from bandwise.core.graph import NodeGraph
from bandwise.core.model import Model, as_xyz

from ..supports import SupportSet, model_extent, no_supports
from .bodies import Bodies, make_bodies
from .constraints import MAX_SPARSE_MODES, _constraints, _null_space, _sparse_null_space
from .geometry import _Frames, _frames
from .links import Link, _add_link_bodies
from .motions import ROTATIONS, _is_planar, _n_motions, motion_space
from .results import MomentRelease, PartModes, ZeroEnergyAnalysis, ZeroEnergyMode
from .suggestions import _suggest

#: Largest number of body coordinates of one part the dense analysis accepts.
MAX_PART_COORDINATES = 600
#: Above it, a sparse eigen-solver is used, up to this many coordinates and modes.
MAX_SPARSE_COORDINATES = 300_000
#: Nodes listed as moving most, per mode.
MOVING_NODES = 5
_AXES = "xyz"


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
    pts = as_xyz(model.points)
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
    return int(popcount(lacking).sum())


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
