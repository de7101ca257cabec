"""Check 5: element defects, vectorised per cell block.

* repeated nodes within one element (a collapsed element);
* zero measure (length, area, volume) on the corner nodes;
* inverted orientation: negative volume (node order reversed, by the
  right-hand rule of the VTK ordering) or a negative Jacobian at a corner
  (a badly distorted element); second-order cells are judged on their
  corner sub-element;
* duplicate elements, the same node set twice (doubled stiffness);
* elements whose dimension differs from the rest of their part (a beam in a
  solid, a plate on a frame), boundary/tag cells excepted.

A zero or negative Jacobian makes the element stiffness meaningless: most
solvers stop, some carry on with wrong answers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.algorithms.topology import corner_shape, group_node_sets
from bandwise.core.elements import CORNER_COUNT

from . import measures
from .context import CheckContext
from .findings import Finding, counted

#: A measure below this fraction of (cell size)^dimension counts as zero.
ZERO_MEASURE = 1e-10


@dataclass
class _Hits:
    """Cells found by one test, as (block index, row) pairs."""

    blocks: list[NDArray[np.int64]]
    rows: list[NDArray[np.int64]]

    @classmethod
    def empty(cls) -> _Hits:
        return cls([], [])

    def add(self, block: int, mask: NDArray[np.bool_], rows: NDArray[np.int64]) -> None:
        if mask.any():
            self.rows.append(rows[mask])
            self.blocks.append(np.full(int(mask.sum()), block, dtype=np.int64))

    @property
    def count(self) -> int:
        return int(sum(r.size for r in self.rows))

    def ids(self, ctx: CheckContext) -> tuple[int, ...]:
        if not self.rows:
            return ()
        return ctx.element_ids(np.concatenate(self.blocks), np.concatenate(self.rows))

    def where(self, ctx: CheckContext) -> tuple[str, ...]:
        return tuple(ctx.block_name(int(b)) for b in np.unique(np.concatenate(self.blocks)))


def check_elements(ctx: CheckContext) -> list[Finding]:
    """Repeated nodes, zero measure, inversion, distortion, duplicates, mixed dimension."""
    repeated, zero, inverted, distorted, clockwise = (_Hits.empty() for _ in range(5))
    planar = ctx.model.is_planar()
    digests: dict[int, NDArray[np.int64]] = {}
    for bi, b in enumerate(ctx.model.cells):
        shape = corner_shape(b.type)
        if shape is None or b.data.dtype == object or b.data.ndim != 2 or not len(b.data):
            continue
        rows = np.arange(len(b.data), dtype=np.int64)
        digests[bi], rep = _row_digests(np.ascontiguousarray(b.data, dtype=np.int64))
        repeated.add(bi, rep, rows)
        dim = ctx.dims[bi]
        if dim == 3:
            measure, low, size = measures.solid_measures(shape, ctx.model.points, b.data)
            corners = low[:, None]
        else:
            k = b.data.shape[1] if shape == "polygon" else CORNER_COUNT[b.type]
            p = ctx.model.points[b.data[:, :k]]
            if p.shape[2] == 2:
                p = np.concatenate([p, np.zeros(p.shape[:2] + (1,))], axis=2)
            measure, corners = _measure(shape, p, planar)
            size = measures.cell_size(p)
        is_zero = np.abs(measure) <= ZERO_MEASURE * np.maximum(size, 1e-300) ** dim
        zero.add(bi, is_zero & ~rep, rows)
        if corners is None or not ctx.coupling[bi].any():
            continue
        ok = ~is_zero & ~rep & ctx.coupling[bi]
        eps = ZERO_MEASURE * size[:, None] ** dim
        neg_corner = (corners < -eps).any(axis=1)
        if dim == 3:
            inverted.add(bi, ok & (measure < 0), rows)
            distorted.add(bi, ok & (measure > 0) & neg_corner, rows)
        else:  # plane cells, planar mesh: orientation seen from +z
            clockwise.add(bi, ok & (measure < 0), rows)
            distorted.add(bi, ok & (measure > 0) & neg_corner, rows)
    out = []
    _emit(out, ctx, repeated, "elements.repeated_nodes", "error",
          ("element lists", "elements list"), "the same node twice: a collapsed element with no valid stiffness")
    _emit(out, ctx, zero, "elements.zero_measure", "error",
          ("element has", "elements have"), "zero length, area or volume on their corner nodes: "
          "a singular element stiffness")
    whole = _whole_blocks(ctx, inverted)
    _emit(out, ctx, inverted, "elements.inverted", "error",
          ("solid element has", "solid elements have"), "negative volume (node order reversed, right-hand rule): "
          "negative Jacobian, the solver stops or gives wrong answers"
          + (f"; every element of {' and '.join(whole)} is inverted: the file probably "
             "uses another node-order convention than VTK's (a reader or export "
             "setting) rather than a meshing fault" if whole else ""))
    _emit(out, ctx, distorted, "elements.distorted", "error",
          ("element has", "elements have"), "a negative Jacobian at a corner (concave, twisted or folded): "
          "the element stiffness is unreliable")
    whole = _whole_blocks(ctx, clockwise)
    _emit(out, ctx, clockwise, "elements.clockwise", "warning",
          ("plane element runs", "plane elements run"), "clockwise seen from +z (the reverse of the usual "
          "counter-clockwise order): negative area for solvers that expect it"
          + (f"; all of {' and '.join(whole)} run so: the mesh was probably drawn with "
             "its normal along -z" if whole else ""))
    out += _duplicates(ctx, digests)
    out += _mixed_dimension(ctx)
    return out


def _whole_blocks(ctx: CheckContext, hits: _Hits) -> list[str]:
    """Names of the blocks in which every coupling cell is among ``hits``."""
    names = []
    for b, r in zip(hits.blocks, hits.rows):
        bi = int(b[0])
        if r.size == int(ctx.coupling[bi].sum()):
            names.append(ctx.block_name(bi))
    return names


def _measure(shape: str, p: NDArray[np.float64], planar: bool,
             ) -> tuple[NDArray[np.float64], NDArray[np.float64] | None]:
    """Signed measure and corner determinants (None when orientation is undefined)."""
    if shape == "line":
        return np.linalg.norm(p[:, 1] - p[:, 0], axis=1), None
    if shape in ("triangle", "quad", "polygon"):
        if planar:
            return measures.plane_signed_area(p), measures.plane_corner_turns(p)
        return measures.surface_area(p), None
    raise ValueError(f"not a line or plane cell: {shape}")


def _emit(out: list[Finding], ctx: CheckContext, hits: _Hits, code: str, severity: str,
          subject: tuple[str, str], text: str) -> None:
    if hits.count:
        out.append(Finding(code, severity, hits.count,
                           f"{counted(hits.count, *subject)} {text}",
                           element_ids=hits.ids(ctx), element_id_kind=ctx.element_id_kind,
                           where=hits.where(ctx)))


@numba.njit(cache=True, nogil=True)
def _row_digests(data):  # pragma: no cover - compiled
    """For each cell: a hash of its node set (order-free) and whether a node repeats."""
    m, k = data.shape
    digest = np.empty(m, dtype=np.int64)
    repeated = np.zeros(m, dtype=np.bool_)
    buf = np.empty(k, dtype=np.int64)
    for e in range(m):
        for a in range(k):  # insertion sort of the row
            v = data[e, a]
            q = a
            while q > 0 and buf[q - 1] > v:
                buf[q] = buf[q - 1]
                q -= 1
            buf[q] = v
        h = k * 0x2545F4914F6CDD1D
        for a in range(k):
            if a and buf[a] == buf[a - 1]:
                repeated[e] = True
            h = (h ^ buf[a]) * 0x3F58476D1CE4E5B9
            h ^= (h >> 29) & 0x7FFFFFFFF
        digest[e] = h
    return digest, repeated


def _duplicates(ctx: CheckContext, digests: dict[int, NDArray[np.int64]]) -> list[Finding]:
    """Coupling elements with the same node set as an earlier one (over all blocks).

    Cells are compared only when the hashes of their sorted node lists agree.
    """
    blocks = [bi for bi in digests if ctx.coupling[bi].any()]
    if not blocks:
        return []
    rows = [np.flatnonzero(ctx.coupling[bi]) for bi in blocks]
    key = np.concatenate([digests[bi][r] for bi, r in zip(blocks, rows)])
    blk = np.concatenate([np.full(r.size, bi, dtype=np.int64) for bi, r in zip(blocks, rows)])
    row = np.concatenate(rows)
    sk = np.sort(key)
    repeated_keys = np.unique(sk[1:][sk[1:] == sk[:-1]])
    hits = _Hits.empty()
    if repeated_keys.size:
        cand = np.flatnonzero(np.isin(key, repeated_keys))
        width = max(ctx.model.cells[bi].data.shape[1] for bi in blocks)
        nodes = np.full((cand.size, width + 1), -1, dtype=np.int64)
        for i, c in enumerate(cand):  # few candidates: hash agreements only
            d = ctx.model.cells[blk[c]].data[row[c]]
            nodes[i, :d.size] = d
            nodes[i, width] = d.size  # the node count is part of the set's identity
        group, _ = group_node_sets(nodes)
        seen: set[int] = set()
        later = np.zeros(cand.size, dtype=bool)
        for i, g in enumerate(group.tolist()):  # candidates are in file order
            later[i] = g in seen
            seen.add(g)
        for bi in np.unique(blk[cand[later]]):
            sel = cand[later][blk[cand[later]] == bi]
            hits.add(int(bi), np.ones(sel.size, dtype=bool), row[sel])
    out: list[Finding] = []
    _emit(out, ctx, hits, "elements.duplicate", "error",
          ("element repeats", "elements repeat"), "the node set of another element: their stiffness counts twice")
    return out


def _mixed_dimension(ctx: CheckContext) -> list[Finding]:
    """Coupling elements whose dimension is not the main one of their part."""
    n_parts, part = ctx.parts
    if n_parts == 0:
        return []
    counts = np.zeros((n_parts, 4), dtype=np.int64)
    cell_parts = []
    for bi, (b, use) in enumerate(zip(ctx.model.cells, ctx.coupling)):
        p = part[b.data[use, 0]] if use.any() else np.zeros(0, dtype=np.int64)
        cell_parts.append(p)
        if p.size:
            counts[:, ctx.dims[bi]] += np.bincount(p, minlength=n_parts)
    main = np.argmax(counts, axis=1)
    hits = _Hits.empty()
    for bi, (use, p) in enumerate(zip(ctx.coupling, cell_parts)):
        if p.size:
            odd = main[p] != ctx.dims[bi]
            hits.add(bi, odd, np.flatnonzero(use))
    out: list[Finding] = []
    _emit(out, ctx, hits, "elements.mixed_dimension", "warning",
          ("element differs", "elements differ"), "in dimension from the rest of their part (a beam in a solid, a "
          "plate on a frame): check that the joint transmits what is meant, rotations "
          "included")
    return out
