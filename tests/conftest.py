"""Shared test harness: run the whole pipeline on YAML text and look at what it found."""

from __future__ import annotations

import io
import json
import textwrap
from pathlib import Path
from typing import Any

import pytest

from speclint.cli import main

REPO = Path(__file__).resolve().parent.parent

# A spec repository split over files: loops in one, requirements on them in another, and a
# file with a problem of its own (tests of --focus and of the pre-commit hook).
_BELT_LOOPS = """\
speclint: 1
loops:
  belt:
    plant: "40/(s*(0.05*s + 1))"
    controller: "K"
    gain: {symbol: K, nominal: 8}
"""
_BELT_REQUIREMENTS = """\
speclint: 1
requirements:
  - id: BELT-010
    loop: belt
    traces_to: [SYS-1]
    tracking: {reference: ramp, magnitude: 500, max_error: 2}
    verification: {method: analysis}
  - id: SYS-1
    origin: customer list, item 1
"""
# A file with a problem of its own, which a focused run on other files must not report.
_OTHER_BROKEN = "speclint: 1\nrequirements:\n  - id: OTHER-1\n    origni: typo\n"
SPLIT_SPECS = (_BELT_LOOPS, _BELT_REQUIREMENTS, _OTHER_BROKEN)


class Run:
    """One `speclint check` on files written into a temporary folder."""

    def __init__(self, code: int, out: str, err: str) -> None:
        self.code, self.out, self.err = code, out, err

    @property
    def report(self) -> dict[str, Any]:
        return json.loads(self.out)

    @property
    def codes(self) -> list[str]:
        return [f["rule"] for f in self.report["findings"]]


@pytest.fixture
def speclint(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    """Call as speclint({"a.yaml": text, ...}, *extra_args): runs check in tmp_path, JSON out."""
    monkeypatch.chdir(tmp_path)

    def run(files: dict[str, str | bytes], *args: str, fmt: str = "json") -> Run:
        for name, content in files.items():
            path = tmp_path / name
            path.parent.mkdir(parents=True, exist_ok=True)
            if isinstance(content, bytes):
                path.write_bytes(content)
            else:
                path.write_text(textwrap.dedent(content), encoding="utf-8")
        out, err = io.StringIO(), io.StringIO()
        code = main(["check", *files, "--no-cache", "--format", fmt, *args], out, err)
        return Run(code, out.getvalue(), err.getvalue())

    return run


def findings_of(run: Run) -> str:
    """The findings, one per line, for assertion messages."""
    return "\n".join(
        f"{f['path']}:{f['line']}:{f['column']}: {f['rule']} {f['message']}"
        for f in run.report["findings"]
    )
