"""The sizing summary of a mesh under its current numbering.

What an analyst reads first: how big the problem is (nodes, elements, DOFs),
whether it is one piece, and what a direct solver needs under today's node
numbering (bandwidth, profile, wavefront, banded and skyline storage).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from bandwise.core.elements import skipped_blocks

from .dofs import DofLayout, dof_layout
from .graph import NodeGraph, component_labels, node_graph
from .metrics import Metrics, metrics
from .model import Model
from .progress import Progress, step


@dataclass(frozen=True)
class MeshSummary:
    """Counts and current-numbering figures of one mesh.

    Attributes
    ----------
    source, file_format
        Where the mesh came from.
    n_nodes, cells_by_type, dimension
        Mesh size; ``dimension`` is the highest topological dimension of its cells.
    dof_rule, dofs_by_signature, n_dofs
        The DOF layout: the rule that chose it, node counts per DOF signature, total.
    n_parts
        Connected parts through element coupling (orphan nodes not counted).
    n_orphans
        Nodes referenced by no element that couples nodes.
    skipped
        Cell blocks not analysed (listed, never dropped).
    node_level, dof_level
        :class:`~bandwise.core.metrics.Metrics` of the current numbering.
    """

    source: str
    file_format: str
    n_nodes: int
    cells_by_type: dict[str, int]
    dimension: int
    dof_rule: str
    dofs_by_signature: dict[str, int]
    n_dofs: int
    n_parts: int
    n_orphans: int
    skipped: list[str]
    node_level: Metrics
    dof_level: Metrics
    extra: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """The summary as JSON-ready data (layout documented in the README)."""
        return {
            "file": self.source,
            "format": self.file_format,
            "nodes": self.n_nodes,
            "elements": dict(self.cells_by_type),
            "n_elements": int(sum(self.cells_by_type.values())),
            "dimension": self.dimension,
            "dofs": {
                "rule": self.dof_rule,
                "nodes_by_signature": dict(self.dofs_by_signature),
                "total": self.n_dofs,
            },
            "parts": self.n_parts,
            "orphan_nodes": self.n_orphans,
            "skipped_blocks": list(self.skipped),
            "current_numbering": {
                "nodes": self.node_level.to_dict(),
                "dofs": self.dof_level.to_dict(),
            },
            **self.extra,
        }


def count_parts(graph: NodeGraph) -> tuple[int, int]:
    """(connected parts among coupled nodes, isolated nodes) of a node graph."""
    deg = graph.degrees()
    isolated = int(np.count_nonzero(deg == 0))
    if graph.n == 0:
        return 0, 0
    n_comp, _ = component_labels(graph)
    return int(n_comp) - isolated, isolated


def summarise(model: Model, layout: DofLayout | None = None, graph: NodeGraph | None = None,
              progress: Progress | None = None) -> MeshSummary:
    """Size up a mesh under its current numbering.

    Parameters
    ----------
    model
        The mesh.
    layout
        DOFs per node; chosen by :func:`~bandwise.core.dofs.dof_layout` if None.
    graph
        The node graph, if already built.
    progress
        Receives the steps (the library itself never prints).
    """
    if layout is None:
        layout = dof_layout(model)
    if graph is None:
        with step(progress, "building node graph"):
            graph = node_graph(model)
    with step(progress, "measuring current numbering"):
        node_level = metrics(graph)
        dof_level = metrics(graph, dofs=layout)
        n_parts, n_isolated = count_parts(graph)
    return MeshSummary(
        source=model.source,
        file_format=model.file_format,
        n_nodes=model.n_nodes,
        cells_by_type=model.cells_by_type(),
        dimension=model.dimension,
        dof_rule=layout.rule,
        dofs_by_signature=layout.counts_by_family(),
        n_dofs=layout.total,
        n_parts=n_parts,
        n_orphans=n_isolated,
        skipped=skipped_blocks(model),
        node_level=node_level,
        dof_level=dof_level,
    )
