"""Element facets and face-connected blocks of cells.

A *facet* of a cell is a face of a 3D solid, an edge of a 2D cell, or an end
node of a line.  Two cells of one *face-connected block* are linked by a
chain of cells in which each neighbour shares a full facet.  A mesh that is
one connected part in the node graph may still fall into several blocks:
blocks touching only at a node (or, for solids, only along an edge) can
rotate relative to each other, which is what the weak-joint check reports
and what rigid-body analysis needs.

Facets are built from the corner nodes only (the first nodes of a
higher-order cell in VTK / meshio order), so a ``tetra10`` shares its faces
with a ``tetra``.  Each facet is listed with its nodes in the order that
gives the outward normal by the right-hand rule for a positively oriented
cell (VTK convention; meshio's wedge follows the gmsh prism order, whose
base triangle normal points into the cell).

Lower-dimensional cells lying wholly on nodes of higher-dimensional cells
(boundary or tag cells, as in :mod:`bandwise.dofs`) add no stiffness; they
get no block (label ``-1``), like vertex cells and cell types bandwise does
not analyse.

References
----------
Kitware, "VTK File Formats" (cell types and node orderings), and the face
tables of ``vtkTetra``, ``vtkHexahedron``, ``vtkWedge``, ``vtkPyramid``.
C. Geuzaine, J.-F. Remacle, "Gmsh reference manual", node ordering (prism).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import sparse
from scipy.sparse.csgraph import connected_components

from .elements import CORNER_COUNT, cell_dimension
from .errors import InputError
from .model import Model

#: Local corner tuples of each facet, outward orientation, per corner shape.
_FACETS: dict[str, tuple[tuple[int, ...], ...]] = {
    "line": ((0,), (1,)),
    "triangle": ((0, 1), (1, 2), (2, 0)),
    "quad": ((0, 1), (1, 2), (2, 3), (3, 0)),
    "tetra": ((0, 2, 1), (0, 1, 3), (1, 2, 3), (2, 0, 3)),
    "hexahedron": ((0, 3, 2, 1), (4, 5, 6, 7), (0, 1, 5, 4),
                   (1, 2, 6, 5), (2, 3, 7, 6), (3, 0, 4, 7)),
    "wedge": ((0, 2, 1), (3, 4, 5), (0, 3, 5, 2), (2, 5, 4, 1), (1, 4, 3, 0)),
    "pyramid": ((0, 3, 2, 1), (0, 1, 4), (1, 2, 4), (2, 3, 4), (3, 0, 4)),
}

#: Linear shape with the same corners as each higher-order cell type.
_CORNER_SHAPE: dict[str, str] = {}
for _t in CORNER_COUNT:
    for _shape in ("line", "triangle", "quad", "tetra", "hexahedron", "wedge", "pyramid"):
        if _t.startswith(_shape):
            _CORNER_SHAPE[_t] = _shape

#: Widest facet of any cell type (quadrilateral faces).
MAX_FACET_NODES = 4


def corner_shape(cell_type: str) -> str | None:
    """The linear cell type whose corners a cell type has (``"tetra10"`` -> ``"tetra"``)."""
    if cell_type == "polygon":
        return "polygon"
    return _CORNER_SHAPE.get(cell_type)


def local_facets(cell_type: str, nodes_per_cell: int | None = None) -> list[tuple[int, ...]]:
    """Local corner indices of each facet of a cell type, outward orientation.

    Parameters
    ----------
    cell_type
        meshio cell type name.
    nodes_per_cell
        Needed for ``"polygon"`` only (its edges are ``(i, i+1 mod k)``).

    Raises
    ------
    InputError
        For vertex cells and cell types bandwise does not analyse.
    """
    shape = corner_shape(cell_type)
    if shape == "polygon":
        if not nodes_per_cell or nodes_per_cell < 3:
            raise InputError("a polygon block needs at least 3 nodes per cell")
        k = nodes_per_cell
        return [(i, (i + 1) % k) for i in range(k)]
    if shape is None:
        raise InputError(f"cell type {cell_type!r} has no facets bandwise knows")
    return list(_FACETS[shape])


def facets(cell_type: str, data: NDArray[np.integer]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """All facets of a block of cells, as corner-node arrays.

    Parameters
    ----------
    cell_type
        meshio cell type name (linear or higher order).
    data
        ``(m, nodes_per_cell)`` node indices of the cells.

    Returns
    -------
    facet_nodes
        ``(m * f, k)`` node indices, ``f`` facets per cell, ``k`` the widest
        facet of the type; narrower facets (the triangles of a wedge or a
        pyramid) are padded on the right with ``-1``.  Rows are cell-major:
        facet ``j`` of cell ``e`` is row ``e * f + j``.
    owner
        ``(m * f,)`` index of the cell (row of ``data``) owning each facet.

    Examples
    --------
    >>> nodes, owner = facets("triangle", np.array([[0, 1, 2]]))
    >>> nodes.tolist(), owner.tolist()
    ([[0, 1], [1, 2], [2, 0]], [0, 0, 0])
    """
    data = np.asarray(data, dtype=np.int64)
    table = local_facets(cell_type, data.shape[1] if data.ndim == 2 else None)
    k = max(len(t) for t in table)
    local = np.full((len(table), k), -1, dtype=np.int64)
    for j, t in enumerate(table):
        local[j, :len(t)] = t
    m, f = data.shape[0], len(table)
    # gather with a dummy column of -1 so that padding stays -1
    padded = np.concatenate([data, np.full((m, 1), -1, dtype=np.int64)], axis=1)
    nodes = padded[:, local].reshape(m * f, k)
    owner = np.repeat(np.arange(m, dtype=np.int64), f)
    return nodes, owner


def coupling_cells(model: Model) -> list[NDArray[np.bool_]]:
    """Which cells of each block carry stiffness (one bool array per block).

    False for vertex cells, cell types not analysed, ragged blocks, and
    boundary/tag cells: lower-dimensional cells whose every node also belongs
    to a higher-dimensional cell (the rule of :func:`bandwise.dofs.dof_layout`).
    """
    top = np.zeros(model.n_nodes, dtype=np.int64)
    for b in model.cells:
        dim = cell_dimension(b.type)
        if dim and _regular(b.data):
            nodes = np.unique(b.data)
            top[nodes] = np.maximum(top[nodes], dim)
    masks = []
    for b in model.cells:
        dim = cell_dimension(b.type)
        if not dim or not _regular(b.data) or corner_shape(b.type) is None:
            masks.append(np.zeros(len(b.data), dtype=bool))
        else:
            masks.append((top[b.data] == dim).any(axis=1))
    return masks


def _regular(data: NDArray[np.integer]) -> bool:
    return data.dtype != object and data.ndim == 2 and data.shape[0] > 0


@dataclass(frozen=True)
class FacetTable:
    """Every facet of the coupling cells of a model, with equal facets grouped.

    Attributes
    ----------
    nodes
        ``(F, 4)`` corner nodes of each facet, outward order, ``-1`` padded.
    block, cell
        Cell block index (into ``model.cells``) and row of the owning cell.
    group
        Id of the distinct facet (same node set) each row belongs to.
    multiplicity
        Number of cells sharing each distinct facet: 1 on the free boundary,
        2 inside a conforming mesh, more at a non-manifold junction.
    """

    nodes: NDArray[np.int64]
    block: NDArray[np.int64]
    cell: NDArray[np.int64]
    group: NDArray[np.int64]
    multiplicity: NDArray[np.int64]

    @property
    def is_free(self) -> NDArray[np.bool_]:
        """True for facets owned by exactly one cell (boundary faces / edges)."""
        return self.multiplicity[self.group] == 1

    def __repr__(self) -> str:
        return f"FacetTable({len(self.group)} facets, {len(self.multiplicity)} distinct)"


def facet_table(model: Model, coupling: list[NDArray[np.bool_]] | None = None) -> FacetTable:
    """Build the :class:`FacetTable` of a model's coupling cells.

    Notes
    -----
    Facets with the same node set are grouped by :func:`group_node_sets`:
    O(F log F) for F facets.
    """
    if coupling is None:
        coupling = coupling_cells(model)
    parts_nodes, parts_block, parts_cell = [], [], []
    for bi, (b, use) in enumerate(zip(model.cells, coupling)):
        if not use.any():
            continue
        rows = np.flatnonzero(use)
        corners = b.data[rows][:, :_corner_count(b.type, b.data.shape[1])]
        nodes, owner = facets(b.type, corners)
        pad = MAX_FACET_NODES - nodes.shape[1]
        if pad:
            nodes = np.concatenate([nodes, np.full((len(nodes), pad), -1, np.int64)], axis=1)
        parts_nodes.append(nodes)
        parts_block.append(np.full(len(owner), bi, dtype=np.int64))
        parts_cell.append(rows[owner])
    if not parts_nodes:
        empty = np.zeros(0, dtype=np.int64)
        return FacetTable(np.zeros((0, MAX_FACET_NODES), np.int64), empty, empty, empty, empty)
    nodes = np.concatenate(parts_nodes)
    group, multiplicity = group_node_sets(nodes)
    return FacetTable(nodes, np.concatenate(parts_block), np.concatenate(parts_cell),
                      group, multiplicity)


def _corner_count(cell_type: str, width: int) -> int:
    return width if cell_type == "polygon" else CORNER_COUNT[cell_type]


def group_node_sets(nodes: NDArray[np.int64]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Group rows holding the same set of nodes.

    Parameters
    ----------
    nodes
        ``(m, k)`` node indices; ``-1`` entries are padding.

    Returns
    -------
    group
        ``(m,)`` id of the distinct node set of each row (ids in key order).
    size
        Number of rows in each group.

    Notes
    -----
    Each sorted row is hashed to one 64-bit key and the keys are grouped by
    one sort, O(m log m); rows are then compared with their group's first
    row, and a (rare) hash collision falls back to a lexicographic sort.
    """
    s = np.sort(np.asarray(nodes, dtype=np.int64), axis=1)
    if len(s) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    key = _row_hash(s)
    _, first, group, counts = np.unique(key, return_index=True, return_inverse=True,
                                        return_counts=True)
    group = group.ravel()
    if np.array_equal(s[first[group]], s):
        return group.astype(np.int64), counts.astype(np.int64)
    return _lexicographic_groups(s)


def _row_hash(s: NDArray[np.int64]) -> NDArray[np.uint64]:
    """A 64-bit mixing hash of each row (splitmix-style multiply and xor-shift)."""
    h = np.full(len(s), 0x9E3779B97F4A7C15, dtype=np.uint64)
    with np.errstate(over="ignore"):
        for c in range(s.shape[1]):
            h ^= (s[:, c] + 1).astype(np.uint64)
            h *= np.uint64(0xBF58476D1CE4E5B9)
            h ^= h >> np.uint64(31)
    return h


def _lexicographic_groups(s: NDArray[np.int64]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    order = np.lexsort(s.T[::-1])
    ss = s[order]
    new = np.ones(len(ss), dtype=bool)
    new[1:] = (ss[1:] != ss[:-1]).any(axis=1)
    gid_sorted = np.cumsum(new) - 1
    group = np.empty(len(s), dtype=np.int64)
    group[order] = gid_sorted
    return group, np.bincount(gid_sorted).astype(np.int64)


def face_connected_blocks(model: Model, table: FacetTable | None = None,
                          ) -> tuple[int, list[NDArray[np.int64]]]:
    """Split the coupling cells into blocks connected through full facets.

    Two cells are in one block when a chain of cells joins them in which
    neighbours share a facet: a face for 3D solids, an edge for 2D cells, a
    node for lines.  Cells of different dimension never share a facet, so a
    beam welded to a solid forms its own block.

    Parameters
    ----------
    model
        The mesh.
    table
        Its :func:`facet_table`, if already built.

    Returns
    -------
    n_blocks
        Number of blocks.
    labels
        One int64 array per cell block of ``model.cells``: the block of each
        cell, ``-1`` for cells with no stiffness (vertex, tag or unanalysed).

    Examples
    --------
    >>> from bandwise.generate import quad_grid
    >>> face_connected_blocks(quad_grid(3, 2))[0]
    1

    Notes
    -----
    Cost: the facet sort, then one connected-components pass over the
    bipartite cell-facet graph, O(F log F) for F facets.
    """
    if table is None:
        table = facet_table(model)
    offsets = np.cumsum([0] + [len(b.data) for b in model.cells])
    n_cells = int(offsets[-1])
    labels_flat = np.full(n_cells, -1, dtype=np.int64)
    if len(table.group) == 0:
        return 0, _split(labels_flat, offsets)
    cell_id = offsets[table.block] + table.cell
    used = np.zeros(n_cells, dtype=bool)
    used[cell_id] = True
    n_groups = len(table.multiplicity)
    # bipartite graph: vertices 0..n_cells-1 are cells, then one per distinct facet
    adj = sparse.coo_matrix((np.ones(len(cell_id), dtype=np.int8),
                             (cell_id, n_cells + table.group)),
                            shape=(n_cells + n_groups, n_cells + n_groups)).tocsr()
    _, comp = connected_components(adj, directed=False)
    cell_comp = comp[:n_cells][used]
    _, compact = np.unique(cell_comp, return_inverse=True)
    labels_flat[used] = compact.ravel()
    return int(compact.max()) + 1, _split(labels_flat, offsets)


def _split(flat: NDArray[np.int64], offsets: NDArray[np.int64]) -> list[NDArray[np.int64]]:
    return [flat[offsets[i]:offsets[i + 1]] for i in range(len(offsets) - 1)]


def node_block_pairs(model: Model, labels: list[NDArray[np.int64]],
                     ) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Distinct (node, block) incidences, sorted by node then block.

    All nodes of a cell (mid-side nodes included) belong to the cell's block.
    A node listed with two or more blocks is a joint between them.
    """
    nodes, blocks = [], []
    for b, lab in zip(model.cells, labels):
        keep = lab >= 0
        if not keep.any():
            continue
        data = b.data[keep]
        nodes.append(data.ravel())
        blocks.append(np.repeat(lab[keep], data.shape[1]))
    if not nodes:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty
    node = np.concatenate(nodes).astype(np.int64)
    block = np.concatenate(blocks)
    n_blocks = int(block.max()) + 1
    key = np.unique(node * n_blocks + block)
    return key // n_blocks, key % n_blocks


def block_nodes(model: Model, labels: list[NDArray[np.int64]]) -> list[NDArray[np.int64]]:
    """The sorted node indices of each face-connected block."""
    node, block = node_block_pairs(model, labels)
    if node.size == 0:
        return []
    order = np.argsort(block, kind="stable")
    counts = np.bincount(block)
    return np.split(node[order], np.cumsum(counts)[:-1])
