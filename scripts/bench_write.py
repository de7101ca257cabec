"""Benchmark: the cost of writing through bandwise's door against meshio's write alone.

bandwise writes a mesh to its temporary place, reads the file back with
meshio's public reader, compares it with the model (node positions, cells,
sets) and only then renames it into place.  This prints, for a scrambled
tetrahedral box of about ``--nodes`` nodes, per format:

1. ``meshio.write`` of the same mesh alone (the baseline);
2. ``bandwise.formats.write_model`` (write, read back, compare, rename);

each in a fresh subprocess, with the time and the peak memory growth over
the mesh's own arrays, and the ratio of the times.  Repeat to see the
spread; the machine is shared.

Usage: ``python scripts/bench_write.py [--nodes 300000] [--repeat 3] [--formats vtu,gmsh]``
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from bench import MEMORY  # noqa: E402  the peak-memory probe of scripts/bench.py

SETUP = MEMORY + """
import json, sys, time
import numpy as np
from bandwise.core.generate import scrambled, tet_grid
side = round(int(sys.argv[2]) ** (1 / 3))
model = scrambled(tet_grid(side, side, side), seed=1)
fmt, out = sys.argv[3], sys.argv[1]
arrays = model.points.nbytes + sum(b.data.nbytes for b in model.cells)
"""

MESHIO_ONLY = SETUP + """
import meshio
from bandwise.formats.meshio_io import to_meshio
mesh = to_meshio(model)
if fmt == "gmsh":
    mesh.cell_data = {"gmsh:physical": [np.ones(len(b.data), int) for b in mesh.cells],
                      "gmsh:geometrical": [np.ones(len(b.data), int) for b in mesh.cells]}
base = reset_peak()
t = time.perf_counter(); meshio.write(out, mesh, file_format=fmt); dt = time.perf_counter() - t
print(json.dumps({"seconds": dt, "peak_rss": peak(), "base_rss": base, "array_bytes": arrays}))
"""

BANDWISE = SETUP + """
from bandwise.formats import write_model
base = reset_peak()
t = time.perf_counter(); write_model(model, out, fmt); dt = time.perf_counter() - t
print(json.dumps({"seconds": dt, "peak_rss": peak(), "base_rss": base, "array_bytes": arrays}))
"""

EXT = {"vtu": ".vtu", "gmsh": ".msh", "vtk": ".vtk", "xdmf": ".xdmf", "med": ".med"}


def run(code: str, out: Path, nodes: int, fmt: str) -> dict:
    done = subprocess.run([sys.executable, "-c", code, str(out), str(nodes), fmt],
                          capture_output=True, text=True, cwd=ROOT, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=300_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--formats", default="vtu,gmsh")
    args = parser.parse_args()
    print(f"{'format':8} {'meshio.write s':>15} {'bandwise s':>11} {'ratio':>6} "
          f"{'meshio mem':>11} {'bandwise mem':>13}   (memory: peak growth / mesh arrays)")
    with tempfile.TemporaryDirectory() as tmp:
        for fmt in args.formats.split(","):
            rows = []
            for k in range(args.repeat):
                a = run(MESHIO_ONLY, Path(tmp) / f"a{k}{EXT[fmt]}", args.nodes, fmt)
                b = run(BANDWISE, Path(tmp) / f"b{k}{EXT[fmt]}", args.nodes, fmt)
                rows.append((a, b))
            ratios = [b["seconds"] / a["seconds"] for a, b in rows]
            for a, b in rows:
                ma = (a["peak_rss"] - a["base_rss"]) / a["array_bytes"]
                mb = (b["peak_rss"] - b["base_rss"]) / b["array_bytes"]
                print(f"{fmt:8} {a['seconds']:15.2f} {b['seconds']:11.2f} "
                      f"{b['seconds'] / a['seconds']:6.2f} {ma:10.2f}x {mb:12.2f}x")
            print(f"{fmt:8} ratio median {statistics.median(ratios):.2f} "
                  f"(min {min(ratios):.2f}, max {max(ratios):.2f}) over {len(rows)} runs")


if __name__ == "__main__":
    main()
