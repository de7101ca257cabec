"""Reduce mesh-sized data to picture-sized data before anything is drawn.

A million-row matrix cannot be drawn one marker per nonzero, nor a curve one
vertex per row, in seconds and in a small file.  These functions bin the
sparsity pattern into a fixed grid of counts and reduce long curves to their
minimum and maximum per bin, so that the picture loses no peak.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph
from bandwise.core.model import check_permutation, inverse_permutation


@dataclass(frozen=True)
class PatternImage:
    """The nonzero pattern of a symmetric matrix, binned.

    Attributes
    ----------
    counts
        ``(bins, bins)`` number of nonzeros (diagonal included) in each cell;
        row bin first.  With ``bins == n`` each cell is one matrix entry.
    n
        Order of the matrix.
    nnz
        Number of nonzeros, diagonal included (``counts.sum()``).
    """

    counts: NDArray[np.int64]
    n: int
    nnz: int

    @property
    def bins(self) -> int:
        """Cells along each side of the image."""
        return int(self.counts.shape[0])


@numba.njit(cache=True, nogil=True)
def _binned_pattern(indptr, indices, pos, bins):  # pragma: no cover - compiled
    """counts[r, c] += 1 for every entry (pos[v], pos[u]) and the diagonal."""
    n = indptr.size - 1
    counts = np.zeros((bins, bins), dtype=np.int64)
    for v in range(n):
        r = pos[v] * bins // n
        counts[r, r] += 1
        for t in range(indptr[v], indptr[v + 1]):
            counts[r, pos[indices[t]] * bins // n] += 1
    return counts


def pattern_image(graph: NodeGraph, perm: NDArray[np.integer] | None = None,
                  bins: int = 600) -> PatternImage:
    """Bin the pattern of the graph's matrix (diagonal included) under ``perm``.

    Parameters
    ----------
    graph
        The node graph: its adjacency plus the diagonal is the node-level
        pattern of the stiffness matrix.
    perm
        New order ``perm[new] = old``; None keeps the current numbering.
    bins
        Cells along each side; matrices of order ``n <= bins`` are binned one
        entry per cell (an exact picture).

    Returns
    -------
    PatternImage

    Notes
    -----
    One compiled pass over the adjacency: O(n + nnz) time, O(bins^2) memory.
    """
    n = graph.n
    k = max(1, min(int(bins), n))
    if n == 0:
        return PatternImage(np.zeros((1, 1), dtype=np.int64), 0, 0)
    if perm is None:
        pos = np.arange(n, dtype=np.int64)
    else:
        pos = inverse_permutation(check_permutation(perm, n)).astype(np.int64)
    counts = _binned_pattern(graph.indptr, graph.indices, pos, k)
    return PatternImage(counts, n, int(graph.indices.size + n))


@dataclass(frozen=True)
class Envelope:
    """A long curve reduced to its lowest and highest value per bin.

    Attributes
    ----------
    start
        First index of each bin (a step curve holds each value to the next start).
    lower, upper
        Minimum and maximum of the curve over each bin.
    length
        Length of the original curve.
    """

    start: NDArray[np.int64]
    lower: NDArray[np.int64]
    upper: NDArray[np.int64]
    length: int


def envelope(values: NDArray[np.integer], max_points: int = 2000) -> Envelope:
    """Reduce ``values`` to at most ``max_points`` bins of (min, max).

    Curves no longer than ``max_points`` are kept whole.  Every peak of the
    original curve is the ``upper`` value of its bin, so the reduced plot
    shows the same maximum as the full one.
    """
    y = np.asarray(values)
    n = int(y.size)
    if n <= max_points:
        return Envelope(np.arange(n, dtype=np.int64), y.astype(np.int64),
                        y.astype(np.int64), n)
    starts = np.unique(np.linspace(0, n, max_points + 1).astype(np.int64)[:-1])
    return Envelope(starts, np.minimum.reduceat(y, starts).astype(np.int64),
                    np.maximum.reduceat(y, starts).astype(np.int64), n)
