"""Element families: which meshio cell types are solids, plates, lines.

The topological dimension of a cell type decides which degrees of freedom
its nodes carry (see :mod:`bandwise.core.dofs`) and which checks apply to it.
"""

from __future__ import annotations

from typing import Any

#: Topological dimension of every cell type bandwise analyses (meshio names).
CELL_DIMENSION: dict[str, int] = {
    "vertex": 0,
    "line": 1, "line3": 1, "line4": 1,
    "triangle": 2, "triangle6": 2, "triangle7": 2, "triangle10": 2,
    "quad": 2, "quad8": 2, "quad9": 2, "polygon": 2,
    "tetra": 3, "tetra10": 3, "tetra14": 3,
    "hexahedron": 3, "hexahedron20": 3, "hexahedron24": 3, "hexahedron27": 3,
    "wedge": 3, "wedge12": 3, "wedge15": 3, "wedge18": 3,
    "pyramid": 3, "pyramid13": 3, "pyramid14": 3,
}

#: Number of corner (vertex) nodes of each cell type; the corners come first
#: in the VTK / meshio node ordering of higher-order cells.
CORNER_COUNT: dict[str, int] = {
    "vertex": 1,
    "line": 2, "line3": 2, "line4": 2,
    "triangle": 3, "triangle6": 3, "triangle7": 3, "triangle10": 3,
    "quad": 4, "quad8": 4, "quad9": 4,
    "tetra": 4, "tetra10": 4, "tetra14": 4,
    "hexahedron": 8, "hexahedron20": 8, "hexahedron24": 8, "hexahedron27": 8,
    "wedge": 6, "wedge12": 6, "wedge15": 6, "wedge18": 6,
    "pyramid": 5, "pyramid13": 5, "pyramid14": 5,
}


def node_count(cell_type: str) -> int | None:
    """Nodes per cell of a fixed-size cell type (``"tetra10"`` -> 10), None if not fixed or unknown.

    The count is the number in the meshio type name, or the corner count of a
    linear type (meshio's cell type names, common practice).
    """
    if cell_type not in CORNER_COUNT:
        return None
    digits = cell_type.lstrip("abcdefghijklmnopqrstuvwxyz")
    return int(digits) if digits else CORNER_COUNT[cell_type]


def cell_dimension(cell_type: str) -> int | None:
    """Topological dimension of a meshio cell type, or None if not analysed."""
    return CELL_DIMENSION.get(cell_type)


def is_analysed(cell_type: str) -> bool:
    """True when bandwise knows the cell type (polyhedra and others are skipped)."""
    return cell_type in CELL_DIMENSION


def skipped_blocks(model: Any) -> list[str]:
    """Cell blocks of a ``Model`` that bandwise does not analyse (listed, never dropped)."""
    return [f"{b.type} ({len(b)} cells)" for b in model.cells if not is_analysed(b.type)]
