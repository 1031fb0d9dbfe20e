"""The analysis cache: one JSON file per loop, keyed by everything its verdicts depend on.

The key hashes the loop's model and its requirements exactly as built (expressions as
written, exact numbers, and the places findings point at, so a finding never comes back
with a stale line number) together with the speclint version. An entry that cannot be
read, parsed, or does not carry its own key is ignored and rewritten: the cache is never
trusted over a fresh analysis and never a reason to fail. Entries are written to a
temporary file and renamed, so concurrent runs cannot leave half an entry behind.
"""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import json
import os
import tempfile
from fractions import Fraction
from pathlib import Path
from typing import Any

from speclint import __version__
from speclint.findings import Finding, Location, Severity
from speclint.model import Loop, Requirement
from speclint.results import CriterionResult, LoopResult, RequirementResult

ENTRY_FORMAT = 1


@functools.cache
def code_fingerprint() -> str:
    """A hash of the code that computes verdicts, so an edited checkout never reuses
    answers an older version of that code gave (the version number alone would)."""
    package = Path(__file__).resolve().parent
    digest = hashlib.sha256(__version__.encode())
    for path in sorted([*package.glob("*.py"), *(package / "analysis").glob("*.py")]):
        try:
            digest.update(path.name.encode() + path.read_bytes())
        except OSError:
            digest.update(path.name.encode())
    return digest.hexdigest()


def loop_key(loop: Loop, requirements: list[Requirement]) -> str:
    """A hash of all the analysis of `loop` depends on, and of the code that analyses it."""
    payload = {
        "speclint": code_fingerprint(),
        "entry": ENTRY_FORMAT,
        "loop": dataclasses.asdict(loop),
        "requirements": [dataclasses.asdict(r) for r in requirements],
    }
    text = json.dumps(payload, sort_keys=True, default=_plain, ensure_ascii=True)
    return hashlib.sha256(text.encode()).hexdigest()


def _plain(value: object) -> object:
    if isinstance(value, Fraction):
        return f"{value.numerator}/{value.denominator}"
    if isinstance(value, Severity):
        return value.value
    raise TypeError(f"cannot key {type(value).__name__}")


class Cache:
    """Loop analyses on disk under `folder`; every failure degrades to a cache miss."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder

    def get(self, key: str) -> tuple[LoopResult, list[RequirementResult], list[Finding]] | None:
        try:
            entry = json.loads(self._path(key).read_text(encoding="utf-8"))
            if entry.get("key") != key or entry.get("format") != ENTRY_FORMAT:
                return None
            loop = _loop_from(entry["loop"])
            reqs = [_requirement_from(r) for r in entry["requirements"]]
            found = [_finding_from(f) for f in entry["findings"]]
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None
        return loop, reqs, found

    def put(
        self, key: str, loop: LoopResult, reqs: list[RequirementResult], found: list[Finding]
    ) -> None:
        entry = {
            "format": ENTRY_FORMAT,
            "key": key,
            "loop": dataclasses.asdict(loop),
            "requirements": [dataclasses.asdict(r) for r in reqs],
            "findings": [_finding_to(f) for f in found],
        }
        try:
            text = json.dumps(entry, allow_nan=True)
            path = self._path(key)
            path.parent.mkdir(parents=True, exist_ok=True)
            self._ignore_in_git()
            fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".entry.", suffix=".tmp")
            try:
                with os.fdopen(fd, "w", encoding="utf-8") as handle:
                    handle.write(text)
                Path(tmp).replace(path)
            finally:
                Path(tmp).unlink(missing_ok=True)
        except OSError:
            return  # a read-only checkout still gets its answers, only slower

    def _path(self, key: str) -> Path:
        return self.folder / f"v{ENTRY_FORMAT}" / key[:2] / f"{key}.json"

    def _ignore_in_git(self) -> None:
        marker = self.folder / ".gitignore"
        if not marker.exists():
            marker.write_text("# written by speclint: the analysis cache is not for git\n*\n")


def _finding_to(f: Finding) -> dict[str, Any]:
    loc = f.location
    return {
        "rule": f.rule,
        "severity": f.severity.value,
        "message": f.message,
        "location": [loc.path, loc.line, loc.column],
        "hint": f.hint,
        "subject": f.subject,
    }


def _finding_from(d: dict[str, Any]) -> Finding:
    path, line, column = d["location"]
    return Finding(
        str(d["rule"]),
        Severity(d["severity"]),
        str(d["message"]),
        Location(str(path), line, column),
        d["hint"],
        d["subject"],
    )


def _intervals(value: Any) -> tuple[tuple[float, float], ...] | None:
    if value is None:
        return None
    return tuple((float(lo), float(hi)) for lo, hi in value)


def _loop_from(d: dict[str, Any]) -> LoopResult:
    d = dict(d)
    d["stable_gains"] = _intervals(d["stable_gains"])
    return LoopResult(**d)


def _criterion_from(d: dict[str, Any]) -> CriterionResult:
    d = dict(d)
    d["admissible_gains"] = _intervals(d["admissible_gains"])
    return CriterionResult(**d)


def _requirement_from(d: dict[str, Any]) -> RequirementResult:
    d = dict(d)
    d["criteria"] = tuple(_criterion_from(c) for c in d["criteria"])
    d["admissible_gains"] = _intervals(d["admissible_gains"])
    return RequirementResult(**d)
