"""Make the demo meshes in ``meshes/`` (an invented scenario: a pump-mounting kit).

- ``bracket.msh`` (gmsh 4.1): an L-shaped steel mounting bracket, linear
  tetrahedra, with physical surfaces for the bolted mounting face and the
  loaded face, numbered in a scrambled order as a mesher might leave it.
- ``gusset.vtu``: a plane gusset plate with a bolt hole, triangles, numbered
  across its long side, with a thickness field and a material id per cell.
- ``frame.inp`` (keyword deck): a two-bay, two-storey space frame of line
  elements, with a node set for the column bases.

Rerun with ``python scripts/make_demo_meshes.py``; the output is deterministic.
"""

from __future__ import annotations

import itertools
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from bandwise.core.generate import _KUHN, _oriented, hex_grid, scrambled, triangle_grid
from bandwise.core.model import CellBlock, Model
from bandwise.formats.meshio_io import write_model

MM = 1.0  # coordinates in millimetres


def _compact(points: np.ndarray, blocks: list[CellBlock]) -> tuple[np.ndarray, list[CellBlock]]:
    """Drop nodes no cell uses and renumber the rest in their original order."""
    used = np.unique(np.concatenate([b.data.ravel() for b in blocks]))
    new = np.full(len(points), -1, dtype=np.int64)
    new[used] = np.arange(used.size)
    return points[used], [CellBlock(b.type, new[b.data]) for b in blocks]


def _boundary_triangles(tets: np.ndarray, points: np.ndarray, on_face) -> np.ndarray:
    """Triangles of tetrahedron faces that lie wholly on a plane picked by ``on_face``."""
    faces = np.concatenate([tets[:, [0, 2, 1]], tets[:, [0, 1, 3]], tets[:, [1, 2, 3]], tets[:, [0, 3, 2]]])
    key = np.sort(faces, axis=1)
    _, first, counts = np.unique(key, axis=0, return_index=True, return_counts=True)
    skin = faces[first[counts == 1]]
    keep = np.all(on_face(points[skin]), axis=1)
    return skin[keep]


def bracket() -> Model:
    """L-shaped bracket: base 120 x 40 x 15 mm, upright 20 x 40 x 60 mm, 5 mm tets."""
    h = 5.0 * MM
    box = hex_grid(25, 9, 13, h)            # 120 x 40 x 60 mm
    hexes = box.cells[0].data
    centre = box.points[hexes].mean(axis=1)
    keep = (centre[:, 2] < 15.0) | (centre[:, 0] < 20.0)
    tets = _oriented(box.points, hexes[keep][:, _KUHN].reshape(-1, 4))
    points, (tet_block,) = _compact(box.points, [CellBlock("tetra", tets)])
    tets = tet_block.data
    mount = _boundary_triangles(tets, points, lambda p: np.isclose(p[..., 2], 0.0))
    load = _boundary_triangles(tets, points, lambda p: np.isclose(p[..., 0], 120.0))
    cells = [CellBlock("tetra", tets), CellBlock("triangle", mount), CellBlock("triangle", load)]
    model = Model(
        points=points,
        cells=cells,
        cell_data={
            "gmsh:physical": [np.full(len(c), tag, dtype=np.int32) for c, tag in zip(cells, (1, 2, 3))],
            "gmsh:geometrical": [np.full(len(c), tag, dtype=np.int32) for c, tag in zip(cells, (1, 1, 2))],
        },
        field_data={"bracket_body": np.array([1, 3]), "mount_face": np.array([2, 2]),
                    "load_face": np.array([3, 2])},
    )
    return scrambled(model, seed=20261201)


def gusset() -> Model:
    """Gusset plate 300 x 150 mm with a 40 mm bolt hole, numbered across the long side."""
    ny, nx = 61, 31  # numbered with the short side fastest would be good; we do the opposite
    grid = triangle_grid(ny, nx, 5.0, 5.0)   # x fastest over 300 mm (61 nodes)
    tri = grid.cells[0].data
    centre = grid.points[tri].mean(axis=1)
    hole = np.hypot(centre[:, 0] - 240.0, centre[:, 1] - 75.0) < 20.0
    points, (block,) = _compact(grid.points, [CellBlock("triangle", tri[~hole])])
    points = points[:, :2]
    material = np.where(points[block.data].mean(axis=1)[:, 0] < 150.0, 1, 2).astype(np.int32)
    return Model(points=points, cells=[block],
                 point_data={"thickness_mm": np.full(len(points), 12.0)},
                 cell_data={"material_id": [material]})


def frame() -> Model:
    """Two-bay, two-storey space frame: bays 6 m x 5 m, storeys 3.5 m, members split in 4."""
    xs, ys, zs = np.array([0.0, 6.0, 12.0]), np.array([0.0, 5.0]), np.array([0.0, 3.5, 7.0])
    joints = np.array([(x, y, z) for z in zs for y in ys for x in xs]) * 1000.0 * MM
    index = {tuple(p): k for k, p in enumerate(joints)}
    members = []
    for (x, y, z) in joints:
        for dx, dy, dz in ((6000.0, 0, 0), (0, 5000.0, 0), (0, 0, 3500.0)):
            if dz == 0 and z == 0:
                continue  # no ground beams
            other = (x + dx, y + dy, z + dz)
            if other in index:
                members.append((index[(x, y, z)], index[other]))
    points = list(joints)
    lines = []
    for a, b in members:  # four elements per member
        chain = [a]
        for t in (0.25, 0.5, 0.75):
            points.append(joints[a] + t * (joints[b] - joints[a]))
            chain.append(len(points) - 1)
        chain.append(b)
        lines.extend(itertools.pairwise(chain))
    points = np.array(points)
    bases = np.flatnonzero(np.isclose(points[:, 2], 0.0))
    return Model(points=points, cells=[CellBlock("line", np.array(lines, dtype=np.int64))],
                 point_sets={"column_bases": bases})


def main() -> None:
    out = ROOT / "meshes"
    out.mkdir(exist_ok=True)
    for name, model in (("bracket.msh", bracket()), ("gusset.vtu", gusset()), ("frame.inp", frame())):
        fmt = write_model(model, out / name)
        print(f"{name}: {model.n_nodes} nodes, {model.n_cells} cells ({fmt})")


if __name__ == "__main__":
    main()
