"""Which orderings ``auto`` tries, and why it leaves some out.

Reference: W.-H. Liu and A. H. Sherman, "Comparative analysis of the
Cuthill-McKee and the reverse Cuthill-McKee ordering algorithms for sparse
matrices", SIAM J. Numer. Anal. 13 (1976) 198-213: the reverse ordering
never has a larger profile, so Cuthill-McKee cannot win the profile
objective beside RCM and is not run for it.
"""

from __future__ import annotations

from bandwise.algorithms.orderings import ORDERINGS, compare, load_all
from bandwise.core.generate import tet_grid
from bandwise.core.graph import node_graph
from bandwise.core.metrics import metrics


def names(comparison):
    return [row.method for row in comparison.rows]


def test_profile_objective_skips_cuthill_mckee_and_rcm_is_no_worse():
    load_all()
    graph = node_graph(tet_grid(5, 4, 3))
    result = compare.compare_orderings(graph, "auto", objective="profile")
    assert "cm" not in names(result) and "rcm" in names(result)
    assert "Liu and Sherman" in result.skipped["cm"]
    # the theorem behind the skip, on this graph
    cm = ORDERINGS["cm"].func(graph)
    rcm = ORDERINGS["rcm"].func(graph)
    assert metrics(graph, rcm).profile <= metrics(graph, cm).profile


def test_bandwidth_objective_keeps_cuthill_mckee():
    load_all()
    graph = node_graph(tet_grid(4, 3, 3))
    assert "cm" in names(compare.compare_orderings(graph, "auto", objective="bandwidth"))


def test_fill_orderings_only_for_fill_on_large_graphs(monkeypatch):
    load_all()
    fill_names = {n for n, info in ORDERINGS.items() if info.objective == "fill"}
    assert fill_names, "a fill-reducing ordering is registered"
    monkeypatch.setattr(compare, "AUTO_FILL_ORDERINGS_MAX_NODES", 10)
    graph = node_graph(tet_grid(4, 3, 3))
    envelope = compare.compare_orderings(graph, "auto", objective="profile")
    assert fill_names.isdisjoint(names(envelope))
    assert all("fill-reducing" in envelope.skipped[n] for n in fill_names)
    fill = compare.compare_orderings(graph, "auto", objective="fill")
    assert fill_names <= set(names(fill))
    # named explicitly, it always runs
    named = compare.compare_orderings(graph, sorted(fill_names), objective="profile")
    assert fill_names <= set(names(named))
