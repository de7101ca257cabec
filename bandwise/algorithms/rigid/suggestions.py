"""Suggested holds: a few DOFs at a few nodes whose holding removes every free mode.

Concern: well-spread candidate nodes per body; node by node (few modes, so a
free solid gets the familiar 3-2-1 pattern) or one pivoted QR (many modes)
picks as many DOFs as there are modes.  Offered, never applied.

Sources: P. Businger and G. H. Golub, "Linear least squares solutions by
Householder transformations", Numer. Math. 7 (1965) 269-276 (column
pivoting); the 3-2-1 support of a free solid (common practice).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
import scipy.linalg as la
from numpy.typing import NDArray

from bandwise.core.dofs import mask_names

from .constraints import _pair_rows
from .motions import _BIT, _n_motions, _space_dofs
from .results import PartModes, SuggestedHold

if TYPE_CHECKING:
    from .analysis import _Context


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
