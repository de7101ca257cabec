"""Benchmark: the orderings against the published figures and the reference libraries.

Every figure is printed beside its baseline, measured in the same run, with
the target and PASS/FAIL:

1. The 77 open test matrices (``../shared/matrices`` with ``published.csv``):
   per matrix, RCM bandwidth (ours / published / scipy / networkx), RCM
   profile (ours / networkx), and the best profile of ``compare_orderings``
   for each effort as a ratio to networkx's RCM profile.  Targets: our RCM
   bandwidth at most the published one on every matrix; our RCM profile
   never more than 5% above networkx's; best-profile geometric mean at most
   0.62 of networkx's RCM with the efforts that trade time for quality
   (``balanced``, ``thorough``; the default ``fast`` is printed beside them).
2. A random Delaunay mesh (``--delaunay-nodes``, default 200,000): our RCM
   time against scipy's (target <= 1.0x), and the best profile of each
   effort against scipy's RCM profile (target <= 0.27, as in part 1).
3. A scrambled tetrahedral box (``--nodes``, default 1,000,000): RCM and
   spectral times against scipy's RCM (targets 1.0x and 3.0x), and the
   spectral ordering on small graphs (no fixed cost of seconds).
4. The same box written as VTU: ``bandwise renumber`` end to end against
   meshio reading and writing the same file (each a fresh process; target
   2.0x), and the profile ``auto`` kept against the best of every ordering
   run one by one (target: within 1%).

Times are wall-clock, the median over ``--repeat`` interleaved rounds (each
round runs the baseline and ours in turn, so load changes on a shared
machine hit both alike), with the spread; CPU times of this thread are
printed too.  numba compilation is excluded: kernels are warmed up first.

Usage: ``python scripts/bench_orderings.py [--nodes N] [--delaunay-nodes N]
[--repeat R] [--no-matrices] [--no-delaunay] [--no-box] [--no-renumber]``
"""

from __future__ import annotations

import argparse
import csv
import os
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from bandwise.algorithms.orderings import load_all
from bandwise.algorithms.orderings.compare import compare_orderings
from bandwise.algorithms.orderings.cuthill_mckee import reverse_cuthill_mckee
from bandwise.algorithms.orderings.spectral import spectral
from bandwise.core.generate import nodes_for_tet_box, scrambled, tet_grid
from bandwise.core.graph import NodeGraph, graph_from_cells, graph_from_matrix, node_graph
from bandwise.core.metrics import metrics

MATRICES = ROOT.parent / "shared" / "matrices"
EFFORTS = ("fast", "balanced", "thorough")
#: The efforts that trade time for quality, to which the profile targets apply; the
#: default, ``fast``, puts time first and is printed beside them for information.
QUALITY_EFFORTS = ("balanced", "thorough")


def scipy_rcm(graph: NodeGraph) -> np.ndarray:
    """scipy's compiled reverse Cuthill-McKee (the baseline)."""
    from scipy.sparse.csgraph import reverse_cuthill_mckee as rcm

    return rcm(graph.to_scipy(), symmetric_mode=True).astype(np.int64)


def networkx_rcm(graph: NodeGraph) -> np.ndarray:
    """networkx's reverse Cuthill-McKee (pseudo-peripheral start per component)."""
    import networkx as nx
    from networkx.utils import reverse_cuthill_mckee_ordering

    g = nx.from_scipy_sparse_array(graph.to_scipy())
    return np.fromiter(reverse_cuthill_mckee_ordering(g), dtype=np.int64, count=graph.n)


def geomean(values: list[float]) -> float:
    """Geometric mean of positive values."""
    return float(np.exp(np.mean(np.log(np.maximum(values, 1e-300)))))


def verdict(text: str, ok: bool, target: str) -> None:
    """One target line."""
    print(f"  [{'PASS' if ok else 'FAIL'}] {text} ({target})")


def effort_verdict(effort: str, text: str, ok: bool, target: str) -> None:
    """A profile target line: a verdict for the quality efforts, information for ``fast``."""
    if effort in QUALITY_EFFORTS:
        verdict(text, ok, target)
    else:
        print(f"  [info] {text} ({target} {'met' if ok else 'not met'}; the default effort "
              f"puts time first, the target is for {' and '.join(QUALITY_EFFORTS)})")


def best_profile(graph: NodeGraph, effort: str) -> tuple[int, str, float]:
    """Node-level profile ``compare_orderings(auto)`` keeps, its method, and the time."""
    t0 = time.perf_counter()
    comp = compare_orderings(graph, "auto", "profile", effort=effort)
    return comp.best.nodes.profile, comp.best.method, time.perf_counter() - t0


def matrix_table() -> None:
    """Part 1: the per-matrix table and the targets on the open test matrices."""
    import scipy.io

    published = MATRICES / "published.csv"
    if not published.exists():
        print(f"no test matrices at {MATRICES}: part 1 skipped")
        return
    rows = list(csv.DictReader(published.open()))
    print(f"1. Test matrices: {len(rows)}; bandwidth = max(i - f_i), profile = sum(i - f_i), "
          "diagonal excluded.\n   RCM bandwidth: ours / published / scipy / networkx; RCM "
          "profile: ours / networkx; best profile of auto per effort / networkx RCM profile")
    print(f"{'matrix':>10} {'n':>5} | {'rcm':>5} {'publ':>5} {'scipy':>5} {'nx':>5} | "
          f"{'P rcm':>8} {'P nx':>8} {'rcm/nx':>6} | "
          + " ".join(f"{e:>8}" for e in EFFORTS) + " | kept (thorough)")
    above_published, above_nx = [], []
    rcm_ratio: list[float] = []
    ratios: dict[str, list[float]] = {e: [] for e in EFFORTS}
    seconds = dict.fromkeys(EFFORTS, 0.0)
    for row in rows:
        graph = graph_from_matrix(scipy.io.mmread(MATRICES / f"{row['name']}.mtx"))
        ours = metrics(graph, reverse_cuthill_mckee(graph))
        ref_scipy = metrics(graph, scipy_rcm(graph))
        ref_nx = metrics(graph, networkx_rcm(graph))
        publ = int(row["bandwidth_rcm_index"])
        nx_p = max(ref_nx.profile, 1)
        if ours.bandwidth > publ:
            above_published.append(row["name"])
        if ours.profile > 1.05 * nx_p:
            above_nx.append(row["name"])
        rcm_ratio.append(max(ours.profile, 1) / nx_p)
        cells = []
        kept = ""
        for e in EFFORTS:
            prof, method, sec = best_profile(graph, e)
            ratios[e].append(max(prof, 1) / nx_p)
            seconds[e] += sec
            cells.append(f"{max(prof, 1) / nx_p:>8.3f}")
            kept = method
        print(f"{row['name']:>10} {graph.n:>5} | {ours.bandwidth:>5} {publ:>5} "
              f"{ref_scipy.bandwidth:>5} {ref_nx.bandwidth:>5} | {ours.profile:>8} "
              f"{ref_nx.profile:>8} {rcm_ratio[-1]:>6.3f} | {' '.join(cells)} | {kept}")
    print("\nGeometric mean / networkx RCM profile: rcm "
          f"{geomean(rcm_ratio):.3f}; best of auto: "
          + ", ".join(f"{e} {geomean(ratios[e]):.3f} ({seconds[e]:.1f} s for all)"
                      for e in EFFORTS))
    verdict(f"RCM bandwidth above the published one on {len(above_published)} of {len(rows)} "
            f"{above_published or ''}", not above_published, "target: none")
    verdict(f"RCM profile more than 5% above networkx's on {len(above_nx)} "
            f"(worst {max(rcm_ratio):.3f}x) {above_nx or ''}", not above_nx, "target: none")
    for e in EFFORTS:
        effort_verdict(e, f"best profile ({e}) geometric mean / networkx RCM "
                       f"{geomean(ratios[e]):.3f}", geomean(ratios[e]) <= 0.62,
                       "target <= 0.62")


def interleaved(funcs: dict[str, Callable[[], object]],
                repeat: int) -> dict[str, tuple[list[float], list[float], object]]:
    """Wall and thread-CPU times of each function over ``repeat`` rounds, and its last result.

    Each round runs every function once, in turn, so that a change of load
    on a shared machine affects all of them alike.
    """
    out: dict[str, tuple[list[float], list[float], object]] = {
        name: ([], [], None) for name in funcs}
    for _ in range(repeat):
        for name, func in funcs.items():
            w, c = time.perf_counter(), time.thread_time()
            result = func()
            walls, cpus, _ = out[name]
            walls.append(time.perf_counter() - w)
            cpus.append(time.thread_time() - c)
            out[name] = (walls, cpus, result)
    return out


def ratio_line(label: str, ours: list[float], base: list[float], target: float) -> None:
    """Median ratio of paired times, its spread, and the verdict."""
    r = np.array(ours) / np.array(base)
    verdict(f"{label}: median {np.median(r):.2f}x (rounds {r.min():.2f}-{r.max():.2f}; "
            f"{np.median(ours):.3f} s vs {np.median(base):.3f} s)", np.median(r) <= target,
            f"target <= {target}")


def warm_up() -> None:
    """Compile (or load) every kernel on two small meshes, so no timing includes it.

    One mesh below and one above the spectral ordering's dense limit, so the
    multilevel path is compiled too.
    """
    for k in (9, 13):
        small = node_graph(scrambled(tet_grid(k, k, k), seed=1))
        for info in load_all().values():
            info.func(small)
        for e in EFFORTS:
            compare_orderings(small, "auto", effort=e)


def delaunay(n_points: int, repeat: int) -> None:
    """Part 2: a random Delaunay mesh."""
    from scipy.spatial import Delaunay

    pts = np.random.default_rng(0).random((n_points, 2))
    graph = graph_from_cells([Delaunay(pts).simplices.astype(np.int64)], n_points)
    print(f"\n2. Random Delaunay mesh of {n_points:,} points: {graph}; {repeat} rounds")
    runs = interleaved({"scipy rcm": lambda: scipy_rcm(graph),
                        "rcm": lambda: reverse_cuthill_mckee(graph)}, repeat)
    ref = metrics(graph, runs["scipy rcm"][2])
    ours = metrics(graph, runs["rcm"][2])
    print(f"   RCM profile: ours {ours.profile} / scipy {ref.profile} = "
          f"{ours.profile / ref.profile:.3f}; bandwidth {ours.bandwidth} / {ref.bandwidth}")
    ratio_line("rcm / scipy rcm wall time", runs["rcm"][0], runs["scipy rcm"][0], 1.0)
    ratio_line("rcm / scipy rcm CPU time", runs["rcm"][1], runs["scipy rcm"][1], 1.0)
    for e in EFFORTS:
        t0 = time.perf_counter()
        comp = compare_orderings(graph, "auto", "profile", effort=e)
        r = comp.best.nodes.profile / ref.profile
        effort_verdict(e, f"best profile ({e}: {comp.best.method}, "
                       f"{time.perf_counter() - t0:.1f} s) / scipy RCM profile {r:.3f}",
                       r <= 0.27, "target <= 0.27")


def box(target_nodes: int, repeat: int) -> NodeGraph:
    """Part 3: the scrambled tetrahedral box; returns its graph."""
    k = nodes_for_tet_box(target_nodes)
    graph = node_graph(scrambled(tet_grid(k, k, k), seed=0))
    print(f"\n3. Scrambled tetrahedral box {k} x {k} x {k}: {graph}; {repeat} rounds")
    # spectral remembers its last graph: each round hands it a fresh graph object
    runs = interleaved({"scipy rcm": lambda: scipy_rcm(graph),
                        "rcm": lambda: reverse_cuthill_mckee(graph),
                        "spectral": lambda: spectral(NodeGraph(graph.indptr, graph.indices))},
                       repeat)
    ref = metrics(graph, runs["scipy rcm"][2])
    for name in ("rcm", "spectral"):
        m = metrics(graph, runs[name][2])
        print(f"   {name}: profile {m.profile / ref.profile:.3f} of scipy RCM's, bandwidth "
              f"{m.bandwidth} / {ref.bandwidth}")
    ratio_line("rcm / scipy rcm wall time", runs["rcm"][0], runs["scipy rcm"][0], 1.0)
    ratio_line("rcm / scipy rcm CPU time", runs["rcm"][1], runs["scipy rcm"][1], 1.0)
    ratio_line("spectral / scipy rcm wall time", runs["spectral"][0], runs["scipy rcm"][0], 3.0)
    ratio_line("spectral / scipy rcm CPU time", runs["spectral"][1], runs["scipy rcm"][1], 3.0)
    for side in (10, 22):
        small = node_graph(scrambled(tet_grid(side, side, side), seed=2))
        t0 = time.perf_counter()
        spectral(small)
        sec = time.perf_counter() - t0
        verdict(f"spectral on {small.n:,} nodes: {sec:.3f} s", sec < 0.5,
                "target: no fixed cost of seconds")
    return graph


def renumber_end_to_end(graph_nodes: int, repeat: int) -> None:
    """Part 4: ``bandwise renumber`` of the box against meshio's read and write."""
    import meshio

    from bandwise.algorithms.orderings.compare import ORIGINAL
    from bandwise.core.dofs import dof_layout
    from bandwise.formats.meshio_io import read_model

    k = nodes_for_tet_box(graph_nodes)
    model = scrambled(tet_grid(k, k, k), seed=0)
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "box.vtu"
        meshio.write(src, meshio.Mesh(model.points, [(b.type, b.data) for b in model.cells]))
        cli = Path(sys.executable).parent / "bandwise"
        meshio_cmd = [sys.executable, "-c",
                      "import sys, meshio; meshio.write(sys.argv[2], meshio.read(sys.argv[1]))",
                      str(src), str(Path(tmp) / "meshio.vtu")]
        ours_cmd = [str(cli), "renumber", str(src), str(Path(tmp) / "out.vtu")]
        env = dict(os.environ)
        subprocess.run(ours_cmd, check=True, capture_output=True, env=env)   # warm caches
        base, ours = [], []
        for _ in range(repeat):
            for cmd, out in ((meshio_cmd, base), (ours_cmd, ours)):
                t0 = time.perf_counter()
                subprocess.run(cmd, check=True, capture_output=True, env=env)
                out.append(time.perf_counter() - t0)
        print(f"\n4. bandwise renumber of the box ({Path(src).stat().st_size / 2**20:.0f} MiB "
              f"VTU) vs meshio read + write, each a fresh process; {repeat} rounds")
        ratio_line("renumber / meshio read+write wall time", ours, base, 2.0)
        loaded = read_model(src)
        graph = node_graph(loaded)
        layout = dof_layout(loaded)
        comp = compare_orderings(graph, "auto", "profile", layout)
        every = compare_orderings(graph, [n for n in load_all() if n not in ("nd",)],
                                  "profile", layout)
        best_all = min(r.dofs.profile for r in every.rows if r.ok)
        kept = comp.best.dofs.profile
        print(f"   auto kept {comp.best.method}; skipped: {sorted(comp.skipped)}; cut short: "
              f"{sorted(comp.cut_short)}")
        ok = [r.method for r in every.rows if r.ok and r.method != ORIGINAL]
        verdict(f"auto's DOF profile / best of {', '.join(ok)} one by one: "
                f"{kept / best_all:.4f}", kept <= 1.01 * best_all, "target <= 1.01")


def main() -> None:
    """Parse the options and run the parts."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=1_000_000,
                        help="nodes of the tetrahedral box (default 1,000,000)")
    parser.add_argument("--delaunay-nodes", type=int, default=200_000,
                        help="points of the random Delaunay mesh (default 200,000)")
    parser.add_argument("--repeat", type=int, default=5, help="rounds of timings (default 5)")
    parser.add_argument("--no-matrices", action="store_true", help="skip part 1")
    parser.add_argument("--no-delaunay", action="store_true", help="skip part 2")
    parser.add_argument("--no-box", action="store_true", help="skip part 3")
    parser.add_argument("--no-renumber", action="store_true", help="skip part 4")
    args = parser.parse_args()
    repeat = max(1, args.repeat)
    warm_up()
    if not args.no_matrices:
        matrix_table()
    if not args.no_delaunay:
        delaunay(args.delaunay_nodes, repeat)
    if not args.no_box:
        box(args.nodes, repeat)
    if not args.no_renumber:
        renumber_end_to_end(args.nodes, max(1, min(repeat, 3)))


if __name__ == "__main__":
    main()
