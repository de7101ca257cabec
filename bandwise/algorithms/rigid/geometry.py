"""Body frames: centroid, size and the coordinate basis of every rigid body.

Concern: body coordinates are rigid motions about the body's centroid,
rotations scaled by the body size so that the rank tolerance is relative;
a rotation that moves none of the body's DOFs (a line body's spin, a
plane body's tilt) is dropped from its basis.

Sources: the second moment of the body's nodes (its inertia tensor about
the centroid, common practice) gives the principal axes whose eigenvalue
decides which rotations a body can make.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DofLayout

from .bodies import Bodies
from .motions import _BIT, ROTATIONS, _n_motions


@dataclass(frozen=True)
class _Frames:
    """Centroid, size and coordinate basis of every body."""

    centroid: NDArray[np.float64]   # (nb, 3)
    size: NDArray[np.float64]       # (nb,)
    basis: NDArray[np.float64]      # (nb, nmot, nmot); kept columns first
    rank: NDArray[np.int64]         # (nb,) number of kept coordinates


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
