"""Benchmark: bandwise read + graph + metrics against meshio's read alone.

Makes a scrambled tetrahedral box of about ``--nodes`` nodes (default one
million), writes it as VTU, then, each in a fresh subprocess so that peak
memory is measured separately:

1. ``meshio.read`` alone;
2. bandwise: ``read_model`` (meshio read, conversion, validation), the node
   graph, the metrics of the current numbering at node and DOF level, and
   the count of connected parts.

Prints the times, their ratio, and peak memory against the size of the
mesh's own arrays (points and connectivity as read).  Compiled kernels are
warmed up on a tiny mesh first (numba's compile cache); that time is not
counted and is shown separately.

Usage: ``python scripts/bench.py [--nodes 1000000] [--repeat 3]``
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

# Peak memory: the kernel's high-water mark (VmHWM) is reset just before the
# measured step by writing 5 to /proc/self/clear_refs (Linux), then read after.
MEMORY = """
def _status(key):
    for line in open("/proc/self/status"):
        if line.startswith(key):
            return int(line.split()[1]) * 1024
def reset_peak():
    with open("/proc/self/clear_refs", "w") as fh:
        fh.write("5")
    return _status("VmRSS")
def peak():
    return _status("VmHWM")
"""

MESHIO_ONLY = MEMORY + """
import json, sys, time
import meshio
base = reset_peak()
t = time.perf_counter(); mesh = meshio.read(sys.argv[1]); dt = time.perf_counter() - t
arrays = mesh.points.nbytes + sum(b.data.nbytes for b in mesh.cells)
print(json.dumps({"seconds": dt, "peak_rss": peak(), "base_rss": base, "array_bytes": arrays}))
"""

BANDWISE = MEMORY + """
import json, sys, time
import numpy as np
import bandwise
from bandwise.core.generate import tet_grid
from bandwise.core.summary import count_parts
t = time.perf_counter()
small = tet_grid(3, 3, 3); g = bandwise.node_graph(small); bandwise.core.metrics(g); count_parts(g)
import meshio  # imported before timing, as in the meshio-alone run
warm = time.perf_counter() - t
base_rss = reset_peak()
steps = {}
t0 = time.perf_counter()
model = bandwise.read_model(sys.argv[1]); steps["read_model"] = time.perf_counter() - t0
read_peak = peak()
after_read = reset_peak()
t = time.perf_counter(); graph = bandwise.node_graph(model); steps["node_graph"] = time.perf_counter() - t
t = time.perf_counter()
layout = bandwise.dof_layout(model)
node = bandwise.core.metrics(graph); dof = bandwise.core.metrics(graph, dofs=layout); parts = count_parts(graph)
steps["metrics"] = time.perf_counter() - t
total = time.perf_counter() - t0
print(json.dumps({"seconds": total, "steps": steps, "warmup": warm, "base_rss": base_rss,
                  "peak_rss": max(read_peak, peak()), "after_read": after_read,
                  "analysis_peak": peak(),
                  "bandwidth": node.bandwidth, "profile": node.profile, "dofs": dof.n_rows,
                  "parts": parts[0], "edges": graph.n_edges}))
"""


def run(script: str, path: Path) -> dict:
    out = subprocess.run([sys.executable, "-c", script, str(path)], capture_output=True,
                         text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def make_mesh(nodes: int, folder: Path) -> tuple[Path, int]:
    from bandwise.core.generate import nodes_for_tet_box, scrambled, tet_grid
    from bandwise.formats.meshio_io import write_model

    k = nodes_for_tet_box(nodes)
    model = scrambled(tet_grid(k, k, k), seed=1)
    path = folder / f"tetbox_{model.n_nodes}.vtu"
    write_model(model, path)
    return path, model.n_nodes


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=3, help="runs of each; the best is kept")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        t = time.perf_counter()
        path, n = make_mesh(args.nodes, Path(tmp))
        print(f"mesh: {n:,} nodes, scrambled tetrahedral box, {path.stat().st_size / 2**20:.0f} MiB VTU "
              f"(made in {time.perf_counter() - t:.1f} s)")
        path.read_bytes()  # warm the file cache for both contestants
        meshio_runs = [run(MESHIO_ONLY, path) for _ in range(args.repeat)]
        ours_runs = [run(BANDWISE, path) for _ in range(args.repeat)]
    m = min(meshio_runs, key=lambda r: r["seconds"])
    b = min(ours_runs, key=lambda r: r["seconds"])
    arrays = m["array_bytes"]
    print(f"graph: {b['edges']:,} edges; current numbering bandwidth {b['bandwidth']:,}, "
          f"profile {b['profile']:,}; {b['dofs']:,} DOFs; {b['parts']} part(s)")
    print()
    print(f"{'':38}{'seconds':>10}")
    print(f"{'meshio.read alone':38}{m['seconds']:>10.2f}")
    for name, sec in b["steps"].items():
        print(f"{'  bandwise ' + name:38}{sec:>10.2f}")
    print(f"{'bandwise read + graph + metrics':38}{b['seconds']:>10.2f}")
    print(f"{'ratio bandwise / meshio':38}{b['seconds'] / m['seconds']:>10.2f}   (target <= 2.5)")
    print(f"(compiled-kernel warm-up, not counted: {b['warmup']:.2f} s; best of {args.repeat} runs)")
    print()
    mib = 2**20
    print(f"mesh arrays (points + connectivity): {arrays / mib:,.0f} MiB")
    m_grown, b_grown = m["peak_rss"] - m["base_rss"], b["peak_rss"] - b["base_rss"]
    print(f"peak memory growth, meshio.read alone: {m_grown / mib:,.0f} MiB "
          f"({m_grown / arrays:.2f} x mesh arrays)")
    print(f"peak memory growth, bandwise:          {b_grown / mib:,.0f} MiB "
          f"({b_grown / arrays:.2f} x mesh arrays; target <= 3)")
    a_grown = b["analysis_peak"] - b["after_read"]
    print(f"  of which graph + metrics, beyond the model in memory: {a_grown / mib:,.0f} MiB "
          f"({a_grown / arrays:.2f} x mesh arrays)")
    print("(growth = peak resident memory during the step less resident memory before it)")


if __name__ == "__main__":
    main()
