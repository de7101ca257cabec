"""``check`` and ``renumber`` with --jobs, --scheduler, --results and --out-dir, as users run them.

The command runs in a process of its own (``python -m bandwise``), so that the
local cluster's worker processes start as they do for a user.  Bandwidths are
compared with the definition computed from the files' cells
(test_batch.reference_bandwidth: George and Liu 1981).
"""

from __future__ import annotations

import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from test_batch import loopback_cluster, reference_bandwidth  # noqa: F401  (a fixture)

from bandwise.core.generate import scrambled, tet_grid
from bandwise.formats import read_model, write_model


def bandwise(*args: str, timeout: float = 240) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "bandwise", *map(str, args)],
                          capture_output=True, text=True, timeout=timeout)


def lines_of(path: Path) -> list[dict]:
    return [json.loads(x) for x in path.read_text().splitlines()]


@pytest.fixture(scope="module")
def nine(tmp_path_factory):
    """Nine generated brackets, the last one corrupt (cut short inside its node block)."""
    folder = tmp_path_factory.mktemp("nine")
    for k in range(8):
        write_model(scrambled(tet_grid(4 + k % 3, 4, 3 + k % 2), k), folder / f"bracket_{k}.msh")
    (folder / "bracket_8.msh").write_bytes((folder / "bracket_0.msh").read_bytes()[:300])
    return folder


@pytest.fixture(scope="module")
def nine_on_two_jobs(nine, tmp_path_factory):
    """``check NINE --jobs 2 --results R.jsonl``, run once for the tests that read it."""
    results = tmp_path_factory.mktemp("results") / "R.jsonl"
    return results, bandwise("check", nine, "--jobs", 2, "--results", results)


def test_nine_meshes_one_corrupt_give_nine_lines_and_exit_2_and_a_rerun_adds_none(
        nine, nine_on_two_jobs):
    results, first = nine_on_two_jobs
    assert first.returncode == 2, first.stderr
    lines = lines_of(results)
    assert len(lines) == 9
    errors = [ln for ln in lines if "error" in ln]
    assert [Path(e["file"]).name for e in errors] == ["bracket_8.msh"]
    assert set(errors[0]) == {"file", "error", "sha256"}
    analysed = [ln for ln in lines if "error" not in ln]
    assert len(analysed) == 8
    for ln in analysed:                                    # the file's check --json entry
        assert ln["current_numbering"]["nodes"]["bandwidth"] == \
            reference_bandwidth(Path(ln["file"]))
        assert ln["verdict"] == "unsupported"              # no supports: a free body
    # the same entry as check --json gives for that file alone
    alone = json.loads(bandwise("check", nine / "bracket_3.msh", "--json").stdout)["meshes"][0]
    entry = next(ln for ln in analysed if ln["file"].endswith("bracket_3.msh"))
    assert {k: v for k, v in entry.items() if k not in ("sha256", "file")} == \
        {k: v for k, v in alone.items() if k != "file"}
    assert "on a local cluster of 2 worker processes" in first.stderr
    assert "9/9 files, 1 error" in first.stderr
    assert "bracket_8.msh  error" in first.stdout          # the summary table

    again = bandwise("check", nine, "--jobs", 2, "--results", results)
    assert again.returncode == 2
    assert "9 files already in the results file, skipped" in again.stderr
    assert len(lines_of(results)) == 9


def test_a_separate_scheduler_and_worker_give_the_same_verdicts_and_bandwidths(
        nine, nine_on_two_jobs, tmp_path, loopback_cluster):  # noqa: F811
    local, a = nine_on_two_jobs
    remote = tmp_path / "remote.jsonl"
    b = bandwise("check", nine, "--scheduler", loopback_cluster, "--results", remote, "--json")
    assert a.returncode == b.returncode == 2, b.stderr
    assert f"on the scheduler at {loopback_cluster} (1 worker, 2 threads)" in b.stderr

    def by_file(path: Path) -> dict:
        return {ln["file"]: (ln.get("verdict"), ln.get("current_numbering", {}).get(
            "dofs", {}).get("bandwidth"), "error" in ln) for ln in lines_of(path)}

    assert by_file(local) == by_file(remote)
    assert len(by_file(remote)) == 9
    # --json: stdout is the check --json document alone, progress and table on stderr
    doc = json.loads(b.stdout)
    assert [Path(m["file"]).name for m in doc["meshes"]] == [f"bracket_{k}.msh" for k in range(9)]
    assert "error" in doc["meshes"][8] and "verdict" not in doc["meshes"][8]
    assert "bracket_8.msh  error" in b.stderr


def test_renumber_many_into_a_folder_on_a_local_cluster(tmp_path):
    sweep = tmp_path / "sweep"
    (sweep / "a").mkdir(parents=True)
    (sweep / "b").mkdir()
    for k in range(3):
        for sub in ("a", "b"):
            write_model(scrambled(tet_grid(4 + k, 4, 3), k), sweep / sub / f"bracket_{k}.vtu")
    out = sweep / "renumbered"                             # inside the inputs: never read back
    run = bandwise("renumber", sweep, "--out-dir", out, "--jobs", 2, "--method", "rcm", "--json")
    assert run.returncode == 0, run.stderr
    docs = json.loads(run.stdout)["files"]
    assert len(docs) == 6
    for doc in docs:
        written = Path(doc["output"])
        rel = written.relative_to(out)
        assert (sweep / rel).exists()                      # a/bracket_0.vtu -> OUT/a/bracket_0.vtu
        assert written.exists() and written.with_name(written.stem + ".map.csv").exists()
        chosen = doc["comparison"]["chosen"]
        figures = next(m for m in doc["comparison"]["methods"] if m["method"] == chosen)
        assert reference_bandwidth(written) == figures["nodes"]["bandwidth"]
        assert read_model(written).n_nodes == read_model(sweep / rel).n_nodes
    # in this process this time: the outputs inside the inputs' folder are not taken as inputs
    again = bandwise("renumber", sweep, "--out-dir", out, "--method", "rcm", "--results",
                     tmp_path / "R.jsonl")
    assert again.returncode == 0 and "renumbering 6 files in this process" in again.stderr


def test_interrupting_the_client_leaves_a_valid_results_file_and_the_rerun_finishes(tmp_path):
    folder = tmp_path / "sweep"
    folder.mkdir()
    for k in range(12):                                    # a second or so each
        write_model(scrambled(tet_grid(24, 24, 20 + k), k), folder / f"plate_{k:02d}.vtu")
    results = tmp_path / "R.jsonl"
    proc = subprocess.Popen([sys.executable, "-m", "bandwise", "check", str(folder), "--jobs",
                             "2", "--results", str(results)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.time() + 180
        while time.time() < deadline and proc.poll() is None and (
                not results.exists() or results.read_text().count("\n") < 2):
            time.sleep(0.05)
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 2
    assert "interrupted after" in err and "run the same command again to resume" in err
    done = lines_of(results)                               # every line whole JSON
    assert 2 <= len(done) < 12
    rerun = bandwise("check", folder, "--results", results)   # resumed in this process
    assert rerun.returncode == 0, rerun.stderr
    assert f"{len(done)} files already in the results file, skipped" in rerun.stderr
    final = lines_of(results)
    assert len(final) == 12 and len({ln["sha256"] for ln in final}) == 12


@pytest.mark.parametrize("args,message", [
    (["renumber", "a.msh", "b.msh", "c.msh"], "give IN and OUT, or --out-dir"),
    (["renumber", "a.msh", "--jobs", "2"], "a batch writes into a folder"),
    (["renumber", "a.msh", "--out-dir", "o", "--map", "m.csv"], "--map takes one file"),
    (["check", "a.msh", "--jobs", "2", "--report", "r"], "--report takes one file"),
    (["check", "a.msh", "--jobs", "2", "--scheduler", "tcp://127.0.0.1:1"], "not both"),
])
def test_batch_options_refused_with_one_line(runner, cli_app, tmp_path, monkeypatch, args,
                                             message):
    monkeypatch.chdir(tmp_path)
    write_model(tet_grid(3, 3, 3), tmp_path / "a.msh")
    result = runner.invoke(cli_app, args)
    assert result.exit_code == 2
    assert message in result.stderr and result.stderr.count("\n") == 1
