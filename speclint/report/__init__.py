"""Report stage: one module per output format, all reading the same RunResult.

Adding a format: a module with ``render(result, settings) -> str`` and a line in
``REPORTERS``; the CLI's ``--format`` choices come from this table.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass
from typing import Protocol

from speclint.findings import Severity
from speclint.results import RunResult

CAUTION = (
    "speclint's figures come from linear time-invariant models and are design aids. They do "
    "not replace the verification and validation that functional-safety standards for drives "
    "and machinery require (for example IEC 61800-5-2, IEC 61508 and ISO 13849-1), nor review "
    "by a qualified engineer under the applicable local codes."
)


@dataclass(frozen=True, slots=True)
class Settings:
    version: str
    color: bool = False
    width: int | None = None  # None: no wrapping at all (piped output)
    # The lowest severity that fails the run: formats with a pass/fail outcome (JUnit) follow it.
    fail_on: Severity = Severity.ERROR


class Reporter(Protocol):
    def __call__(self, result: RunResult, settings: Settings) -> str: ...


def _lazy(module: str, function: str = "render") -> Callable[[RunResult, Settings], str]:
    """A reporter that imports its module only when chosen: a run pays for one format."""

    def render(result: RunResult, settings: Settings) -> str:
        chosen = importlib.import_module(f"speclint.report.{module}")
        text: str = getattr(chosen, function)(result, settings)
        return text

    return render


REPORTERS: dict[str, Callable[[RunResult, Settings], str]] = {
    "console": _lazy("console"),
    "json": _lazy("json_report"),
    "markdown": _lazy("markdown"),
    "sarif": _lazy("sarif"),
    "junit": _lazy("junit"),
    "github": _lazy("github", "report"),
}
