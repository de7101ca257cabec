"""Time the stiffness check (zero eigenvalues by inertia) of a large tetrahedral solid.

Builds a tetrahedral box of about ``--dofs`` DOFs (3 per node), free or held
on the face x = 0 (``--held``), and in the same run times

1. the kinematic analysis it verifies (:func:`bandwise.algorithms.rigid.zero_energy_modes`),
   the baseline,
2. the stiffness check (:func:`bandwise.algorithms.stiffness.verify_stiffness`):
   unit-material stiffness built piece by piece, each piece's null space by
   inertia, the pieces glued,

and prints both with their ratio (wall and CPU time: on a busy machine the
CPU time is the steadier figure), the two counts, and the peak memory.
With ``--whole-dofs N`` it also factors a box of about N DOFs as a whole
matrix and piece by piece, side by side (the choice made at 20,000).

Usage::

    python scripts/bench_stiffness_check.py --dofs 1000000 --repeat 1
    python scripts/bench_stiffness_check.py --dofs 110000 --held --repeat 3
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np

from bandwise.algorithms.rigid import zero_energy_modes
from bandwise.algorithms.stiffness import verify_stiffness
from bandwise.algorithms.supports import apply_supports, parse_support
from bandwise.core.dofs import dof_layout
from bandwise.core.generate import tet_grid


def _times(func, repeat: int) -> tuple[list[tuple[float, float]], object]:
    """(wall, CPU) seconds of each run, and the last result."""
    times, out = [], None
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        out = func()
        times.append((time.perf_counter() - t0, time.process_time() - c0))
    return times, out


def _spread(times: list[tuple[float, float]]) -> str:
    wall = [t for t, _ in times]
    cpu = [c for _, c in times]
    return (f"wall best {min(wall):.1f} s, worst {max(wall):.1f} s; CPU best {min(cpu):.1f} s "
            f"(over {len(times)} run(s))")


def _best(times: list[tuple[float, float]]) -> float:
    return min(t for t, _ in times)


def _box(dofs: int, held: bool):
    k = max(2, int(np.ceil((dofs / 3) ** (1 / 3))))
    model = tet_grid(k, k, k)
    layout = dof_layout(model)
    supports = apply_supports(model, layout, [parse_support("plane x=0:fixed")] if held else [])
    return model, layout, supports


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--dofs", type=int, default=1_000_000, help="target number of DOFs")
    parser.add_argument("--held", action="store_true", help="hold the face x = 0")
    parser.add_argument("--repeat", type=int, default=1, help="runs of each step")
    parser.add_argument("--whole-dofs", type=int, default=0,
                        help="also compare whole-matrix and piece-by-piece counts at this size")
    args = parser.parse_args()
    model, layout, supports = _box(args.dofs, args.held)
    n_free = layout.total - supports.n_fixed_dofs
    print(f"tetrahedral box: {model.n_nodes:,} nodes, {len(model.cells[0].data):,} tetrahedra, "
          f"{n_free:,} free DOFs ({'held on x = 0' if args.held else 'free'})")
    t_kin, analysis = _times(lambda: zero_energy_modes(model, layout, supports), args.repeat)
    t_chk, check = _times(lambda: verify_stiffness(model, layout, supports, analysis),
                          args.repeat)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"kinematic analysis (baseline): {_spread(t_kin)}; {analysis.total} zero-energy modes")
    print(f"stiffness check: {_spread(t_chk)}; {check.zero_eigenvalues} zero eigenvalues, "
          f"verified {check.verified}, agrees {check.agrees}, certain {check.certain}")
    print(f"  {check.method}")
    print(f"ratio stiffness check / kinematic analysis (best wall): "
          f"{_best(t_chk) / _best(t_kin):.1f}x")
    print(f"peak resident memory of the run: {peak:,.0f} MiB")
    if args.whole_dofs:
        model, layout, supports = _box(args.whole_dofs, args.held)
        analysis = zero_energy_modes(model, layout, supports)
        n = layout.total - supports.n_fixed_dofs
        t_whole, whole = _times(lambda: verify_stiffness(
            model, layout, supports, analysis, whole_dofs=n), args.repeat)
        t_piece, piece = _times(lambda: verify_stiffness(
            model, layout, supports, analysis, whole_dofs=1), args.repeat)
        print(f"{n:,} free DOFs: whole matrix {_spread(t_whole)} ({whole.zero_eigenvalues}); "
              f"piece by piece {_spread(t_piece)} ({piece.zero_eigenvalues}); "
              f"ratio whole / pieces {_best(t_whole) / _best(t_piece):.2f}x")


if __name__ == "__main__":
    main()
