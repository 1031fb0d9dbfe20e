"""The JUnit XML report, for the test views of CI systems.

Layout: one ``<testsuite>`` per spec file, named by its path. A file is what an engineer
edits, reviews and links to, and its file-level problems (syntax, schema, loop models) sit
beside its requirements; suites per criterion kind would scatter one file's problems over
several suites and leave file-level findings without a home.

Inside a suite:

* one ``<testcase>`` per requirement, named by its ID: ``<failure>`` when the verdict is
  retune, unreachable, conflict or unstable; ``<error>`` when it is invalid (the spec
  could not be analysed); passed when met; ``<skipped>`` for a textual requirement, which
  has no criteria to judge (so the view shows it was seen, not that it passed). A finding
  about the requirement (same file, ``subject`` its ID) at or above the failing severity
  turns a met or textual requirement into a failure too; every finding about it is listed
  in the case's text.
* one ``<testcase>`` per other finding (about a loop, or about the file as a whole): a
  failure when its severity is at or above the failing severity (``--fail-on``), else
  passed with the message in ``<system-out>``, so the XML fails exactly when the run does.

Every suite carries the caution in its properties. All user text passes through
:func:`xml_text`, which drops the characters XML 1.0 cannot hold, because one such
character makes the whole file unreadable to the CI system.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from collections import defaultdict
from dataclasses import dataclass, field

from speclint.findings import Finding, Severity
from speclint.report import CAUTION, Settings
from speclint.results import CriterionResult, RequirementResult, RunResult
from speclint.rules import RULES

FAILED = ("retune", "unreachable", "conflict", "unstable")
ERRORED = ("invalid",)

# XML 1.0, production [2] Char: tab, LF, CR and the ranges below; everything else (C0
# controls, lone surrogates, U+FFFE, U+FFFF) may not appear even as a character reference.
_NOT_XML = re.compile("[^\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")
_NAME_LIMIT = 200


def xml_text(text: str) -> str:
    """`text` without the characters XML 1.0 forbids."""
    return _NOT_XML.sub("", text)


def _sub(parent: ET.Element, tag: str, text: str | None = None, **attrib: str) -> ET.Element:
    element = ET.SubElement(parent, tag, {k: xml_text(v) for k, v in attrib.items()})
    if text:
        element.text = xml_text(text)
    return element


def _where(item: Finding) -> str:
    loc = item.location
    parts = [loc.path] + [str(n) for n in (loc.line, loc.column) if n is not None]
    return ":".join(parts)


def _finding_line(item: Finding) -> str:
    line = f"{_where(item)}: {item.severity.value} {item.rule} {item.message}"
    return f"{line}\n    hint: {item.hint}" if item.hint else line


def _number(x: float | None) -> str:
    return "n/a" if x is None else f"{x:.6g}"


def _criterion_line(c: CriterionResult) -> str:
    label = " ".join([c.kind.replace("_", " "), *c.detail.values()])
    verdict = {True: "met", False: "not met", None: "not decided"}[c.met]
    return f"{label}: required {_number(c.required)}, achieved {_number(c.achieved)} ({verdict})"


@dataclass(slots=True)
class _Suite:
    requirements: list[RequirementResult] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)


def _suites(result: RunResult) -> dict[str, _Suite]:
    # A clean file still gets its (empty) suite: the view shows it was checked.
    suites: dict[str, _Suite] = {path: _Suite() for path in result.files}
    suites = defaultdict(_Suite, suites)
    for req in result.requirements:
        suites[req.path].requirements.append(req)
    for item in result.findings:
        suites[item.location.path].findings.append(item)
    return dict(sorted(suites.items()))


def _fails(item: Finding, fail_on: Severity) -> bool:
    return item.severity.rank >= fail_on.rank


def _requirement_case(
    suite: ET.Element, req: RequirementResult, about: list[Finding], fail_on: Severity
) -> str:
    case = _sub(suite, "testcase", classname=req.path, name=req.id, file=req.path)
    case.set("line", str(req.line))
    lines = [_criterion_line(c) for c in req.criteria] + [_finding_line(f) for f in about]
    body = "\n".join(lines)
    failing = [f for f in about if _fails(f, fail_on)]
    if req.status in FAILED:
        _sub(case, "failure", body, type=req.status or "", message=req.message or req.status or "")
        return "failure"
    if req.status in ERRORED:
        _sub(case, "error", body, type="invalid", message=req.message or "invalid")
        return "error"
    if failing:
        first = failing[0]
        _sub(case, "failure", body, type=first.rule, message=first.message)
        return "failure"
    if req.status is None:
        _sub(case, "skipped", message="textual requirement: no criteria to judge")
        if body:
            _sub(case, "system-out", body)
        return "skipped"
    if body:
        _sub(case, "system-out", body)
    return "passed"


def _finding_case(suite: ET.Element, item: Finding, fail_on: Severity) -> str:
    name = f"{item.rule} {RULES[item.rule].name}: {item.message}"
    if len(name) > _NAME_LIMIT:
        name = name[: _NAME_LIMIT - 1] + "…"
    case = _sub(suite, "testcase", classname=item.location.path, name=name)
    case.set("file", xml_text(item.location.path))
    if item.location.line is not None:
        case.set("line", str(item.location.line))
    if _fails(item, fail_on):
        _sub(case, "failure", _finding_line(item), type=item.rule, message=item.message)
        return "failure"
    _sub(case, "system-out", _finding_line(item))
    return "passed"


@dataclass(slots=True)
class _Tally:
    tests: int = 0
    failures: int = 0
    errors: int = 0
    skipped: int = 0

    def add(self, outcome: str) -> None:
        self.tests += 1
        if outcome == "failure":
            self.failures += 1
        elif outcome == "error":
            self.errors += 1
        elif outcome == "skipped":
            self.skipped += 1

    def merge(self, other: _Tally) -> None:
        self.tests += other.tests
        self.failures += other.failures
        self.errors += other.errors
        self.skipped += other.skipped

    def write(self, element: ET.Element) -> None:
        for key in ("tests", "failures", "errors", "skipped"):
            element.set(key, str(getattr(self, key)))


def document(result: RunResult, settings: Settings) -> ET.Element:
    """The report as an element tree rooted at ``<testsuites>``."""
    root = ET.Element("testsuites", {"name": "speclint"})
    totals = _Tally()
    for path, content in _suites(result).items():
        suite = _sub(root, "testsuite", name=path)
        props = _sub(suite, "properties")
        _sub(props, "property", name="speclint.version", value=settings.version)
        _sub(props, "property", name="caution", value=CAUTION)
        ids = {r.id for r in content.requirements}
        about: dict[str, list[Finding]] = defaultdict(list)
        rest: list[Finding] = []
        for item in content.findings:
            if item.subject is not None and item.subject in ids:
                about[item.subject].append(item)
            else:
                rest.append(item)
        tally = _Tally()
        for req in content.requirements:
            tally.add(_requirement_case(suite, req, about.get(req.id, []), settings.fail_on))
        for item in rest:
            tally.add(_finding_case(suite, item, settings.fail_on))
        tally.write(suite)
        totals.merge(tally)
    totals.write(root)
    return root


def render(result: RunResult, settings: Settings) -> str:
    root = document(result, settings)
    ET.indent(root)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, "unicode") + "\n"
