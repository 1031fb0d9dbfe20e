"""The SARIF report, checked against the official SARIF 2.1.0 JSON Schema (OASIS) and the
URI rules of RFC 3986."""

from __future__ import annotations

import io
import json
from pathlib import Path

import jsonschema
import pytest

from speclint.cli import main
from speclint.findings import Finding, Location, Severity
from speclint.report.sarif import fingerprints
from speclint.rules import RULES

HERE = Path(__file__).resolve()
# The OASIS schema (errata 01, JSON Schema draft-04) lives in shared/ beside the repository.
SCHEMA_PLACES = [
    HERE.parents[2] / "shared" / "schemas-ext" / "sarif-2.1.0.schema.json",
    Path("/work/shared/schemas-ext/sarif-2.1.0.schema.json"),
]

CLEAN = "speclint: 1\nrequirements:\n  - id: SYS-1\n    origin: customer list, item 1\n"
BROKEN = "speclint: 1\nrequirements:\n  - id: SYS-1\n    origni: typo\n"
TWO_LOOPS = """\
speclint: 1
loops:
  belt:
    plant: "1/(s*(s + 1))"
    controller: "K"
    gain: {symbol: K, nominal: 2}
  belt:
    plant: "1/s"
"""
ORPHAN = "speclint: 1\nrequirements:\n  - id: R-1\n    loop: nowhere\n    origin: x\n"


@pytest.fixture(scope="module")
def validator() -> jsonschema.Draft4Validator:
    for place in SCHEMA_PLACES:
        if place.is_file():
            schema = json.loads(place.read_text(encoding="utf-8"))
            return jsonschema.Draft4Validator(schema)
    pytest.skip(f"the SARIF 2.1.0 schema is not at any of {[str(p) for p in SCHEMA_PLACES]}")


def sarif(run) -> dict:
    return json.loads(run.out)


def test_log_validates_against_the_official_schema(speclint, validator):
    run = speclint(
        {"a.yaml": CLEAN, "b.yaml": BROKEN, "c.yaml": TWO_LOOPS, "d.yaml": ORPHAN}, fmt="sarif"
    )
    log = sarif(run)
    errors = sorted(validator.iter_errors(log), key=str)
    assert not errors, "\n".join(f"{list(e.absolute_path)}: {e.message}" for e in errors)
    assert run.code == 1
    assert log["version"] == "2.1.0"
    assert len(log["runs"]) == 1
    results = log["runs"][0]["results"]
    assert {r["ruleId"] for r in results} >= {"SL201", "SL311"}


def test_rules_are_the_catalogue_and_results_index_them(speclint):
    log = sarif(speclint({"b.yaml": BROKEN, "d.yaml": ORPHAN}, fmt="sarif"))
    driver = log["runs"][0]["tool"]["driver"]
    assert driver["name"] == "speclint"
    rules = driver["rules"]
    assert [r["id"] for r in rules] == list(RULES)
    for rule in rules:
        assert rule["name"] == RULES[rule["id"]].name
        assert rule["defaultConfiguration"]["level"] == RULES[rule["id"]].severity.value
        assert rule["shortDescription"]["text"] and rule["help"]["text"]
    for result in log["runs"][0]["results"]:
        assert rules[result["ruleIndex"]]["id"] == result["ruleId"]
        # SARIF 2.1.0 §3.27.10: level is one of none, note, warning, error.
        assert result["level"] == RULES[result["ruleId"]].severity.value


def test_location_matches_the_finding_place(speclint):
    log = sarif(speclint({"b.yaml": BROKEN}, fmt="sarif"))
    (result,) = log["runs"][0]["results"]
    physical = result["locations"][0]["physicalLocation"]
    # The misspelt key "origni" starts on line 4, column 5 (1-based, as SARIF counts).
    assert physical["region"] == {"startLine": 4, "startColumn": 5}
    assert physical["artifactLocation"] == {"uri": "b.yaml", "uriBaseId": "%SRCROOT%"}
    assert "%SRCROOT%" in log["runs"][0]["originalUriBaseIds"]


def test_uris_are_percent_encoded(speclint, tmp_path, validator):
    # RFC 3986 §2.1 and §2.4: space, '#', '%' are not allowed in a path segment and become
    # %20, %23, %25; non-ASCII text is encoded as its UTF-8 octets (ü is C3 BC).
    run = speclint({"my specs/a #1 %ü.yaml": BROKEN}, fmt="sarif")
    log = sarif(run)
    validator.validate(log)
    where = log["runs"][0]["results"][0]["locations"][0]["physicalLocation"]
    assert where["artifactLocation"]["uri"] == "my%20specs/a%20%231%20%25%C3%BC.yaml"


def test_uris_are_relative_to_the_repository_root(tmp_path, monkeypatch):
    (tmp_path / ".git").mkdir()
    sub = tmp_path / "specs"
    sub.mkdir()
    (sub / "b.yaml").write_text(BROKEN, encoding="utf-8")
    monkeypatch.chdir(sub)
    out = io.StringIO()
    assert main(["check", "b.yaml", "--no-cache", "--format", "sarif"], out, io.StringIO()) == 1
    result = json.loads(out.getvalue())["runs"][0]["results"][0]
    location = result["locations"][0]["physicalLocation"]["artifactLocation"]
    assert location == {"uri": "specs/b.yaml", "uriBaseId": "%SRCROOT%"}


def _fingerprints(log: dict) -> list[tuple[str, str, int, str]]:
    return [
        (
            r["locations"][0]["physicalLocation"]["artifactLocation"]["uri"],
            r["ruleId"],
            r["locations"][0]["physicalLocation"]["region"]["startLine"],
            r["partialFingerprints"]["speclintFinding/v1"],
        )
        for r in log["runs"][0]["results"]
    ]


def test_fingerprints_survive_lines_moving_and_tell_findings_apart(speclint):
    before = _fingerprints(sarif(speclint({"c.yaml": TWO_LOOPS, "d.yaml": ORPHAN}, fmt="sarif")))
    # Two lines more above everything in c.yaml; its duplicate-key message names the line
    # of the first key, which moves too.
    moved = "# a comment\n# another\n" + TWO_LOOPS
    after = _fingerprints(sarif(speclint({"c.yaml": moved, "d.yaml": ORPHAN}, fmt="sarif")))
    assert [(uri, rule) for uri, rule, *_ in before] == [("c.yaml", "SL105"), ("d.yaml", "SL311")]
    assert [(uri, rule) for uri, rule, *_ in after] == [("c.yaml", "SL105"), ("d.yaml", "SL311")]
    assert after[0][2] == before[0][2] + 2
    assert [p for *_, p in before] == [p for *_, p in after]
    assert before[0][3] != before[1][3]


def test_identical_findings_get_distinct_fingerprints():
    # Same rule, file and message (up to the line it names): told apart by their order.
    first = Finding(
        "SL105",
        Severity.ERROR,
        'duplicate key "plant"; the first stands on line 4',
        Location("e.yaml", 5, 5),
    )
    second = Finding(
        "SL105",
        Severity.ERROR,
        'duplicate key "plant"; the first stands on line 9',
        Location("e.yaml", 10, 5),
    )
    a, b = fingerprints([first, second], ["e.yaml", "e.yaml"])
    assert a != b and a.split(":")[0] == b.split(":")[0]
    (alone,) = fingerprints([second], ["e.yaml"])
    assert alone == a  # the first of its kind, whichever line it stands on
