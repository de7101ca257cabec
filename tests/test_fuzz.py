"""Damaged files never give a traceback, never change the input, never leave a half output.

Hypothesis (fixed seed, the ``bandwise`` profile) picks a valid file of one
format, a damage (truncation, flipped bytes, a section removed, a huge
count, a bad node id, NaN coordinates, an empty block) and its place; the
rules are those of ``scripts/fuzz.py``, which runs the same cases longer.
"""

from __future__ import annotations

import importlib.util
import random
import sys
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parent.parent


def _fuzz_module():
    spec = importlib.util.spec_from_file_location("bandwise_fuzz", ROOT / "scripts" / "fuzz.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules["bandwise_fuzz"] = module
    spec.loader.exec_module(module)
    return module


fuzz = _fuzz_module()
SEED_NAMES = ("bracket22.msh", "bracket41.msh", "bracket.vtu", "bracket.vtk", "bracket.inp",
              "bracket.bdf", "bracket.med", "bracket.exo")


@pytest.fixture(scope="module")
def workspace(tmp_path_factory):
    root = tmp_path_factory.mktemp("fuzz")
    seeds, cases, out = root / "seeds", root / "cases", root / "out"
    for d in (seeds, cases, out):
        d.mkdir()
    files = {p.name: p for p in fuzz.seed_files(seeds)}
    return {"seeds": files, "cases": cases, "out": out, "run": fuzz.in_process_runner()}


def test_seeds_are_valid(workspace):
    """Undamaged, every seed passes with exit 0 or 1 (findings) and leaves its input alone."""
    for name in SEED_NAMES:
        outcomes = fuzz.run_case(workspace["seeds"][name], workspace["out"], workspace["run"])
        assert [o.defects for o in outcomes] == [(), ()]
        assert all(o.exit_code in (0, 1) for o in outcomes), [o.stderr for o in outcomes]


@settings(max_examples=60)
@given(seed=st.sampled_from(SEED_NAMES), mutation=st.sampled_from(sorted(fuzz.MUTATIONS)),
       where=st.integers(0, 2**32 - 1))
def test_damaged_files_fail_cleanly(workspace, seed, mutation, where):
    data = fuzz.MUTATIONS[mutation](workspace["seeds"][seed].read_bytes(), random.Random(where))
    path = workspace["cases"] / f"damaged_{seed}"
    path.write_bytes(data)
    outcomes = fuzz.run_case(path, workspace["out"], workspace["run"])
    assert [d for o in outcomes for d in o.defects] == []
    assert list(workspace["out"].iterdir()) == []


def test_judge_catches_what_it_must():
    """The rules themselves: each broken one is reported."""
    assert fuzz.judge("check", 2, "", "bandwise: error: x\n", False) == []
    assert fuzz.judge("check", 2, "", "Traceback (most recent call last):\n", False)
    assert fuzz.judge("check", 2, "", "bandwise: error: a\nbandwise: error: b\n", False)
    assert fuzz.judge("check", 0, "not json", "", True)
    assert fuzz.judge("check", 2, "", "bandwise: error: internal error: KeyError\n", False)
    assert fuzz.judge("check", 139, "", "", False)
