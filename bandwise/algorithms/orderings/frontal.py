"""Element order for a frontal solver, and the front width of an element order.

A frontal solver (Irons 1970) assembles the elements one at a time.  A node
enters the front with the first element that contains it and is eliminated
as soon as the last element that contains it has been assembled.  The
**front width** at step t is the number of nodes (or DOFs) in the front
after element t is assembled and before its fully summed nodes are
eliminated: the order of the frontal matrix the solver holds at that step.
We report its maximum and its root-mean-square over the steps.  The front
depends on the element order only, not on the node numbering.

Element order used here: elements in ascending order of their lowest-numbered
node under the (renumbered) node numbering, ties broken by their highest
node, then by their place in the file.  Razzaque (1980) and Sloan and
Randolph (1983) both derive the element order from a profile-reducing node
numbering in this spirit (the rule as recalled from those papers, from
memory; the tie-break is ours).  Why it works: node v enters the front with
the first element of lowest node ``f_v`` (the first column of row v of the
matrix) and leaves once the elements of lowest node up to v are assembled,
so within one block of elements the front tracks the nodal wavefront and
never exceeds its maximum.

Only elements that carry stiffness enter the front: a lower-dimensional cell
lying wholly on nodes of higher-dimensional cells (a boundary or tag cell,
such as a gmsh physical surface on a solid) is passed over, by the same rule
as :func:`bandwise.core.dofs.dof_layout`.  The file stores cell blocks one after
another, so the front is measured for that order: block after block, each in
its own (possibly new) order.

References
----------
B. M. Irons, "A frontal solution program for finite element analysis",
Int. J. Numer. Meth. Eng. 2 (1970) 5-32.
A. Razzaque, "Automatic reduction of frontwidth for finite element
analysis", Int. J. Numer. Meth. Eng. 15 (1980) 1315-1324.
S. W. Sloan and M. F. Randolph, "Automatic element reordering for finite
element analysis with frontal solution schemes", Int. J. Numer. Meth. Eng.
19 (1983) 1153-1181.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DofLayout
from bandwise.core.elements import cell_dimension
from bandwise.core.errors import InputError
from bandwise.core.model import CellBlock, Model, inverse_permutation

BlockOrder = Sequence[NDArray[np.integer] | None]


@dataclass(frozen=True)
class FrontWidth:
    """Front width of one element order.

    Attributes
    ----------
    steps
        Number of elements assembled (stiffness-carrying cells).
    max_nodes, rms_nodes
        Maximum and root-mean-square number of nodes in the front.
    max_dofs, rms_dofs
        The same counted in DOFs.
    """

    steps: int
    max_nodes: int
    rms_nodes: float
    max_dofs: int
    rms_dofs: float

    def to_dict(self) -> dict[str, float | int]:
        """The figures as a plain dict (for JSON)."""
        return dataclasses.asdict(self)


@dataclass(frozen=True)
class ElementReordering:
    """An element order chosen for a frontal solver, with the front before and after.

    Attributes
    ----------
    order
        One array per cell block, ``order[k][new] = old`` row of block k;
        None for a block left as it is (vertex or unanalysed cells, or every
        block when the file's order is kept).
    before, after
        Front width of the file's element order and of the order chosen.
    kept_file_order
        True when sorting would not have reduced the front (RMS, then
        maximum, in DOFs), so the file's order is kept.
    """

    order: tuple[NDArray[np.int64] | None, ...]
    before: FrontWidth
    after: FrontWidth
    kept_file_order: bool = False

    def to_dict(self) -> dict[str, object]:
        """JSON-ready: the two front widths and whether the file's order was kept."""
        return {"before": self.before.to_dict(), "after": self.after.to_dict(),
                "kept_file_order": self.kept_file_order}


def _sortable(block: CellBlock) -> bool:
    """Blocks with a regular connectivity array of an analysed type, beyond vertices."""
    dim = cell_dimension(block.type)
    return bool(dim) and block.data.dtype != object and block.data.ndim == 2 and len(block) > 0


def stiffness_cells(model: Model) -> list[NDArray[np.bool_] | None]:
    """Per block, which cells carry stiffness (None for blocks never assembled).

    A cell of dimension k whose nodes all belong to cells of higher
    dimension is a boundary or tag cell and carries none.
    """
    top = np.zeros(model.n_nodes, dtype=np.int64)
    for b in model.cells:
        if _sortable(b):
            nodes = np.unique(b.data)
            top[nodes] = np.maximum(top[nodes], cell_dimension(b.type))
    masks: list[NDArray[np.bool_] | None] = []
    for b in model.cells:
        if not _sortable(b):
            masks.append(None)
            continue
        masks.append((top[b.data] == cell_dimension(b.type)).any(axis=1))
    return masks


def _dof_weights(model: Model, dofs: int | NDArray[np.integer] | DofLayout) -> NDArray[np.int64]:
    if isinstance(dofs, DofLayout):
        d = dofs.per_node
    elif np.isscalar(dofs):
        d = np.full(model.n_nodes, int(dofs), dtype=np.int64)
    else:
        d = np.asarray(dofs, dtype=np.int64)
    if d.shape != (model.n_nodes,):
        raise InputError("DOF counts must be one integer per node")
    return d


def _checked_order(model: Model, order: BlockOrder | None) -> list[NDArray[np.int64] | None]:
    if order is None:
        return [None] * len(model.cells)
    if len(order) != len(model.cells):
        raise InputError(f"an element order needs one entry per cell block "
                         f"({len(model.cells)}), got {len(order)}")
    checked: list[NDArray[np.int64] | None] = []
    for k, (o, b) in enumerate(zip(order, model.cells)):
        if o is None:
            checked.append(None)
            continue
        o = np.asarray(o)
        m = len(b)
        if o.shape != (m,) or not np.issubdtype(o.dtype, np.integer) or (
                m and (o.min() < 0 or o.max() >= m or np.bincount(o, minlength=m).max() != 1)):
            raise InputError(f"the order of cell block {k + 1} ({b.type}) is not a "
                             f"permutation of its {m} cells")
        checked.append(o.astype(np.int64))
    return checked


def front_width(model: Model, order: BlockOrder | None = None,
                dofs: int | NDArray[np.integer] | DofLayout = 1) -> FrontWidth:
    """Front width of the elements assembled block after block in ``order``.

    Parameters
    ----------
    model
        The mesh.
    order
        Per block ``order[k][new] = old`` (None, or a None entry: file order).
    dofs
        DOFs per node for the DOF-level figures (int, one per node, or a layout).

    Returns
    -------
    FrontWidth

    Notes
    -----
    Cost O(sum of nodes per element) time, O(n) extra memory beyond it.
    """
    order_ = _checked_order(model, order)
    masks = stiffness_cells(model)
    n = model.n_nodes
    first = np.full(n, np.iinfo(np.int64).max, dtype=np.int64)
    last = np.full(n, -1, dtype=np.int64)
    t = 0
    for b, o, mask in zip(model.cells, order_, masks):
        if mask is None:
            continue
        data = b.data if o is None else b.data[o]
        keep = mask if o is None else mask[o]
        data = data[keep]
        steps = np.repeat(np.arange(t, t + len(data), dtype=np.int64), data.shape[1])
        np.minimum.at(first, data.ravel(), steps)
        np.maximum.at(last, data.ravel(), steps)
        t += len(data)
    if t == 0:
        return FrontWidth(0, 0, 0.0, 0, 0.0)
    used = last >= 0
    d = _dof_weights(model, dofs)
    nodes = _front(first[used], last[used], np.ones(int(used.sum()), dtype=np.int64), t)
    by_dof = _front(first[used], last[used], d[used], t)
    return FrontWidth(
        steps=t,
        max_nodes=int(nodes.max()),
        rms_nodes=float(np.sqrt(np.mean(nodes.astype(np.float64) ** 2))),
        max_dofs=int(by_dof.max()),
        rms_dofs=float(np.sqrt(np.mean(by_dof.astype(np.float64) ** 2))),
    )


def _front(first: NDArray[np.int64], last: NDArray[np.int64], weight: NDArray[np.int64],
           steps: int) -> NDArray[np.int64]:
    """Sum of the weights of the nodes with ``first <= t <= last``, for every step t."""
    diff = np.bincount(first, weights=weight, minlength=steps + 1)
    diff -= np.bincount(last + 1, weights=weight, minlength=steps + 1)
    return np.cumsum(diff[:steps]).round().astype(np.int64)


def element_order(model: Model) -> list[NDArray[np.int64] | None]:
    """Order the cells of each block by lowest node, then highest node, then file position.

    Parameters
    ----------
    model
        The mesh, with its nodes already numbered as they will be solved
        (renumber first: the order follows the node numbering).

    Returns
    -------
    list
        Per block ``order[k][new] = old``; None for vertex and unanalysed blocks.
    """
    out: list[NDArray[np.int64] | None] = []
    for b in model.cells:
        if not _sortable(b):
            out.append(None)
            continue
        low, high = b.data.min(axis=1), b.data.max(axis=1)
        out.append(np.lexsort((np.arange(len(b)), high, low)).astype(np.int64))
    return out


def reordered_elements(model: Model, order: BlockOrder) -> Model:
    """A copy of the model with the cells of each block in a new order.

    Cell fields follow their cells; cell sets are mapped to the new cell
    positions (kept in ascending order).  Nodes are untouched.

    Parameters
    ----------
    model
        The mesh.
    order
        Per block ``order[k][new] = old``; None keeps a block as it is.
    """
    order_ = _checked_order(model, order)
    new_of_old = [None if o is None else inverse_permutation(o) for o in order_]

    def cells_of(k: int, a: NDArray) -> NDArray:
        o = order_[k]
        return np.array(a, copy=True) if o is None else np.asarray(a)[o]

    def members(k: int, a: NDArray) -> NDArray:
        inv = new_of_old[k]
        a = np.asarray(a, dtype=np.int64)
        return a.copy() if inv is None else np.sort(inv[a])

    return dataclasses.replace(
        model,
        cells=[CellBlock(b.type, cells_of(k, b.data)) for k, b in enumerate(model.cells)],
        cell_data={name: [cells_of(k, a) for k, a in enumerate(arrays)]
                   for name, arrays in model.cell_data.items()},
        cell_sets={name: [members(k, a) for k, a in enumerate(arrays)]
                   for name, arrays in model.cell_sets.items()},
    )


def frontal_reordering(model: Model,
                       dofs: int | NDArray[np.integer] | DofLayout = 1) -> ElementReordering:
    """Choose an element order for a frontal solver and measure the front before and after.

    Parameters
    ----------
    model
        The mesh, nodes already in their solving order.
    dofs
        DOFs per node for the DOF-level front width.

    Returns
    -------
    ElementReordering
        Apply it with :func:`reordered_elements`.  The file's order is a
        candidate too: it is kept when sorting does not shrink the front.
    """
    order = element_order(model)
    before = front_width(model, None, dofs)
    after = front_width(model, order, dofs)
    if (after.rms_dofs, after.max_dofs) >= (before.rms_dofs, before.max_dofs):
        return ElementReordering(tuple([None] * len(model.cells)), before, before, True)
    return ElementReordering(tuple(order), before, after)
