"""Benchmark: all mesh checks against meshio's read alone, in one run.

Makes a scrambled tetrahedral box of about ``--nodes`` nodes (default one
million), writes it as VTU in a temporary folder, then times

1. ``meshio.read`` of that file;
2. :func:`bandwise.algorithms.checks.run_checks` on the mesh read (every check,
   default options), given the node graph, which ``bandwise check`` builds
   once for the summary and the checks; its time is printed apart.

Prints both times, wall-clock and CPU (the CPU figure is steadier on a
busy machine), their ratio (the target is at most 2), the ratio with the
graph build included, and the time of each check step.  Compiled kernels are warmed up on a tiny mesh first; that
time is not counted.  Each figure is the best of ``--repeat`` runs.

Usage: ``python scripts/bench_checks.py [--nodes 1000000] [--repeat 1]``
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


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=1)
    args = parser.parse_args()

    import meshio

    from bandwise.algorithms.checks import run_checks
    from bandwise.core.generate import nodes_for_tet_box, scrambled, tet_grid
    from bandwise.core.graph import node_graph
    from bandwise.formats.meshio_io import model_from_meshio, to_meshio

    run_checks(tet_grid(3, 3, 3))  # warm-up: compile / load the numba kernels
    side = nodes_for_tet_box(args.nodes)
    model = scrambled(tet_grid(side, side, side), seed=1)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "box.vtu"
        meshio.write(path, to_meshio(model))
        del model
        read_s, check_s, graph_s = float("inf"), float("inf"), 0.0
        read_cpu, check_cpu = float("inf"), float("inf")
        steps, findings = _Steps(), []
        for _ in range(args.repeat):
            c0, t0 = time.process_time(), time.perf_counter()
            mesh = meshio.read(path)
            read_s = min(read_s, time.perf_counter() - t0)
            read_cpu = min(read_cpu, time.process_time() - c0)
            m = model_from_meshio(mesh, str(path), "vtu")
            run_steps = _Steps()
            t0 = time.perf_counter()
            graph = node_graph(m)
            c1, t1 = time.process_time(), time.perf_counter()
            findings = run_checks(m, graph, progress=run_steps)
            elapsed = time.perf_counter() - t1
            check_cpu = min(check_cpu, time.process_time() - c1)
            if elapsed < check_s:
                check_s, graph_s, steps = elapsed, t1 - t0, run_steps
    n_cells = sum(len(b.data) for b in m.cells)
    print(f"mesh: {m.n_nodes:,} nodes, {n_cells:,} tetrahedra (scrambled numbering)")
    print(f"{'step':<36}{'wall s':>10}{'CPU s':>10}")
    print(f"{'meshio.read (baseline)':<36}{read_s:>10.2f}{read_cpu:>10.2f}")
    print(f"{'all checks (run_checks)':<36}{check_s:>10.2f}{check_cpu:>10.2f}")
    for label, sec in steps.timings.items():
        print(f"  {label:<34}{sec:>10.2f}")
    print(f"{'node graph (shared with the summary)':<36}{graph_s:>10.2f}")
    print(f"ratio checks / meshio.read: wall {check_s / read_s:.2f}, CPU "
          f"{check_cpu / read_cpu:.2f} (target <= 2); wall with the node graph: "
          f"{(check_s + graph_s) / read_s:.2f}")
    print("findings: " + (", ".join(f"{f.code} {f.count}" for f in findings) or "none"))


if __name__ == "__main__":
    main()
