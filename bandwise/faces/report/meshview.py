"""What of a mesh the report draws: outer facets, line members, a projection.

A solid is drawn by its outer facets (element faces that belong to one
element only), a plate or shell by its cells, a frame by its members, each
reduced to corner nodes.  Coordinates are projected onto the picture plane:
a planar mesh as it lies, a 3D mesh from a fixed oblique view, with the
facets sorted far to near (painter's order) and shaded by their tilt.  Big
meshes are drawn from an evenly spread, seeded subset of facets, so a
million-node mesh draws in seconds and the picture says how much it shows.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.sparse.csgraph import connected_components

from bandwise.algorithms.topology import FacetTable, coupling_cells, facet_table
from bandwise.core.elements import CORNER_COUNT, cell_dimension
from bandwise.core.graph import NodeGraph
from bandwise.core.model import Model, as_xyz

#: Azimuth and elevation (degrees) of the oblique view of 3D meshes: seen from
#: +x, -y, +z, so that x runs to the right and z up.
VIEW = (-50.0, 25.0)


@dataclass(frozen=True)
class MeshView:
    """A mesh reduced to what is drawn, in picture coordinates.

    Attributes
    ----------
    xy
        ``(n_nodes, 2)`` projected coordinates of every node.
    facets
        ``(m, 4)`` corner nodes of the facets drawn, far to near; triangles
        repeat their last corner.
    shade
        ``(m,)`` lightness factor of each facet, in (0, 1].
    lines
        ``(k, 2)`` end nodes of the line members drawn.
    part
        Connected part of every node, 1-based; 0 for orphan nodes.
    n_parts
        Number of connected parts.
    facets_total, lines_total
        How many facets and members the full drawing has (before subsampling;
        the outer faces of solids turned away from the viewer are not counted).
    axis_names
        Names of the picture axes (``("x", "y")``, or the view for 3D).
    screen
        ``(3, 2)`` projection: picture coordinates are ``points @ screen``
        (used to draw vectors such as mode shapes).
    """

    xy: NDArray[np.float64]
    facets: NDArray[np.int64]
    shade: NDArray[np.float64]
    lines: NDArray[np.int64]
    part: NDArray[np.int64]
    n_parts: int
    facets_total: int
    lines_total: int
    axis_names: tuple[str, str]
    screen: NDArray[np.float64]

    @property
    def is_subsampled(self) -> bool:
        """True when fewer facets or members are drawn than the mesh has."""
        return len(self.facets) < self.facets_total or len(self.lines) < self.lines_total


def node_parts(graph: NodeGraph) -> tuple[NDArray[np.int64], int]:
    """Connected part of every node (1-based, by lowest node), 0 for orphans."""
    n = graph.n
    if n == 0:
        return np.zeros(0, dtype=np.int64), 0
    _, label = connected_components(graph.to_scipy(), directed=False)
    coupled = graph.degrees() > 0
    part = np.zeros(n, dtype=np.int64)
    used = np.unique(label[coupled])
    if used.size:
        # components come labelled by their lowest node, so the order is kept
        rank = np.zeros(label.max() + 1, dtype=np.int64)
        rank[used] = np.arange(1, used.size + 1)
        part[coupled] = rank[label[coupled]]
    return part, int(used.size)


def _pad4(faces: NDArray[np.int64]) -> NDArray[np.int64]:
    if faces.shape[1] == 4:
        return faces
    return np.concatenate([faces, faces[:, -1:]], axis=1)


def outer_faces(model: Model, table: FacetTable | None = None) -> NDArray[np.int64]:
    """Faces of the 3D cells owned by one cell only, as ``(m, 4)`` corners, outward.

    The free facets of :func:`bandwise.algorithms.topology.facet_table` (the same the
    free-face check counts) that are faces, not edges; triangles repeat their
    last corner.
    """
    table = facet_table(model) if table is None else table
    nodes = table.nodes_of(table.free)
    faces = nodes[nodes[:, 2] >= 0]          # faces of solids; 2D cells have edge facets
    triangle = faces[:, 3] < 0
    faces[triangle, 3] = faces[triangle, 2]
    return faces


def surface_cells(model: Model) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Corners of the 2D cells, ``(m, 4)``, and of the line cells, ``(k, 2)``, that carry
    stiffness (shells, plates, frames; not the tag cells on the faces of solids)."""
    faces, lines = [], []
    for block, use in zip(model.cells, coupling_cells(model)):
        dim = cell_dimension(block.type)
        if not use.any() or dim not in (1, 2):
            continue
        k = CORNER_COUNT.get(block.type, block.data.shape[1])
        corners = block.data[use][:, :k].astype(np.int64)
        if dim == 1:
            lines.append(corners[:, [0, -1]])
        elif k in (3, 4):
            faces.append(_pad4(corners))
        else:  # polygons: a fan of triangles keeps them drawable
            for j in range(1, k - 1):
                faces.append(_pad4(corners[:, [0, j, j + 1]]))
    return (np.concatenate(faces) if faces else np.zeros((0, 4), dtype=np.int64),
            np.concatenate(lines) if lines else np.zeros((0, 2), dtype=np.int64))


def projection(points: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64],
                                                     NDArray[np.float64] | None]:
    """The ``(3, 2)`` picture projection, axis names and view direction of a mesh.

    A mesh flat in one coordinate is drawn in the plane of the other two
    (view direction None); any other is seen from :data:`VIEW`.
    """
    p = np.asarray(points, dtype=np.float64)
    extent = np.ptp(p, axis=0) if len(p) else np.zeros(3)
    flat = extent <= 1e-9 * max(float(extent.max(initial=0.0)), 1.0)
    if flat.any():
        axes = [k for k in range(3) if k != int(np.argmax(flat))][:2]
        screen = np.zeros((3, 2))
        screen[axes[0], 0] = screen[axes[1], 1] = 1.0
        return screen, ("xyz"[axes[0]], "xyz"[axes[1]]), None
    az, el = np.radians(VIEW)
    toward = np.array([np.cos(el) * np.cos(az), np.cos(el) * np.sin(az), np.sin(el)])
    right = np.array([-np.sin(az), np.cos(az), 0.0])
    up = np.cross(toward, right)
    return np.column_stack([right, up]), ("view right", "view up"), toward


def _facing(points: NDArray[np.float64], faces: NDArray[np.int64],
            toward: NDArray[np.float64]) -> NDArray[np.bool_]:
    """True for outward-ordered faces whose normal points to the viewer (back-face culling)."""
    p = points[faces]
    normal = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
    return normal @ toward >= 0


def spread(m: int, keep: int) -> NDArray[np.int64]:
    """``keep`` of ``m`` indices, evenly spread and seeded (the same every run)."""
    if m <= keep:
        return np.arange(m, dtype=np.int64)
    rng = np.random.default_rng(20261201)
    return np.sort(rng.choice(m, size=keep, replace=False))


def mesh_view(model: Model, graph: NodeGraph, max_facets: int = 60000,
              max_lines: int = 40000, table: FacetTable | None = None) -> MeshView:
    """Reduce a mesh to its drawing: outer facets, members, parts, projection.

    Parameters
    ----------
    model, graph
        The mesh and its node graph (for the connected parts).
    max_facets, max_lines
        Most facets and members drawn; bigger meshes are subsampled.
    table
        The model's facet table, when the checks already matched it.

    Notes
    -----
    The outer faces come from one compiled facet grouping (:mod:`bandwise.algorithms.topology`).
    """
    part, n_parts = node_parts(graph)
    points = as_xyz(np.asarray(model.points, dtype=np.float64))
    screen, names, toward = projection(points)
    xy = points @ screen
    cells2d, lines = surface_cells(model)
    outer = outer_faces(model, table)
    if toward is not None and len(outer):
        outer = outer[_facing(points, outer, toward)]    # the back of a solid is hidden
    facets = np.concatenate([outer, cells2d])
    total_f, total_l = len(facets), len(lines)
    facets = facets[spread(total_f, max_facets)]
    lines = lines[spread(total_l, max_lines)]
    if toward is None or len(facets) == 0:
        shade = np.ones(len(facets))
    else:
        p = points[facets]
        normal = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0])
        length = np.linalg.norm(normal, axis=1)
        cos = np.abs(normal @ toward) / np.where(length > 0, length, 1.0)
        shade = 0.55 + 0.45 * cos
        order = np.argsort((points[facets] @ toward).mean(axis=1), kind="stable")
        facets, shade = facets[order], shade[order]
    return MeshView(xy, facets, shade, lines, part, n_parts, total_f, total_l, names, screen)
