"""Memory needed to read, analyse and renumber a mesh, estimated before the work starts.

A mesh too big for the machine should be refused with the figure, not
crash half way through with the system swapping.  The estimate adds up the
arrays bandwise actually allocates, stage by stage (the peak is the
largest stage plus what stays alive from the earlier ones):

- **read**: meshio's arrays and the model's copies: coordinates twice
  (``24 n`` bytes each), connectivity twice (``8 k`` bytes per cell of ``k``
  nodes, int64; a text reader's parse buffers are of the same order); a
  VTU file read by bandwise's own streaming reader (:mod:`bandwise.formats.vtu`)
  decodes straight into the model's arrays: each once, plus the cell
  offsets and types (9 bytes a cell);
- **graph** (:mod:`bandwise.core.graph`): the node-to-element incidence
  (``n + 1`` int64 pointers, an int16 block and an int32 row per cell
  node), the neighbour counts and a marker (``8 n`` each), and the CSR
  result: ``n + 1`` int64 pointers and ``nnz`` int32 neighbours;
- **metrics** (:mod:`bandwise.core.metrics`): a few int64 vectors of the matrix
  order at DOF level and one at node level (measured: about 33 bytes per
  DOF on a 100,000-node tetrahedral box; the part count is a compiled
  search over the graph, with one label per node);
- **orderings**: level structures and the graph handed to scipy again
  (about ``16 n + 12 nnz``).

``nnz`` (twice the number of graph edges) is not known before the graph is
built; it is taken from the node degree of regular meshes of the main cell
type (a node of a tetrahedral mesh has about 14 neighbours, of a
hexahedral one 26: common practice, from structured meshes).

Set the environment variable ``BANDWISE_MEMORY_CHECK=off`` to run anyway.  The
counts a file announces before its data (read by the file formats,
:mod:`bandwise.formats.headers`) give the estimate before a file is read.
"""

from __future__ import annotations

import os
import re
from dataclasses import asdict, dataclass

from bandwise.core.errors import InputError
from bandwise.core.tables import human_bytes

#: Typical number of neighbours of a node, by main cell type (regular meshes).
DEGREE = {
    "line": 2, "line3": 2, "triangle": 6, "triangle6": 12, "quad": 8, "quad8": 12, "quad9": 8,
    "tetra": 14, "tetra10": 27, "hexahedron": 26, "hexahedron20": 44, "hexahedron27": 26,
    "wedge": 20, "wedge15": 36, "pyramid": 14, "vertex": 0,
    "unknown": 6,  # a header gives no cell type: the lowest common degree (errs low)
}
#: Nodes per cell assumed for cells whose type a header does not give.
UNKNOWN_CELL_NODES = 4
#: Bytes of the Python interpreter, numpy, scipy, meshio and numba once loaded.
BASELINE_BYTES = 180 * 2**20


@dataclass(frozen=True)
class MemoryEstimate:
    """Estimated bytes of each stage and the peak.

    Attributes
    ----------
    read, graph, metrics, orderings
        Bytes allocated by each stage.
    peak
        Largest total alive at once (baseline of the loaded libraries included).
    nnz
        Assumed neighbour entries of the node graph.
    """

    read: int
    graph: int
    metrics: int
    orderings: int
    peak: int
    nnz: int

    def to_dict(self) -> dict[str, int]:
        """The figures as a plain dict (for JSON)."""
        return asdict(self)


def _main_type(n_cells_by_type: dict[str, int]) -> str:
    counted = {t: c for t, c in n_cells_by_type.items() if t != "vertex" and c}
    return max(counted, key=counted.get) if counted else "vertex"


def _nodes_per_cell(cell_type: str) -> int:
    from bandwise.core.elements import CORNER_COUNT

    if cell_type in CORNER_COUNT and not cell_type[-1].isdigit():
        return CORNER_COUNT[cell_type]
    digits = re.search(r"(\d+)$", cell_type)
    return int(digits.group(1)) if digits else UNKNOWN_CELL_NODES


def memory_estimate(n_nodes: int, n_cells_by_type: dict[str, int], dofs_per_node: int = 3,
                    orderings: bool = True, streamed: bool = False) -> MemoryEstimate:
    """Estimate the bytes a mesh needs, stage by stage (see the module notes).

    Parameters
    ----------
    n_nodes
        Number of nodes.
    n_cells_by_type
        Cells per meshio cell type; the type ``"unknown"`` counts
        :data:`UNKNOWN_CELL_NODES` nodes per cell.
    dofs_per_node
        DOFs per node for the DOF-level figures.
    orderings
        Include the renumbering stage.
    streamed
        Read by bandwise's streaming VTU reader rather than by meshio.
    """
    n = int(n_nodes)
    cell_nodes = sum(c * _nodes_per_cell(t) for t, c in n_cells_by_type.items())
    main = _main_type(n_cells_by_type)
    nnz = n * DEGREE.get(main, DEGREE["tetra"])
    if streamed:
        read = 24 * n + 8 * cell_nodes + 9 * sum(n_cells_by_type.values())
    else:
        read = 2 * 24 * n + 2 * 8 * cell_nodes
    graph = 8 * (n + 1) + 6 * cell_nodes + 8 * 2 * n + 8 * (n + 1) + 4 * nnz
    ndof = n * max(dofs_per_node, 1)
    metrics = 4 * 8 * ndof + 8 * n
    order = (16 * n + 12 * nnz) if orderings else 0
    alive_after_graph = BASELINE_BYTES + read + 8 * (n + 1) + 4 * nnz
    peak = max(BASELINE_BYTES + read + graph, alive_after_graph + max(metrics, order))
    return MemoryEstimate(read, graph, metrics, order, int(peak), int(nnz))


def estimate_bytes(n_nodes: int, n_cells_by_type: dict[str, int], dofs_per_node: int = 3,
                   orderings: bool = True, streamed: bool = False) -> int:
    """Peak bytes to read, build the graph, measure (and renumber) a mesh.

    >>> estimate_bytes(1_000_000, {"tetra": 5_000_000}) > 10**9
    True
    """
    return memory_estimate(n_nodes, n_cells_by_type, dofs_per_node, orderings, streamed).peak


def available_bytes() -> int | None:
    """Memory the machine can give now: ``MemAvailable`` of ``/proc/meminfo``, else sysconf."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES")) * int(os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return None


def check_fits(estimate: int, available: int | None = None, what: str = "this mesh") -> None:
    """Refuse work that will not fit in memory.

    Parameters
    ----------
    estimate
        Bytes needed (:func:`estimate_bytes`).
    available
        Bytes available; None reads them from the machine
        (:func:`available_bytes`).  When neither is known nothing is refused.
    what
        Named in the message.

    Raises
    ------
    InputError
        When ``estimate`` exceeds ``available``, with both figures.
    """
    if os.environ.get("BANDWISE_MEMORY_CHECK", "").lower() in ("off", "0", "no"):
        return
    if available is None:
        available = available_bytes()
    if available is None or estimate <= available:
        return
    raise InputError(f"{what} needs about {human_bytes(estimate)} of memory and the machine has "
                     f"{human_bytes(available)} available; free memory or use a bigger machine "
                     "(BANDWISE_MEMORY_CHECK=off runs anyway)")
