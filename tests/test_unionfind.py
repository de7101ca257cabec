"""The one union-find (bandwise.core.unionfind) against networkx's connected components.

A union of the two ends of every edge of a graph leaves one set per connected
component (Galler and Fischer, "An improved equivalence algorithm", Comm. ACM 7
(1964) 301-303); the reference is networkx.connected_components on the same
random graphs.  The root of each set is its smallest member, by the linking
rule (larger root under smaller) the module states.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from bandwise.core.unionfind import compact_labels, find, roots, union, union_rows


@st.composite
def graphs(draw):
    """(n, edges, seed): a random graph of up to 60 vertices, isolated ones included."""
    n = draw(st.integers(1, 60))
    m = draw(st.integers(0, 2 * n))
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    edges = rng.integers(0, n, size=(m, 2)).astype(np.int64)
    return n, edges, seed


def _reference(n: int, edges: np.ndarray) -> list[frozenset[int]]:
    g = nx.Graph()
    g.add_nodes_from(range(n))
    g.add_edges_from(map(tuple, edges.tolist()))
    return sorted((frozenset(c) for c in nx.connected_components(g)), key=min)


def _sets(labels: np.ndarray) -> list[frozenset[int]]:
    out: dict[int, set[int]] = {}
    for v, lab in enumerate(labels.tolist()):
        out.setdefault(lab, set()).add(v)
    return sorted((frozenset(s) for s in out.values()), key=min)


@given(graphs())
def test_pairwise_unions_give_the_connected_components(case):
    n, edges, seed = case
    parent = np.arange(n, dtype=np.int64)
    # the edges in a shuffled order: the sets do not depend on it
    for a, b in edges[np.random.default_rng(seed).permutation(len(edges))]:
        union(parent, a, b)
    want = _reference(n, edges)
    root = roots(parent)
    assert _sets(root) == want
    # each set's root is its smallest member, and find agrees with roots
    assert all(root[v] == min(c) for c in want for v in c)
    assert [find(parent, v) for v in range(n)] == root.tolist()


@given(graphs(), st.integers(2, 4))
def test_union_of_rows_joins_each_row_like_a_clique(case, width):
    # a cell of `width` nodes couples them all: networkx gets the row as a path,
    # which has the same components as the clique
    n, edges, seed = case
    rng = np.random.default_rng(seed)
    data = rng.integers(0, n, size=(max(len(edges) // 2, 1), width)).astype(np.int64)
    rows = np.flatnonzero(rng.random(len(data)) < 0.7).astype(np.int64)
    parent = np.arange(n, dtype=np.int64)
    union_rows(data, rows, parent)
    path_edges = np.concatenate([data[rows][:, [k, k + 1]] for k in range(width - 1)])
    want = _reference(n, path_edges)
    assert _sets(roots(parent)) == want


@given(graphs())
def test_compact_labels_number_sets_by_first_kept_member(case):
    n, edges, seed = case
    parent = np.arange(n, dtype=np.int64)
    for a, b in edges:
        union(parent, a, b)
    keep = np.random.default_rng(seed).random(n) < 0.8
    labels, count = compact_labels(parent, keep)
    want = [c for c in _reference(n, edges)]
    kept = [frozenset(v for v in c if keep[v]) for c in want]
    kept = sorted((c for c in kept if c), key=min)
    assert count == len(kept)
    assert (labels[~keep] == -1).all()
    # labels 0, 1, ... in order of each set's first kept element
    assert [int(labels[min(c)]) for c in kept] == list(range(count))
    assert all(len({int(labels[v]) for v in c}) == 1 for c in kept)
