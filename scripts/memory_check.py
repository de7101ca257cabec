"""Measured peak memory of read + graph + metrics (+ an ordering) beside bandwise's estimate.

Usage::

    python scripts/memory_check.py MESH [--ordering rcm]
    python scripts/memory_check.py --nodes 100000        # a generated tetrahedral box

Prints one line: nodes, the estimate (without the loaded libraries), the
measured growth of the resident size (sampled every 2 ms) and of the traced
numpy allocations (``tracemalloc``; arrays made inside compiled kernels are
not traced), and the ratio estimate / measured.  A generated mesh is written
to a temporary file by a separate process first, so that its making does not
count.
"""

from __future__ import annotations

import argparse
import gc
import os
import subprocess
import sys
import tempfile
import threading
import time
import tracemalloc
from pathlib import Path


def _current_rss() -> int:
    """Resident size now (``/proc/self/statm``), in bytes."""
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


class _PeakSampler(threading.Thread):
    """Samples the resident size every few milliseconds: the peak of this stretch of work,
    whatever the process's earlier peak (``ru_maxrss``) was."""

    def __init__(self) -> None:
        super().__init__(daemon=True)
        self.peak = _current_rss()
        self.running = True

    def run(self) -> None:
        while self.running:
            self.peak = max(self.peak, _current_rss())
            time.sleep(0.002)

    def stop(self) -> int:
        self.running = False
        self.join()
        return max(self.peak, _current_rss())


def warm_up(suffix: str, ordering: str | None) -> None:
    """Compile and cache the kernels in a process of their own (compiling takes memory)."""
    extra = ["--ordering", ordering] if ordering else []
    subprocess.run([sys.executable, __file__, "--warm-up", suffix, *extra], check=True)


def measure(path: Path | None, ordering: str | None, suffix: str = ".vtu") -> dict[str, float]:
    """Peak growth while reading, building the graph, measuring (and ordering) one mesh."""
    from bandwise.algorithms.orderings import ORDERINGS, load_all
    from bandwise.core.generate import tet_grid
    from bandwise.core.graph import node_graph
    from bandwise.core.memory import BASELINE_BYTES, memory_estimate
    from bandwise.core.metrics import metrics
    from bandwise.core.summary import count_parts
    from bandwise.formats.meshio_io import read_model, write_model

    load_all()
    with tempfile.TemporaryDirectory() as tmp:  # warm up: imports and cached kernels
        warm = Path(tmp) / f"warm{suffix if path is None else path.suffix}"
        write_model(tet_grid(4, 4, 4), warm)
        small = read_model(warm)
        g = node_graph(small)
        metrics(g), metrics(g, dofs=3), count_parts(g)
        if ordering:
            ORDERINGS[ordering].func(g)
    del small, g
    gc.collect()
    if path is None:
        return {}
    base = _current_rss()
    sampler = _PeakSampler()
    sampler.start()
    tracemalloc.start()
    model = read_model(path)
    graph = node_graph(model)
    metrics(graph), metrics(graph, dofs=3), count_parts(graph)
    if ordering:
        perm = ORDERINGS[ordering].func(graph)
        metrics(graph, perm, dofs=3)
    traced = tracemalloc.get_traced_memory()[1]
    grown = sampler.stop() - base
    # a VTU file goes through bandwise's streaming reader (meshio only for what it does not handle)
    est = memory_estimate(model.n_nodes, model.cells_by_type(), 3, orderings=bool(ordering),
                          streamed=path.suffix.lower() == ".vtu")
    estimate = est.peak - BASELINE_BYTES
    return {"nodes": model.n_nodes, "estimate": estimate, "rss": grown, "traced": traced,
            "ratio": estimate / max(grown, 1)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("mesh", nargs="?", type=Path)
    parser.add_argument("--nodes", type=int, help="generate a tetrahedral box of about this many nodes")
    parser.add_argument("--ordering", default=None, help="also run this registered ordering")
    parser.add_argument("--warm-up", metavar="SUFFIX", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.warm_up:
        measure(None, args.ordering, args.warm_up)
        return
    with tempfile.TemporaryDirectory() as tmp:
        path = args.mesh
        if path is None:
            if not args.nodes:
                parser.error("give a mesh file or --nodes")
            path = Path(tmp) / "box.vtu"
            code = ("from bandwise.core.generate import tet_grid, nodes_for_tet_box as k;"
                    "from bandwise.formats.meshio_io import write_model;"
                    f"e = k({args.nodes}); write_model(tet_grid(e, e, e), {str(path)!r})")
            subprocess.run([sys.executable, "-c", code], check=True)
        warm_up(path.suffix, args.ordering)
        r = measure(path, args.ordering)
    mib = 2**20
    print(f"nodes {r['nodes']:,}  estimate {r['estimate'] / mib:.1f} MiB  measured peak growth "
          f"{r['rss'] / mib:.1f} MiB (rss), {r['traced'] / mib:.1f} MiB (traced)  "
          f"estimate/measured {r['ratio']:.2f}")


if __name__ == "__main__":
    main()
