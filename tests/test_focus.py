"""`check --focus`: the whole configured spec set is checked, only the given files are
reported on (plus what a change in them breaks elsewhere), and the exit status follows the
reported findings only."""

from __future__ import annotations

import io
import json
from pathlib import Path

import pytest

from conftest import SPLIT_SPECS
from speclint.cli import main

LOOPS, REQUIREMENTS, OTHER = SPLIT_SPECS


@pytest.fixture
def repo(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A spec repository: loops in one file, requirements on them in another."""
    specs = tmp_path / "specs"
    specs.mkdir()
    (specs / "loops.yaml").write_text(LOOPS, encoding="utf-8")
    (specs / "requirements.yaml").write_text(REQUIREMENTS, encoding="utf-8")
    (specs / "other.yaml").write_text(OTHER, encoding="utf-8")
    (tmp_path / "workflow.yaml").write_text("on: push\njobs: {}\n", encoding="utf-8")
    (tmp_path / "speclint.toml").write_text('paths = ["specs"]\n', encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    return tmp_path


def check(*args: str) -> tuple[int, dict, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(["check", "--no-cache", "--format", "json", *args], out, err)
    return code, json.loads(out.getvalue()) if out.getvalue() else {}, err.getvalue()


def places(report: dict) -> list[tuple[str, str]]:
    return [(f["path"], f["rule"]) for f in report["findings"]]


def test_one_file_alone_loses_its_links_but_focus_keeps_them(repo):
    # Checked on its own, the requirements file cannot see the loop defined next door.
    code, report, _ = check("specs/requirements.yaml")
    assert ("specs/requirements.yaml", "SL311") in places(report) and code == 1
    # Focused on it, the whole set is loaded: the link resolves, and the other file's own
    # error is not reported, nor does it fail the run.
    code, report, _ = check("--focus", "specs/requirements.yaml")
    assert places(report) == [] and code == 0
    assert report["summary"]["files"] == 1
    assert {r["id"] for r in report["requirements"]} == {"BELT-010", "SYS-1"}
    assert [loop["id"] for loop in report["loops"]] == ["belt"]


def test_focus_on_a_loop_file_reports_the_requirements_on_its_loops(repo):
    code, report, _ = check("--focus", "specs/loops.yaml")
    assert code == 0 and places(report) == []
    # BELT-010 lives in another file, but its verdict follows the focused loop.
    assert [r["id"] for r in report["requirements"]] == ["BELT-010"]


def test_a_change_that_breaks_links_elsewhere_is_reported_there(repo):
    loops = repo / "specs" / "loops.yaml"
    loops.write_text(LOOPS.replace("belt:", "conveyor:"), encoding="utf-8")
    code, report, _ = check("--focus", "specs/loops.yaml")
    assert code == 1
    # The renamed loop now has no requirement (SL607, in the focused file), and the
    # requirement elsewhere names a loop that no longer exists (SL311, reported there).
    assert places(report) == [("specs/loops.yaml", "SL607"), ("specs/requirements.yaml", "SL311")]
    assert report["summary"]["files"] == 2


def test_the_focused_files_own_findings_decide_the_exit_status(repo):
    code, report, _ = check("--focus", "specs/other.yaml")
    assert code == 1 and places(report) == [("specs/other.yaml", "SL201")]


def test_yaml_outside_the_spec_set_is_passed_over(repo):
    # pre-commit hands over every changed YAML file, CI workflows included.
    code, report, _ = check("--focus", "workflow.yaml")
    assert code == 0 and places(report) == [] and report["summary"]["files"] == 0


def test_focus_on_a_folder_covers_the_files_inside(repo):
    code, report, _ = check("--focus", "specs")
    assert code == 1 and places(report) == [("specs/other.yaml", "SL201")]
    assert report["summary"]["files"] == 3


def test_focus_needs_paths_that_exist(repo):
    code, _, err = check("--focus")
    assert code == 2 and "--focus needs the files" in err
    code, _, err = check("--focus", "specs/gone.yaml")
    assert code == 2 and "specs/gone.yaml: no such file" in err
