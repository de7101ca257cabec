"""Bandwidth, profile, wavefront and storage of a symmetric matrix under an ordering.

Definitions (George and Liu 1981; Sloan 1986; Everstine 1979).  For the
symmetric matrix A under an ordering, row i (0-based) and
``f_i = min{ j : a_ij != 0 }`` (j <= i, the diagonal counts):

- row bandwidth ``b_i = i - f_i``; **bandwidth** ``b = max b_i`` (the
  semi-bandwidth, diagonal excluded; texts that quote ``2b + 1`` or ``b + 1``
  count the diagonal);
- **profile** (envelope size) ``P = sum b_i``, diagonal excluded; skyline
  (active-column) storage holds ``P + n`` entries;
- **wavefront** at step i: the number of rows ``k >= i`` with ``f_k <= i``,
  row i itself included; its maximum and root-mean-square over i;
- **envelope factorisation work**: ``sum b_i (b_i + 3) / 2`` multiplications
  (George and Liu 1981, ch. 4).

At DOF level each node carries ``d`` DOFs numbered node after node
(node-blocked): node row i becomes rows ``d*i + a``.  For uniform ``d``,
``b_dof = d*b + d - 1`` and ``P_dof = sum_i (d^2 b_i + d(d-1)/2)``; mixed
counts per node are handled exactly through DOF offsets.

References
----------
A. George and J. W. H. Liu, *Computer Solution of Large Sparse Positive
Definite Systems*, Prentice-Hall, 1981.
S. W. Sloan, "An algorithm for profile and wavefront reduction of sparse
matrices", Int. J. Numer. Meth. Eng. 23 (1986) 239-251.
G. C. Everstine, "A comparison of three resequencing algorithms for the
reduction of matrix profile and wavefront", Int. J. Numer. Meth. Eng. 14
(1979) 837-853.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from .dofs import DofLayout
from .graph import NodeGraph
from .model import check_permutation, order_and_positions

#: Bytes of one stored matrix value (double precision).
VALUE_BYTES = 8
#: Bytes of one stored index or pointer (64-bit integers).
INDEX_BYTES = 8


@dataclass(frozen=True)
class Metrics:
    """Figures of one ordering at one level (nodes, or DOFs).

    Attributes
    ----------
    n_rows
        Order of the matrix (nodes, or DOFs).
    bandwidth
        Semi-bandwidth ``max(i - f_i)``, diagonal excluded.
    profile
        Envelope size ``sum(i - f_i)``, diagonal excluded.
    max_wavefront, rms_wavefront
        Maximum and root-mean-square wavefront, row itself included.
    envelope_ops
        Multiplications of an envelope (skyline) Cholesky factorisation.
    banded_bytes
        Storage of the lower band incl. diagonal, ``n (b + 1)`` values.
    skyline_bytes
        Skyline storage: ``P + n`` values and ``n + 1`` pointers.
    """

    n_rows: int
    bandwidth: int
    profile: int
    max_wavefront: int
    rms_wavefront: float
    envelope_ops: int
    banded_bytes: int
    skyline_bytes: int

    def to_dict(self) -> dict[str, float | int]:
        """The figures as a plain dict (for JSON)."""
        return asdict(self)


@numba.njit(cache=True, nogil=True)
def _first_columns(indptr, indices, pos):  # pragma: no cover - compiled
    """f[v] = min(pos[v], pos[u] for u adjacent to v), indexed by old vertex."""
    n = indptr.size - 1
    f = np.empty(n, dtype=np.int64)
    for v in range(n):
        m = pos[v]
        for t in range(indptr[v], indptr[v + 1]):
            p = pos[indices[t]]
            m = min(m, p)
        f[v] = m
    return f


def first_columns(graph: NodeGraph, perm: NDArray[np.integer] | None = None) -> NDArray[np.int64]:
    """Column of the first nonzero of each row, rows in the new order.

    Parameters
    ----------
    graph
        The node graph (old numbering).
    perm
        New order ``perm[new] = old``; None keeps the current numbering.

    Returns
    -------
    ndarray
        ``f[i]`` for row i of the reordered matrix; ``f[i] <= i``.
    """
    perm, pos = order_and_positions(perm, graph.n)
    f_old = _first_columns(graph.indptr, graph.indices, pos)
    return f_old[perm]


def _dof_counts(graph: NodeGraph, dofs: int | NDArray[np.integer] | DofLayout) -> NDArray[np.int64]:
    if isinstance(dofs, DofLayout):
        d = dofs.per_node
    elif np.isscalar(dofs):
        d = np.full(graph.n, int(dofs), dtype=np.int64)
    else:
        d = np.asarray(dofs, dtype=np.int64)
    if d.shape != (graph.n,) or (d.size and d.min() < 0):
        raise ValueError("DOF counts must be one non-negative integer per node")
    return d


def metrics(graph: NodeGraph, perm: NDArray[np.integer] | None = None,
            dofs: int | NDArray[np.integer] | DofLayout = 1) -> Metrics:
    """Bandwidth, profile, wavefront and storage of the graph's matrix under ``perm``.

    No permuted matrix is built: the first column of every row is found from
    the adjacency and the new positions, and everything else follows.

    Parameters
    ----------
    graph
        The node graph.
    perm
        New order ``perm[new] = old``; None evaluates the current numbering.
    dofs
        DOFs per node: 1 gives node-level figures; an int, one count per node
        (old numbering), or a :class:`~bandwise.core.dofs.DofLayout` gives DOF-level
        figures with DOFs numbered node after node.

    Returns
    -------
    Metrics

    Notes
    -----
    Cost O(n + nnz) time and O(n) extra memory.
    """
    f, d, off = _reordered(graph, perm, dofs)
    ndof = int(off[-1])
    if ndof == 0:
        return Metrics(0, 0, 0, 0, 0.0, 0, 0, 0)
    base = off[:-1] - off[f]          # b of the first DOF row of each node
    has = d > 0
    bandwidth = int((base + d - 1)[has].max())
    tri = d * (d - 1) // 2
    profile = int((d * base + tri).sum())
    s1 = d * base + tri
    s2 = d * base * base + 2 * base * tri + (d - 1) * d * (2 * d - 1) // 6
    envelope_ops = int(((s2 + 3 * s1) // 2).sum())
    front = _fronts(f, d, off)
    return Metrics(
        n_rows=ndof,
        bandwidth=bandwidth,
        profile=profile,
        max_wavefront=int(front.max()),
        rms_wavefront=float(np.sqrt(np.mean(front.astype(np.float64) ** 2))),
        envelope_ops=envelope_ops,
        banded_bytes=ndof * (bandwidth + 1) * VALUE_BYTES,
        skyline_bytes=(profile + ndof) * VALUE_BYTES + (ndof + 1) * INDEX_BYTES,
    )


def _reordered(graph: NodeGraph, perm: NDArray[np.integer] | None,
               dofs: int | NDArray[np.integer] | DofLayout) -> tuple[NDArray[np.int64], ...]:
    """First columns (node level), DOF counts and DOF offsets, all in the new order."""
    f = first_columns(graph, perm)
    d_old = _dof_counts(graph, dofs)
    d = d_old if perm is None else d_old[check_permutation(perm, graph.n)]
    off = np.zeros(f.size + 1, dtype=np.int64)
    np.cumsum(d, out=off[1:])
    return f, d, off


def wavefront_profile(graph: NodeGraph, perm: NDArray[np.integer] | None = None,
                      dofs: int | NDArray[np.integer] | DofLayout = 1) -> NDArray[np.int64]:
    """The wavefront at every elimination step, DOF rows in the new order (for plots)."""
    f, d, off = _reordered(graph, perm, dofs)
    return _fronts(f, d, off)


def _fronts(f: NDArray[np.int64], d: NDArray[np.int64], off: NDArray[np.int64]) -> NDArray[np.int64]:
    """Wavefront at each DOF step: rows open at step r are those with f_k <= r <= k."""
    ndof = int(off[-1])
    diff = np.bincount(off[f], weights=d, minlength=ndof + 1).astype(np.int64)
    diff[1:] -= 1
    return np.cumsum(diff[:ndof])


def column_heights(graph: NodeGraph, perm: NDArray[np.integer] | None = None,
                   dofs: int | NDArray[np.integer] | DofLayout = 1) -> NDArray[np.int64]:
    """Skyline column heights ``i - f_i`` of every DOF row, new order (for plots)."""
    f, d, off = _reordered(graph, perm, dofs)
    node_of_row = np.repeat(np.arange(f.size), d)
    return np.arange(int(off[-1]), dtype=np.int64) - off[f][node_of_row]
