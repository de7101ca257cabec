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

import numpy as np
from numpy.typing import NDArray

from ..topology import local_facets

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
