"""Node-order conventions: the order in which a file lists the nodes of a cell.

bandwise's cells follow meshio's order (VTK's, except the linear wedge,
which follows gmsh's prism: base 0-1-2 counter-clockwise seen from the top
3-4-5), and the element checks judge orientation in that order.  meshio
converts most formats to it; where it does not, a cell read as meshio gives
it has the mirror image of its true shape and every cell of the block looks
inverted.  This module holds the permutations that put such cells right,
per format and cell type, as ``order`` with ``model[:, k] = file[:, order[k]]``.

MED (``.med``)
    MED lists the first face of a solid with its normal pointing out of the
    element, VTK into it.  Linear cells: tetra ``0 2 1 3``, pyramid
    ``0 3 2 1 4``, hexahedron ``0 3 2 1 4 7 6 5``, wedge ``0 2 1 3 5 4``
    (gmsh's MED reader, ``med2mshNodeIndex``: C. Geuzaine and J.-F. Remacle,
    Gmsh source ``Geo/GModelIO_MED.cpp``; gmsh's linear order is meshio's).
    Quadratic tetra and hexahedron: the corner permutation carried to the
    mid-edge nodes, MED placing them edge by edge as VTK does (the same
    gmsh tables, checked in ``tests/test_formats_conventions.py``).  meshio
    reads and writes MED connectivity as stored, so bandwise applies the
    permutation after reading and before writing.  Triangles and
    quadrilaterals share VTK's order.
FLAC3D (``.f3grid``)
    meshio's FLAC3D reader still maps a wedge zone to VTK's wedge order,
    which meshio itself no longer uses for the linear wedge: every wedge of
    a valid grid comes back mirrored.  The wedge is turned back with
    ``0 2 1 3 5 4``.  meshio's FLAC3D writer makes each zone right-handed
    from its own volume, so writing needs no permutation.

These are facts about the installed meshio as much as about the formats:
the tests check each against a valid shared file and a hand-built element
of known positive volume.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import NDArray

from bandwise.core.model import CellBlock, Model

#: Corner nodes of each edge, in meshio's (VTK's) order of mid-edge nodes.
_EDGES: dict[str, tuple[tuple[int, int], ...]] = {
    "tetra10": ((0, 1), (1, 2), (2, 0), (0, 3), (1, 3), (2, 3)),
    "hexahedron20": ((0, 1), (1, 2), (2, 3), (3, 0), (4, 5), (5, 6), (6, 7), (7, 4),
                     (0, 4), (1, 5), (2, 6), (3, 7)),
}
_LINEAR = {"tetra10": "tetra", "hexahedron20": "hexahedron"}

#: MED -> meshio corner orders (gmsh's med2mshNodeIndex; each is its own inverse).
_MED_LINEAR: dict[str, tuple[int, ...]] = {
    "tetra": (0, 2, 1, 3),
    "pyramid": (0, 3, 2, 1, 4),
    "wedge": (0, 2, 1, 3, 5, 4),
    "hexahedron": (0, 3, 2, 1, 4, 7, 6, 5),
}


def _with_edges(cell_type: str, corners: tuple[int, ...]) -> tuple[int, ...]:
    """The full order of a quadratic cell whose corners are permuted by ``corners``.

    The file places its mid-edge nodes edge by edge in the same pattern as
    meshio, over its own corners: the model's mid node on edge (a, b) is the
    file's mid node on edge (corners[a], corners[b]).
    """
    edges = _EDGES[cell_type]
    where = {frozenset(e): len(corners) + k for k, e in enumerate(edges)}
    mids = tuple(where[frozenset((corners[a], corners[b]))] for a, b in edges)
    return tuple(corners) + mids


_MED: dict[str, tuple[int, ...]] = {
    **_MED_LINEAR,
    **{q: _with_edges(q, _MED_LINEAR[lin]) for q, lin in _LINEAR.items()},
}

#: Per registry format: cell type -> order read (``model[:, k] = file[:, order[k]]``).
READ_ORDERS: dict[str, Mapping[str, tuple[int, ...]]] = {
    "med": _MED,
    "flac3d": {"wedge": (0, 2, 1, 3, 5, 4)},
}
#: Per registry format: cell type -> order written (``file[:, k] = model[:, order[k]]``).
WRITE_ORDERS: dict[str, Mapping[str, tuple[int, ...]]] = {
    "med": {t: tuple(int(i) for i in np.argsort(o)) for t, o in _MED.items()},
}
#: Cell types whose order in a format bandwise does not know (refused for writing).
UNKNOWN_ORDERS: dict[str, frozenset[str]] = {
    "med": frozenset({"pyramid13", "wedge15", "wedge18", "hexahedron27"}),
}


def reordered(model: Model, orders: Mapping[str, tuple[int, ...]]) -> Model:
    """The model with the nodes of each listed cell type put in ``orders`` (in place).

    Cell blocks of other types, and ragged blocks, are left as they are.
    """
    if not orders:
        return model
    blocks = []
    for b in model.cells:
        order = orders.get(b.type)
        if order is None or b.data.dtype == object or b.data.ndim != 2 \
                or b.data.shape[1] != len(order):
            blocks.append(b)
        else:
            blocks.append(CellBlock(b.type, np.ascontiguousarray(b.data[:, list(order)])))
    model.cells = blocks
    return model


def read_order(fmt: str, cell_type: str) -> tuple[int, ...] | None:
    """The order a cell of ``cell_type`` read from a ``fmt`` file is put in (None: as read)."""
    return READ_ORDERS.get(fmt, {}).get(cell_type)


def in_model_order(fmt: str, model: Model) -> Model:
    """A model read from a ``fmt`` file through meshio, with its cells in bandwise's order."""
    return reordered(model, READ_ORDERS.get(fmt, {}))


def file_order(fmt: str, data: NDArray[np.int64], cell_type: str) -> NDArray[np.int64]:
    """Connectivity of one block in the order a ``fmt`` file stores it."""
    order = WRITE_ORDERS.get(fmt, {}).get(cell_type)
    if order is None or data.dtype == object or data.ndim != 2:
        return data
    return np.ascontiguousarray(data[:, list(order)])
