"""The SARIF report: a SARIF 2.1.0 log (OASIS standard) for code-scanning services.

One run; ``tool.driver.rules`` is the whole rule catalogue (so ``ruleIndex`` is stable
for a given speclint version) and every finding is one result. Requirement verdicts need
no results of their own: every verdict other than met is already a finding (SL4xx).

Choices the standard leaves open:

* ``informationUri`` is omitted: the project publishes no home page, and an invented
  address would send people nowhere. The rules carry their help text inline instead.
* Artifact URIs are relative to the repository root (the nearest folder holding ``.git``,
  else the working directory), percent-encoded, with ``uriBaseId`` ``%SRCROOT%``. The base
  is described, not given as a ``file:`` URI, so that the log does not leak the machine's
  folder layout and is the same on every checkout. A path outside the root becomes an
  absolute ``file:`` URI.
* Columns count Unicode code points, as the YAML reader counts them (``columnKind``).
* ``partialFingerprints["speclintFinding/v1"]`` is our own fingerprint: a hash of the rule,
  the repository path, the finding's subject and its message with line and column
  references taken out, plus an ordinal among identical ones. Moving lines above a finding
  leaves it unchanged, so a code-scanning service tracks the finding across commits.
  Uploaders add their own line-hash fingerprints; we do not compute those.
"""

from __future__ import annotations

import hashlib
import json
import re
from collections import Counter
from pathlib import Path
from typing import Any
from urllib.parse import quote

from speclint.findings import Finding, Severity
from speclint.report import CAUTION, Settings
from speclint.report.places import repository_path, repository_root
from speclint.results import RunResult
from speclint.rules import RULES, Rule

SCHEMA_URI = (
    "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
)
ROOT_ID = "%SRCROOT%"
FINGERPRINT_KEY = "speclintFinding/v1"

# SARIF's levels happen to share our severities' names; the table keeps that explicit.
LEVEL = {Severity.ERROR: "error", Severity.WARNING: "warning", Severity.NOTE: "note"}

FAMILY = {
    "SL0": "It concerns the run itself.",
    "SL1": "It is found while reading the file (encoding, YAML syntax, limits).",
    "SL2": "It concerns the spec's structure as the spec JSON Schema defines it.",
    "SL3": "It concerns a loop model (its transfer-function expressions, gain and constants).",
    "SL4": "It is a requirement verdict from the exact analysis of the loop.",
    "SL5": "It concerns the stability margins reported for a loop.",
    "SL6": "It concerns the trace between requirements.",
}

# References to places ("a.yaml:12", "a.yaml:12:5", "line 12", "column 5") change when
# lines move; the fingerprint must not.
_PLACE = re.compile(r"(?<=\S):\d+(?::\d+)?\b|\b(?:line|column)s? \d+\b")


def _rule(rule: Rule) -> dict[str, Any]:
    level = LEVEL[rule.severity]
    family = FAMILY.get(rule.code[:3], "")
    full = f"{rule.code} {rule.name}: {rule.summary}. {family}".strip()
    help_text = (
        f"{full} Default level: {level}. `speclint rules` lists the whole catalogue; "
        "`--fail-on` sets the lowest severity that fails a run."
    )
    return {
        "id": rule.code,
        "name": rule.name,
        "shortDescription": {"text": rule.summary},
        "fullDescription": {"text": full},
        "help": {"text": help_text, "markdown": help_text},
        "defaultConfiguration": {"level": level},
    }


def artifact_location(shown: str, cwd: Path, root: Path | None) -> dict[str, str]:
    """The SARIF artifactLocation of a report path: relative to %SRCROOT% when inside it."""
    relative = repository_path(shown, cwd, root)
    if relative is None:
        absolute = Path(shown) if Path(shown).is_absolute() else cwd / shown
        return {"uri": absolute.resolve().as_uri()}
    # Everything but unreserved characters and "/" is escaped: spaces, '#', '%', ':' (which
    # would otherwise read as a URI scheme) and non-ASCII text as UTF-8 octets (RFC 3986).
    return {"uri": quote(relative, safe="/"), "uriBaseId": ROOT_ID}


def fingerprints(findings: list[Finding], uris: list[str]) -> list[str]:
    """Our fingerprint for each finding, stable while lines above it move."""
    seen: Counter[str] = Counter()
    out = []
    for item, uri in zip(findings, uris, strict=True):
        text = _PLACE.sub("", item.message)
        key = "\0".join((item.rule, uri, item.subject or "", text))
        digest = hashlib.sha256(key.encode("utf-8")).hexdigest()[:32]
        seen[digest] += 1
        out.append(f"{digest}:{seen[digest]}")
    return out


def _result(item: Finding, index: int, where: dict[str, str], fingerprint: str) -> dict[str, Any]:
    text = item.message if not item.hint else f"{item.message}\nhint: {item.hint}"
    physical: dict[str, Any] = {"artifactLocation": where}
    loc = item.location
    if loc.line is not None:
        region: dict[str, int] = {"startLine": loc.line}
        if loc.column is not None:
            region["startColumn"] = loc.column
        physical["region"] = region
    out: dict[str, Any] = {
        "ruleId": item.rule,
        "ruleIndex": index,
        "level": LEVEL[item.severity],
        "message": {"text": text},
        "locations": [{"physicalLocation": physical}],
        "partialFingerprints": {FINGERPRINT_KEY: fingerprint},
    }
    if item.subject is not None:
        out["properties"] = {"subject": item.subject}
    return out


def document(result: RunResult, settings: Settings, cwd: Path | None = None) -> dict[str, Any]:
    """The SARIF log as a JSON-ready dict."""
    cwd = cwd or Path.cwd()
    root = repository_root(cwd)
    index = {code: i for i, code in enumerate(RULES)}
    wheres = [artifact_location(f.location.path, cwd, root) for f in result.findings]
    prints = fingerprints(result.findings, [w["uri"] for w in wheres])
    base = "the repository root" if root is not None else "the folder speclint ran in"
    run = {
        "tool": {
            "driver": {
                "name": "speclint",
                "version": settings.version,
                "semanticVersion": settings.version,
                "rules": [_rule(rule) for rule in RULES.values()],
            }
        },
        "originalUriBaseIds": {ROOT_ID: {"description": {"text": base}}},
        "columnKind": "unicodeCodePoints",
        "results": [
            _result(f, index[f.rule], w, p)
            for f, w, p in zip(result.findings, wheres, prints, strict=True)
        ],
        "properties": {"caution": CAUTION},
    }
    return {"$schema": SCHEMA_URI, "version": "2.1.0", "runs": [run]}


def render(result: RunResult, settings: Settings) -> str:
    return json.dumps(document(result, settings), indent=2, ensure_ascii=False) + "\n"
