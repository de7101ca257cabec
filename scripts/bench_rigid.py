"""Time the zero-energy analysis of a large supported mesh against meshio's read of it.

Builds a tetrahedral box of about ``--nodes`` nodes, writes it as VTU (binary)
into a temporary folder, then in the same run times

1. ``meshio.read`` of that file (the baseline),
2. the kinematic analysis: supports resolved on two faces and a corner, the
   face-connected blocks, the rigid-body system and its null space
   (:func:`bandwise.algorithms.rigid.zero_energy_modes`),

and prints both side by side with their ratio (target: at most 1.0).

Usage::

    python scripts/bench_rigid.py --nodes 100000
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import meshio
import numpy as np

from bandwise.algorithms.rigid import zero_energy_modes
from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.algorithms.topology import face_connected_blocks
from bandwise.core.dofs import dof_layout
from bandwise.core.generate import nodes_for_tet_box, tet_grid
from bandwise.formats.meshio_io import model_from_meshio, to_meshio


def _best(func, repeat: int) -> tuple[float, object]:
    best, out = float("inf"), None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = func()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=1_000_000, help="target number of nodes")
    parser.add_argument("--repeat", type=int, default=3, help="runs of each step (best kept)")
    parser.add_argument("--format", choices=("vtu", "gmsh"), default="vtu",
                        help="file written and read back: VTU binary or gmsh 4.1 ASCII")
    args = parser.parse_args()
    k = nodes_for_tet_box(args.nodes)
    model = tet_grid(k, k, k)
    supports_text = ["plane x=0:ux", "plane y=0:uy", f"near {k - 1},{k - 1},0:uz"]
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / ("box.vtu" if args.format == "vtu" else "box.msh")
        if args.format == "vtu":
            meshio.write(path, to_meshio(model), binary=True)
        else:
            meshio.write(path, to_meshio(model), file_format="gmsh", binary=False)
        t_read, mesh = _best(lambda: meshio.read(path), args.repeat)
    model = model_from_meshio(mesh)
    layout = dof_layout(model)
    supports = [parse_support(s) for s in supports_text]

    def analysis():
        held = apply_supports(model, layout, supports)
        return zero_energy_modes(model, layout, held)

    zero_energy_modes(model, layout, apply_supports(model, layout, supports))  # compile
    t_blocks, _ = _best(lambda: face_connected_blocks(model), args.repeat)
    t_all, result = _best(analysis, args.repeat)
    labels = face_connected_blocks(model)[1]
    t_own, _ = _best(lambda: zero_energy_modes(model, layout, apply_supports(model, layout, supports),
                                               labels=labels), args.repeat)
    print(f"mesh: {model.n_nodes:,} nodes, {len(model.cells[0]):,} tetrahedra; supports: "
          + "; ".join(supports_text))
    print(f"zero-energy modes: {result.total} (expected 0: the three supports hold all six)")
    print(f"{'step':<42}{'seconds':>10}{'ratio to read':>16}")
    baseline = f"meshio.read (baseline, {args.format})"
    print(f"{baseline:<42}{t_read:>10.3f}{1.0:>16.2f}")
    print(f"{'kinematic analysis (supports + modes)':<42}{t_all:>10.3f}{t_all / t_read:>16.2f}")
    print(f"{'  of which face-connected blocks':<42}{t_blocks:>10.3f}{t_blocks / t_read:>16.2f}")
    print(f"{'  the rest (blocks given)':<42}{t_own:>10.3f}{t_own / t_read:>16.2f}")
    print(f"target: ratio <= 1.0 -> {'met' if t_all <= t_read else 'NOT met'}")
    assert np.isfinite(t_all)


if __name__ == "__main__":
    main()
