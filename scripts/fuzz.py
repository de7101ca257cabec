"""Fuzz the command line with damaged mesh files: never a traceback, never a damaged file.

Usage::

    python scripts/fuzz.py --cases 500 --seconds 300 [--seed 1] [--keep FOLDER] [--in-process]

Valid files of each format (a small bracket mesh written by bandwise, plus
the real meshes of ``../shared/meshes-real`` when present) are mutated:
truncated, bytes flipped, a section removed, a count made huge, node ids
made negative or out of range, coordinates made NaN, blocks emptied.  Each
case runs ``bandwise check FILE --json`` and ``bandwise renumber FILE OUT``
in a fresh process and checks:

- no traceback and no "internal error" (an exception nobody expected);
- exit 0 or 1 with valid JSON, or exit 2 with exactly one error line;
- the input file unchanged (sha256 before and after);
- on failure, nothing left in the output folder (no output, no ``.part``).

A case that breaks a rule is a defect: printed, and kept with ``--keep``.
The last line gives the number of cases run and of defects found.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import random
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SHARED_MESHES = ROOT.parent / "shared" / "meshes-real"
#: Real meshes used as seeds when the shared data are beside the repository.
REAL_SEEDS = ("sfepy/abaqus_tet.inp", "meshio/UUea.inp", "pyNastran/plate.bdf",
              "sfepy/cube.bdf", "pyNastran/composite_plate_2022.fem", "meshio/ex17-2.2.msh",
              "meshio/insulated-4.1.msh", "sfepy/circles_in_square.vtk",
              "pylith/box_tet_vertices_ascii.msh", "scikit-fem/mixedtriquad.msh")
#: Seconds one command may take before the case counts as a hang.
TIMEOUT = 60

_INT = re.compile(rb"(?<![\w.+-])\d+(?![\w.])")
_FLOAT = re.compile(rb"[-+]?\d+\.\d*(?:[eE][-+]?\d+)?")


# ---------------------------------------------------------------- seed files

def seed_files(folder: Path) -> list[Path]:
    """Valid mesh files of every format bandwise reads and writes, in ``folder``."""
    import numpy as np

    from bandwise.core.generate import hex_grid
    from bandwise.core.model import CellBlock, Model
    from bandwise.formats.meshio_io import write_model

    box = hex_grid(4, 3, 2)
    hexes = box.cells[0].data
    model = Model(points=box.points,
                  cells=[CellBlock("hexahedron", hexes), CellBlock("quad", hexes[:, :4][:3])],
                  point_data={"temperature": np.linspace(0, 1, box.n_nodes)},
                  cell_data={"pressure": [np.arange(len(hexes), dtype=float), np.ones(3)]},
                  point_sets={"WALL": np.array([0, 4, 8])},
                  cell_sets={"BODY": [np.arange(len(hexes)), np.zeros(0, np.int64)],
                             "FACE": [np.zeros(0, np.int64), np.arange(3)]})
    seeds = []
    for name, fmt in (("bracket22.msh", "gmsh22"), ("bracket41.msh", "gmsh"),
                      ("bracket.vtu", "vtu"), ("bracket.vtk", "vtk"), ("bracket.inp", "abaqus"),
                      ("bracket.bdf", "nastran"), ("bracket.med", "med"),
                      ("bracket.exo", "exodus")):
        path = folder / name
        write_model(model, path, fmt)
        seeds.append(path)
    if SHARED_MESHES.is_dir():
        for rel in REAL_SEEDS:
            src = SHARED_MESHES / rel
            if src.is_file():
                dst = folder / f"real_{src.name}"
                shutil.copyfile(src, dst)
                seeds.append(dst)
    return seeds


# ---------------------------------------------------------------- mutations

Mutation = Callable[[bytes, random.Random], bytes]


def truncated(data: bytes, rng: random.Random) -> bytes:
    """Cut the file at a random place."""
    return data[:rng.randrange(0, max(len(data), 1))]


def flipped(data: bytes, rng: random.Random) -> bytes:
    """Change a few random bytes."""
    out = bytearray(data)
    for _ in range(rng.randint(1, 8)):
        if out:
            out[rng.randrange(len(out))] = rng.randrange(256)
    return bytes(out)


def _lines(data: bytes) -> list[bytes]:
    return data.splitlines(keepends=True)


def section_removed(data: bytes, rng: random.Random) -> bytes:
    """Remove a section: a gmsh ``$Name ... $EndName`` block, a keyword block, or some lines."""
    sections = list(re.finditer(rb"\$(\w+)\r?\n.*?\$End\1\r?\n", data, re.DOTALL))
    if sections:
        m = rng.choice(sections)
        return data[:m.start()] + data[m.end():]
    lines = _lines(data)
    keywords = [k for k, ln in enumerate(lines) if ln.startswith(b"*") and not ln.startswith(b"**")]
    if keywords:
        k = rng.choice(keywords)
        end = next((j for j in keywords if j > k), len(lines))
        return b"".join(lines[:k] + lines[end:])
    if len(lines) < 2:
        return b""
    a = rng.randrange(len(lines))
    return b"".join(lines[:a] + lines[a + rng.randint(1, 20):])


def _replace_token(data: bytes, pattern: re.Pattern[bytes], value: bytes,
                   rng: random.Random, first: int = 0) -> bytes:
    hits = [m for m in pattern.finditer(data) if m.start() >= first]
    if not hits:
        return data
    m = rng.choice(hits[:2000])
    return data[:m.start()] + value + data[m.end():]


def huge_count(data: bytes, rng: random.Random) -> bytes:
    """Make a count (the integer after a section start, or any integer) enormous."""
    big = rng.choice([b"999999999999", b"2147483648", b"99999999"])
    sec = re.search(rb"\$(Nodes|Elements)\r?\n", data)
    if sec and rng.random() < 0.7:
        return _replace_token(data, _INT, big, rng, first=sec.end()) if rng.random() < 0.3 else \
            data[:sec.end()] + _INT.sub(big, data[sec.end():], count=1)
    vtu = re.search(rb'NumberOf(Points|Cells)="\d+"', data)
    if vtu:
        return data[:vtu.start()] + vtu.group(0).split(b"=")[0] + b'="' + big + b'"' + \
            data[vtu.end():]
    return _replace_token(data, _INT, big, rng)


def bad_node_id(data: bytes, rng: random.Random) -> bytes:
    """Write a negative, zero or out-of-range number where an id may be."""
    return _replace_token(data, _INT, rng.choice([b"-5", b"0", b"-1", b"987654321", b"70000"]), rng)


def nan_coordinate(data: bytes, rng: random.Random) -> bytes:
    """Turn a real number into NaN or infinity."""
    return _replace_token(data, _FLOAT, rng.choice([b"nan", b"NaN", b"inf", b"-inf", b"1e999"]),
                          rng)


def empty_block(data: bytes, rng: random.Random) -> bytes:
    """Empty a block: a zero count after a section start, or a keyword with no data."""
    sec = list(re.finditer(rb"\$(Nodes|Elements)\r?\n", data))
    if sec:
        m = rng.choice(sec)
        rest = data[m.end():]
        return data[:m.end()] + _INT.sub(b"0", rest, count=1)
    lines = _lines(data)
    keywords = [k for k, ln in enumerate(lines) if ln.startswith(b"*") and not ln.startswith(b"**")]
    if keywords:
        k = rng.choice(keywords)
        end = next((j for j in keywords if j > k), len(lines))
        return b"".join(lines[:k + 1] + lines[end:])
    return data.replace(b"\n", b"\n\n", 1)


MUTATIONS: dict[str, Mutation] = {
    "truncated": truncated, "flipped": flipped, "section removed": section_removed,
    "huge count": huge_count, "bad node id": bad_node_id, "nan coordinate": nan_coordinate,
    "empty block": empty_block,
}


# ---------------------------------------------------------------- one case

@dataclass(frozen=True)
class Outcome:
    """What one command did with one mutated file."""

    command: str
    exit_code: int
    stdout: str
    stderr: str
    defects: tuple[str, ...]


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def judge(command: str, code: int, stdout: str, stderr: str, wants_json: bool) -> list[str]:
    """The rules a command's result must keep; the broken ones, in words."""
    defects = []
    if "Traceback" in stderr or "Traceback" in stdout:
        defects.append("traceback")
    if "internal error" in stderr:
        defects.append("internal error: " + stderr.strip().splitlines()[-1][:200])
    errors = [ln for ln in stderr.splitlines() if ln.startswith("bandwise: error:")]
    other = [ln for ln in stderr.splitlines() if ln.strip() and not ln.startswith("bandwise: ")]
    if code == 2:
        if len(errors) != 1:
            defects.append(f"exit 2 with {len(errors)} error lines")
    elif code in (0, 1):
        if wants_json:
            try:
                json.loads(stdout)
            except ValueError:
                defects.append("exit 0/1 without valid JSON")
    else:
        defects.append(f"exit code {code}")
    if other:
        defects.append(f"stray stderr: {other[0][:160]}")
    return [f"{command}: {d}" for d in defects]


def run_case(path: Path, out_dir: Path, runner: Callable[[list[str]], tuple[int, str, str]]
             ) -> list[Outcome]:
    """Run check and renumber on one file; judge every rule."""
    outcomes = []
    for command, args, wants_json in (
            ("check", ["check", str(path), "--json"], True),
            ("renumber", ["renumber", str(path), str(out_dir / f"out{''.join(path.suffixes)}"),
                          "--method", "rcm"], False)):
        before = sha256(path)
        existing = set(os.listdir(out_dir))
        code, stdout, stderr = runner(args)
        defects = judge(command, code, stdout, stderr, wants_json)
        if sha256(path) != before:
            defects.append(f"{command}: the input file changed")
        new = set(os.listdir(out_dir)) - existing
        leftovers = sorted(n for n in new if ".part" in n or n.startswith("."))
        if leftovers:
            defects.append(f"{command}: temporary files left: {leftovers}")
        if code != 0 and command == "renumber" and new:
            defects.append(f"{command}: failed but left {sorted(new)}")
        for name in new:  # each case starts from an empty output folder
            p = out_dir / name
            shutil.rmtree(p) if p.is_dir() else p.unlink()
        outcomes.append(Outcome(command, code, stdout, stderr, tuple(defects)))
    return outcomes


def subprocess_runner(args: list[str]) -> tuple[int, str, str]:
    """Run ``bandwise ARGS`` in a fresh interpreter (what a user does)."""
    try:
        done = subprocess.run([sys.executable, "-m", "bandwise", *args], check=False,
                              capture_output=True,
                              text=True, timeout=TIMEOUT, errors="replace")
    except subprocess.TimeoutExpired:
        return -1, "", f"hang: no answer in {TIMEOUT} s"
    return done.returncode, done.stdout, done.stderr


class _Hang(BaseException):
    """Raised by the alarm when a command runs too long (not an Exception: nothing catches it)."""


def _hang(signum: int, frame: object) -> None:
    raise _Hang


def in_process_runner() -> Callable[[list[str]], tuple[int, str, str]]:
    """Run the command line in this interpreter (many more cases per minute)."""
    from typer.testing import CliRunner

    from bandwise.faces.cli import app, load_commands

    load_commands()
    try:
        runner = CliRunner(mix_stderr=False)
    except TypeError:  # newer click keeps them apart by default
        runner = CliRunner()

    def run(args: list[str]) -> tuple[int, str, str]:
        previous = signal.signal(signal.SIGALRM, _hang)
        signal.alarm(TIMEOUT)
        try:
            result = runner.invoke(app, args)
        except _Hang:
            return -1, "", f"hang: no answer in {TIMEOUT} s"
        finally:
            signal.alarm(0)
            signal.signal(signal.SIGALRM, previous)
        stderr = result.stderr
        if result.exception is not None and not isinstance(result.exception, SystemExit):
            stderr += f"\nTraceback (escaped the command line): {result.exception!r}"
        return result.exit_code, result.stdout, stderr

    return run


def mutated_copy(seed: Path, folder: Path, rng: random.Random, case: int) -> tuple[Path, str]:
    """A damaged copy of ``seed`` in ``folder`` (companion files copied beside it)."""
    name = rng.choice(list(MUTATIONS))
    data = MUTATIONS[name](seed.read_bytes(), rng)
    target = folder / f"case{case}_{seed.name}"
    target.write_bytes(data)
    target.chmod(0o444)  # the input is read-only to bandwise: make it so
    return target, name


def main() -> None:
    global TIMEOUT
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=200, help="most cases to run")
    parser.add_argument("--seconds", type=float, default=300, help="stop after this long")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--keep", type=Path, help="copy the files of defective cases here")
    parser.add_argument("--in-process", action="store_true",
                        help="run the commands in this interpreter, not a fresh one each time")
    parser.add_argument("--verbose", action="store_true", help="name every case as it starts")
    parser.add_argument("--memory-gb", type=float, default=6.0,
                        help="address-space limit of an in-process run, so that a case asking "
                             "for too much memory gets MemoryError instead of the system's "
                             "out-of-memory killer (6)")
    parser.add_argument("--timeout", type=int, default=TIMEOUT,
                        help=f"seconds a command may take before it counts as a hang ({TIMEOUT})")
    args = parser.parse_args()
    TIMEOUT = args.timeout
    if args.in_process:
        import resource

        limit = int(args.memory_gb * 2**30)
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    runner = in_process_runner() if args.in_process else subprocess_runner
    rng = random.Random(args.seed)
    t0 = time.monotonic()
    ran = defective = 0
    counts: dict[str, int] = {}
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        seeds_dir, cases_dir, out_dir = work / "seeds", work / "cases", work / "out"
        for d in (seeds_dir, cases_dir, out_dir):
            d.mkdir()
        seeds = seed_files(seeds_dir)
        while ran < args.cases and time.monotonic() - t0 < args.seconds:
            seed = rng.choice(seeds)
            path, mutation = mutated_copy(seed, cases_dir, rng, ran)
            if args.verbose:
                print(f"case {ran + 1}: {mutation} of {seed.name}", flush=True)
            outcomes = run_case(path, out_dir, runner)
            ran += 1
            defects = [d for o in outcomes for d in o.defects]
            if defects:
                defective += 1
                for d in defects:
                    key = d.split(":")[0] + ": " + d.split(":")[1].strip()[:40]
                    counts[key] = counts.get(key, 0) + 1
                print(f"DEFECT case {ran} ({mutation} of {seed.name}): {'; '.join(defects)}",
                      flush=True)
                if args.keep:
                    args.keep.mkdir(parents=True, exist_ok=True)
                    shutil.copyfile(path, args.keep / path.name)
            path.chmod(0o644)
            path.unlink()
    print(f"{ran} cases in {time.monotonic() - t0:.0f} s, {defective} with a defect")
    for key, count in sorted(counts.items(), key=lambda kv: -kv[1]):
        print(f"  {count:4d}  {key}")


if __name__ == "__main__":
    main()
