"""Report stage: one module per output format, all reading the same RunResult.

Adding a format: a module with ``render(result, settings) -> str`` and a line in
``REPORTERS``; the CLI's ``--format`` choices come from this table.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Protocol

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


class Reporter(Protocol):
    def __call__(self, result: RunResult, settings: Settings) -> str: ...


def _console(result: RunResult, settings: Settings) -> str:
    from speclint.report import console

    return console.render(result, settings)


def _json(result: RunResult, settings: Settings) -> str:
    from speclint.report import json_report

    return json_report.render(result, settings)


def _markdown(result: RunResult, settings: Settings) -> str:
    from speclint.report import markdown

    return markdown.render(result, settings)


# Each reporter imports its module only when chosen: a run pays for one format.
REPORTERS: dict[str, Callable[[RunResult, Settings], str]] = {
    "console": _console,
    "json": _json,
    "markdown": _markdown,
}
