"""The command line: exit codes, output files, report formats, and the real process."""

from __future__ import annotations

import io
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import jsonschema

from conftest import REPO
from speclint.cli import main
from speclint.rules import RULES

CLEAN = (
    "speclint: 1\nrequirements:\n  - id: SYS-1\n    origin: customer list, item 1\n"
    "    verification: {method: inspection}\n"
)
BROKEN = "speclint: 1\nrequirements:\n  - id: SYS-2\n    origni: typo\n"


def call(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), out, err)
    return code, out.getvalue(), err.getvalue()


def test_exit_0_when_clean_and_1_on_errors(speclint):
    assert speclint({"a.yaml": CLEAN}).code == 0
    assert speclint({"b.yaml": BROKEN}).code == 1


def test_fail_on_moves_the_threshold(speclint, tmp_path):
    # An empty folder is a warning (SL002): it fails only with --fail-on warning.
    (tmp_path / "empty").mkdir()
    run = speclint({"a.yaml": CLEAN}, "empty")
    assert run.code == 0 and run.codes == ["SL002"]
    assert speclint({"a.yaml": CLEAN}, "empty", "--fail-on", "warning").code == 1


def test_exit_2_for_usage_and_configuration_errors(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert call("check", "--format", "yaml")[0] == 2
    assert call("check", "missing.yaml")[0] == 2
    assert call("frobnicate")[0] == 2
    (tmp_path / "speclint.toml").write_text('fail_on = "fatal"\n')
    code, _, err = call("check")
    assert code == 2 and "fail_on" in err and "Traceback" not in err
    (tmp_path / "speclint.toml").write_text("paths = [\n")
    code, _, err = call("check")
    assert code == 2 and "not valid TOML" in err
    (tmp_path / "speclint.toml").write_text('colour = "on"\n')
    code, _, err = call("check")
    assert code == 2 and "unknown setting 'colour'" in err


def test_configured_paths_are_used_when_none_are_given(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "specs").mkdir()
    (tmp_path / "specs" / "a.yaml").write_text(BROKEN)
    (tmp_path / "other.yaml").write_text(BROKEN)
    (tmp_path / "pyproject.toml").write_text('[tool.speclint]\npaths = ["specs"]\n')
    code, out, _ = call("check", "--format", "json")
    assert code == 1
    assert json.loads(out)["summary"]["files"] == 1
    assert {f["path"] for f in json.loads(out)["findings"]} == {"specs/a.yaml"}


def test_folder_search_passes_over_yaml_that_is_not_a_spec(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "ci.yaml").write_text("on: push\njobs: {}\n")
    (tmp_path / "spec.yaml").write_text(CLEAN)
    code, out, _ = call("check", "--format", "json", ".")
    assert code == 0 and json.loads(out)["summary"]["files"] == 1


def test_output_file_receives_the_report(speclint, tmp_path):
    run = speclint({"b.yaml": BROKEN}, "--output", "report.json")
    assert run.code == 1 and run.out == ""
    report = json.loads((tmp_path / "report.json").read_text())
    assert report["findings"][0]["rule"] == "SL201"
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_json_report_follows_its_schema(speclint):
    schema = json.loads((REPO / "schemas" / "speclint-report.schema.json").read_text())
    run = speclint({"a.yaml": CLEAN, "b.yaml": BROKEN})
    jsonschema.Draft202012Validator(schema).validate(run.report)
    assert run.report["summary"]["files"] == 2
    assert run.report["summary"]["errors"] == 1


def test_console_report_puts_the_location_first_and_does_not_read_markup(speclint):
    text = (
        'speclint: 1\nrequirements:\n  - id: SYS-1\n    loop: "[bold]x[/bold]"\n    origni: typo\n'
    )
    run = speclint({"c.yaml": text}, fmt="console")
    first = next(line for line in run.out.splitlines() if "SL201" in line)
    assert first.startswith("c.yaml:5:5: error SL201 ")
    assert "\x1b[" not in run.out  # not a terminal: no colour codes
    bad_name = next(line for line in run.out.splitlines() if "not a valid loop name" in line)
    assert '"[bold]x[/bold]"' in bad_name  # shown as written, not read as console markup
    assert all(len(line) < 400 for line in run.out.splitlines())


def test_console_report_is_not_wrapped_when_piped(speclint):
    long_id = "R-" + "x" * 60
    text = f"speclint: 1\nrequirements:\n  - id: {long_id}\n    loop: nowhere-at-all-{'y' * 40}\n"
    run = speclint({"c.yaml": text}, fmt="console")
    line = next(line for line in run.out.splitlines() if "SL311" in line)
    assert long_id in line and line.endswith(")")


def test_rules_lists_every_rule():
    code, out, _ = call("rules")
    assert code == 0
    listed = re.findall(r"^(SL\d{3})\s", out, re.MULTILINE)
    assert listed == list(RULES)
    code, out, _ = call("rules", "--format", "json")
    assert [r["code"] for r in json.loads(out)] == list(RULES)


def test_schema_command_prints_the_spec_schema():
    code, out, _ = call("schema")
    assert code == 0 and json.loads(out)["$id"] == "urn:speclint:schema:spec:1"
    code, out, _ = call("schema", "--path")
    assert code == 0 and Path(out.strip()).is_file()


def _spawn(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    env["PYTHONPATH"] = str(REPO)
    return subprocess.run(
        [sys.executable, "-m", "speclint", *args],
        cwd=cwd,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
    )


def test_real_process_exit_code_and_output(tmp_path):
    (tmp_path / "b.yaml").write_text(BROKEN)
    done = _spawn("check", "b.yaml", cwd=tmp_path)
    assert done.returncode == 1
    assert done.stdout.startswith("b.yaml\nb.yaml:4:5: error SL201 ")
    assert done.stderr == ""


def test_real_process_in_the_repository_runs_the_demo():
    done = _spawn("check", "--format", "json", cwd=REPO)
    assert done.returncode == 1, done.stderr  # the demo carries deliberate problems
    report = json.loads(done.stdout)
    assert report["summary"]["files"] >= 2
    assert all(f["line"] is not None for f in report["findings"])


def test_a_requirement_with_errors_is_shown_on_the_loop_it_names(speclint):
    # Common practice for a review: an invalid line stays with its loop, not in a pile apart.
    loop = 'loops:\n  drive:\n    plant: "1/(s*(s + 1))"\n    controller: K\n'
    loop += "    gain: {symbol: K, nominal: 1}\n"
    reqs = "requirements:\n  - id: R-1\n    loop: drive\n    verificaton: {method: test}\n"
    reqs += "  - id: R-2\n    loop: 7\n    verification: {method: test}\n"
    run = speclint({"a.yaml": "speclint: 1\n" + loop + reqs})
    shown = {r["id"]: (r["loop"], r["status"]) for r in run.report["requirements"]}
    assert shown == {"R-1": ("drive", "invalid"), "R-2": (None, "invalid")}
    console = speclint({"a.yaml": "speclint: 1\n" + loop + reqs}, fmt="console").out
    apart = console.split("Requirements on no analysed loop", 1)[1]
    assert "R-2" in apart and "R-1" not in apart
