"""Equation numbering: free DOFs numbered in node order, held DOFs set aside.

After a renumbering ``perm`` (``perm[new] = old``) the nodes are taken in
their new order and, within a node, its DOFs in the order of
:data:`bandwise.core.dofs.DOF_NAMES`; every free DOF gets the next equation number
and every held DOF is set aside (common practice of direct-solver codes: the
reactions at held DOFs are recovered afterwards from the solved displacements,
``R = K_sf u_f``).

The reduced system (held rows and columns removed) is measured directly on
its own pattern: nodes whose every DOF is held drop out of the node graph,
partly held nodes keep their free DOFs, and the figures are those of
:func:`bandwise.core.metrics.metrics` (bandwidth, profile, wavefront, banded and
skyline storage) on that pattern.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .dofs import DOF_NAMES, DofLayout
from .errors import InputError
from .graph import NodeGraph
from .metrics import Metrics, metrics
from .model import check_permutation


@dataclass(frozen=True)
class EquationNumbering:
    """The equation number of every DOF, in the new node order.

    Attributes
    ----------
    perm
        Node order used, ``perm[new] = old``.
    node
        Old node index of each DOF, DOFs listed node after node in the new order.
    dof
        Index into :data:`~bandwise.core.dofs.DOF_NAMES` of each DOF (for a layout
        without names, the 0-based position within the node).
    equation
        0-based equation number of each DOF, ``-1`` for a held DOF.
    reduced
        Figures of the reduced system, or None when no node graph was given.
    named
        False for a layout without standard DOF names.
    """

    perm: NDArray[np.int64]
    node: NDArray[np.int64]
    dof: NDArray[np.int64]
    equation: NDArray[np.int64]
    reduced: Metrics | None
    named: bool = True

    @property
    def n_dofs(self) -> int:
        """All DOFs, held ones included."""
        return int(self.equation.size)

    @property
    def n_fixed(self) -> int:
        """Held DOFs (their reactions are recovered after the solution)."""
        return int(np.count_nonzero(self.equation < 0))

    @property
    def n_equations(self) -> int:
        """Equations left to solve."""
        return self.n_dofs - self.n_fixed

    def dof_names(self) -> list[str]:
        """Name of every DOF, in the listing order."""
        if self.named:
            return [DOF_NAMES[k] for k in self.dof]
        return [f"dof{k + 1}" for k in self.dof]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary (the ``equations`` entry of ``check --json``)."""
        return {"dofs": self.n_dofs, "fixed_dofs": self.n_fixed, "equations": self.n_equations,
                "reduced_system": None if self.reduced is None else self.reduced.to_dict()}

    def __repr__(self) -> str:
        return (f"EquationNumbering({self.n_dofs} DOFs, {self.n_fixed} held, "
                f"{self.n_equations} equations)")


def _dof_table(layout: DofLayout, fixed: NDArray[np.int64], perm: NDArray[np.int64],
               ) -> tuple[NDArray[np.int64], ...]:
    """(new node position, DOF index, held?) of every DOF, node after node."""
    n = perm.size
    if layout.unnamed is not None:
        has = np.ones((n, layout.unnamed), dtype=bool)
        held = np.zeros_like(has)
    else:
        bits = np.arange(len(DOF_NAMES), dtype=np.int64)
        has = ((layout.masks[perm][:, None] >> bits) & 1).astype(bool)
        held = ((fixed[perm][:, None] >> bits) & 1).astype(bool)
    pos, dof = np.nonzero(has)          # row-major: node after node, DOFs in name order
    return pos.astype(np.int64), dof.astype(np.int64), held[pos, dof]


def equation_numbering(layout: DofLayout, fixed: NDArray[np.integer] | None,
                       perm: NDArray[np.integer] | None = None,
                       graph: NodeGraph | None = None, *,
                       whole: Metrics | None = None) -> EquationNumbering:
    """Number the free DOFs node after node in the new order; set held DOFs aside.

    Parameters
    ----------
    layout
        DOFs of each node (:func:`bandwise.core.dofs.dof_layout`).
    fixed
        Bit mask per node of its held DOFs (``SupportSet.fixed``); None: none held.
    perm
        Node order ``perm[new] = old``; None keeps the current numbering.
    graph
        The node graph (old numbering); with it, the reduced system's
        bandwidth, profile, wavefront and storage are measured.
    whole
        The DOF-level figures of the whole system in the order ``perm``
        (``metrics(graph, perm, layout)``), when the caller has them: with no
        DOF held the reduced system is the whole one, and they are taken as
        they are instead of being measured again.

    Returns
    -------
    EquationNumbering

    Raises
    ------
    InputError
        A malformed permutation, a mask of the wrong length, held DOFs a node
        does not carry.

    Notes
    -----
    Cost O(n + nnz): one pass over the DOFs, and for the figures one
    sub-matrix extraction of the node graph and :func:`bandwise.core.metrics.metrics`.
    """
    n = layout.masks.size
    perm = np.arange(n, dtype=np.int64) if perm is None else check_permutation(perm, n)
    fixed = np.zeros(n, dtype=np.int64) if fixed is None else np.asarray(fixed, dtype=np.int64)
    if fixed.shape != (n,):
        raise InputError(f"the held-DOF masks must be one per node ({n}), got {fixed.shape}")
    if layout.unnamed is None and (fixed & ~layout.masks).any():
        raise InputError("some held DOFs are not carried by their nodes")
    if layout.unnamed is not None and fixed.any():
        raise InputError("held DOFs need named DOFs per node")
    pos, dof, held = _dof_table(layout, fixed, perm)
    equation = np.where(held, -1, np.cumsum(~held) - 1).astype(np.int64)
    if graph is None:
        reduced = None
    elif whole is not None and not held.any():
        reduced = whole
    else:
        reduced = reduced_metrics(graph, layout, fixed, perm)
    return EquationNumbering(perm, perm[pos], dof, equation, reduced, layout.unnamed is None)


def reduced_metrics(graph: NodeGraph, layout: DofLayout, fixed: NDArray[np.int64],
                    perm: NDArray[np.int64]) -> Metrics:
    """Bandwidth, profile, wavefront and storage of the system with held DOFs removed.

    Nodes with no free DOF are removed from the graph (their rows and columns
    are gone); the others keep their free DOFs, coupled to every free DOF of
    their neighbours, numbered node after node in the order ``perm``.
    """
    free = layout.per_node.copy()
    if layout.unnamed is None:
        held = fixed.copy()
        for _ in range(len(DOF_NAMES)):
            free -= held & 1
            held >>= 1
    keep = free > 0
    if keep.all():
        return metrics(graph, perm, free)
    kept = np.flatnonzero(keep)
    sub = graph.to_scipy()[kept][:, kept].tocsr()
    sub.sort_indices()
    compact = np.full(graph.n, -1, dtype=np.int64)
    compact[kept] = np.arange(kept.size)
    order = compact[perm]
    sub_perm = order[order >= 0]
    sub_graph = NodeGraph(sub.indptr.astype(np.int64), sub.indices.astype(graph.indices.dtype))
    return metrics(sub_graph, sub_perm, free[kept])
