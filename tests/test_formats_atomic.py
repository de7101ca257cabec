"""Outputs after a kill: the old file or the new one, plus at most one temporary place.

A child process writes a mesh over an existing output and is killed
(``SIGKILL``: no clean-up can run) at moments spread over its write; the
folder must then hold the old output byte for byte or the new one whole,
and at most the output's one temporary folder, which the next write of
the same output removes.  Renaming a file within one folder replaces the
target atomically (POSIX ``rename(2)``; common practice).
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from bandwise.core.errors import MeshWriteError
from bandwise.core.generate import tet_grid
from bandwise.formats import write_model
from bandwise.formats.atomic import OWNER, temporary_place
from bandwise.formats.registry import FileKind

ROOT = Path(__file__).resolve().parent.parent

CHILD = """
import sys, time
from bandwise.core.generate import tet_grid
from bandwise.formats import write_model
from bandwise.formats.registry import FileKind
model = tet_grid(45, 45, 45)
model.file_kind = FileKind("vtk", "4.2", "binary")
print("writing", flush=True)
t = time.perf_counter()
write_model(model, sys.argv[1])
print(f"done {time.perf_counter() - t:.3f}", flush=True)
"""


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _new_model():
    model = tet_grid(45, 45, 45)
    model.file_kind = FileKind("vtk", "4.2", "binary")
    return model


def _child(out: Path) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", CHILD, str(out)], stdout=subprocess.PIPE,
                            text=True, cwd=ROOT)


def test_a_kill_at_any_moment_leaves_old_or_new_and_one_temporary_place(tmp_path):
    reference = tmp_path / "reference"
    reference.mkdir()
    write_model(_new_model(), reference / "plate.vtk")
    new = _sha(reference / "plate.vtk")
    folder = tmp_path / "job"
    folder.mkdir()
    out = folder / "plate.vtk"
    # how long a whole write takes in a child, measured once
    child = _child(out)
    lines = child.communicate(timeout=120)[0].split()
    duration = float(lines[lines.index("done") + 1])
    assert _sha(out) == new
    seen = set()
    for fraction in (0.0, 0.3, 0.6, 0.9, 1.2):
        write_model(tet_grid(4, 4, 4), out)          # an old output to protect
        old = _sha(out)
        child = _child(out)
        assert child.stdout.readline().strip() == "writing"
        time.sleep(fraction * duration)
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=60)
        child.stdout.close()
        entries = sorted(p.name for p in folder.iterdir())
        assert entries in (["plate.vtk"], [".plate.vtk.part", "plate.vtk"]), entries
        state = {old: "old", new: "new"}.get(_sha(out))
        assert state is not None, "the output is neither the old file nor the new one"
        seen.add((state, len(entries)))
        # the next write of the same output clears what the killed one left
        write_model(_new_model(), out)
        assert sorted(p.name for p in folder.iterdir()) == ["plate.vtk"] and _sha(out) == new
    # the kills did land inside the write: some left the temporary place behind
    assert any(n == 2 for _, n in seen), seen


def test_a_running_writer_is_not_disturbed(tmp_path):
    out = tmp_path / "plate.vtk"
    place = temporary_place(out)
    place.mkdir()
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        with open(f"/proc/{sleeper.pid}/stat") as fh:
            start = fh.read().rsplit(")", 1)[1].split()[19]
        (place / OWNER).write_text(f"{sleeper.pid} {start}\n")
        with pytest.raises(MeshWriteError, match=f"another run \\(process {sleeper.pid}\\)"):
            write_model(tet_grid(3, 3, 3), out)
        assert not out.exists() and place.is_dir()
    finally:
        sleeper.kill()
        sleeper.wait()
    # its owner gone, the place is stale: the next write removes it
    write_model(tet_grid(3, 3, 3), out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plate.vtk"]


def test_xdmf_output_switches_whole_and_leaves_no_old_data(tmp_path):
    """The XDMF file and its HDF5 data are replaced together; the old data file is removed."""
    from bandwise.formats.mesh_io import xdmf_companions

    out = tmp_path / "plate.xdmf"
    write_model(tet_grid(4, 4, 4), out)
    first = xdmf_companions(out)
    write_model(tet_grid(5, 5, 5), out)
    second = xdmf_companions(out)
    assert len(first) == len(second) == 1 and first != second
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["plate.xdmf", *second])
    from bandwise.formats import read_model

    assert read_model(out).n_nodes == 125


def test_temporary_place_is_one_per_output():
    assert temporary_place("/x/out.vtu") == Path("/x/.out.vtu.part")
    assert os.path.basename(temporary_place("a.msh")) == ".a.msh.part"
