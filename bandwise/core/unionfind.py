"""Disjoint sets (union-find) over ``0 .. n-1``, as compiled kernels.

Concern: the one union-find of bandwise, used for the face-connected blocks of
cells (:mod:`bandwise.algorithms.topology`) and the connected parts of nodes
(:mod:`bandwise.algorithms.checks.context`).  The forest is a plain int64 array
``parent`` with ``parent[x] == x`` at a root, started as ``np.arange(n)``; the
caller owns it and passes it to every kernel.

Rules: :func:`union` hangs the larger root under the smaller, so the root of
every set is its smallest member and the sets' roots do not depend on the
order of the unions; :func:`find` hangs every node of the path it walks
directly under the root (path compression).

Cost: linking by index with path compression does m operations on n elements
in O(m log n) at worst (Tarjan and van Leeuwen 1984); on meshes the trees stay
a few levels deep and a pass is about linear.

numba caches each kernel with the module that calls it: after editing this
file, delete the cache entries of its callers (DEVELOPERS.md, Benchmarks).

References
----------
B. A. Galler and M. J. Fischer, "An improved equivalence algorithm",
Comm. ACM 7 (1964) 301-303.
R. E. Tarjan and J. van Leeuwen, "Worst-case analysis of set union
algorithms", J. ACM 31 (1984) 245-281.
"""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def find(parent, x):  # pragma: no cover - compiled
    """Root of ``x``; every node on the path is hung directly under the root."""
    root = x
    while parent[root] != root:
        root = parent[root]
    while parent[x] != root:
        nxt = parent[x]
        parent[x] = root
        x = nxt
    return root


@numba.njit(cache=True, nogil=True)
def union(parent, a, b):  # pragma: no cover - compiled
    """Join the sets of ``a`` and ``b``: the larger root goes under the smaller.

    Returns nothing (a returned root measurably slows the facet pass's hot loop).
    """
    ra = find(parent, a)
    rb = find(parent, b)
    if ra < rb:
        parent[rb] = ra
    elif rb < ra:
        parent[ra] = rb


@numba.njit(cache=True, nogil=True)
def union_rows(data, rows, parent):  # pragma: no cover - compiled
    """Join the entries of every listed row of ``data`` (the nodes of a cell) into one set."""
    for ri in range(rows.size):
        e = rows[ri]
        a = find(parent, data[e, 0])
        for k in range(1, data.shape[1]):
            b = find(parent, data[e, k])
            if a < b:
                parent[b] = a
            elif b < a:
                parent[a] = b
                a = b


@numba.njit(cache=True, nogil=True)
def roots(parent):  # pragma: no cover - compiled
    """Root (smallest member of its set) of every element."""
    out = np.empty(parent.size, dtype=np.int64)
    for v in range(parent.size):
        out[v] = find(parent, v)
    return out


@numba.njit(cache=True, nogil=True)
def compact_labels(parent, keep):  # pragma: no cover - compiled
    """Sets numbered 0, 1, ... in order of their first kept element; -1 where not ``keep``.

    Returns (label of every element, number of sets met).
    """
    n = parent.size
    label_of_root = np.full(n, -1, dtype=np.int64)
    labels = np.full(n, -1, dtype=np.int64)
    count = 0
    for c in range(n):
        if not keep[c]:
            continue
        r = find(parent, c)
        if label_of_root[r] == -1:
            label_of_root[r] = count
            count += 1
        labels[c] = label_of_root[r]
    return labels, count
