"""Tests of the Cuthill-McKee, reverse Cuthill-McKee, GPS and Sloan orderings.

Checked against sources outside bandwise: theorems (Liu and Sherman 1976 on
reversal; the degree bound on bandwidth; exact bandwidths of paths, stars
and grids), reference libraries (networkx's breadth-first layers and
diameter, scipy's reverse Cuthill-McKee) and the published reverse
Cuthill-McKee bandwidths of the open test matrices (SuiteSparse index).
"""

from __future__ import annotations

import csv
import itertools
import math
from collections import deque

import networkx as nx
import numpy as np
import pytest
import scipy.io
from conftest import shared_path
from hypothesis import given
from hypothesis import strategies as st
from scipy.sparse.csgraph import connected_components
from scipy.sparse.csgraph import reverse_cuthill_mckee as scipy_rcm

from bandwise.algorithms.orderings import ORDERINGS
from bandwise.algorithms.orderings._levels import pseudo_diameter, rooted_levels
from bandwise.algorithms.orderings.cuthill_mckee import cuthill_mckee, reverse_cuthill_mckee
from bandwise.algorithms.orderings.gps import gps
from bandwise.algorithms.orderings.sloan import sloan
from bandwise.core.errors import InputError
from bandwise.core.generate import (
    hex_grid,
    line_frame,
    quad_grid,
    scrambled,
    tet_grid,
    triangle_grid,
)
from bandwise.core.graph import NodeGraph, graph_from_matrix, node_graph
from bandwise.core.metrics import metrics
from bandwise.core.model import CellBlock, Model

ORDERS = {
    "cm": cuthill_mckee,
    "rcm": reverse_cuthill_mckee,
    "gps": gps,
    "sloan": sloan,
    "sloan(1,2)": lambda g: sloan(g, w1=1.0, w2=2.0),
}


# ---------------------------------------------------------------- helpers


def graph_of_edges(n: int, edges: list[tuple[int, int]]) -> NodeGraph:
    """The graph of a frame of two-node members (points unused)."""
    return node_graph(line_frame(np.zeros((n, 2)), np.array(edges, dtype=np.int64)))


def grid_graph(nx_: int, ny: int) -> NodeGraph:
    """The 5-point grid graph of nx_ x ny nodes, numbered row by row."""
    idx = np.arange(nx_ * ny).reshape(ny, nx_)
    edges = np.r_[np.c_[idx[:, :-1].ravel(), idx[:, 1:].ravel()],
                  np.c_[idx[:-1, :].ravel(), idx[1:, :].ravel()]]
    pts = np.c_[np.tile(np.arange(nx_), ny), np.repeat(np.arange(ny), nx_)].astype(float)
    return node_graph(line_frame(pts, edges))


def as_networkx(graph: NodeGraph) -> nx.Graph:
    g = nx.Graph()
    g.add_nodes_from(range(graph.n))
    for v in range(graph.n):
        g.add_edges_from((v, int(u)) for u in graph.neighbours(v) if u > v)
    return g


def part_labels(graph: NodeGraph) -> np.ndarray:
    return connected_components(graph.to_scipy(), directed=False)[1]


def is_part_contiguous(graph: NodeGraph, perm: np.ndarray) -> bool:
    """Every connected part occupies one run of consecutive new numbers."""
    labels = part_labels(graph)[perm]
    runs = 1 + np.count_nonzero(labels[1:] != labels[:-1])
    return runs == np.unique(labels).size


@st.composite
def random_meshes(draw) -> NodeGraph:
    """Small grids of several element types with a random subset of cells removed.

    Removing cells splits the mesh into parts and leaves orphan nodes, so
    graphs with several parts and isolated nodes occur; the numbering is
    scrambled.
    """
    kind = draw(st.sampled_from(["quad", "triangle", "hex", "tet"]))
    if kind in ("quad", "triangle"):
        shape = (draw(st.integers(2, 9)), draw(st.integers(2, 9)))
        model = (quad_grid if kind == "quad" else triangle_grid)(*shape)
    else:
        shape = tuple(draw(st.integers(2, 4)) for _ in range(3))
        model = (hex_grid if kind == "hex" else tet_grid)(*shape)
    seed = draw(st.integers(0, 2**32 - 1))
    drop = draw(st.floats(0.0, 0.95))
    rng = np.random.default_rng(seed)
    block = model.cells[0]
    keep = rng.random(len(block.data)) >= drop
    cut = Model(points=model.points, cells=[CellBlock(block.type, block.data[keep])])
    return node_graph(scrambled(cut, seed=seed % 1000))


def reference_cuthill_mckee_sweep(graph: NodeGraph, root: int) -> list[int]:
    """Slow, obvious Cuthill-McKee from ``root``: breadth first, new neighbours by degree."""
    deg = graph.degrees()
    seen = {root}
    order = [root]
    queue = deque([root])
    while queue:
        v = queue.popleft()
        new = [int(u) for u in graph.neighbours(v) if int(u) not in seen]
        new.sort(key=lambda u: deg[u])          # stable: ties keep index order
        seen.update(new)
        order.extend(new)
        queue.extend(new)
    return order


def reference_sloan(graph: NodeGraph, start: int, dist: np.ndarray,
                    w1: float, w2: float) -> list[int]:
    """Slow Sloan numbering of one part with a plain list as the queue.

    Transcribed from the algorithm of S. W. Sloan, IJNME 23 (1986) 239-251
    (statuses inactive / preactive / active / postactive;
    priority W1 * dist - W2 * (current degree + 1)); the queue is searched
    for its highest priority, ties to the lowest node.
    """
    inactive, preactive, active, postactive = range(4)
    deg = graph.degrees()
    status = dict.fromkeys(range(graph.n), inactive)
    prio = {v: w1 * dist[v] - w2 * (deg[v] + 1) for v in range(graph.n)}
    queue = {start}
    status[start] = preactive
    out = []
    while queue:
        i = max(queue, key=lambda v: (prio[v], -v))
        queue.remove(i)
        if status[i] == preactive:
            for j in map(int, graph.neighbours(i)):
                if status[j] == postactive:
                    continue
                prio[j] += w2
                if status[j] == inactive:
                    status[j] = preactive
                    queue.add(j)
        out.append(i)
        status[i] = postactive
        for j in map(int, graph.neighbours(i)):
            if status[j] != preactive:
                continue
            status[j] = active
            prio[j] += w2
            for k in map(int, graph.neighbours(j)):
                if status[k] == postactive:
                    continue
                prio[k] += w2
                if status[k] == inactive:
                    status[k] = preactive
                    queue.add(k)
    return out


# ------------------------------------------------ invariants on random meshes


@given(random_meshes())
def test_every_ordering_is_a_permutation_numbering_parts_contiguously(graph):
    # An ordering is a permutation (each index once), and each connected part
    # is numbered as one block: the definition of ordering "part after part"
    # (common practice; George and Liu 1981, ch. 4, number components apart).
    for name, order in ORDERS.items():
        perm = order(graph)
        assert perm.dtype == np.int64, name
        assert np.array_equal(np.sort(perm), np.arange(graph.n)), name
        assert is_part_contiguous(graph, perm), name


@given(random_meshes())
def test_reversal_never_increases_the_profile(graph):
    # W.-H. Liu and A. H. Sherman, SIAM J. Numer. Anal. 13 (1976) 198-213,
    # theorem: the reverse of a Cuthill-McKee ordering has profile no larger
    # than the ordering itself; reversal leaves the bandwidth unchanged.
    cm = metrics(graph, cuthill_mckee(graph))
    rcm = metrics(graph, reverse_cuthill_mckee(graph))
    assert rcm.profile <= cm.profile
    assert rcm.bandwidth == cm.bandwidth


@given(random_meshes())
def test_bandwidth_is_at_least_half_the_largest_degree(graph):
    # A node of degree d has neighbours on at most b positions on each side
    # of it, so b >= ceil(d / 2) (common practice; listed, from memory, in
    # Chinn, Chvatalova, Dewdney and Gibbs, J. Graph Theory 6 (1982) 223-254).
    bound = math.ceil(int(graph.degrees().max(initial=0)) / 2)
    for name, order in ORDERS.items():
        assert metrics(graph, order(graph)).bandwidth >= bound, name


@given(random_meshes())
def test_bandwidth_is_at_least_the_diameter_bound(graph):
    # For a connected part of n_p nodes and diameter D, any numbering has
    # b >= ceil((n_p - 1) / D): a shortest path between the first and last
    # node of the part covers n_p - 1 positions in D steps (common practice;
    # Chinn et al. 1982, from memory).  A part's induced
    # numbering is no wider than the whole, so the bound holds for the graph.
    ng = as_networkx(graph)
    bound = max((math.ceil((len(c) - 1) / nx.diameter(ng.subgraph(c)))
                 for c in nx.connected_components(ng) if len(c) > 1), default=0)
    for name, order in ORDERS.items():
        assert metrics(graph, order(graph)).bandwidth >= bound, name


@given(random_meshes())
def test_sloan_key_numbers_in_decreasing_key(graph):
    # The key replaces Sloan's distance term: with the global weight large
    # against the local one, each part is numbered in decreasing key
    # (Sloan 1986, priority P = W1 * global - W2 * local).
    key = -np.arange(graph.n, dtype=np.float64)
    perm = sloan(graph, w1=1e6, w2=1.0, key=key)
    labels = part_labels(graph)[perm]
    for part in np.unique(labels):
        keys = key[perm[labels == part]]
        # within a part, numbering follows the key as far as adjacency lets it:
        # the first node is the part's largest key
        assert keys[0] == keys.max()


# -------------------------------------------------------- exact small cases


def test_path_is_numbered_end_to_end():
    # Path 0-2-1-3 (scrambled labels): its bandwidth is 1 and profile n - 1,
    # the optimum, from either end.  Cuthill-McKee starts at the lowest
    # node of least degree (0), already peripheral (George and Liu 1979 stop
    # at once when the depth equals the size): 0, 2, 1, 3.
    g = graph_of_edges(4, [(0, 2), (2, 1), (1, 3)])
    assert cuthill_mckee(g).tolist() == [0, 2, 1, 3]
    assert reverse_cuthill_mckee(g).tolist() == [3, 1, 2, 0]
    for name, order in ORDERS.items():
        m = metrics(g, order(g))
        assert (m.bandwidth, m.profile) == (1, 3), name


def test_star_shows_what_reversal_gains():
    # Star: centre 0, leaves 1..5 (computed by hand).  Cuthill-McKee from a
    # leaf numbers the centre second and then all other leaves: order
    # 2, 0, 1, 3, 4, 5 (George-Liu moves the start from leaf 1 to leaf 2,
    # the first of least degree in the last level), bandwidth 4, profile
    # 0+1+1+2+3+4 = 11.  Reversed, four leaves come before the centre:
    # profile 4 + 1 = 5, the least possible (centre at position c gives
    # c + sum_{k<=5-c} k, smallest 5 at c = 4 or 5): the classic case for
    # reversing (Liu and Sherman 1976; the star example from memory).
    g = graph_of_edges(6, [(0, k) for k in range(1, 6)])
    cm, rcm = cuthill_mckee(g), reverse_cuthill_mckee(g)
    assert cm.tolist() == [2, 0, 1, 3, 4, 5]
    assert rcm.tolist() == [5, 4, 3, 1, 0, 2]
    assert (metrics(g, cm).bandwidth, metrics(g, cm).profile) == (4, 11)
    assert (metrics(g, rcm).bandwidth, metrics(g, rcm).profile) == (4, 5)
    # Sloan, built for profile, reaches the least profile too.
    assert metrics(g, sloan(g)).profile == 5
    # GPS numbers level by level in a combined structure and reaches the
    # star's bandwidth ceil(5/2) = 3 (the bandwidth of K_{1,m} is
    # ceil(m/2), which our hand count confirms for m = 5: the centre at
    # position 3 has leaves 3 away on both sides; Chinn et al. 1982, from memory).
    assert metrics(g, gps(g)).bandwidth == 3


def test_three_by_three_grid_gets_the_diagonal_numbering():
    # 3 x 3 grid graph (5-point), nodes row by row:
    #   6 7 8
    #   3 4 5
    #   0 1 2
    # Start: corner 0 (least degree 2); George-Liu finds the opposite corner
    # 8 in the last level, no deeper: root 8.  Breadth first with new
    # neighbours by degree: 8 | 5 7 | 2 4 6 | 1 3 | 0 (within 5's new
    # neighbours, 2 (degree 2) before 4 (degree 4)).  Reversed:
    # 0 3 1 6 4 2 7 5 8.  The bandwidth of the n x n grid is n = 3
    # (J. Chvatalova, Discrete Math. 11 (1975) 249-253, from memory; checked
    # here by exhaustive search over all 9! numberings); the profile is
    # 0+1+2+2+3+3+3+3+2 = 19 (by hand).
    g = grid_graph(3, 3)
    positions = np.array(list(itertools.permutations(range(9))), dtype=np.int8)
    u, v = np.repeat(np.arange(9), np.diff(g.indptr)), g.indices
    assert np.abs(positions[:, u] - positions[:, v]).max(axis=1).min() == 3
    assert cuthill_mckee(g).tolist() == [8, 5, 7, 2, 4, 6, 1, 3, 0]
    assert reverse_cuthill_mckee(g).tolist() == [0, 3, 1, 6, 4, 2, 7, 5, 8]
    for name, order in ORDERS.items():
        assert metrics(g, order(g)).bandwidth == 3, name
    assert metrics(g, reverse_cuthill_mckee(g)).profile == 19


def test_isolated_nodes_and_empty_graph():
    # No edges: every node is its own part; any order is a permutation.
    g = graph_of_edges(5, [(1, 3)])
    for name, order in ORDERS.items():
        perm = order(g)
        assert sorted(perm.tolist()) == [0, 1, 2, 3, 4], name
        assert is_part_contiguous(g, perm), name
    empty = NodeGraph(np.zeros(1, dtype=np.int64), np.zeros(0, dtype=np.int32))
    for name, order in ORDERS.items():
        assert order(empty).size == 0, name


# ---------------------------------------------- kernels against references


@pytest.mark.parametrize("model", [quad_grid(6, 4), tet_grid(4, 3, 3)], ids=["quad", "tet"])
def test_level_structure_equals_networkx_breadth_first_layers(model):
    # networkx.bfs_layers: the rooted level structure by definition.
    g = node_graph(scrambled(model, seed=3))
    ref = [sorted(layer) for layer in nx.bfs_layers(as_networkx(g), [5])]
    assert [sorted(level.tolist()) for level in rooted_levels(g, 5)] == ref


@pytest.mark.parametrize("model", [quad_grid(7, 4), triangle_grid(5, 5), tet_grid(4, 3, 5)],
                         ids=["quad", "triangle", "tet"])
def test_pseudo_diameter_of_a_grid_is_a_diameter(model):
    # On these box meshes the search ends at a true diameter: the distance
    # between the ends equals networkx's diameter (for George and Liu 1979
    # a pseudo-peripheral node's eccentricity is close to the diameter; on
    # boxes it is exact, common practice).
    g = node_graph(scrambled(model, seed=5))
    s, e = pseudo_diameter(g, np.arange(g.n))
    ng = as_networkx(g)
    assert nx.shortest_path_length(ng, s, e) == nx.diameter(ng)
    assert len(rooted_levels(g, s)) - 1 == nx.diameter(ng)


def test_pseudo_diameter_rejects_bad_parts():
    g = grid_graph(3, 3)
    with pytest.raises(InputError):
        pseudo_diameter(g, np.array([], dtype=np.int64))
    with pytest.raises(InputError):
        pseudo_diameter(g, np.array([9]))
    assert pseudo_diameter(graph_of_edges(3, [(0, 1)]), [2]) == (2, 2)


@pytest.mark.parametrize("model", [quad_grid(6, 5), tet_grid(3, 4, 3)], ids=["quad", "tet"])
def test_cuthill_mckee_equals_the_slow_reference(model):
    # The compiled sweep against the obvious definition (Cuthill and McKee
    # 1969: breadth first, each node's unnumbered neighbours in increasing
    # degree), from the root our ordering chose.
    g = node_graph(scrambled(model, seed=11))
    perm = cuthill_mckee(g)
    assert perm.tolist() == reference_cuthill_mckee_sweep(g, int(perm[0]))


@pytest.mark.parametrize("model", [quad_grid(7, 5), triangle_grid(6, 4), tet_grid(3, 3, 4)],
                         ids=["quad", "triangle", "tet"])
@pytest.mark.parametrize("weights", [(2.0, 1.0), (1.0, 2.0)])
def test_sloan_heap_equals_the_list_queue_of_the_paper(model, weights):
    g = node_graph(scrambled(model, seed=2))
    s, e = pseudo_diameter(g, np.arange(g.n))
    dist = np.empty(g.n)
    for d, level in enumerate(rooted_levels(g, e)):
        dist[level] = d
    assert sloan(g, *weights).tolist() == reference_sloan(g, s, dist, *weights)


def test_sloan_rejects_bad_options():
    g = grid_graph(3, 3)
    with pytest.raises(InputError):
        sloan(g, w1=float("inf"))
    with pytest.raises(InputError):
        sloan(g, w2=-1.0)
    with pytest.raises(InputError):
        sloan(g, w1="two")
    with pytest.raises(InputError):
        sloan(g, key=np.zeros(4))
    with pytest.raises(InputError):
        sloan(g, key=np.full(9, np.nan))


@pytest.mark.parametrize("module", ["_levels", "cuthill_mckee", "gps", "sloan"])
def test_docstring_examples(module):
    import doctest
    import importlib

    result = doctest.testmod(importlib.import_module(f"bandwise.algorithms.orderings.{module}"))
    assert result.attempted > 0
    assert result.failed == 0


def test_orderings_are_registered():
    assert {"cm", "rcm", "gps", "sloan"} <= set(ORDERINGS)
    assert ORDERINGS["rcm"].func is reverse_cuthill_mckee
    assert ORDERINGS["sloan"].objective == "profile"


# ------------------------------------------------- the open test matrices


@pytest.fixture(scope="module")
def matrices():
    """Every test matrix with its published figures: (name, graph, row)."""
    folder = shared_path("matrices")
    rows = list(csv.DictReader((folder / "published.csv").open()))
    return [(r["name"], graph_from_matrix(scipy.io.mmread(folder / f"{r['name']}.mtx")), r)
            for r in rows]


def test_rcm_meets_the_published_bandwidths(matrices):
    # SuiteSparse index (Davis and Hu, ACM TOMS 38(1), 2011), column
    # bandwidth_rcm_index: the collection's own RCM.  Target of issue 15:
    # ours at most the published figure on every matrix.
    above = [(name, metrics(g, reverse_cuthill_mckee(g)).bandwidth, r["bandwidth_rcm_index"])
             for name, g, r in matrices
             if metrics(g, reverse_cuthill_mckee(g)).bandwidth > int(r["bandwidth_rcm_index"])]
    assert len(matrices) == 77
    assert above == []


def test_rcm_profile_against_networkx(matrices):
    # networkx.utils.reverse_cuthill_mckee_ordering (a pseudo-peripheral
    # start per component) as the reference: our profile never more than 5%
    # above it on any matrix (target of issue 15; both are RCM and differ in
    # the start node and in how ties between equal degrees are broken).
    from networkx.utils import reverse_cuthill_mckee_ordering

    worse = []
    for name, g, _ in matrices:
        ref = np.fromiter(reverse_cuthill_mckee_ordering(as_networkx(g)), np.int64, g.n)
        ratio = metrics(g, reverse_cuthill_mckee(g)).profile / max(metrics(g, ref).profile, 1)
        if ratio > 1.05:
            worse.append((name, round(ratio, 3)))
    assert worse == []


def test_rcm_against_scipy_and_the_reversal_theorem(matrices):
    # scipy.sparse.csgraph.reverse_cuthill_mckee as the reference: never
    # more than 10% wider (target of issue 3); profile within 30% on each
    # matrix and no larger in geometric mean (stated tolerance: both are
    # RCM, they differ only in the start node).  Liu and Sherman (1976):
    # RCM profile <= CM's.
    prof = []
    for name, g, _ in matrices:
        ref = metrics(g, scipy_rcm(g.to_scipy(), symmetric_mode=True).astype(np.int64))
        ours = metrics(g, reverse_cuthill_mckee(g))
        assert ours.bandwidth <= 1.1 * ref.bandwidth, name
        assert ours.profile <= 1.3 * ref.profile, name
        assert ours.profile <= metrics(g, cuthill_mckee(g)).profile, name
        prof.append(ours.profile / ref.profile)
    assert np.exp(np.mean(np.log(prof))) <= 1.0


SOME = ["can_1072", "dwt_2680", "bcsstk13", "1138_bus", "jagmesh7", "bcspwr10"]


def test_gps_and_sloan_against_scipy_rcm(matrices):
    # GPS (1976) reports bandwidths as good as RCM's or better; Sloan (1989,
    # tables on Everstine's set) reports profiles well below RCM's.  Stated
    # tolerances: GPS bandwidth within 25% and profile within 30% of scipy's
    # RCM on each matrix, bandwidth below it in geometric mean; Sloan profile
    # within 10% of scipy's RCM on each matrix, below it on each of a few,
    # and at most 0.8 of it in geometric mean.
    band, prof = [], []
    for name, g, _ in matrices:
        ref = metrics(g, scipy_rcm(g.to_scipy(), symmetric_mode=True).astype(np.int64))
        m_gps, m_sloan = metrics(g, gps(g)), metrics(g, sloan(g))
        assert m_gps.bandwidth <= 1.25 * ref.bandwidth, name
        assert m_gps.profile <= 1.3 * ref.profile, name
        assert m_sloan.profile <= 1.1 * ref.profile, name
        if name in SOME:
            assert m_sloan.profile < ref.profile, name
        band.append(m_gps.bandwidth / ref.bandwidth)
        prof.append(m_sloan.profile / ref.profile)
    assert np.exp(np.mean(np.log(band))) < 1.0
    assert np.exp(np.mean(np.log(prof))) <= 0.8
