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

from ..elements import CORNER_COUNT
from ..topology import corner_shape
from . import measures
from .context import CheckContext
from .findings import Finding

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
    sorted_rows: dict[int, NDArray[np.int64]] = {}
    for bi, b in enumerate(ctx.model.cells):
        shape = corner_shape(b.type)
        if shape is None or b.data.dtype == object or b.data.ndim != 2 or not len(b.data):
            continue
        rows = np.arange(len(b.data), dtype=np.int64)
        s = np.sort(b.data, axis=1)
        sorted_rows[bi] = s
        rep = (s[:, 1:] == s[:, :-1]).any(axis=1)
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
          "elements list the same node twice: a collapsed element with no valid stiffness")
    _emit(out, ctx, zero, "elements.zero_measure", "error",
          "elements have zero length, area or volume on their corner nodes: "
          "a singular element stiffness")
    _emit(out, ctx, inverted, "elements.inverted", "error",
          "solid elements have negative volume (node order reversed, right-hand rule): "
          "negative Jacobian, the solver stops or gives wrong answers")
    _emit(out, ctx, distorted, "elements.distorted", "error",
          "elements have a negative Jacobian at a corner (concave, twisted or folded): "
          "the element stiffness is unreliable")
    _emit(out, ctx, clockwise, "elements.clockwise", "warning",
          "plane elements run clockwise seen from +z (the reverse of the usual "
          "counter-clockwise order): negative area for solvers that expect it")
    out += _duplicates(ctx, sorted_rows)
    out += _mixed_dimension(ctx)
    return out


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
          text: str) -> None:
    if hits.count:
        out.append(Finding(code, severity, hits.count, f"{hits.count} {text}",
                           element_ids=hits.ids(ctx), element_id_kind=ctx.element_id_kind,
                           where=hits.where(ctx)))


def _duplicates(ctx: CheckContext, sorted_rows: dict[int, NDArray[np.int64]],
                ) -> list[Finding]:
    """Coupling elements with the same node set as an earlier one (over all blocks).

    Two cells with one node set have the same facets, hence the same
    smallest facet group id: only cells sharing it are compared.
    """
    t = ctx.table
    hits = _Hits.empty()
    smallest = [t.cell_first_facet[ctx.offsets[b] + rows]
                for b, rows in zip(t.entry_block, t.entry_rows)]
    key = np.concatenate(smallest)
    width = max(ctx.model.cells[b].data.shape[1] for b in t.entry_block)
    rows_sorted = np.full((len(key), width), -1, dtype=np.int64)
    at = 0
    for b, rows in zip(t.entry_block, t.entry_rows):
        d = sorted_rows[int(b)][rows]
        rows_sorted[at:at + len(rows), width - d.shape[1]:] = d
        at += len(rows)
    later = _later_copies(key, rows_sorted, len(t.multiplicity))
    at = 0
    for b, rows in zip(t.entry_block, t.entry_rows):
        hits.add(int(b), later[at:at + len(rows)], rows)
        at += len(rows)
    out: list[Finding] = []
    _emit(out, ctx, hits, "elements.duplicate", "error",
          "elements repeat the node set of another element: their stiffness counts twice")
    return out


@numba.njit(cache=True, nogil=True)
def _later_copies(key, rows, n_keys):  # pragma: no cover - compiled
    """True for each row equal to an earlier row with the same key (chained per key)."""
    head = np.full(n_keys, -1, dtype=np.int64)
    nxt = np.full(key.size, -1, dtype=np.int64)
    later = np.zeros(key.size, dtype=np.bool_)
    for c in range(key.size):
        g = key[c]
        o = head[g]
        while o != -1 and not later[c]:
            same = True
            for a in range(rows.shape[1]):
                if rows[o, a] != rows[c, a]:
                    same = False
                    break
            later[c] = same
            o = nxt[o]
        nxt[c] = head[g]
        head[g] = c
    return later


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
          "elements differ in dimension from the rest of their part (a beam in a solid, a "
          "plate on a frame): check that the joint transmits what is meant, rotations "
          "included")
    return out
