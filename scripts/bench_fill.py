"""Cholesky fill of bandwise orderings on the open test matrices, and symbolic-count timing.

Part 1: for every matrix of the shared Harwell-Boeing set listed in
``published.csv``, nnz(L) (diagonal included, from
:func:`bandwise.algorithms.orderings.symbolic.cholesky_nnz`) under the file's own numbering, RCM
(if registered), spectral and nested dissection, beside the published figure
after approximate minimum degree (column ``cholesky_nnz_amd_incl_diag``),
with ratios to it and their geometric means.

Part 2: time of the graph build, ``nd``, ``cholesky_nnz`` (node and 3-DOF
level) and the spectral ordering on a scrambled tetrahedral box of about
``--nodes`` nodes.

Usage::

    python scripts/bench_fill.py --nodes 100000
    python scripts/bench_fill.py --skip-matrices --nodes 1000000
"""

from __future__ import annotations

import argparse
import csv
import time
from pathlib import Path

import numpy as np
import scipy.io

from bandwise.algorithms.orderings import ORDERINGS, load_all
from bandwise.algorithms.orderings.symbolic import cholesky_nnz
from bandwise.core import generate
from bandwise.core.graph import graph_from_matrix, node_graph

MATRICES = Path(__file__).resolve().parent.parent.parent / "shared" / "matrices"
METHODS = ("identity", "rcm", "spectral", "nd")


def available_orderings() -> dict[str, object]:
    """The orderings to compare; RCM only when its module is in the tree."""
    try:
        load_all()
    except (ImportError, SyntaxError, AttributeError, NameError) as exc:
        # an ordering module being edited must not stop the benchmark
        print(f"(some ordering modules did not import: {exc})")
        from bandwise.algorithms.orderings import nested_dissection, spectral  # noqa: F401
    found = {"identity": lambda g: np.arange(g.n, dtype=np.int64)}
    for name in METHODS[1:]:
        if name in ORDERINGS:
            found[name] = ORDERINGS[name].func
        else:
            print(f"({name} is not registered: its column is skipped)")
    return found


def geometric_mean(values: list[float]) -> float:
    """Geometric mean of positive ratios."""
    return float(np.exp(np.mean(np.log(values)))) if values else float("nan")


def matrix_table(folder: Path) -> None:
    """Print per-matrix fill and ratios to the published AMD fill."""
    orderings = available_orderings()
    names = list(orderings)
    print(f"{'matrix':<10} {'n':>6} {'AMD(pub)':>9} "
          + " ".join(f"{m:>10}" for m in names) + "   " + " ".join(f"{m + '/AMD':>12}" for m in names))
    ratios: dict[str, list[float]] = {m: [] for m in names}
    with open(folder / "published.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for row in rows:
        graph = graph_from_matrix(scipy.io.mmread(folder / f"{row['name']}.mtx"))
        amd = int(row["cholesky_nnz_amd_incl_diag"])
        fills = {m: cholesky_nnz(graph, orderings[m](graph)) for m in names}
        for m in names:
            ratios[m].append(fills[m] / amd)
        print(f"{row['name']:<10} {graph.n:>6} {amd:>9} "
              + " ".join(f"{fills[m]:>10}" for m in names) + "   "
              + " ".join(f"{fills[m] / amd:>12.3f}" for m in names))
    print(f"{'geo. mean':<27} " + " " * (11 * len(names))
          + "   " + " ".join(f"{geometric_mean(ratios[m]):>12.3f}" for m in names))
    worst = max(ratios["nd"]) if "nd" in ratios else float("nan")
    print(f"nd/AMD worst {worst:.3f}; nd no worse than the file numbering on "
          f"{sum(a <= b for a, b in zip(ratios['nd'], ratios['identity']))}/{len(rows)}")


def timed(label: str, func, *args):
    """Run ``func(*args)``, print its wall time, return its result."""
    t0 = time.perf_counter()
    out = func(*args)
    print(f"  {label:<40} {time.perf_counter() - t0:8.2f} s")
    return out


def mesh_timing(nodes: int, skip_spectral: bool = False) -> None:
    """Time nd, the symbolic count and the spectral order on a scrambled tetrahedral box."""
    side = max(2, round(nodes ** (1 / 3)))
    model = generate.scrambled(generate.tet_grid(side, side, side), seed=7)
    print(f"\nscrambled tet box {side}^3 = {model.n_nodes} nodes")
    graph = timed("node graph", node_graph, model)
    cholesky_nnz(graph)  # compile the kernels outside the timings
    base = timed("cholesky_nnz, current numbering", cholesky_nnz, graph)
    perm = timed("nd ordering (METIS)", ORDERINGS["nd"].func, graph)
    fill = timed("cholesky_nnz, nd", cholesky_nnz, graph, perm)
    fill3 = timed("cholesky_nnz, nd, 3 DOFs per node", cholesky_nnz, graph, perm, 3)
    if not skip_spectral:
        timed("spectral ordering (multilevel Fiedler)", ORDERINGS["spectral"].func, graph)
    print(f"  nnz(L) current {base:,}  nd {fill:,}  ratio {base / fill:.1f}x; "
          f"3 DOFs: {fill3:,} ({fill3 / fill:.2f}x the node count, 9x minus the diagonal blocks)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=1_000_000,
                        help="size of the tetrahedral box for the timing part")
    parser.add_argument("--matrices", type=Path, default=MATRICES,
                        help="folder with published.csv and the .mtx files")
    parser.add_argument("--skip-matrices", action="store_true", help="timing part only")
    parser.add_argument("--skip-spectral", action="store_true", help="do not time the spectral order")
    args = parser.parse_args()
    if not args.skip_matrices:
        matrix_table(args.matrices)
    available_orderings()
    mesh_timing(args.nodes, args.skip_spectral)


if __name__ == "__main__":
    main()
