"""GitHub Actions annotations and the job summary.

The escaping rules are those GitHub documents for workflow commands ("Workflow commands
for GitHub Actions", GitHub Docs, from memory): in the message % → %25, CR → %0D,
LF → %0A; in property values additionally : → %3A and , → %2C.
"""

from __future__ import annotations

from speclint.findings import Finding, Location, Severity
from speclint.report import CAUTION, Settings
from speclint.report.github import escape_data, escape_property, render, step_summary
from speclint.results import RequirementResult, RunResult

BROKEN = "speclint: 1\nrequirements:\n  - id: SYS-1\n    origni: typo\n"


def test_escaping_of_data_and_properties():
    assert escape_data("50% of R\r\nnext") == "50%25 of R%0D%0Anext"
    assert escape_data("a: b, c") == "a: b, c"  # ':' and ',' are safe in the message
    assert escape_property("a: b, c%\n") == "a%3A b%2C c%25%0A"
    # '%' first: an escape already in the text must not be read back as one.
    assert escape_data("%0A") == "%250A"


def test_annotation_lines_carry_place_title_and_escaped_text(tmp_path):
    findings = [
        Finding(
            "SL204",
            Severity.ERROR,
            "max_error: 120% exceeds 100%\nsecond line",
            Location("specs/a:b,c.yaml", 7, 3),
            hint="use a value, like 0.5",
        ),
        Finding("SL306", Severity.WARNING, "common factor", Location("specs/d.yaml", 2)),
        Finding("SL501", Severity.NOTE, "margin convention", Location("specs/d.yaml")),
    ]
    result = RunResult(files=["specs/a:b,c.yaml", "specs/d.yaml"], findings=findings)
    lines = render(result, Settings("1"), cwd=tmp_path).splitlines()
    assert lines[:3] == [
        "::error file=specs/a%3Ab%2Cc.yaml,line=7,col=3,title=SL204 bad-value::"
        "max_error: 120%25 exceeds 100%25%0Asecond line%0Ahint: use a value, like 0.5",
        "::warning file=specs/d.yaml,line=2,title=SL306 common-factor::common factor",
        "::notice file=specs/d.yaml,title=SL501 margin-caveat::margin convention",
    ]
    assert len(lines) == 4
    last = lines[-1]
    assert last.startswith(
        "::notice title=speclint summary::1 error, 1 warning, 1 note in 2 files."
    )
    assert "first 10 annotations" in last and "--format sarif" in last


def test_every_finding_is_one_line_so_text_cannot_start_a_command(tmp_path):
    sneaky = "ok\n::error file=x.yaml::forged\r::set-output name=a::b"
    result = RunResult(
        files=["a.yaml"],
        findings=[Finding("SL201", Severity.ERROR, sneaky, Location("a.yaml", 1, 1))],
    )
    lines = render(result, Settings("1"), cwd=tmp_path).splitlines()
    assert len(lines) == 2
    assert lines[0].endswith("::ok%0A::error file=x.yaml::forged%0D::set-output name=a::b")


def test_paths_are_relative_to_the_repository_root(tmp_path):
    (tmp_path / ".git").mkdir()
    sub = tmp_path / "specs"
    sub.mkdir()
    result = RunResult(
        files=["a.yaml"], findings=[Finding("SL201", Severity.ERROR, "x", Location("a.yaml", 3, 1))]
    )
    first = render(result, Settings("1"), cwd=sub).splitlines()[0]
    assert first.startswith("::error file=specs/a.yaml,line=3,col=1,")


def test_summary_is_appended_to_the_step_summary_file(speclint, tmp_path, monkeypatch):
    target = tmp_path / "summary.md"
    target.write_text("# earlier step\n", encoding="utf-8")
    monkeypatch.setenv("GITHUB_STEP_SUMMARY", str(target))
    run = speclint({"b.yaml": BROKEN}, fmt="github")
    assert run.code == 1
    assert run.out.startswith("::error file=b.yaml,line=4,col=5,title=SL201 unknown-key::")
    text = target.read_text(encoding="utf-8")
    assert text.startswith("# earlier step\n")  # appended, never truncated
    assert "| error | 1 |" in text
    assert "| b.yaml:4:5 | error | SL201 unknown-key |" in text
    assert CAUTION in text
    speclint({"b.yaml": BROKEN}, fmt="github")
    assert target.read_text(encoding="utf-8").count("## speclint") == 2


def test_no_summary_file_without_the_variable(speclint, tmp_path, monkeypatch):
    monkeypatch.delenv("GITHUB_STEP_SUMMARY", raising=False)
    speclint({"b.yaml": BROKEN}, fmt="github")
    assert not [p for p in tmp_path.iterdir() if p.suffix == ".md"]


def test_summary_counts_statuses_and_keeps_user_text_inert():
    findings = [
        Finding(
            "SL201", Severity.ERROR, "a | b <script> *x* [l](u)\nnext", Location("a.yaml", 1, 1)
        ),
    ]
    requirements = [
        RequirementResult("R-1", "a.yaml", 2, "feed", "met"),
        RequirementResult("R-2", "a.yaml", 3, "feed", "retune"),
        RequirementResult("R-3", "a.yaml", 4, "feed", "retune"),
    ]
    text = step_summary(RunResult(["a.yaml"], findings, requirements=requirements), Settings("1"))
    assert "| met | 1 |" in text and "| retune | 2 |" in text
    row = next(line for line in text.splitlines() if line.startswith("| a.yaml:1:1 "))
    # One row, four cells: the pipe in the message is escaped, HTML is not live.
    assert row.count("|") - row.count("\\|") == 5
    assert "<script>" not in text and "&lt;script&gt;" in text
    assert "\\*x\\*" in text and "\\[l\\](u)" in text


def test_summary_file_that_cannot_be_written_is_a_clear_error(speclint, tmp_path, monkeypatch):
    monkeypatch.setenv("GITHUB_STEP_SUMMARY", str(tmp_path / "no" / "such" / "dir" / "s.md"))
    run = speclint({"b.yaml": BROKEN}, fmt="github")
    assert run.code == 2 and "cannot append the job summary" in run.err
    assert "Traceback" not in run.err
