"""The node connectivity graph of a mesh.

One vertex per mesh node; two nodes are adjacent when some element contains
both (an element's stiffness block couples all its nodes, so the assembled
matrix has a nonzero block there).  The graph is stored as a symmetric CSR
adjacency without self loops: the neighbours of node ``v`` are
``indices[indptr[v]:indptr[v+1]]``, sorted.  Orphan nodes are isolated
vertices.  Degrees of freedom are expanded only when counting (see
:mod:`bandwise.core.metrics`).

The build is a compiled two-pass kernel over the node-to-element incidence
(count, then fill), with a marker array to drop repeated neighbours, run in
parallel over contiguous node ranges: O(sum over nodes of the
nodes of their elements) time and no intermediate edge list, which is what
keeps a one-million-node tetrahedral mesh within a few times its own size.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from .elements import is_analysed
from .model import Model


@dataclass(frozen=True)
class NodeGraph:
    """Symmetric adjacency of the nodes, in CSR form, without self loops.

    Attributes
    ----------
    indptr
        ``n + 1`` offsets into ``indices``.
    indices
        Neighbours of each node, sorted within each row.
    """

    indptr: NDArray[np.int64]
    indices: NDArray[np.int32] | NDArray[np.int64]

    @property
    def n(self) -> int:
        """Number of vertices (mesh nodes or matrix rows)."""
        return int(self.indptr.size - 1)

    @property
    def n_edges(self) -> int:
        """Number of undirected edges."""
        return int(self.indices.size // 2)

    def degrees(self) -> NDArray[np.int64]:
        """Number of neighbours of each node."""
        return np.diff(self.indptr)

    def neighbours(self, v: int) -> NDArray[np.int64]:
        """The neighbours of node ``v``."""
        return self.indices[self.indptr[v]:self.indptr[v + 1]]

    def to_scipy(self) -> sp.csr_matrix:
        """The adjacency as a ``scipy.sparse.csr_matrix`` of ones (no diagonal)."""
        data = np.ones(self.indices.size, dtype=np.int8)
        return sp.csr_matrix((data, self.indices, self.indptr), shape=(self.n, self.n))

    def __repr__(self) -> str:
        return f"NodeGraph({self.n} nodes, {self.n_edges} edges)"


def component_labels(graph: NodeGraph) -> tuple[int, NDArray[np.int64]]:
    """Connected components of the graph: (count, label of every vertex).

    Labels are numbered in order of each component's lowest vertex, so the
    result does not depend on anything but the graph.  A breadth-first sweep
    over the CSR arrays: O(n + nnz) time, no conversion of the matrix.
    """
    labels = _component_labels(graph.indptr, graph.indices)
    return (int(labels.max()) + 1 if labels.size else 0), labels


@numba.njit(cache=True, nogil=True)
def _component_labels(indptr, indices):  # pragma: no cover - compiled
    n = indptr.size - 1
    labels = np.full(n, -1, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    count = 0
    for s in range(n):
        if labels[s] >= 0:
            continue
        labels[s] = count
        head, tail = 0, 1
        queue[0] = s
        while head < tail:
            v = queue[head]
            head += 1
            for t in range(indptr[v], indptr[v + 1]):
                u = indices[t]
                if labels[u] < 0:
                    labels[u] = count
                    queue[tail] = u
                    tail += 1
        count += 1
    return labels


def graph_from_matrix(matrix: sp.spmatrix) -> NodeGraph:
    """The graph of a square sparse matrix pattern: vertex i is row i.

    Every stored entry counts as structure (explicit zeros included); the
    pattern is symmetrised and the diagonal dropped.
    """
    a = sp.coo_matrix(matrix)
    if a.shape[0] != a.shape[1]:
        raise ValueError(f"the matrix is not square ({a.shape[0]} x {a.shape[1]})")
    off = a.row != a.col
    r, c = a.row[off].astype(np.int64), a.col[off].astype(np.int64)
    ones = np.ones(2 * r.size, dtype=np.int8)
    s = sp.csr_matrix((ones, (np.r_[r, c], np.r_[c, r])), shape=a.shape)
    s.sum_duplicates()
    s.sort_indices()
    return NodeGraph(s.indptr.astype(np.int64), s.indices.astype(_index_dtype(a.shape[0])))


def _index_dtype(n: int) -> type:
    return np.int32 if n < 2**31 - 1 else np.int64


def node_graph(model: Model) -> NodeGraph:
    """Build the node graph of a mesh: all nodes of an element are coupled.

    Vertex cells couple nothing; unanalysed (ragged) blocks are skipped and
    listed by :func:`bandwise.formats.meshio_io.skipped_blocks`.

    Notes
    -----
    Cost O(n + sum_e k_e^2) time, memory O(n + nnz) beyond the mesh.
    """
    blocks = [b.data for b in model.cells
              if is_analysed(b.type) and b.data.dtype != object
              and b.data.ndim == 2 and b.data.shape[1] > 1 and len(b)]
    n = model.n_nodes
    return graph_from_cells(blocks, n)


def graph_from_cells(blocks: list[NDArray[np.integer]], n: int) -> NodeGraph:
    """The node graph of a list of ``(m, k)`` connectivity arrays over ``n`` nodes."""
    idx_t = _index_dtype(n)
    if not blocks:
        return NodeGraph(np.zeros(n + 1, dtype=np.int64), np.zeros(0, dtype=idx_t))
    cells = padded_cells(blocks)
    order = _visit_order(cells, n)
    inc_ptr, inc_row = _incidence(cells, order)
    bounds = _chunks(n)
    counts = _count_neighbours(cells, order, inc_ptr, inc_row, bounds)
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(counts, out=indptr[1:])
    indices = np.empty(int(indptr[-1]), dtype=idx_t)
    _fill_neighbours(cells, order, inc_ptr, inc_row, indptr, indices, bounds)
    return NodeGraph(indptr, indices)


def padded_cells(blocks: list[NDArray[np.integer]]) -> NDArray[np.int64]:
    """All cells in one ``(m, k_max)`` int64 array, short rows padded with -1.

    A single block is used as it is (no copy when it is already contiguous
    int64), which is the common case of a large mesh; the kernels then read
    one plain 2D array in their inner loops.
    """
    if len(blocks) == 1:
        return np.ascontiguousarray(blocks[0], dtype=np.int64)
    width = max(int(b.shape[1]) for b in blocks)
    out = np.full((sum(len(b) for b in blocks), width), -1, dtype=np.int64)
    row = 0
    for b in blocks:
        out[row:row + len(b), :b.shape[1]] = b
        row += len(b)
    return out


@numba.njit(cache=True, nogil=True)
def _visit_order(cells, n):  # pragma: no cover - compiled
    """Nodes in order of first appearance in the cell list, unused nodes last.

    Visiting nodes in this order keeps the cells of consecutive nodes close
    in memory whatever the node numbering (meshers write cells in a spatially
    coherent order), which turns the random memory accesses of a scrambled
    numbering into mostly cached ones.
    """
    order = np.empty(n, dtype=np.int64)
    seen = np.zeros(n, dtype=np.bool_)
    k = 0
    for e in range(cells.shape[0]):
        for a in range(cells.shape[1]):
            v = cells[e, a]
            if v >= 0 and not seen[v]:
                seen[v] = True
                order[k] = v
                k += 1
    for v in range(n):
        if not seen[v]:
            order[k] = v
            k += 1
    return order


def _incidence(cells: NDArray[np.int64], order: NDArray[np.int64]) -> tuple[NDArray[np.int64], ...]:
    """Node-to-cell incidence as CSR over visit ranks: the cells of each node."""
    ptr, rank = _incidence_pointers(cells, order)
    row = np.empty(int(ptr[-1]), dtype=_index_dtype(cells.shape[0]))
    _incidence_fill(cells, rank, ptr, row)
    return ptr, row


@numba.njit(cache=True, nogil=True)
def _incidence_pointers(cells, order):  # pragma: no cover - compiled
    n = order.size
    rank = np.empty(n, dtype=np.int64)
    for r in range(n):
        rank[order[r]] = r
    ptr = np.zeros(n + 1, dtype=np.int64)
    for e in range(cells.shape[0]):
        for a in range(cells.shape[1]):
            v = cells[e, a]
            if v >= 0:
                ptr[rank[v] + 1] += 1
    for r in range(n):
        ptr[r + 1] += ptr[r]
    return ptr, rank


@numba.njit(cache=True, nogil=True)
def _incidence_fill(cells, rank, ptr, row):  # pragma: no cover - compiled
    fill = ptr[:-1].copy()
    for e in range(cells.shape[0]):
        for a in range(cells.shape[1]):
            v = cells[e, a]
            if v >= 0:
                r = rank[v]
                row[fill[r]] = e
                fill[r] += 1


def _chunks(n: int) -> NDArray[np.int64]:
    """Bounds of contiguous node ranges, one per worker thread."""
    k = max(1, min(numba.get_num_threads(), n // 4096 + 1))
    return np.linspace(0, n, k + 1).astype(np.int64)


@numba.njit(cache=True, nogil=True, parallel=True)
def _count_neighbours(cells, order, ptr, row, bounds):  # pragma: no cover - compiled
    """Number of distinct neighbours of every node (a marker array per thread)."""
    n = ptr.size - 1
    counts = np.zeros(n, dtype=np.int64)
    width = cells.shape[1]
    for c in numba.prange(bounds.size - 1):
        mark = np.full(n, -1, dtype=np.int32)
        for r in range(bounds[c], bounds[c + 1]):
            v = order[r]
            mark[v] = v
            k = 0
            for t in range(ptr[r], ptr[r + 1]):
                e = row[t]
                for a in range(width):
                    u = cells[e, a]
                    if u >= 0 and mark[u] != v:
                        mark[u] = v
                        k += 1
            counts[v] = k
    return counts


@numba.njit(cache=True, nogil=True, parallel=True)
def _fill_neighbours(cells, order, ptr, row, indptr, indices, bounds):  # pragma: no cover
    """Write the sorted distinct neighbours of every node into ``indices``."""
    n = indptr.size - 1
    width = cells.shape[1]
    for c in numba.prange(bounds.size - 1):
        mark = np.full(n, -1, dtype=np.int32)
        for r in range(bounds[c], bounds[c + 1]):
            v = order[r]
            mark[v] = v
            start = indptr[v]
            k = start
            for t in range(ptr[r], ptr[r + 1]):
                e = row[t]
                for a in range(width):
                    u = cells[e, a]
                    if u >= 0 and mark[u] != v:
                        mark[u] = v
                        # insertion into the sorted run indices[start:k]
                        j = k
                        while j > start and indices[j - 1] > u:
                            indices[j] = indices[j - 1]
                            j -= 1
                        indices[j] = u
                        k += 1
