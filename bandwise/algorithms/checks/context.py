"""What several checks need, computed once per mesh and shared."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
from numpy.typing import NDArray

from bandwise.algorithms.merge import resolve_tolerance
from bandwise.algorithms.topology import (
    FacetTable,
    coupling_cells,
    face_connected_blocks,
    facet_table,
)
from bandwise.core.elements import cell_dimension
from bandwise.core.errors import InputError
from bandwise.core.graph import NodeGraph
from bandwise.core.model import Model
from bandwise.core.unionfind import roots, union_rows

from .findings import ELEMENT_ID_KIND


@dataclass(frozen=True)
class CheckOptions:
    """Settings of the mesh checks.

    Attributes
    ----------
    tolerance
        Absolute distance under which two distinct nodes count as coincident;
        None to use ``relative_tolerance`` times the shortest element edge.
    relative_tolerance
        Fraction of the shortest element edge used when ``tolerance`` is None.
    max_listed
        Most node / element labels kept in one finding (the count is exact).
    links
        Node groups tied by something other than elements (rigid links and
        multi-point constraints of a solver deck), as ``(m, k)`` index arrays:
        parts joined only by them count as one.
    """

    tolerance: float | None = None
    relative_tolerance: float = 1e-3
    max_listed: int = 10_000
    links: tuple[NDArray[np.int64], ...] = ()

    def __post_init__(self) -> None:
        if self.tolerance is not None and not self.tolerance > 0:
            raise InputError(f"the tolerance must be a positive distance, got {self.tolerance}")
        if not self.relative_tolerance > 0:
            raise InputError("the relative tolerance must be positive, "
                             f"got {self.relative_tolerance}")
        if self.max_listed < 1:
            raise InputError("max_listed must be at least 1")


class CheckContext:
    """The model, its node graph and the derived arrays the checks share."""

    def __init__(self, model: Model, graph: NodeGraph, options: CheckOptions) -> None:
        if graph.n != model.n_nodes:
            raise InputError(f"the graph has {graph.n} vertices but the mesh {model.n_nodes} nodes")
        self.model = model
        self.graph = graph
        self.options = options

    # ---- labels -------------------------------------------------------
    @cached_property
    def node_labels(self) -> tuple[NDArray[np.int64], str]:
        """Labels shown for nodes and what they are."""
        return self.model.node_labels()

    def node_ids(self, nodes: NDArray[np.integer]) -> tuple[int, ...]:
        """Labels of 0-based node indices, at most ``max_listed``."""
        labels, _ = self.node_labels
        idx = np.asarray(nodes, dtype=np.int64).ravel()[:self.options.max_listed]
        return tuple(int(v) for v in labels[idx].tolist())

    @property
    def node_id_kind(self) -> str:
        """What node labels are."""
        return self.node_labels[1]

    element_id_kind = ELEMENT_ID_KIND

    @cached_property
    def offsets(self) -> NDArray[np.int64]:
        """Start of each cell block in the file-order element numbering."""
        return np.cumsum([0] + [len(b.data) for b in self.model.cells]).astype(np.int64)

    def element_ids(self, block: NDArray[np.integer] | int,
                    rows: NDArray[np.integer]) -> tuple[int, ...]:
        """1-based file positions of cells given by block index and row."""
        pos = self.offsets[np.asarray(block)] + np.asarray(rows, dtype=np.int64) + 1
        return tuple(int(v) for v in np.ravel(pos)[:self.options.max_listed].tolist())

    def block_name(self, index: int) -> str:
        """A readable name of cell block ``index``."""
        b = self.model.cells[index]
        return f"block {index + 1} ({b.type}, {len(b.data)} cells)"

    # ---- topology -----------------------------------------------------
    @cached_property
    def coupling(self) -> list[NDArray[np.bool_]]:
        """Cells carrying stiffness, per block (see :func:`~bandwise.algorithms.topology.coupling_cells`)."""
        return coupling_cells(self.model)

    @property
    def has_elements(self) -> bool:
        """True when at least one cell couples nodes."""
        return any(m.any() for m in self.coupling)

    @cached_property
    def dims(self) -> list[int]:
        """Topological dimension of each block (0 when not analysed)."""
        return [cell_dimension(b.type) or 0 for b in self.model.cells]

    @cached_property
    def table(self) -> FacetTable:
        """Facets of the coupling cells, equal facets grouped."""
        return facet_table(self.model, self.coupling)

    @cached_property
    def blocks(self) -> tuple[int, list[NDArray[np.int64]]]:
        """Face-connected blocks: (count, label per cell per block)."""
        return face_connected_blocks(self.model, self.table)

    @cached_property
    def free_facets(self) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
        """Free facets (bounding one cell only) and the dimension of the cell each bounds."""
        free = self.table.free
        free_block, _ = self.table.owner_of(free)
        return free, np.asarray(self.dims)[free_block]

    @cached_property
    def references(self) -> NDArray[np.int64]:
        """Number of coupling-cell references to each node."""
        counts = np.zeros(self.model.n_nodes, dtype=np.int64)
        for b, use in zip(self.model.cells, self.coupling):
            if use.any():
                counts += np.bincount(b.data[use].ravel(), minlength=self.model.n_nodes)
        return counts

    @cached_property
    def parts(self) -> tuple[int, NDArray[np.int64]]:
        """Connected parts through element coupling: (count, part of each node).

        Parts are numbered by decreasing node count; nodes no coupling cell
        references get ``-1``.  (A union-find pass over the cells: the same
        parts as the connected components of the node graph.)
        """
        n = self.model.n_nodes
        parent = np.arange(n, dtype=np.int64)
        for b, use in zip(self.model.cells, self.coupling):
            if use.any():
                union_rows(np.ascontiguousarray(b.data, dtype=np.int64),
                           np.flatnonzero(use).astype(np.int64), parent)
        for group in self.options.links:
            union_rows(np.ascontiguousarray(group, dtype=np.int64),
                       np.arange(len(group), dtype=np.int64), parent)
        coupled = self.references > 0
        part = np.full(n, -1, dtype=np.int64)
        if not coupled.any():
            return 0, part
        root = roots(parent)
        ids, compact = np.unique(root[coupled], return_inverse=True)
        sizes = np.bincount(compact)
        rank = np.empty(len(ids), dtype=np.int64)
        rank[np.argsort(-sizes, kind="stable")] = np.arange(len(ids))
        part[coupled] = rank[compact.ravel()]
        return len(ids), part

    @cached_property
    def tolerance(self) -> tuple[float, str]:
        """Coincidence distance and a sentence saying how it was chosen."""
        opt = self.options
        return resolve_tolerance(self.graph, self.model.points, opt.tolerance,
                                 opt.relative_tolerance)
