"""Signed measures and corner Jacobians of cells, vectorised per block.

Positive orientation follows the VTK cell node ordering (Kitware, "VTK File
Formats"): a tetrahedron is positive when ``(p1-p0) x (p2-p0) . (p3-p0) > 0``
(right-hand rule), a hexahedron when its bottom face 0-1-2-3 turns
counter-clockwise seen from the top face 4-5-6-7; plane cells are positive
when counter-clockwise seen from +z.  meshio's linear wedge uses the gmsh
prism order (base 0-1-2 counter-clockwise seen from the top 3-4-5).

The volume of a solid is the divergence-theorem sum over its outward faces,
``V = 1/3 sum_f integral x.n dA``; a quadrilateral face contributes the mean of
its two triangulations, which is exact for the bilinear faces of a
trilinear hexahedron, a wedge or a pyramid (common practice).
"""

from __future__ import annotations

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.algorithms.topology import local_facets
from bandwise.core.model import as_xyz

#: For each corner of a solid: the corner and three neighbours (a, b, c) with
#: det(pa - p, pb - p, pc - p) > 0 on a positively oriented cell.
CORNER_FRAMES: dict[str, tuple[tuple[int, int, int, int], ...]] = {
    "tetra": ((0, 1, 2, 3), (1, 2, 0, 3), (2, 0, 1, 3), (3, 0, 2, 1)),
    "hexahedron": ((0, 1, 3, 4), (1, 2, 0, 5), (2, 3, 1, 6), (3, 0, 2, 7),
                   (4, 7, 5, 0), (5, 4, 6, 1), (6, 5, 7, 2), (7, 6, 4, 3)),
    "wedge": ((0, 1, 2, 3), (1, 2, 0, 4), (2, 0, 1, 5),
              (3, 5, 4, 0), (4, 3, 5, 1), (5, 4, 3, 2)),
    "pyramid": ((0, 1, 3, 4), (1, 2, 0, 4), (2, 3, 1, 4), (3, 0, 2, 4)),
}


def _det3(a: NDArray[np.float64], b: NDArray[np.float64], c: NDArray[np.float64],
          ) -> NDArray[np.float64]:
    return np.einsum("...i,...i->...", np.cross(a, b), c)


def solid_volume(shape: str, p: NDArray[np.float64]) -> NDArray[np.float64]:
    """Signed volume of each solid from its corner coordinates ``p`` (m, corners, 3)."""
    p = p - p[:, :1]  # local origin: less round-off
    vol = np.zeros(len(p))
    for face in local_facets(shape):
        if len(face) == 3:
            a, b, c = face
            vol += _det3(p[:, a], p[:, b], p[:, c])
        else:
            a, b, c, d = face
            vol += 0.5 * (_det3(p[:, a], p[:, b], p[:, c]) + _det3(p[:, a], p[:, c], p[:, d])
                          + _det3(p[:, a], p[:, b], p[:, d]) + _det3(p[:, b], p[:, c], p[:, d]))
    return vol / 6.0


def corner_jacobians(shape: str, p: NDArray[np.float64]) -> NDArray[np.float64]:
    """Corner Jacobian determinants ``(m, corners)`` of solids (positive when valid)."""
    frames = np.array(CORNER_FRAMES[shape])
    o, a, b, c = (p[:, frames[:, k]] for k in range(4))
    return _det3(a - o, b - o, c - o)


def plane_signed_area(p: NDArray[np.float64]) -> NDArray[np.float64]:
    """Signed area seen from +z of polygons with corners ``p`` (m, k, >=2) (shoelace)."""
    x, y = p[..., 0], p[..., 1]
    return 0.5 * (x * np.roll(y, -1, axis=1) - np.roll(x, -1, axis=1) * y).sum(axis=1)


def plane_corner_turns(p: NDArray[np.float64]) -> NDArray[np.float64]:
    """z-component of (next - corner) x (previous - corner) at each corner of polygons."""
    d1 = np.roll(p, -1, axis=1)[..., :2] - p[..., :2]
    d0 = np.roll(p, 1, axis=1)[..., :2] - p[..., :2]
    return d1[..., 0] * d0[..., 1] - d1[..., 1] * d0[..., 0]


def surface_area(p: NDArray[np.float64]) -> NDArray[np.float64]:
    """Unsigned area of polygons in 3D with corners ``p`` (m, k, 3) (vector area)."""
    q = p - p[:, :1]
    vec = 0.5 * np.cross(q, np.roll(q, -1, axis=1)).sum(axis=1)
    return np.linalg.norm(vec, axis=1)


def cell_size(p: NDArray[np.float64]) -> NDArray[np.float64]:
    """Diagonal of the bounding box of each cell's corners: its length scale."""
    return np.linalg.norm(np.ptp(p, axis=1), axis=1)


def solid_measures(shape: str, points: NDArray[np.float64], data: NDArray[np.int64],
                   ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Signed volume, smallest corner Jacobian and size of every solid of a block.

    Parameters
    ----------
    shape
        Linear solid type of the corners (``"tetra"``, ``"hexahedron"`` ...).
    points
        ``(n, 3)`` node coordinates.
    data
        ``(m, k)`` connectivity; the corners come first.

    Returns
    -------
    volume, min_corner, size
        As :func:`solid_volume`, the minimum over the corners of
        :func:`corner_jacobians`, and :func:`cell_size`, computed in one
        compiled pass without gathering the corner coordinates.
    """
    faces = local_facets(shape)
    table = np.full((len(faces), 4), -1, dtype=np.int64)
    for j, f in enumerate(faces):
        table[j, :len(f)] = f
    frames = np.array(CORNER_FRAMES[shape], dtype=np.int64)
    if shape == "tetra":  # every corner of a tetrahedron gives 6 V
        frames = frames[:1]
    n_corners = {"tetra": 4, "pyramid": 5, "wedge": 6, "hexahedron": 8}[shape]
    pts = np.ascontiguousarray(as_xyz(points), dtype=np.float64)
    return _solid_kernel(pts, np.ascontiguousarray(data, dtype=np.int64), table, frames,
                         n_corners)


@numba.njit(cache=True, nogil=True)
def _det_at(p, o, a, b, c):  # pragma: no cover - compiled
    ax, ay, az = p[a, 0] - p[o, 0], p[a, 1] - p[o, 1], p[a, 2] - p[o, 2]
    bx, by, bz = p[b, 0] - p[o, 0], p[b, 1] - p[o, 1], p[b, 2] - p[o, 2]
    cx, cy, cz = p[c, 0] - p[o, 0], p[c, 1] - p[o, 1], p[c, 2] - p[o, 2]
    return ax * (by * cz - bz * cy) - ay * (bx * cz - bz * cx) + az * (bx * cy - by * cx)


@numba.njit(cache=True, nogil=True)
def _solid_kernel(points, data, faces, frames, n_corners):  # pragma: no cover - compiled
    m = data.shape[0]
    volume = np.empty(m)
    min_corner = np.empty(m)
    size = np.empty(m)
    p = np.empty((n_corners, 3))
    for e in range(m):
        lo0 = lo1 = lo2 = np.inf
        hi0 = hi1 = hi2 = -np.inf
        for a in range(n_corners):  # corners relative to the first: less round-off
            v = data[e, a]
            for c in range(3):
                p[a, c] = points[v, c] - points[data[e, 0], c]
            lo0, hi0 = min(lo0, p[a, 0]), max(hi0, p[a, 0])
            lo1, hi1 = min(lo1, p[a, 1]), max(hi1, p[a, 1])
            lo2, hi2 = min(lo2, p[a, 2]), max(hi2, p[a, 2])
        size[e] = np.sqrt((hi0 - lo0) ** 2 + (hi1 - lo1) ** 2 + (hi2 - lo2) ** 2)
        vol = 0.0
        for f in range(faces.shape[0]):
            a, b, c, d = faces[f, 0], faces[f, 1], faces[f, 2], faces[f, 3]
            if d < 0:
                vol += _triple(p, a, b, c)
            else:
                vol += 0.5 * (_triple(p, a, b, c) + _triple(p, a, c, d)
                              + _triple(p, a, b, d) + _triple(p, b, c, d))
        volume[e] = vol / 6.0
        low = np.inf
        for k in range(frames.shape[0]):
            low = min(low, _det_at(p, frames[k, 0], frames[k, 1], frames[k, 2], frames[k, 3]))
        min_corner[e] = low
    return volume, min_corner, size


@numba.njit(cache=True, nogil=True)
def _triple(p, a, b, c):  # pragma: no cover - compiled
    """a . (b x c) of three corner position vectors."""
    return (p[a, 0] * (p[b, 1] * p[c, 2] - p[b, 2] * p[c, 1])
            - p[a, 1] * (p[b, 0] * p[c, 2] - p[b, 2] * p[c, 0])
            + p[a, 2] * (p[b, 0] * p[c, 1] - p[b, 1] * p[c, 0]))
