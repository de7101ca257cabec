"""The node connectivity graph of a mesh.

One vertex per mesh node; two nodes are adjacent when some element contains
both (an element's stiffness block couples all its nodes, so the assembled
matrix has a nonzero block there).  The graph is stored as a symmetric CSR
adjacency without self loops: the neighbours of node ``v`` are
``indices[indptr[v]:indptr[v+1]]``, sorted.  Orphan nodes are isolated
vertices.  Degrees of freedom are expanded only when counting (see
:mod:`bandwise.metrics`).

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
    listed by :func:`bandwise.meshio_io.skipped_blocks`.

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
    typed = numba.typed.List()
    for b in _grouped_by_width(blocks):
        typed.append(b)
    order = _visit_order(typed, n)
    inc_ptr, inc_blk, inc_row = _incidence(typed, order)
    bounds = _chunks(n)
    counts = _count_neighbours(typed, order, inc_ptr, inc_blk, inc_row, bounds)
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(counts, out=indptr[1:])
    indices = np.empty(int(indptr[-1]), dtype=idx_t)
    _fill_neighbours(typed, order, inc_ptr, inc_blk, inc_row, indptr, indices, bounds)
    return NodeGraph(indptr, indices)


def _grouped_by_width(blocks: list[NDArray[np.integer]]) -> list[NDArray[np.int64]]:
    """One contiguous int64 array per number of nodes per cell (few kernel blocks)."""
    by_width: dict[int, list[NDArray[np.integer]]] = {}
    for b in blocks:
        by_width.setdefault(int(b.shape[1]), []).append(b)
    return [np.ascontiguousarray(np.concatenate(g) if len(g) > 1 else g[0], dtype=np.int64)
            for g in by_width.values()]


@numba.njit(cache=True, nogil=True)
def _visit_order(blocks, n):  # pragma: no cover - compiled
    """Nodes in order of first appearance in the cell lists, unused nodes last.

    Visiting nodes in this order keeps the cells of consecutive nodes close
    in memory whatever the node numbering (meshers write cells in a spatially
    coherent order), which turns the random memory accesses of a scrambled
    numbering into mostly cached ones.
    """
    order = np.empty(n, dtype=np.int64)
    seen = np.zeros(n, dtype=np.bool_)
    k = 0
    for b in range(len(blocks)):
        data = blocks[b]
        for e in range(data.shape[0]):
            for a in range(data.shape[1]):
                v = data[e, a]
                if not seen[v]:
                    seen[v] = True
                    order[k] = v
                    k += 1
    for v in range(n):
        if not seen[v]:
            order[k] = v
            k += 1
    return order


@numba.njit(cache=True, nogil=True)
def _incidence(blocks, order):  # pragma: no cover - compiled
    """Node-to-cell incidence as CSR over visit ranks: (block, row) pairs per node."""
    n = order.size
    rank = np.empty(n, dtype=np.int64)
    for r in range(n):
        rank[order[r]] = r
    ptr = np.zeros(n + 1, dtype=np.int64)
    for b in range(len(blocks)):
        data = blocks[b]
        for e in range(data.shape[0]):
            for a in range(data.shape[1]):
                ptr[rank[data[e, a]] + 1] += 1
    for r in range(n):
        ptr[r + 1] += ptr[r]
    fill = ptr[:-1].copy()
    blk = np.empty(ptr[n], dtype=np.int16)
    row = np.empty(ptr[n], dtype=np.int32)
    for b in range(len(blocks)):
        data = blocks[b]
        for e in range(data.shape[0]):
            for a in range(data.shape[1]):
                r = rank[data[e, a]]
                blk[fill[r]] = b
                row[fill[r]] = e
                fill[r] += 1
    return ptr, blk, row


def _chunks(n: int) -> NDArray[np.int64]:
    """Bounds of contiguous node ranges, one per worker thread."""
    k = max(1, min(numba.get_num_threads(), n // 4096 + 1))
    return np.linspace(0, n, k + 1).astype(np.int64)


@numba.njit(cache=True, nogil=True, parallel=True)
def _count_neighbours(blocks, order, ptr, blk, row, bounds):  # pragma: no cover - compiled
    """Number of distinct neighbours of every node (a marker array per thread)."""
    n = ptr.size - 1
    counts = np.zeros(n, dtype=np.int64)
    for c in numba.prange(bounds.size - 1):
        mark = np.full(n, -1, dtype=np.int32)
        for r in range(bounds[c], bounds[c + 1]):
            v = order[r]
            mark[v] = v
            k = 0
            for t in range(ptr[r], ptr[r + 1]):
                data = blocks[blk[t]]
                e = row[t]
                for a in range(data.shape[1]):
                    u = data[e, a]
                    if mark[u] != v:
                        mark[u] = v
                        k += 1
            counts[v] = k
    return counts


@numba.njit(cache=True, nogil=True, parallel=True)
def _fill_neighbours(blocks, order, ptr, blk, row, indptr, indices, bounds):  # pragma: no cover
    """Write the sorted distinct neighbours of every node into ``indices``."""
    n = indptr.size - 1
    for c in numba.prange(bounds.size - 1):
        mark = np.full(n, -1, dtype=np.int32)
        for r in range(bounds[c], bounds[c + 1]):
            v = order[r]
            mark[v] = v
            start = indptr[v]
            k = start
            for t in range(ptr[r], ptr[r + 1]):
                data = blocks[blk[t]]
                e = row[t]
                for a in range(data.shape[1]):
                    u = data[e, a]
                    if mark[u] != v:
                        mark[u] = v
                        # insertion into the sorted run indices[start:k]
                        j = k
                        while j > start and indices[j - 1] > u:
                            indices[j] = indices[j - 1]
                            j -= 1
                        indices[j] = u
                        k += 1
