"""Benchmark: the single-machine limit: ``check`` and ``renumber`` on 1M, 3M and 10M nodes.

Makes scrambled tetrahedral boxes of about each size (VTU, the format the
streaming reader takes; written by meshio alone, without the read-back
check of bandwise's writer, to spare time and memory), caches them in ``--cache`` (writing the 10M box
takes minutes), then runs the command line on each, every run a fresh
process, and prints its wall time and peak resident memory (the kernel's
high-water mark of that process, ``wait4``) beside the estimate the reader
refuses a file by (:func:`bandwise.formats.headers.counts_estimate`, from the
header's counts), as a ratio (the batch's ``PEAK_OVER_ESTIMATE``).  Then:

- ``check`` time at the largest size against the smallest, as a ratio
  (target: at most 11x from 1M to 10M nodes);
- ``renumber`` peak memory at the largest size (target: at most 20 GiB);
- the refusal: a VTU file announcing ``--refuse-nodes`` nodes in its header
  (and holding none) is refused before reading, the estimate in the message.

Usage::

    python scripts/bench_scale.py                                   # 1M, 3M, 10M
    python scripts/bench_scale.py --sizes 1e6,3e6 --repeat 2
    python scripts/bench_scale.py --sizes 1e6,3e6,1e7 --method rcm  # renumber by RCM alone
    python scripts/bench_scale.py --size-factors                    # batch.SIZE_FACTORS

``--method`` is passed to ``renumber`` (default ``auto``: every ordering).
Before the 10M size check that ``free -g`` shows 20 GiB available: the
runs take that much, and making the box a little less.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

GIB = 2**30

MAKE = """
import sys
import meshio
from bandwise.core.generate import scrambled, tet_grid
k = int(sys.argv[1])
model = scrambled(tet_grid(k, k, k), seed=1)
mesh = meshio.Mesh(model.points, [(b.type, b.data) for b in model.cells])
del model
meshio.write(sys.argv[2], mesh, file_format=sys.argv[3])
"""


def timed(cmd: list[str], stdout: Path | None = None) -> dict:
    """Run a command; its wall time, peak resident bytes, exit code, and stderr's last line."""
    err = tempfile.TemporaryFile()
    out = open(stdout, "wb") if stdout else subprocess.DEVNULL
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=out, stderr=err)
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    if stdout:
        out.close()
    err.seek(0)
    lines = err.read().decode(errors="replace").strip().splitlines()
    steps = {}
    for line in lines:  # "bandwise: building node graph: 2.1 s" (steps over a second)
        label, _, rest = line.removeprefix("bandwise: ").rpartition(": ")
        if label.startswith("reading tetbox_"):
            label = "reading the mesh"
        if label and rest.endswith(" s") and rest[:-2].replace(".", "", 1).isdigit():
            steps[label] = steps.get(label, 0.0) + float(rest[:-2])
    return {"seconds": seconds, "peak": usage.ru_maxrss * 1024, "code": proc.returncode,
            "stderr": lines[-1] if lines else "", "steps": steps}


def box(nodes: int, cache: Path, suffix: str = ".vtu") -> tuple[Path, dict | None]:
    """The cached box of about ``nodes`` nodes (made, in a process of its own, when missing)."""
    from bandwise.core.generate import nodes_for_tet_box

    k = nodes_for_tet_box(nodes)
    path = cache / f"tetbox_{k}x{k}x{k}_seed1{suffix}"
    if path.exists():
        return path, None
    cache.mkdir(parents=True, exist_ok=True)
    part = path.with_name(f".{path.name}.part{os.getpid()}{suffix}")  # renamed when whole
    fmt = {".inp": "abaqus", ".bdf": "nastran", ".vtk": "vtk", ".vtu": "vtu"}[suffix]
    made = timed([sys.executable, "-c", MAKE, str(k), str(part), fmt])
    if made["code"] != 0:
        part.unlink(missing_ok=True)
        raise SystemExit(f"making the {k}^3 box failed: {made['stderr']}")
    part.replace(path)
    return path, made


def bandwise(*args: str) -> list[str]:
    return [sys.executable, "-m", "bandwise", *args]


def spread(runs: list[dict], key: str) -> tuple[float, str]:
    values = [r[key] for r in runs]
    best = min(values)
    if len(values) == 1:
        return best, ""
    return best, (f" best of {len(values)}, up to {max(values) / best:.2f}x, median "
                  f"{statistics.median(values) / best:.2f}x")


def size_factors(nodes: int, cache: Path, method: str) -> None:
    """Peak growth of ``check`` and ``renumber`` per byte of file, for formats whose header
    gives no counts (batch.SIZE_FACTORS)."""
    base = timed([sys.executable, "-c", "import bandwise, meshio, scipy.sparse, numba"])["peak"]
    print(f"loaded libraries: {base / 2**20:.0f} MiB; renumber --method {method}")
    print(f"{'file':34}{'file MiB':>10}{'check peak':>12}{'per byte':>10}"
          f"{'renumber peak':>15}{'per byte':>10}")
    with tempfile.TemporaryDirectory() as tmp:
        for suffix in (".vtk", ".inp", ".bdf"):
            path, _ = box(nodes, cache, suffix)
            size = path.stat().st_size
            c = timed(bandwise("check", str(path)))
            r = timed(bandwise("renumber", str(path), str(Path(tmp) / f"out{suffix}"),
                               "--method", method))
            print(f"{path.name:34}{size / 2**20:>10.1f}{c['peak'] / 2**20:>10.0f} M"
                  f"{(c['peak'] - base) / size:>10.1f}{r['peak'] / 2**20:>13.0f} M"
                  f"{(r['peak'] - base) / size:>10.1f}", flush=True)


def _header_estimate(path: Path) -> int:
    """The estimate the reader refuses a file by, from its header's counts."""
    from bandwise.formats import headers, registry

    return headers.counts_estimate(registry.header_counts(path), streamed=path.suffix == ".vtu")


def refusal(nodes: int, folder: Path) -> None:
    """A VTU file announcing ``nodes`` nodes (and holding none) is refused before reading."""
    from bandwise.core.memory import available_bytes

    path = folder / "announces_too_much.vtu"
    path.write_text('<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid" version="0.1">\n'
                    f'<UnstructuredGrid><Piece NumberOfPoints="{nodes}" '
                    f'NumberOfCells="{6 * nodes}">\n</Piece></UnstructuredGrid></VTKFile>\n')
    r = timed(bandwise("check", str(path)))
    print(f"refusal: a VTU header announcing {nodes:,} nodes (estimate "
          f"{_header_estimate(path) / GIB:,.1f} GiB, {available_bytes() / GIB:,.1f} GiB "
          "available): "
          f"exit {r['code']} in {r['seconds']:.2f} s")
    print(f"  {r['stderr']}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="1e6,3e6,1e7",
                        help="comma-separated node counts (default 1e6,3e6,1e7)")
    parser.add_argument("--cache", type=Path,
                        default=Path(tempfile.gettempdir()) / "bandwise-bench-scale",
                        help="folder of the generated boxes, kept between runs")
    parser.add_argument("--method", default="auto", help="renumber's --method (default auto)")
    parser.add_argument("--repeat", type=int, default=1,
                        help="runs of each size below 5M nodes; the best is shown with the spread")
    parser.add_argument("--skip", choices=("check", "renumber"), action="append", default=[],
                        help="leave a command out")
    parser.add_argument("--refuse-nodes", type=int, default=200_000_000,
                        help="nodes announced by the file that must be refused")
    parser.add_argument("--size-factors", action="store_true",
                        help="measure check's and renumber's peak per byte of VTK, keyword "
                             "and bulk-data files")
    parser.add_argument("--nodes", type=int, default=216_000, help="box for --size-factors")
    args = parser.parse_args()
    if args.size_factors:
        size_factors(args.nodes, args.cache, args.method)
        return
    sizes = [int(float(s)) for s in args.sizes.split(",")]
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        warm, _ = box(1000, tmp)  # compile the kernels (numba's cache) outside the timings
        timed(bandwise("check", str(warm)))
        timed(bandwise("renumber", str(warm), str(tmp / "warm_out.vtu"), "--method", args.method))
        rows = {}
        for nodes in sizes:
            path, made = box(nodes, args.cache)
            if made:
                print(f"made {path.name}: {made['seconds']:.0f} s, peak "
                      f"{made['peak'] / GIB:.1f} GiB, {path.stat().st_size / 2**20:,.0f} MiB")
            path.read_bytes()  # in the file cache for every run alike
            repeat = args.repeat if nodes < 5_000_000 else 1
            from bandwise.formats import registry

            row = {"estimate": _header_estimate(path), "n": registry.header_counts(path).nodes}
            if "check" not in args.skip:
                runs = [timed(bandwise("check", str(path), "--json"), tmp / "check.json")
                        for _ in range(repeat)]
                row["check"] = runs
                if any(r["code"] not in (0, 1) for r in runs):
                    print(f"check failed on {path.name}: {runs[0]['stderr']}")
                else:  # the whole mesh was analysed
                    doc = json.loads((tmp / "check.json").read_text())["meshes"][0]
                    assert doc["nodes"] == row["n"], (doc["nodes"], row["n"])
            if "renumber" not in args.skip:
                out = tmp / "renumbered.vtu"
                runs = [timed(bandwise("renumber", str(path), str(out), "--method", args.method))
                        for _ in range(repeat)]
                row["renumber"] = runs
                if any(r["code"] != 0 for r in runs):
                    print(f"renumber failed on {path.name}: {runs[0]['stderr']}")
                out.unlink(missing_ok=True)
                out.with_name("renumbered.map.csv").unlink(missing_ok=True)
            rows[nodes] = row
            _print_row(nodes, row, args.method, header=len(rows) == 1)
        _print_targets(rows, sizes)
        _print_steps(rows, sizes)
        refusal(args.refuse_nodes, tmp)


def _print_row(nodes: int, row: dict, method: str, header: bool) -> None:
    if header:
        print(f"{'nodes':>12}{'estimate':>10}  {'check s':>9}{'check peak':>12}  "
              f"{'renumber s':>11}{'renumber peak':>14}  (renumber --method {method}; "
              "time spread over the runs)")
    parts = [f"{row.get('n', nodes):>12,}", f"{row['estimate'] / GIB:>8.2f} G"]
    notes = []
    for cmd, width in (("check", (9, 12)), ("renumber", (11, 14))):
        runs = row.get(cmd)
        if not runs:
            parts.append(f"  {'-':>{width[0]}}{'-':>{width[1]}}")
            continue
        t, t_spread = spread(runs, "seconds")
        p, _ = spread(runs, "peak")
        parts.append(f"  {t:>{width[0]}.1f}{p / GIB:>{width[1] - 2}.2f} G")
        notes.append(f"{cmd} peak {p / row['estimate']:.2f}x the estimate{t_spread and ','}"
                     f"{t_spread}")
    print("".join(parts) + (f"  ({'; '.join(notes)})" if notes else ""), flush=True)


def _print_steps(rows: dict, sizes: list[int]) -> None:
    """Seconds of every step over a second (the fastest run of each size), to see which grows."""
    for cmd in ("check", "renumber"):
        best = {n: min(rows[n][cmd], key=lambda r: r["seconds"])["steps"]
                for n in sizes if rows[n].get(cmd)}
        labels = list(dict.fromkeys(k for steps in best.values() for k in steps))
        if not labels:
            continue
        print(f"{cmd} steps over a second (s):")
        for label in labels:
            cells = "".join(f"{best[n].get(label, 0.0):>10.1f}" for n in best)
            print(f"  {label[:44]:44}{cells}")


def _print_targets(rows: dict, sizes: list[int]) -> None:
    small, large = min(sizes), max(sizes)
    if small == large:
        return
    a, b = rows[small], rows[large]
    if "check" in a and "check" in b:
        ratio = spread(b["check"], "seconds")[0] / spread(a["check"], "seconds")[0]
        print(f"check time, {large:,} vs {small:,} nodes: {ratio:.2f}x for "
              f"{b.get('n', large) / a.get('n', small):.2f}x the nodes (target <= 11x at 10x)")
    if "renumber" in b:
        peak = spread(b["renumber"], "peak")[0]
        print(f"renumber peak memory at {b.get('n', large):,} nodes: {peak / GIB:.2f} GiB "
              "(target <= 20 GiB)")


if __name__ == "__main__":
    main()
