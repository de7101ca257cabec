"""Benchmark: the report against the analysis it presents, in one run.

Makes a scrambled tetrahedral box of about ``--nodes`` nodes (default one
million), then times

1. the analysis: node graph, sizing summary, mesh checks, and the reverse
   Cuthill-McKee ordering with its figures (``compare_orderings(..., "rcm")``);
2. the report of those results: :func:`bandwise.faces.report.write_report`
   (mesh drawing, binned sparsity patterns, skyline and wavefront curves,
   comparison chart, HTML and JSON).

Prints both times, their ratio, the time of each report step and the size
of the files.  Targets at one million nodes: the report under 30 s beyond
the analysis, ``report.html`` under 10 MB.  Compiled kernels are warmed up
on a tiny mesh first; that time is not counted.

Usage: ``python scripts/bench_report.py [--nodes 1000000]``
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))


class _Steps:
    """Collects the time of each named step (a bandwise Progress)."""

    def __init__(self) -> None:
        self.timings: dict[str, float] = {}

    def started(self, label: str) -> None:
        pass

    def finished(self, label: str, seconds: float) -> None:
        self.timings[label] = self.timings.get(label, 0.0) + seconds


def _analyse(model):
    from bandwise.algorithms.checks import run_checks
    from bandwise.algorithms.orderings.compare import compare_orderings
    from bandwise.core.dofs import dof_layout
    from bandwise.core.graph import node_graph
    from bandwise.core.summary import summarise
    from bandwise.faces.report import ReportInputs

    graph = node_graph(model)
    layout = dof_layout(model)
    summary = summarise(model, layout, graph)
    findings = run_checks(model, graph)
    comparison = compare_orderings(graph, "rcm", "profile", layout)
    return ReportInputs(model, graph, layout, summary, findings=findings,
                        comparison=comparison)


def _run(nodes: int, folder: Path) -> tuple[float, float, _Steps, Path]:
    from bandwise.core.generate import nodes_for_tet_box, scrambled, tet_grid
    from bandwise.faces.report import write_report

    k = nodes_for_tet_box(nodes)
    model = scrambled(tet_grid(k, k, k), seed=1)
    model.source = f"box-{model.n_nodes}.vtu"
    t0 = time.perf_counter()
    inputs = _analyse(model)
    t1 = time.perf_counter()
    steps = _Steps()
    files = write_report(folder / "report", inputs, steps)
    t2 = time.perf_counter()
    return t1 - t0, t2 - t1, steps, files.folder


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=1_000_000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        (Path(tmp) / "warm").mkdir()
        _run(1000, Path(tmp) / "warm")                     # compile the kernels
        (Path(tmp) / "big").mkdir()
        analysis, report, steps, folder = _run(args.nodes, Path(tmp) / "big")
        sizes = {p.name: p.stat().st_size for p in sorted(folder.iterdir())}
    print(f"nodes (requested)        {args.nodes:>12,}")
    print(f"analysis                 {analysis:>10.2f} s")
    print(f"report                   {report:>10.2f} s   (target at 1M nodes: < 30 s)")
    print(f"report / analysis        {report / analysis:>10.3f}")
    for label, seconds in steps.timings.items():
        print(f"  {label:<38}{seconds:>8.2f} s")
    for name, size in sizes.items():
        print(f"  {name:<38}{size / 2**20:>8.2f} MiB")
    print(f"report.html              {sizes['report.html'] / 2**20:>10.2f} MiB  (target < 10 MB)")


if __name__ == "__main__":
    main()
