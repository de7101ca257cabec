"""The mesh model: bandwise's own arrays, independent of any file format.

A :class:`Model` holds what a finite-element mesh file carries that matters
to numbering: node coordinates, cell blocks, point and cell fields, point and
cell sets, gmsh physical names and periodic node pairs.  Only
:mod:`bandwise.formats.meshio_io` knows about meshio; the algorithms see this model
and the node graph built from it.

Permutation convention (used everywhere in bandwise)
-----------------------------------------------------
A permutation ``perm`` lists the old node indices in their new order:
``perm[new] = old`` (the convention of ``scipy.sparse.csgraph.reverse_cuthill_mckee``).
Its inverse, the old-to-new map, is ``new_of_old[old] = new``.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .elements import cell_dimension
from .errors import InputError


@dataclass(frozen=True)
class CellBlock:
    """One block of cells of a single type.

    Attributes
    ----------
    type
        meshio cell type name (``"tetra"``, ``"quad9"``, ...).
    data
        ``(n_cells, nodes_per_cell)`` array of 0-based node indices.
    """

    type: str
    data: NDArray[np.int64]

    @property
    def dimension(self) -> int | None:
        """Topological dimension of the cell type (None if not analysed)."""
        return cell_dimension(self.type)

    def __len__(self) -> int:
        return int(self.data.shape[0])

    def __repr__(self) -> str:
        return f"CellBlock({self.type!r}, {len(self)} cells)"


@dataclass
class Model:
    """A finite-element mesh as plain arrays.

    Attributes
    ----------
    points
        ``(n_nodes, dim)`` float coordinates (``dim`` is 2 or 3).
    cells
        The cell blocks, in file order.
    point_data
        Nodal fields, each with ``n_nodes`` rows.
    cell_data
        Element fields: name -> one array per cell block.
    point_sets
        Named node sets: name -> array of 0-based node indices.
    cell_sets
        Named element sets: name -> one index array per cell block.
    field_data
        Format metadata carried through unchanged (gmsh physical names ...).
    node_ids
        Original node ids (labels) where the file has them, else None.
    periodic
        gmsh periodic entities as meshio gives them; node pairs are permuted.
    source
        Path and format the model was read from (informative only).
    file_kind
        The kind of file it was read from (format, version, encoding,
        compression: a ``bandwise.formats.registry.FileKind``), so that an
        output of the same format is written the same way; None when unknown.
    """

    points: NDArray[np.float64]
    cells: list[CellBlock]
    point_data: dict[str, NDArray[Any]] = field(default_factory=dict)
    cell_data: dict[str, list[NDArray[Any]]] = field(default_factory=dict)
    point_sets: dict[str, NDArray[np.int64]] = field(default_factory=dict)
    cell_sets: dict[str, list[NDArray[np.int64]]] = field(default_factory=dict)
    field_data: dict[str, Any] = field(default_factory=dict)
    node_ids: NDArray[np.int64] | None = None
    periodic: list[Any] | None = None
    info: Any = None
    source: str = ""
    file_format: str = ""
    file_kind: Any = None

    @property
    def n_nodes(self) -> int:
        """Number of nodes (points)."""
        return int(self.points.shape[0])

    @property
    def n_cells(self) -> int:
        """Number of cells over all blocks, vertex cells included."""
        return sum(len(b) for b in self.cells)

    @property
    def dimension(self) -> int:
        """Highest topological dimension among the analysed cells (0 if none)."""
        dims = [b.dimension for b in self.cells if b.dimension is not None and len(b)]
        return max(dims, default=0)

    def cells_by_type(self) -> dict[str, int]:
        """Number of cells of each type, over all blocks."""
        counts: dict[str, int] = {}
        for b in self.cells:
            counts[b.type] = counts.get(b.type, 0) + len(b)
        return counts

    def is_planar(self, rtol: float = 1e-9) -> bool:
        """True when every node lies in one plane z = const (or points are 2D)."""
        if self.points.shape[1] < 3 or self.n_nodes == 0:
            return True
        z = self.points[:, 2]
        extent = float(np.ptp(self.points, axis=0).max()) or 1.0
        return bool(np.ptp(z) <= rtol * extent)

    def node_labels(self) -> tuple[NDArray[np.int64], str]:
        """Node labels to show a user, and what they are.

        Returns the original ids when the file carries them, otherwise 1-based
        positions in the file, with a word saying which.
        """
        if self.node_ids is not None:
            return self.node_ids, "original node id"
        return np.arange(1, self.n_nodes + 1, dtype=np.int64), "1-based node position"

    def renumbered(self, perm: NDArray[np.integer]) -> Model:
        """A copy of the model with its nodes in a new order.

        Parameters
        ----------
        perm
            New order of the nodes: ``perm[new] = old``; must be a permutation
            of ``range(n_nodes)``.

        Returns
        -------
        Model
            Points, nodal fields and node ids reordered; cell connectivity,
            node sets and periodic node pairs mapped through the inverse
            permutation.  Cells, cell fields and cell sets keep their order.
        """
        perm = check_permutation(perm, self.n_nodes)
        new_of_old = inverse_permutation(perm)
        return dataclasses.replace(
            self,
            points=self.points[perm],
            cells=[CellBlock(b.type, mapped_connectivity(b.data, new_of_old))
                   for b in self.cells],
            point_data={k: np.asarray(v)[perm] for k, v in self.point_data.items()},
            cell_data={k: [np.array(a, copy=True) for a in v] for k, v in self.cell_data.items()},
            point_sets={k: new_of_old[np.asarray(v, dtype=np.int64)]
                        for k, v in self.point_sets.items()},
            cell_sets={k: [np.array(a, copy=True) for a in v] for k, v in self.cell_sets.items()},
            node_ids=None if self.node_ids is None else self.node_ids[perm],
            periodic=mapped_periodic(self.periodic, new_of_old),
        )


def as_xyz(points: NDArray[np.floating]) -> NDArray[np.float64]:
    """Node coordinates as an (n, 3) array: 1D or 2D points get zero trailing coordinates.

    3D points are returned as they are (no copy).
    """
    if points.shape[1] < 3:
        points = np.column_stack([points, np.zeros((points.shape[0], 3 - points.shape[1]))])
    return points


def mapped_connectivity(data: NDArray[Any], new_of_old: NDArray[np.int64]) -> NDArray[Any]:
    """Connectivity with node indices mapped; ragged (object) blocks cell by cell."""
    if data.dtype != object:
        return new_of_old[data]
    out = np.empty(len(data), dtype=object)
    out[:] = [new_of_old[np.asarray(c, dtype=np.int64)] for c in data]
    return out


def mapped_periodic(periodic: list[Any] | None,
                    new_of_old: NDArray[np.int64]) -> list[Any] | None:
    """gmsh periodic entities with their node pairs (the last item) mapped."""
    if periodic is None:
        return None
    out = []
    for entry in periodic:
        entry = list(entry)
        entry[-1] = new_of_old[np.asarray(entry[-1], dtype=np.int64)]
        out.append(entry)
    return out


def inverse_permutation(perm: NDArray[np.integer]) -> NDArray[np.int64]:
    """Old-to-new map of a permutation: ``inv[perm[k]] = k``."""
    perm = np.asarray(perm, dtype=np.int64)
    inv = np.empty_like(perm)
    inv[perm] = np.arange(perm.size, dtype=np.int64)
    return inv


def check_permutation(perm: NDArray[np.integer], n: int) -> NDArray[np.int64]:
    """Return ``perm`` as int64 after checking it is a permutation of ``range(n)``.

    Raises
    ------
    InputError
        If ``perm`` has the wrong length or does not list every index once.
    """
    p = np.asarray(perm)
    if p.shape != (n,) or not np.issubdtype(p.dtype, np.integer):
        raise InputError(f"a permutation of {n} nodes must be {n} integers, got shape {p.shape}")
    p = p.astype(np.int64, copy=False)
    if n and (p.min() < 0 or p.max() >= n or np.bincount(p, minlength=n).max() != 1):
        raise InputError("the permutation does not list every node exactly once")
    return p


def order_and_positions(perm: NDArray[np.integer] | None,
                        n: int) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """``perm`` checked (the identity when None) and its inverse ``pos[old] = new``.

    Every kernel that walks a reordered matrix needs both; they are made here once.
    """
    if perm is None:
        ident = np.arange(n, dtype=np.int64)
        return ident, ident
    perm = check_permutation(perm, n)
    return perm, inverse_permutation(perm)
