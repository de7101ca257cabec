"""Many files as tasks (bandwise.workflows.batch): inputs, the results file, Dask clusters, faults.

The task here is a small real one (read, node graph, sizing summary) so that
these tests exercise the batch machinery alone; the command-line tests
(test_batch_cli.py) run the full check and renumber workflows.  The figures
each run gives are compared with the bandwidth computed here from the
element connectivity by its definition (semi-bandwidth b = max |i - j| over
coupled nodes i, j: George and Liu 1981, Computer Solution of Large Sparse
Positive Definite Systems, the definition the README states).
"""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp

from bandwise.core.generate import hex_grid, quad_grid, scrambled, tet_grid, triangle_grid
from bandwise.formats import read_model, write_model
from bandwise.workflows.batch import (
    BatchProgress,
    FileOutcome,
    ResultsFile,
    expand_paths,
    output_paths,
    run_batch,
    sha256_of,
    task_memory,
)

#: Lets processes started here (a killed client, a scheduler and its worker) import this
#: module's tasks, as a real cluster has bandwise installed on every machine.
HERE_ENV = {**os.environ, "PYTHONPATH": os.pathsep.join(
    [str(Path(__file__).parent), os.environ.get("PYTHONPATH", "")])}


@dataclass(frozen=True)
class Sizing:
    """Stand-in per-file task: read, node graph, sizing summary (a real ``to_dict()``)."""

    sleep: float = 0.0

    def __call__(self, path: str):
        from bandwise.core.dofs import dof_layout
        from bandwise.core.graph import node_graph
        from bandwise.core.summary import summarise

        time.sleep(self.sleep)
        model = read_model(path)
        return summarise(model, dof_layout(model), graph=node_graph(model))


@dataclass(frozen=True)
class Dies:
    """Kills the worker running it: always on ``poison*`` files, once on ``flaky*`` files."""

    marks: str

    def __call__(self, path: str):
        name = Path(path).name
        if name.startswith("poison"):
            with open(Path(self.marks) / f"{name}.deaths", "a") as fh:
                fh.write(f"{os.getpid()}\n")
            os.kill(os.getpid(), signal.SIGKILL)
        if name.startswith("flaky"):
            try:
                fd = os.open(Path(self.marks) / f"{name}.died",
                             os.O_CREAT | os.O_EXCL | os.O_WRONLY)
            except FileExistsError:
                pass
            else:
                os.write(fd, str(os.getpid()).encode())
                os.close(fd)
                os.kill(os.getpid(), signal.SIGKILL)
        return Sizing()(path)


@dataclass(frozen=True)
class Span:
    """Records when it ran, to see which tasks ran at once."""

    seconds: float

    def __call__(self, path: str):
        t0 = time.time()
        time.sleep(self.seconds)
        return {"file": path, "start": t0, "end": time.time(), "pid": os.getpid()}


def reference_bandwidth(path: Path) -> int:
    """Semi-bandwidth at node level from the file's cells, by the definition."""
    model = read_model(path)
    rows, cols = [], []
    for block in model.cells:
        c = block.data
        for a in range(c.shape[1]):
            for b in range(c.shape[1]):
                if a != b:
                    rows.append(c[:, a])
                    cols.append(c[:, b])
    pattern = sp.coo_matrix((np.ones(sum(len(r) for r in rows)),
                             (np.concatenate(rows), np.concatenate(cols))))
    return int(np.max(np.abs(pattern.row - pattern.col)))


GOOD = {
    "bracket_tet_{}.msh": lambda k: scrambled(tet_grid(3 + k % 3, 3, 4), k),
    "plate_quad_{}.vtu": lambda k: scrambled(quad_grid(4 + k, 3), k),
    "plate_tri_{}.vtk": lambda k: scrambled(triangle_grid(3, 4 + k), k),
    "frame_hex_{}.msh": lambda k: scrambled(hex_grid(3, 3, 2 + k % 2), k),
}


def make_meshes(folder: Path, n_good: int = 16) -> tuple[list[Path], list[Path]]:
    """``n_good`` generated meshes of four kinds in two subfolders, and four bad files."""
    good = []
    for k in range(n_good):
        name, build = list(GOOD.items())[k % len(GOOD)]
        sub = folder / ("sweep_a" if k % 2 else "sweep_b")
        sub.mkdir(parents=True, exist_ok=True)
        path = sub / name.format(k)
        write_model(build(k), path)
        good.append(path)
    bad_dir = folder / "sweep_b"
    cut = bad_dir / "bracket_cut.msh"                      # cut short inside $Nodes
    cut.write_bytes(good[0].read_bytes()[:200])
    noise = bad_dir / "bracket_noise.vtu"                  # not XML at all
    noise.write_bytes(bytes(range(256)) * 8)
    empty = bad_dir / "bracket_empty.msh"
    empty.write_bytes(b"")
    dangling = bad_dir / "bracket_dangling.msh"            # an element on a node that is not there
    dangling.write_text("$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n3\n1 0 0 0\n2 1 0 0\n"
                        "3 0 1 0\n$EndNodes\n$Elements\n1\n1 2 0 1 2 7\n$EndElements\n")
    return good, [cut, noise, empty, dangling]


@pytest.fixture(scope="module")
def meshes(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sweep")
    good, bad = make_meshes(folder)
    return folder, good, bad


def lines_of(path: Path) -> list[dict]:
    return [json.loads(x) for x in path.read_text().splitlines()]


# --------------------------------------------------------------------------- inputs


def test_expand_paths_searches_folders_matches_globs_and_keeps_named_files(tmp_path):
    (tmp_path / "a" / "deep").mkdir(parents=True)
    (tmp_path / ".hidden").mkdir()
    (tmp_path / "out").mkdir()
    for name in ("a/one.msh", "a/deep/two.vtu", "a/notes.txt", "a/run.jsonl", ".hidden/x.msh",
                 "a/.one.part.msh",
                 "out/renumbered.msh", "b.mtx", "c.inp"):
        (tmp_path / name).write_text("x")
    found = expand_paths([tmp_path], exclude=[tmp_path / "out"])
    assert [p.relative_to(tmp_path).as_posix() for p in found] == \
        ["a/deep/two.vtu", "a/one.msh", "b.mtx", "c.inp"]
    assert expand_paths([str(tmp_path / "**" / "*.msh")], exclude=[tmp_path / "out"]) == \
        [tmp_path / "a" / "one.msh"]
    # a named file is kept as given, even missing or of an unknown kind: its task says so
    kept = expand_paths([tmp_path / "a" / "notes.txt", tmp_path / "missing.msh",
                         tmp_path / "a" / "notes.txt", tmp_path / "a" / "one.msh", tmp_path])
    assert kept == [tmp_path / "a" / "notes.txt", tmp_path / "missing.msh",
                    tmp_path / "a" / "notes.txt", tmp_path / "a" / "one.msh",
                    tmp_path / "a" / "deep" / "two.vtu", tmp_path / "b.mtx", tmp_path / "c.inp",
                    tmp_path / "out" / "renumbered.msh"]


def test_expand_paths_refuses_a_folder_or_pattern_without_meshes(tmp_path):
    from bandwise.core.errors import InputError

    (tmp_path / "empty").mkdir()
    with pytest.raises(InputError, match="no mesh or matrix file"):
        expand_paths([tmp_path / "empty"])
    with pytest.raises(InputError, match="matches no mesh"):
        expand_paths([str(tmp_path / "*.msh")])


def test_output_paths_mirror_the_inputs_below_their_common_folder(tmp_path):
    from bandwise.core.errors import InputError

    a, b = tmp_path / "s" / "a" / "m.msh", tmp_path / "s" / "b" / "m.msh"
    out = output_paths([a, b], tmp_path / "out")
    assert out == {str(a): str(tmp_path / "out" / "a" / "m.msh"),
                   str(b): str(tmp_path / "out" / "b" / "m.msh")}
    assert output_paths([a], tmp_path / "out") == {str(a): str(tmp_path / "out" / "m.msh")}
    with pytest.raises(InputError, match="where the inputs are"):
        output_paths([a, b], tmp_path / "s")


def test_task_memory_from_the_header_or_the_file_size(meshes):
    from bandwise.core.memory import BASELINE_BYTES, estimate_bytes
    from bandwise.workflows.batch import PEAK_OVER_ESTIMATE, SIZE_FACTORS, CheckTask, RenumberTask

    _, good, bad = meshes
    msh = good[0]
    model = read_model(msh)                               # the header's counts, cells of 4 nodes
    low = estimate_bytes(model.n_nodes, {"unknown": model.n_cells})
    assert low > BASELINE_BYTES
    assert CheckTask().memory(str(msh)) == int(PEAK_OVER_ESTIMATE["check"] * low)
    assert RenumberTask({}).memory(str(msh)) == int(PEAK_OVER_ESTIMATE["renumber"] * low)
    vtk = next(p for p in good if p.suffix == ".vtk")          # no counts in a legacy VTK header
    assert task_memory(vtk) == BASELINE_BYTES + SIZE_FACTORS["check"][None] * vtk.stat().st_size


# --------------------------------------------------------------------------- results file


def test_results_file_drops_a_torn_last_line_and_appends_whole_lines(tmp_path):
    path = tmp_path / "r.jsonl"
    whole = {"file": "a.msh", "sha256": "1" * 64, "nodes": 4}
    path.write_text(json.dumps(whole) + "\n" + '{"file": "b.msh", "sha2')   # killed mid-write
    with ResultsFile(path) as store:
        assert store.lines == [whole] and store.dropped_torn_line
        store.append({"file": "c.msh", "sha256": "2" * 64, "nodes": np.int64(8)})
    assert lines_of(path) == [whole, {"file": "c.msh", "sha256": "2" * 64, "nodes": 8}]


def test_results_file_refuses_a_file_that_is_not_one(tmp_path):
    from bandwise.core.errors import InputError

    path = tmp_path / "notes.jsonl"
    path.write_text("hello\n")
    with pytest.raises(InputError, match="line 1 is not a bandwise result"):
        ResultsFile(path).__enter__()
    assert path.read_text() == "hello\n"                    # left as it was


def test_results_file_is_written_by_one_batch_at_a_time(tmp_path):
    from bandwise.core.errors import InputError

    path = tmp_path / "r.jsonl"
    with ResultsFile(path):
        with pytest.raises(InputError, match="another batch"):
            ResultsFile(path).__enter__()


# --------------------------------------------------------------------------- in this process


def test_in_process_batch_records_every_file_and_resumes(meshes, tmp_path):
    folder, good, bad = meshes
    files = expand_paths([folder])
    assert len(files) == 20
    results = tmp_path / "r.jsonl"
    seen: list[BatchProgress] = []
    first = run_batch(files, Sizing(), results=results, on_progress=seen.append)
    assert [o.file for o in first.outcomes] == [str(p) for p in files]
    assert sorted(o.file for o in first.errors) == sorted(str(p) for p in bad)
    for o in first.outcomes:
        if o.ok:
            assert o.entry["current_numbering"]["nodes"]["bandwidth"] == \
                reference_bandwidth(Path(o.file))
    # progress: once at the start, then once per file, the count rising to the total
    assert [p.done for p in seen] == list(range(21)) and seen[-1].total == 20
    assert seen[-1].errors == 4 and seen[-1].eta == 0.0
    lines = lines_of(results)
    assert len(lines) == 20
    assert {ln["sha256"] for ln in lines} == {sha256_of(p) for p in files}
    errors = [ln for ln in lines if "error" in ln]
    assert len(errors) == 4 and all(set(ln) == {"file", "error", "sha256"} for ln in errors)

    # a rerun skips every file, adds no line, and gives the same outcomes back
    again = run_batch(files, Sizing(), results=results)
    assert again.skipped == 20 and len(lines_of(results)) == 20
    assert [o.entry for o in again.outcomes] == [o.entry for o in first.outcomes]
    assert [o.error for o in again.outcomes] == [o.error for o in first.outcomes]

    # a changed file is a new file: only it runs again
    changed = good[1]
    backup = changed.read_bytes()
    try:
        write_model(scrambled(quad_grid(6, 6), 99), changed)
        third = run_batch(files, Sizing(), results=results)
    finally:
        changed.write_bytes(backup)
    assert third.skipped == 19 and len(lines_of(results)) == 21
    assert lines_of(results)[-1]["nodes"] == 36


def test_a_killed_batch_resumes_where_it_stopped(meshes, tmp_path):
    """The client is killed mid-batch (SIGKILL, no clean-up): the rerun finishes the rest."""
    folder, _, _ = meshes
    files = [str(p) for p in expand_paths([folder])]
    results = tmp_path / "r.jsonl"
    driver = (
        "import sys, test_batch\n"
        "from bandwise.workflows.batch import run_batch\n"
        f"run_batch(sys.argv[1:], test_batch.Sizing(sleep=0.3), results={str(results)!r})\n")
    proc = subprocess.Popen([sys.executable, "-c", driver, *files], env=HERE_ENV)
    try:
        deadline = time.time() + 120
        while time.time() < deadline and (not results.exists()
                                           or results.read_text().count("\n") < 5):
            time.sleep(0.05)
        proc.send_signal(signal.SIGKILL)
    finally:
        proc.wait(30)
    done = lines_of(results)                                 # every line whole
    assert 5 <= len(done) < 20
    rerun = run_batch(files, Sizing(), results=results)
    assert rerun.skipped == len(done)
    final = lines_of(results)
    assert len(final) == 20 and len({ln["sha256"] for ln in final}) == 20


# --------------------------------------------------------------------------- local cluster


def test_local_cluster_of_two_workers_gives_what_one_process_gives(meshes, tmp_path):
    folder, good, bad = meshes
    files = expand_paths([folder])
    results = tmp_path / "r.jsonl"
    cluster = run_batch(files, Sizing(), jobs=2, results=results)
    alone = run_batch(files, Sizing())
    assert cluster.where == "on a local cluster of 2 worker processes"
    assert [o.entry for o in cluster.outcomes] == [o.entry for o in alone.outcomes]
    assert [o.error for o in cluster.outcomes] == [o.error for o in alone.outcomes]
    assert len({o.worker for o in cluster.outcomes}) == 2     # both workers took files
    assert {o.worker.split(":")[1] for o in cluster.outcomes} != {str(os.getpid())}
    assert len(lines_of(results)) == 20
    for o in cluster.outcomes:
        if o.ok:
            assert o.entry["current_numbering"]["nodes"]["bandwidth"] == \
                reference_bandwidth(Path(o.file))


def test_a_dead_worker_task_is_retried_and_a_file_that_kills_twice_is_an_error(meshes, tmp_path):
    folder, good, _ = meshes
    flaky = tmp_path / "flaky_bracket.msh"
    poison = tmp_path / "poison_bracket.msh"
    flaky.write_bytes(good[0].read_bytes())
    poison.write_bytes(good[2].read_bytes())
    files = [good[4], flaky, good[5], poison, good[6], good[7]]
    marks = tmp_path / "marks"
    marks.mkdir()
    results = tmp_path / "r.jsonl"
    out = run_batch(files, Dies(str(marks)), jobs=2, results=results)
    by_name = {Path(o.file).name: o for o in out.outcomes}
    # the flaky file's first worker died; another worker finished it
    died_pid = (marks / "flaky_bracket.msh.died").read_text()
    assert by_name["flaky_bracket.msh"].ok
    assert by_name["flaky_bracket.msh"].worker.split(":")[1] != died_pid
    assert by_name["flaky_bracket.msh"].entry["nodes"] == read_model(flaky).n_nodes
    # the poison file killed two workers, the second time alone: an error, and every other
    # file was worked on, whichever worker it shared with the poison file
    assert len((marks / "poison_bracket.msh.deaths").read_text().split()) == 2
    assert "worker process died each time it worked on this file, the last time with no " \
        "other file running" in by_name["poison_bracket.msh"].error
    assert [o.ok for o in out.outcomes] == [True, True, True, False, True, True]
    assert len(lines_of(results)) == 6


# --------------------------------------------------------------------------- an existing cluster


def _stop(proc: subprocess.Popen) -> None:
    if proc.poll() is None:
        proc.terminate()
        try:
            proc.wait(20)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(20)


@pytest.fixture(scope="module")
def loopback_cluster(tmp_path_factory):
    """``dask scheduler`` and one ``dask worker`` (2 threads, MEMORY=1e9) on 127.0.0.1."""
    folder = tmp_path_factory.mktemp("cluster")
    scheduler_file = folder / "scheduler.json"
    dask = [sys.executable, "-m", "dask"]
    log = open(folder / "cluster.log", "wb")
    scheduler = subprocess.Popen(
        dask + ["scheduler", "--host", "127.0.0.1", "--port", "0", "--no-dashboard",
                "--scheduler-file", str(scheduler_file)], stdout=log, stderr=log, env=HERE_ENV)
    worker = None
    try:
        deadline = time.time() + 90
        while not scheduler_file.exists() and time.time() < deadline:
            assert scheduler.poll() is None, (folder / "cluster.log").read_text()
            time.sleep(0.1)
        time.sleep(0.2)                                       # let the file be written whole
        address = json.loads(scheduler_file.read_text())["address"]
        worker = subprocess.Popen(
            dask + ["worker", address, "--nthreads", "2", "--nworkers", "1", "--no-dashboard",
                    "--host", "127.0.0.1", "--resources", "MEMORY=1e9"],
            stdout=log, stderr=log, env=HERE_ENV)
        yield address
    finally:
        for proc in (worker, scheduler):
            if proc is not None:
                _stop(proc)
        log.close()


def test_an_existing_scheduler_gives_what_this_process_gives(meshes, loopback_cluster):
    folder, _, _ = meshes
    files = expand_paths([folder])
    remote = run_batch(files, Sizing(), scheduler=loopback_cluster, timeout=90,
                       estimate=lambda p: 1e8)
    local = run_batch(files, Sizing())
    assert remote.where == f"on the scheduler at {loopback_cluster} (1 worker, 2 threads)"
    assert [o.entry for o in remote.outcomes] == [o.entry for o in local.outcomes]
    assert [o.error for o in remote.outcomes] == [o.error for o in local.outcomes]


def _overlapped(outcomes: tuple[FileOutcome, ...]) -> bool:
    spans = sorted((o.entry["start"], o.entry["end"]) for o in outcomes)
    return any(b[0] < a[1] for a, b in zip(spans, spans[1:]))


def test_a_worker_takes_on_no_more_memory_at_once_than_it_holds(meshes, loopback_cluster):
    """The worker holds MEMORY=1e9 and has 2 threads: two tasks of 0.4e9 run at once,
    two of 0.6e9 one after the other, and one of 2e9 is refused without being sent."""
    _, good, _ = meshes
    pair = good[:2]
    small = run_batch(pair, Span(1.5), scheduler=loopback_cluster, estimate=lambda p: 4e8)
    assert _overlapped(small.outcomes)
    large = run_batch(pair, Span(1.5), scheduler=loopback_cluster, estimate=lambda p: 6e8)
    assert all(o.ok for o in large.outcomes) and not _overlapped(large.outcomes)
    huge = run_batch(pair[:1], Span(0.0), scheduler=loopback_cluster, estimate=lambda p: 2e9)
    assert "needs about 1.9 GiB of memory; the largest worker holds 953.7 MiB" in \
        huge.outcomes[0].error


def test_an_unreachable_scheduler_is_one_clear_error(meshes):
    from bandwise.core.errors import InputError

    with socket.socket() as s:                                # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    with pytest.raises(InputError, match="cannot reach the Dask scheduler"):
        run_batch(meshes[1][:1], Sizing(), scheduler=f"tcp://127.0.0.1:{port}", timeout=3)


def test_jobs_and_scheduler_are_one_or_the_other(meshes):
    from bandwise.core.errors import InputError

    with pytest.raises(InputError, match="not both"):
        run_batch(meshes[1][:1], Sizing(), jobs=2, scheduler="tcp://127.0.0.1:1")
    with pytest.raises(InputError, match="at least 1"):
        run_batch(meshes[1][:1], Sizing(), jobs=0)


