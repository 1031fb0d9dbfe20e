"""The JUnit XML report, parsed back with the standard library's XML parser.

The outcome elements (failure, error, skipped) and the counting attributes follow the
JUnit XML layout that CI systems read (the Ant junit task's report format, as Jenkins and
GitLab document it, from memory); XML 1.0 (W3C, production [2] Char) fixes which
characters a document may hold.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

from speclint.findings import Finding, Location, Severity
from speclint.report import CAUTION, Settings
from speclint.report.junit import render, xml_text
from speclint.results import CriterionResult, RequirementResult, RunResult

BROKEN = "speclint: 1\nrequirements:\n  - id: SYS-1\n    origni: typo\n"


def _req(rid: str, status: str | None, message: str | None = None) -> RequirementResult:
    return RequirementResult(
        rid, "specs/feed.yaml", 10, "feed" if status else None, status, message
    )


def _result() -> RunResult:
    requirements = [
        _req("R-MET", "met"),
        _req("R-RETUNE", "retune", "met for 0.2 < K < 4"),
        _req("R-UNREACH", "unreachable", "loop type 0 cannot follow a ramp"),
        _req("R-CONFLICT", "conflict", "with R-MET"),
        _req("R-UNSTABLE", "unstable", "the nominal loop is unstable"),
        _req("R-INVALID", "invalid", "loop 'feed' has errors"),
        _req("R-TEXT", None),
        RequirementResult(
            "R-CRIT",
            "specs/feed.yaml",
            30,
            "feed",
            "retune",
            "needs a larger gain",
            criteria=(
                CriterionResult("tracking", 0.5, 0.75, False, ((0.4, 2.0),), {"reference": "ramp"}),
            ),
        ),
    ]
    findings = [
        Finding(
            "SL306",
            Severity.WARNING,
            "plant: common factor (s + 1)",
            Location("specs/feed.yaml", 4, 12),
            subject="feed",
        ),
        Finding(
            "SL201", Severity.ERROR, 'unknown key "origni"', Location("specs/other.yaml", 4, 5)
        ),
        Finding(
            "SL401",
            Severity.ERROR,
            "R-RETUNE: not met at the nominal gain",
            Location("specs/feed.yaml", 10, 5),
            subject="R-RETUNE",
        ),
    ]
    return RunResult(
        files=["specs/clean.yaml", "specs/feed.yaml", "specs/other.yaml"],
        findings=findings,
        requirements=requirements,
    )


def _cases(suite: ET.Element) -> dict[str, ET.Element]:
    return {case.get("name", ""): case for case in suite.iter("testcase")}


def _outcome(case: ET.Element) -> str:
    for tag in ("failure", "error", "skipped"):
        if case.find(tag) is not None:
            return tag
    return "passed"


def test_one_suite_per_file_with_requirement_outcomes_and_counts():
    root = ET.fromstring(render(_result(), Settings("9.9.9")))
    assert root.tag == "testsuites"
    suites = {s.get("name"): s for s in root.findall("testsuite")}
    assert list(suites) == ["specs/clean.yaml", "specs/feed.yaml", "specs/other.yaml"]

    feed = _cases(suites["specs/feed.yaml"])
    outcomes = {name: _outcome(case) for name, case in feed.items() if name.startswith("R-")}
    assert outcomes == {
        "R-MET": "passed",
        "R-RETUNE": "failure",
        "R-UNREACH": "failure",
        "R-CONFLICT": "failure",
        "R-UNSTABLE": "failure",
        "R-INVALID": "error",
        "R-TEXT": "skipped",
        "R-CRIT": "failure",
    }
    assert feed["R-UNREACH"].find("failure").get("type") == "unreachable"
    assert feed["R-UNREACH"].find("failure").get("message") == "loop type 0 cannot follow a ramp"
    assert feed["R-INVALID"].find("error").get("type") == "invalid"
    # The verdict finding about R-RETUNE is told inside its case, not as a case of its own.
    assert "SL401" in feed["R-RETUNE"].find("failure").text
    assert not [name for name in feed if name.startswith("SL401")]
    crit = feed["R-CRIT"].find("failure").text
    assert "tracking ramp: required 0.5, achieved 0.75 (not met)" in crit
    # The loop's warning is a case of its own that passes under the default --fail-on error.
    (warning,) = [case for name, case in feed.items() if name.startswith("SL306")]
    assert _outcome(warning) == "passed" and "common factor" in warning.find("system-out").text
    assert warning.get("file") == "specs/feed.yaml" and warning.get("line") == "4"

    counts = {
        k: suites["specs/feed.yaml"].get(k) for k in ("tests", "failures", "errors", "skipped")
    }
    assert counts == {"tests": "9", "failures": "5", "errors": "1", "skipped": "1"}
    other = _cases(suites["specs/other.yaml"])
    (schema_case,) = other.values()
    assert schema_case.find("failure").get("type") == "SL201"
    assert suites["specs/clean.yaml"].get("tests") == "0"
    totals = {k: root.get(k) for k in ("tests", "failures", "errors", "skipped")}
    assert totals == {"tests": "10", "failures": "6", "errors": "1", "skipped": "1"}


def test_failing_severity_follows_fail_on():
    root = ET.fromstring(render(_result(), Settings("9.9.9", fail_on=Severity.WARNING)))
    feed = next(s for s in root.findall("testsuite") if s.get("name") == "specs/feed.yaml")
    (warning,) = [c for name, c in _cases(feed).items() if name.startswith("SL306")]
    assert _outcome(warning) == "failure"


def test_suites_carry_the_caution():
    root = ET.fromstring(render(_result(), Settings("9.9.9")))
    for suite in root.findall("testsuite"):
        props = {p.get("name"): p.get("value") for p in suite.iter("property")}
        assert props["caution"] == CAUTION and props["speclint.version"] == "9.9.9"


def test_characters_xml_forbids_are_stripped_and_the_rest_survive():
    # XML 1.0 production [2]: NUL, ESC, other C0 controls, U+FFFE and U+FFFF may not appear
    # at all; tab, LF, CR and ordinary text (including non-ASCII) must come through.
    assert xml_text("a\x00b\x1bc\x7fd\ufffee\uffff\tf\ng\rh ü") == "abc\x7fde\tf\ng\rh ü"
    nasty = 'id \x01 <&> "quoted" \x1b[31m'
    result = RunResult(
        files=["s\x02.yaml"],
        findings=[
            Finding("SL201", Severity.ERROR, nasty, Location("s\x02.yaml", 1, 1), hint="\x00x")
        ],
        requirements=[RequirementResult("R\x03-1", "s\x02.yaml", 2, None, None, None)],
    )
    text = render(result, Settings("1"))
    root = ET.fromstring(text)  # would raise on any forbidden character
    (suite,) = root.findall("testsuite")
    assert suite.get("name") == "s.yaml"
    names = [c.get("name") for c in suite.iter("testcase")]
    assert names == ["R-1", 'SL201 unknown-key: id  <&> "quoted" [31m']
    assert suite.find("testcase/failure").get("message") == 'id  <&> "quoted" [31m'


def test_cli_writes_junit_for_a_real_run(speclint):
    run = speclint({"b.yaml": BROKEN}, fmt="junit")
    assert run.code == 1
    root = ET.fromstring(run.out)
    (suite,) = root.findall("testsuite")
    assert suite.get("name") == "b.yaml"
    failure = suite.find("testcase/failure")
    assert failure.get("type") == "SL201" and "b.yaml:4:5" in failure.text
