"""Structured meshes made by construction, for demos, tests and benchmarks.

Each generator returns a :class:`~bandwise.core.model.Model` numbered row by row
(x fastest, then y, then z), optionally scrambled with a seeded random
permutation to imitate a poor numbering from a mesher.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .model import CellBlock, Model


def _grid_points(shape: tuple[int, ...], spacing: tuple[float, ...]) -> NDArray[np.float64]:
    axes = [np.arange(n, dtype=np.float64) * h for n, h in zip(shape, spacing)]
    mesh = np.meshgrid(*axes, indexing="ij")
    # node index = i + nx*j (+ nx*ny*k): x fastest
    pts = np.stack([m.transpose(*reversed(range(len(shape)))).ravel() for m in mesh], axis=1)
    if pts.shape[1] == 2:
        pts = np.column_stack([pts, np.zeros(len(pts))])
    return pts


def quad_grid(nx: int, ny: int, hx: float = 1.0, hy: float = 1.0) -> Model:
    """A plane grid of ``(nx-1) x (ny-1)`` quads over ``nx x ny`` nodes, row by row."""
    idx = np.arange(nx * ny, dtype=np.int64).reshape(ny, nx)
    q = np.stack([idx[:-1, :-1], idx[:-1, 1:], idx[1:, 1:], idx[1:, :-1]], -1).reshape(-1, 4)
    return Model(points=_grid_points((nx, ny), (hx, hy)), cells=[CellBlock("quad", q)])


def triangle_grid(nx: int, ny: int, hx: float = 1.0, hy: float = 1.0) -> Model:
    """A plane grid of quads each split into two counter-clockwise triangles."""
    q = quad_grid(nx, ny, hx, hy)
    c = q.cells[0].data
    tri = np.concatenate([c[:, [0, 1, 2]], c[:, [0, 2, 3]]])
    return Model(points=q.points, cells=[CellBlock("triangle", tri)])


def hex_grid(nx: int, ny: int, nz: int, h: float = 1.0) -> Model:
    """A box of ``(nx-1)(ny-1)(nz-1)`` hexahedra, VTK node order, row by row."""
    idx = np.arange(nx * ny * nz, dtype=np.int64).reshape(nz, ny, nx)
    c = [idx[:-1, :-1, :-1], idx[:-1, :-1, 1:], idx[:-1, 1:, 1:], idx[:-1, 1:, :-1],
         idx[1:, :-1, :-1], idx[1:, :-1, 1:], idx[1:, 1:, 1:], idx[1:, 1:, :-1]]
    hexes = np.stack(c, -1).reshape(-1, 8)
    return Model(points=_grid_points((nx, ny, nz), (h, h, h)), cells=[CellBlock("hexahedron", hexes)])


# Kuhn subdivision of the unit cube into 6 positively oriented tetrahedra
# sharing the diagonal 0-6 (VTK hexahedron corner numbering).
_KUHN = np.array([[0, 1, 2, 6], [0, 2, 3, 6], [0, 3, 7, 6],
                  [0, 7, 4, 6], [0, 4, 5, 6], [0, 5, 1, 6]], dtype=np.int64)


def tet_grid(nx: int, ny: int, nz: int, h: float = 1.0) -> Model:
    """A box of hexahedra each split into 6 tetrahedra (Kuhn), conforming, row by row."""
    hexes = hex_grid(nx, ny, nz, h)
    c = hexes.cells[0].data
    tets = c[:, _KUHN].reshape(-1, 4)
    tets = _oriented(hexes.points, tets)
    return Model(points=hexes.points, cells=[CellBlock("tetra", tets)])


def _oriented(points: NDArray[np.float64], tets: NDArray[np.int64]) -> NDArray[np.int64]:
    """Swap two nodes of every tetrahedron with negative signed volume."""
    p = points[tets]
    vol = np.einsum("ij,ij->i", np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), p[:, 3] - p[:, 0])
    out = tets.copy()
    neg = vol < 0
    out[neg, 1], out[neg, 2] = tets[neg, 2], tets[neg, 1]
    return out


def line_frame(points: NDArray[np.float64], members: NDArray[np.int64]) -> Model:
    """A frame of two-node line elements between given points."""
    pts = np.asarray(points, dtype=np.float64)
    if pts.shape[1] == 2:
        pts = np.column_stack([pts, np.zeros(len(pts))])
    return Model(points=pts, cells=[CellBlock("line", np.asarray(members, dtype=np.int64))])


def scrambled(model: Model, seed: int = 0) -> Model:
    """The model with its nodes renumbered by a seeded random permutation."""
    perm = np.random.default_rng(seed).permutation(model.n_nodes)
    return model.renumbered(perm)


def nodes_for_tet_box(target_nodes: int) -> int:
    """Nodes per edge of a cubic tet box with about ``target_nodes`` nodes."""
    return max(2, round(target_nodes ** (1 / 3)))
