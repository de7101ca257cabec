"""Element facets and face-connected blocks of cells.

A *facet* of a cell is a face of a 3D solid, an edge of a 2D cell, or an end
node of a line.  Two cells of one *face-connected block* are linked by a
chain of cells in which each neighbour shares a full facet.  A mesh that is
one connected part in the node graph may still fall into several blocks:
blocks touching only at a node (or, for solids, only along an edge) can
rotate relative to each other, which is what the weak-joint check reports
and what rigid-body analysis needs.

Facets are built from the corner nodes only (the first nodes of a
higher-order cell in VTK / meshio order), so a ``tetra10`` shares its faces
with a ``tetra``.  Each facet is listed with its nodes in the order that
gives the outward normal by the right-hand rule for a positively oriented
cell (VTK convention; meshio's wedge follows the gmsh prism order, whose
base triangle normal points into the cell).

Lower-dimensional cells lying wholly on nodes of higher-dimensional cells
(boundary or tag cells, as in :mod:`bandwise.core.dofs`) add no stiffness; they
get no block (label ``-1``), like vertex cells and cell types bandwise does
not analyse.

References
----------
Kitware, "VTK File Formats" (cell types and node orderings), and the face
tables of ``vtkTetra``, ``vtkHexahedron``, ``vtkWedge``, ``vtkPyramid``.
C. Geuzaine, J.-F. Remacle, "Gmsh reference manual", node ordering (prism).
"""

from __future__ import annotations

from concurrent.futures import Future
from dataclasses import dataclass, field

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.background import in_background
from bandwise.core.elements import CORNER_COUNT, cell_dimension
from bandwise.core.errors import InputError
from bandwise.core.model import Model
from bandwise.core.unionfind import compact_labels, union

#: Local corner tuples of each facet, outward orientation, per corner shape.
_FACETS: dict[str, tuple[tuple[int, ...], ...]] = {
    "line": ((0,), (1,)),
    "triangle": ((0, 1), (1, 2), (2, 0)),
    "quad": ((0, 1), (1, 2), (2, 3), (3, 0)),
    "tetra": ((0, 2, 1), (0, 1, 3), (1, 2, 3), (2, 0, 3)),
    "hexahedron": ((0, 3, 2, 1), (4, 5, 6, 7), (0, 1, 5, 4),
                   (1, 2, 6, 5), (2, 3, 7, 6), (3, 0, 4, 7)),
    "wedge": ((0, 2, 1), (3, 4, 5), (0, 3, 5, 2), (2, 5, 4, 1), (1, 4, 3, 0)),
    "pyramid": ((0, 3, 2, 1), (0, 1, 4), (1, 2, 4), (2, 3, 4), (3, 0, 4)),
}

#: Linear shape with the same corners as each higher-order cell type.
_CORNER_SHAPE: dict[str, str] = {}
for _t in CORNER_COUNT:
    for _shape in ("line", "triangle", "quad", "tetra", "hexahedron", "wedge", "pyramid"):
        if _t.startswith(_shape):
            _CORNER_SHAPE[_t] = _shape

#: Bits of the one word a facet's other corner ranks are packed into, when they fit.
_PACKED_BITS = 63

#: Widest facet of any cell type (quadrilateral faces).
MAX_FACET_NODES = 4


def corner_shape(cell_type: str) -> str | None:
    """The linear cell type whose corners a cell type has (``"tetra10"`` -> ``"tetra"``)."""
    if cell_type == "polygon":
        return "polygon"
    return _CORNER_SHAPE.get(cell_type)


def local_facets(cell_type: str, nodes_per_cell: int | None = None) -> list[tuple[int, ...]]:
    """Local corner indices of each facet of a cell type, outward orientation.

    Parameters
    ----------
    cell_type
        meshio cell type name.
    nodes_per_cell
        Needed for ``"polygon"`` only (its edges are ``(i, i+1 mod k)``).

    Raises
    ------
    InputError
        For vertex cells and cell types bandwise does not analyse.
    """
    shape = corner_shape(cell_type)
    if shape == "polygon":
        if not nodes_per_cell or nodes_per_cell < 3:
            raise InputError("a polygon block needs at least 3 nodes per cell")
        k = nodes_per_cell
        return [(i, (i + 1) % k) for i in range(k)]
    if shape is None:
        raise InputError(f"cell type {cell_type!r} has no facets bandwise knows")
    return list(_FACETS[shape])


def facets(cell_type: str, data: NDArray[np.integer]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """All facets of a block of cells, as corner-node arrays.

    Parameters
    ----------
    cell_type
        meshio cell type name (linear or higher order).
    data
        ``(m, nodes_per_cell)`` node indices of the cells.

    Returns
    -------
    facet_nodes
        ``(m * f, k)`` node indices, ``f`` facets per cell, ``k`` the widest
        facet of the type; narrower facets (the triangles of a wedge or a
        pyramid) are padded on the right with ``-1``.  Rows are cell-major:
        facet ``j`` of cell ``e`` is row ``e * f + j``.
    owner
        ``(m * f,)`` index of the cell (row of ``data``) owning each facet.

    Examples
    --------
    >>> nodes, owner = facets("triangle", np.array([[0, 1, 2]]))
    >>> nodes.tolist(), owner.tolist()
    ([[0, 1], [1, 2], [2, 0]], [0, 0, 0])
    """
    data = np.asarray(data, dtype=np.int64)
    table = local_facets(cell_type, data.shape[1] if data.ndim == 2 else None)
    k = max(len(t) for t in table)
    local = np.full((len(table), k), -1, dtype=np.int64)
    for j, t in enumerate(table):
        local[j, :len(t)] = t
    m, f = data.shape[0], len(table)
    # gather with a dummy column of -1 so that padding stays -1
    padded = np.concatenate([data, np.full((m, 1), -1, dtype=np.int64)], axis=1)
    nodes = padded[:, local].reshape(m * f, k)
    owner = np.repeat(np.arange(m, dtype=np.int64), f)
    return nodes, owner


def coupling_cells(model: Model) -> list[NDArray[np.bool_]]:
    """Which cells of each block carry stiffness (one bool array per block).

    False for vertex cells, cell types not analysed, ragged blocks, and
    boundary/tag cells: lower-dimensional cells whose every node also belongs
    to a higher-dimensional cell (the rule of :func:`bandwise.core.dofs.dof_layout`).
    """
    dims = [cell_dimension(b.type) or 0 for b in model.cells]
    usable = [bool(d) and _regular(b.data) and corner_shape(b.type) is not None
              for b, d in zip(model.cells, dims)]
    present = {d for d, u in zip(dims, usable) if u}
    if len(present) <= 1:  # one dimension only: no cell lies on a higher one
        return [np.full(len(b.data), u, dtype=bool) for b, u in zip(model.cells, usable)]
    top = np.zeros(model.n_nodes, dtype=np.int8)
    for d in sorted(present):
        for b, bd, u in zip(model.cells, dims, usable):
            if u and bd == d:
                top[b.data.ravel()] = d
    masks = []
    for b, d, u in zip(model.cells, dims, usable):
        masks.append((top[b.data] == d).any(axis=1) if u else np.zeros(len(b.data), dtype=bool))
    return masks


def _regular(data: NDArray[np.integer]) -> bool:
    return data.dtype != object and data.ndim == 2 and data.shape[0] > 0


@dataclass(frozen=True)
class FacetTable:
    """Every facet of the coupling cells of a model, equal facets grouped.

    Facets are numbered block by block (blocks in ``entry_block``), cell by
    cell, then in the order of :func:`local_facets`; their nodes are not
    stored but recovered on demand with :meth:`nodes_of`.

    Attributes
    ----------
    entry_block
        Index (into ``model.cells``) of each block that has coupling cells.
    entry_rows
        The coupling rows of each such block.
    entry_local
        ``(f, 4)`` local corner indices of the facets of each block, ``-1`` padded.
    starts
        Index of the first facet of each block, and the total at the end.
    free
        Sorted indices of the free facets, owned by one cell only (the
        boundary faces of solids, boundary edges of plane and shell meshes).
    multiplicity
        Number of cells sharing each distinct facet: 1 on the free boundary,
        2 inside a conforming mesh, more at a non-manifold junction.
    cell_labels
        Face-connected block of every cell of the model (file order, all
        blocks), ``-1`` for cells with no stiffness.
    n_blocks
        Number of face-connected blocks.
    """

    model: Model = field(repr=False)
    entry_block: NDArray[np.int64]
    entry_rows: tuple[NDArray[np.int64], ...]
    entry_local: tuple[NDArray[np.int64], ...]
    starts: NDArray[np.int64]
    free: NDArray[np.int64]
    multiplicity: NDArray[np.int64]
    cell_labels: NDArray[np.int64]
    n_blocks: int

    @property
    def n_facets(self) -> int:
        """Number of facets, counted once per owning cell."""
        return int(self.starts[-1])

    @property
    def is_free(self) -> NDArray[np.bool_]:
        """True for facets owned by exactly one cell (boundary faces / edges)."""
        mask = np.zeros(self.n_facets, dtype=bool)
        mask[self.free] = True
        return mask

    def owner_of(self, idx: NDArray[np.integer]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
        """(cell block index, row in that block) of the cells owning facets ``idx``."""
        idx = np.asarray(idx, dtype=np.int64)
        entry = np.searchsorted(self.starts, idx, side="right") - 1
        block = self.entry_block[entry]
        row = np.empty(idx.shape, dtype=np.int64)
        for e, (rows, local) in enumerate(zip(self.entry_rows, self.entry_local)):
            sel = entry == e
            row[sel] = rows[(idx[sel] - self.starts[e]) // len(local)]
        return block, row

    def nodes_of(self, idx: NDArray[np.integer]) -> NDArray[np.int64]:
        """``(len(idx), 4)`` corner nodes of facets ``idx``, outward order, ``-1`` padded."""
        idx = np.asarray(idx, dtype=np.int64).ravel()
        out = np.full((idx.size, MAX_FACET_NODES), -1, dtype=np.int64)
        entry = np.searchsorted(self.starts, idx, side="right") - 1
        for e, (rows, local) in enumerate(zip(self.entry_rows, self.entry_local)):
            sel = np.flatnonzero(entry == e)
            if not sel.size:
                continue
            f = len(local)
            offset = idx[sel] - self.starts[e]
            data = self.model.cells[self.entry_block[e]].data
            cells = data[rows[offset // f]]
            lj = local[offset % f]
            padded = np.concatenate([cells, np.full((len(cells), 1), -1, np.int64)], axis=1)
            out[sel] = np.take_along_axis(padded, np.where(lj >= 0, lj, data.shape[1]), axis=1)
        return out

    def __repr__(self) -> str:
        return (f"FacetTable({self.n_facets} facets, {len(self.multiplicity)} distinct, "
                f"{self.n_blocks} face-connected blocks)")


def facet_table(model: Model, coupling: list[NDArray[np.bool_]] | None = None) -> FacetTable:
    """Build the :class:`FacetTable` of a model's coupling cells.

    Notes
    -----
    Three compiled passes, each linear in the facet count F:

    1. corners are ranked in order of first appearance in the cell list;
       the lowest rank of a facet's corners is its *lead*, and the facets of
       each lead are counted;
    2. a second walk over the cells puts each facet into the bucket of its
       lead (a counting sort), as its other ranks: packed exactly into one
       64-bit word when they fit (the faces of a tetrahedral mesh of up to
       2**31 nodes, of a hexahedral one of up to 2**21), else one rank a
       column;
    3. each bucket (a few dozen facets: those whose lowest corner is one
       node) is sorted on its own, equal facets are runs, and the cells of a
       run are joined in a union-find forest, which gives the face-connected
       blocks.

    Ranking by first appearance makes the work follow the cell order, which
    in a generated mesh is spatially coherent even when the node numbering
    is not: the buckets touched by consecutive cells are close together in
    memory.  The facet node tuples are not stored.
    """
    if coupling is None:
        coupling = coupling_cells(model)
    offsets = np.cumsum([0] + [len(b.data) for b in model.cells]).astype(np.int64)
    entries = []
    for bi, (b, use) in enumerate(zip(model.cells, coupling)):
        if use.any():
            table = local_facets(b.type, b.data.shape[1])
            local = np.full((len(table), MAX_FACET_NODES), -1, dtype=np.int64)
            for j, t in enumerate(table):
                local[j, :len(t)] = t
            entries.append((bi, np.flatnonzero(use).astype(np.int64), local))
    counts = [rows.size * len(local) for _, rows, local in entries]
    starts = np.cumsum([0] + counts).astype(np.int64)
    n_facets = int(starts[-1])
    width = max((int((local >= 0).sum(axis=1).max()) for _, _, local in entries), default=1)
    slots = max(width - 1, 1)
    bits = max(1, int(model.n_nodes + 1).bit_length())
    packed = slots * bits <= _PACKED_BITS
    small = np.int32 if max(n_facets, model.n_nodes) < 2**31 else np.int64
    rank = np.full(model.n_nodes, -1, dtype=small)
    bucket_start = np.zeros(model.n_nodes + 1, dtype=np.int64)
    rest = np.empty((n_facets, 1 if packed else slots), dtype=np.int64)
    idx = np.empty(n_facets, dtype=small)
    blocks = [(np.ascontiguousarray(model.cells[bi].data, dtype=np.int64), rows, local,
               (local >= 0).sum(axis=1).astype(np.int64), start)
              for (bi, rows, local), start in zip(entries, starts[:-1])]
    next_rank = 0
    for data, rows, local, widths, start in blocks:  # pass 1: ranks, bucket sizes
        next_rank = _facet_pass(data, rows, local, widths, slots, bits, packed, rank, next_rank,
                                bucket_start, False, rest, idx, start)
    bucket_start = np.cumsum(bucket_start[:next_rank + 1])
    fill = bucket_start[:-1].copy()
    for data, rows, local, widths, start in blocks:  # pass 2: facets into their buckets
        _facet_pass(data, rows, local, widths, slots, bits, packed, rank, next_rank, fill, True,
                    rest, idx, start)
    del rank, fill, blocks
    n_cells = int(offsets[-1])
    enf = np.array([len(local) for _, _, local in entries] or [1], dtype=np.int64)
    ecells = np.concatenate([offsets[bi] + rows for bi, rows, _ in entries] or
                            [np.zeros(0, np.int64)])
    erow0 = np.cumsum([0] + [rows.size for _, rows, _ in entries]).astype(np.int64)
    # a block whose every cell couples needs no lookup: cell = first cell + row
    ebase = np.array([offsets[bi] if rows.size == len(model.cells[bi].data) else -1
                      for bi, rows, _ in entries] or [0], dtype=np.int64)
    parent = np.arange(n_cells, dtype=np.int64)
    mult, free = _bucket_runs(bucket_start, rest, idx, starts, enf, ecells, erow0, ebase,
                              parent)
    coupled = np.zeros(n_cells, dtype=np.bool_)
    for (bi, rows, _) in entries:
        coupled[offsets[bi] + rows] = True
    labels, n_blocks = compact_labels(parent, coupled)
    return FacetTable(model, np.array([e[0] for e in entries], dtype=np.int64),
                      tuple(e[1] for e in entries), tuple(e[2] for e in entries), starts,
                      np.sort(free), mult, labels, int(n_blocks))


def facet_table_in_background(model: Model, coupling: list[NDArray[np.bool_]] | None = None,
                              ) -> Future[FacetTable]:
    """Start :func:`facet_table` on a second thread and return its future.

    The table's compiled passes release the interpreter lock, so other work
    (the checks that do not need it, the node graph) runs meanwhile on
    another core.  ``future.result()`` gives the table or raises what
    building it raised.
    """
    return in_background(facet_table, model, coupling)


@numba.njit(cache=True, nogil=True, inline="always")
def _sorted_ranks(cr, local, j, k, t):  # pragma: no cover - compiled
    """The ranks of facet ``j``'s ``k`` corners, ascending, into ``t[:k]``.

    Sorting networks of min/max (no data-dependent branch: facet corner
    ranks are in random order, and mispredicted branches of an insertion
    sort cost more than the rest of the pass).
    """
    if k == 3:
        a, b, c = cr[local[j, 0]], cr[local[j, 1]], cr[local[j, 2]]
        lo, hi = min(a, b), max(a, b)
        t[0], t[2] = min(lo, c), max(hi, c)
        t[1] = max(lo, min(hi, c))
    elif k == 4:
        a, b, c, d = cr[local[j, 0]], cr[local[j, 1]], cr[local[j, 2]], cr[local[j, 3]]
        a, b = min(a, b), max(a, b)
        c, d = min(c, d), max(c, d)
        a, c = min(a, c), max(a, c)
        b, d = min(b, d), max(b, d)
        t[0], t[1], t[2], t[3] = a, min(b, c), max(b, c), d
    elif k == 2:
        a, b = cr[local[j, 0]], cr[local[j, 1]]
        t[0], t[1] = min(a, b), max(a, b)
    else:
        t[0] = cr[local[j, 0]]


@numba.njit(cache=True, nogil=True)
def _facet_pass(data, rows, local, widths, slots, bits, packed, rank, next_rank, fill, scatter,
                rest, idx, out0):  # pragma: no cover - compiled
    """One pass over the facets of one block, in cell order (passes 1 and 2 of :func:`facet_table`).

    Each facet's corner ranks are sorted; the lowest is its *lead*.  Without
    ``scatter`` (pass 1), corners not yet ranked get ``next_rank, next_rank
    + 1, ...`` in order of first appearance and ``fill[lead + 1]`` counts the
    facets of each lead.  With ``scatter`` (pass 2, ``fill`` now the next
    free slot of each lead's bucket), the facet's other ranks (+1, so that 0
    pads narrower facets on the left; packed ``bits`` apiece into one word,
    or one rank a column) go to ``rest`` and its index to ``idx`` at that
    slot.  Returns the next unused rank.
    """
    nf = local.shape[0]
    nc = 0
    for j in range(nf):
        for a in range(widths[j]):
            nc = max(nc, local[j, a] + 1)
    t = np.empty(4, dtype=np.int64)
    cr = np.empty(nc, dtype=np.int64)
    c = next_rank
    for ri in range(rows.size):
        e = rows[ri]
        for a in range(nc):  # each corner looked up once per cell
            v = data[e, a]
            r = np.int64(rank[v])
            if r < 0:
                r = c
                rank[v] = c
                c += 1
            cr[a] = r
        for j in range(nf):
            k = widths[j]
            _sorted_ranks(cr, local, j, k, t)
            if not scatter:
                fill[t[0] + 1] += 1
                continue
            p = fill[t[0]]
            fill[t[0]] = p + 1
            idx[p] = out0 + ri * nf + j
            if packed:
                h = 0
                for a in range(1, k):
                    h = (h << bits) | (t[a] + 1)
                rest[p, 0] = h
            else:
                pad = slots - (k - 1)
                for a in range(pad):
                    rest[p, a] = 0
                for a in range(1, k):
                    rest[p, pad + a - 1] = t[a] + 1
    return c


@numba.njit(cache=True, nogil=True, inline="always")
def _row_equal(rows, i, j):  # pragma: no cover - compiled
    for a in range(rows.shape[1]):
        if rows[i, a] != rows[j, a]:
            return False
    return True


@numba.njit(cache=True, nogil=True)
def _sort_bucket(rows, idx, lo, hi, tmp):  # pragma: no cover - compiled
    """Shell sort of ``rows[lo:hi]`` (lexicographic) with ``idx``: insertion sort when short.

    Gaps of M. Ciura, "Best increments for the average case of Shellsort",
    FCT 2001, extended by factors of 2.25: buckets are short, but a node
    shared by very many cells must not cost a quadratic sort.
    """
    n = hi - lo
    if n <= 48:
        _gapped_insertion(rows, idx, lo, hi, 1, tmp)
        return
    gaps = np.empty(64, dtype=np.int64)
    k = 0
    for g in (1, 4, 10, 23, 57, 132, 301, 701, 1750):
        if g < n:
            gaps[k] = g
            k += 1
    g = 1750
    while k >= 9:
        g = g * 9 // 4
        if g >= n:
            break
        gaps[k] = g
        k += 1
    for q in range(k - 1, -1, -1):
        _gapped_insertion(rows, idx, lo, hi, gaps[q], tmp)


@numba.njit(cache=True, nogil=True)
def _gapped_insertion(rows, idx, lo, hi, gap, tmp):  # pragma: no cover - compiled
    w = rows.shape[1]
    if w == 1:  # packed keys: scalar comparisons (the common case, about twice as fast)
        for a in range(lo + gap, hi):
            key, ti = rows[a, 0], idx[a]
            q = a
            while q - gap >= lo and rows[q - gap, 0] > key:
                rows[q, 0] = rows[q - gap, 0]
                idx[q] = idx[q - gap]
                q -= gap
            rows[q, 0] = key
            idx[q] = ti
        return
    for a in range(lo + gap, hi):
        for c in range(w):
            tmp[c] = rows[a, c]
        ti = idx[a]
        q = a
        while q - gap >= lo:
            less = False
            for c in range(w):
                if tmp[c] != rows[q - gap, c]:
                    less = tmp[c] < rows[q - gap, c]
                    break
            if not less:
                break
            for c in range(w):
                rows[q, c] = rows[q - gap, c]
            idx[q] = idx[q - gap]
            q -= gap
        for c in range(w):
            rows[q, c] = tmp[c]
        idx[q] = ti


@numba.njit(cache=True, nogil=True)
def _bucket_runs(bucket_start, rows, idx, starts, enf, ecells, erow0, ebase,
                 parent):  # pragma: no cover - compiled
    """Sort each bucket, walk its runs of equal facets (pass 3).

    Returns the size of each run (distinct facet) and the facets alone in
    their run; joins the owning cells of each run in ``parent``.
    """
    n = idx.size
    mult = np.zeros(n, dtype=np.int32)
    free = np.empty(n, dtype=idx.dtype)
    tmp = np.empty(rows.shape[1], dtype=np.int64)
    n_free = 0
    g = -1
    for b in range(bucket_start.size - 1):
        lo, hi = bucket_start[b], bucket_start[b + 1]
        if hi - lo > 1:
            _sort_bucket(rows, idx, lo, hi, tmp)
        run_start = lo
        first = 0
        for i in range(lo, hi + 1):
            if i == hi or i == lo or not _row_equal(rows, i, i - 1):
                if i > lo and i - run_start == 1:
                    free[n_free] = idx[run_start]
                    n_free += 1
                if i == hi:
                    break
                g += 1
                run_start = i
            f = idx[i]
            e = 0
            while f >= starts[e + 1]:
                e += 1
            r = (f - starts[e]) // enf[e]
            cell = ebase[e] + r if ebase[e] >= 0 else ecells[erow0[e] + r]
            if i == run_start:
                first = cell
            else:
                union(parent, first, cell)
            mult[g] += 1
    return mult[:g + 1].astype(np.int64), free[:n_free].astype(np.int64)


@numba.njit(cache=True, nogil=True, inline="always")
def _mix(h, v):  # pragma: no cover - compiled
    """Fold ``v`` into the hash ``h`` (multiply, xor-shift: a splitmix-style mixer)."""
    h = (h ^ v) * 0x3F58476D1CE4E5B9
    h ^= (h >> 31) & 0x1FFFFFFFF
    h *= 0x14D049BB133111EB
    return h ^ ((h >> 29) & 0x7FFFFFFFF)


def group_node_sets(nodes: NDArray[np.int64]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Group rows holding the same set of nodes.

    Parameters
    ----------
    nodes
        ``(m, k)`` node indices (``-1`` entries count as padding).

    Returns
    -------
    group
        ``(m,)`` id of the distinct node set of each row, numbered in order
        of first appearance.
    size
        Number of rows in each group.

    Notes
    -----
    Rows are sorted, then hashed into an open-addressing table by a compiled
    kernel: O(m k log k) time.
    """
    s = np.ascontiguousarray(np.sort(np.asarray(nodes, dtype=np.int64), axis=1))
    if s.ndim != 2 or len(s) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    capacity = 1 << max(4, int(np.ceil(np.log2(len(s) * 1.4 + 1))))
    group, size, n_groups = _hash_rows(s, capacity)
    return group, size[:n_groups].copy()


@numba.njit(cache=True, nogil=True)
def _hash_rows(s, capacity):  # pragma: no cover - compiled
    m, k = s.shape
    mask = capacity - 1
    slots = np.full(capacity, -1, dtype=np.int64)
    rep = np.empty(m, dtype=np.int64)
    size = np.zeros(m, dtype=np.int64)
    group = np.empty(m, dtype=np.int64)
    n_groups = 0
    for i in range(m):
        h = 0x27D4EB2F165667C5
        for a in range(k):
            h = _mix(h, s[i, a])
        slot = h & mask
        while True:
            g = slots[slot]
            if g == -1:
                g = n_groups
                n_groups += 1
                slots[slot] = g
                rep[g] = i
                break
            r = rep[g]
            same = True
            for a in range(k):
                if s[r, a] != s[i, a]:
                    same = False
                    break
            if same:
                break
            slot = (slot + 1) & mask
        size[g] += 1
        group[i] = g
    return group, size, n_groups


def face_connected_blocks(model: Model, table: FacetTable | None = None,
                          ) -> tuple[int, list[NDArray[np.int64]]]:
    """Split the coupling cells into blocks connected through full facets.

    Two cells are in one block when a chain of cells joins them in which
    neighbours share a facet: a face for 3D solids, an edge for 2D cells, a
    node for lines.  Cells of different dimension never share a facet, so a
    beam welded to a solid forms its own block.

    Parameters
    ----------
    model
        The mesh.
    table
        Its :func:`facet_table`, if already built.

    Returns
    -------
    n_blocks
        Number of blocks, numbered in the order of their first cell.
    labels
        One int64 array per cell block of ``model.cells``: the block of each
        cell, ``-1`` for cells with no stiffness (vertex, tag or unanalysed).

    Examples
    --------
    >>> from bandwise.core.generate import quad_grid
    >>> face_connected_blocks(quad_grid(3, 2))[0]
    1

    Notes
    -----
    Computed with the facet table (facet keys radix-sorted once, a
    union-find forest over the cells), about linear in the facet count.
    """
    if table is None:
        table = facet_table(model)
    offsets = np.cumsum([0] + [len(b.data) for b in model.cells])
    return table.n_blocks, _split(table.cell_labels, offsets)


def _split(flat: NDArray[np.int64], offsets: NDArray[np.int64]) -> list[NDArray[np.int64]]:
    return [flat[offsets[i]:offsets[i + 1]] for i in range(len(offsets) - 1)]


def node_block_pairs(model: Model, labels: list[NDArray[np.int64]],
                     ) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Distinct (node, block) incidences, sorted by node then block.

    All nodes of a cell (mid-side nodes included) belong to the cell's block.
    A node listed with two or more blocks is a joint between them.
    """
    nodes, blocks = [], []
    for b, lab in zip(model.cells, labels):
        keep = lab >= 0
        if not keep.any():
            continue
        data = b.data[keep]
        nodes.append(data.ravel())
        blocks.append(np.repeat(lab[keep], data.shape[1]))
    if not nodes:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty
    node = np.concatenate(nodes).astype(np.int64)
    block = np.concatenate(blocks)
    n_blocks = int(block.max()) + 1
    key = np.unique(node * n_blocks + block)
    return key // n_blocks, key % n_blocks


def block_nodes(model: Model, labels: list[NDArray[np.int64]]) -> list[NDArray[np.int64]]:
    """The sorted node indices of each face-connected block."""
    node, block = node_block_pairs(model, labels)
    if node.size == 0:
        return []
    order = np.argsort(block, kind="stable")
    counts = np.bincount(block)
    return np.split(node[order], np.cumsum(counts)[:-1])
