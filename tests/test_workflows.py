"""The library workflows behind every face: one verdict, typed results, a batch that loses no file.

The expected counts come from theory, not from bandwise: a free 3D solid has
6 rigid-body modes (translations and rotations; common practice, e.g.
K. J. Bathe, *Finite Element Procedures*, 1996, section 10.2.4), and a block
held fixed on a whole face has none.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from conftest import ROOT

import bandwise
from bandwise.core.generate import hex_grid
from bandwise.formats import write_model


@pytest.fixture(scope="module")
def block(tmp_path_factory) -> Path:
    """A hexahedral block of 4 x 3 x 2 nodes (24), 10 mm cells; held on its x = 0 face."""
    model = hex_grid(4, 3, 2, h=10.0)
    path = tmp_path_factory.mktemp("wf") / "block.vtu"
    write_model(model, path)
    return path


HELD = ["plane x=0:fixed"]


def test_free_and_held_blocks_get_different_words(block):
    free = bandwise.check_file(block)
    held = bandwise.check_file(block, supports=HELD)
    assert free.supports.free_modes == 6 and held.supports.free_modes == 0
    assert free.verdict.word == "unsupported" and "6 zero-energy modes" in free.verdict.reason
    assert held.verdict.word == "ready"
    assert not free.failed and not held.failed       # the gate itself is unchanged


@pytest.mark.parametrize("supports", [[], HELD], ids=["free", "held"])
def test_one_verdict_in_json_report_and_library(block, supports, runner, cli_app, tmp_path):
    args = [a for s in supports for a in ("--support", s)]
    res = runner.invoke(cli_app, ["check", "--json", str(block), *args,
                                  "--report", str(tmp_path / "rep")])
    assert res.exit_code == 0                        # the held block (and the free one) pass
    cli_word = json.loads(res.stdout)["meshes"][0]["verdict"]
    report_word = json.loads((tmp_path / "rep" / "report.json").read_text())["verdict"]
    lib = bandwise.check_file(block, supports=supports)
    assert cli_word == report_word == lib.to_dict()["verdict"] == lib.verdict.word
    page = (tmp_path / "rep" / "report.html").read_text()
    assert f"Verdict: {lib.verdict.word}" in page


def test_to_dict_is_exactly_the_cli_json(block, runner, cli_app):
    res = runner.invoke(cli_app, ["check", "--json", str(block), "--support", HELD[0]])
    entry = json.loads(res.stdout)["meshes"][0]
    assert entry == json.loads(json.dumps(bandwise.check_file(block, supports=HELD).to_dict()))


def test_renumber_result_is_the_cli_json(block, runner, cli_app, tmp_path):
    out = tmp_path / "cli.vtu"
    res = runner.invoke(cli_app, ["renumber", "--json", "--method", "rcm", str(block), str(out)])
    cli = json.loads(res.stdout)
    lib = bandwise.renumber_file(block, out, method="rcm").to_dict()
    timed = ("comparison", "comparison_time")           # measured times differ run to run
    drop = lambda d: {k: v for k, v in d.items() if k not in timed}  # noqa: E731
    assert drop(cli) == drop(json.loads(json.dumps(lib)))
    assert list(cli["comparison_time"]["wall_seconds_by_method"]) == ["original", "rcm"]
    assert [m["method"] for m in cli["comparison"]["methods"]] == \
        [m["method"] for m in lib["comparison"]["methods"]]


def test_results_are_frozen_and_read_well(block):
    result = bandwise.check_file(block, supports=HELD)
    with pytest.raises(AttributeError):
        result.verdict = None  # type: ignore[misc]
    text = repr(result)
    assert text.startswith("CheckResult(") and "verdict='ready'" in text and "nodes=24" in text


def test_progress_reaches_a_plain_callback(block):
    seen = []
    bandwise.check_file(block, progress=lambda label, seconds: seen.append((label, seconds)))
    starts = [label for label, s in seen if s is None]
    ends = [label for label, s in seen if s is not None]
    assert "building node graph" in starts and sorted(starts) == sorted(ends)


def test_the_library_never_imports_the_command_line(block):
    code = (f"import sys, bandwise; bandwise.check_file({str(block)!r}); "
            "assert 'typer' not in sys.modules, 'typer'; "
            "assert not any(m.startswith('bandwise.faces') for m in sys.modules), 'faces'")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=ROOT)
    assert done.returncode == 0, done.stderr


@pytest.fixture
def batch(block, tmp_path) -> list[Path]:
    """Three files, the middle one cut short half way through."""
    good2 = tmp_path / "second.vtu"
    good2.write_bytes(block.read_bytes())
    cut = tmp_path / "truncated.vtu"
    data = block.read_bytes()
    cut.write_bytes(data[: len(data) // 2])
    return [block, cut, good2]


def test_a_batch_never_loses_a_file(batch, runner, cli_app):
    res = runner.invoke(cli_app, ["check", "--json", *map(str, batch)])
    assert res.exit_code == 2                        # one file could not be analysed
    entries = json.loads(res.stdout)["meshes"]
    assert [Path(e["file"]).name for e in entries] == [p.name for p in batch]
    assert "verdict" in entries[0] and "verdict" in entries[2]
    assert set(entries[1]) == {"file", "error"} and entries[1]["error"]
    assert len(res.stderr.strip().splitlines()) == 1  # the one error, on one line


def test_a_batch_in_text_ends_with_one_line_per_file(batch, runner, cli_app):
    res = runner.invoke(cli_app, ["check", *map(str, batch)])
    assert res.exit_code == 2
    tail = res.stdout.strip().splitlines()[-3:]
    assert tail[0].startswith(str(batch[0])) and ": unsupported (" in tail[0]
    assert tail[1].startswith(str(batch[1])) and "could not be analysed" in tail[1]
    assert tail[2].startswith(str(batch[2])) and ": unsupported (" in tail[2]


def test_check_files_returns_a_failure_value(batch):
    results = bandwise.check_files(batch)
    assert isinstance(results[1], bandwise.FileFailure)
    assert results[1].to_dict() == {"file": str(batch[1]), "error": results[1].error}
    assert [type(r).__name__ for r in results] == ["CheckResult", "FileFailure", "CheckResult"]


def test_write_report_renders_a_result(block, tmp_path):
    result = bandwise.renumber_file(block, tmp_path / "out.vtu", method="rcm",
                                    supports=HELD, analyse=True)
    files = bandwise.write_report(result, tmp_path / "rep")
    doc = json.loads(files.json.read_text())
    assert doc["verdict"] == "ready"
    assert {o["file"] for o in doc["outputs"]} == {str(tmp_path / "out.vtu"),
                                                  str(tmp_path / "out.map.csv")}


def test_readme_python_examples_run():
    """The README's Python API section is a doctest, run from the repository root."""
    import doctest
    import os

    text = (ROOT / "README.md").read_text()
    start = text.index("## Python API")
    section = text[start:text.index("\n## ", start + 1)]
    blocks = [b.split("```", 1)[0] for b in section.split("```pycon")[1:]]
    assert blocks, "the README's Python API section has no pycon example"
    parser = doctest.DocTestParser()
    test = parser.get_doctest("\n".join(blocks), {}, "README", "README.md", 0)
    here = os.getcwd()
    os.chdir(ROOT)
    try:
        runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
        runner.run(test)
    finally:
        os.chdir(here)
    assert test.examples and runner.failures == 0


def test_effort_reaches_the_orderings_and_a_bad_one_is_refused(block, runner, cli_app, tmp_path):
    res = runner.invoke(cli_app, ["renumber", "--json", "--effort", "balanced", str(block),
                                  str(tmp_path / "b.vtu")])
    assert res.exit_code == 0
    assert json.loads(res.stdout)["comparison"]["effort"] == "balanced"
    bad = runner.invoke(cli_app, ["renumber", "--effort", "slow", str(block),
                                  str(tmp_path / "c.vtu")])
    assert bad.exit_code == 2 and "unknown effort 'slow'" in bad.stderr
    assert not (tmp_path / "c.vtu").exists()


def test_the_report_draws_from_the_facets_the_checks_matched(block, tmp_path, monkeypatch):
    from bandwise.faces.report import meshview

    result = bandwise.check_file(block, supports=HELD)
    assert result.table is not None

    def not_again(model):  # the picture must not match the facets a second time
        raise AssertionError("facet table built again for the report")

    monkeypatch.setattr(meshview, "facet_table", not_again)
    files = bandwise.write_report(result, tmp_path / "rep")
    assert (files.folder / "mesh.png").stat().st_size > 0
