"""The one record every stage emits and every report reads."""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum


class Severity(Enum):
    """How much a finding matters; ordered so that `fail_on` can compare."""

    NOTE = "note"
    WARNING = "warning"
    ERROR = "error"

    @property
    def rank(self) -> int:
        return _RANK[self]


_RANK = {Severity.NOTE: 0, Severity.WARNING: 1, Severity.ERROR: 2}


@dataclass(frozen=True, slots=True)
class Location:
    """A place in a file. Line and column are 1-based, as editors and SARIF count.

    PyYAML's marks are 0-based; they become 1-based here, once, in :meth:`from_mark`, so
    that no reporter has to remember to convert.
    """

    path: str
    line: int | None = None
    column: int | None = None

    @staticmethod
    def from_mark(path: str, line0: int, column0: int) -> Location:
        return Location(path, line0 + 1, column0 + 1)

    def shifted(self, columns: int) -> Location:
        """The same line, `columns` further right (a place inside a scalar)."""
        if self.column is None:
            return self
        return Location(self.path, self.line, self.column + columns)


@dataclass(frozen=True, slots=True)
class Finding:
    """One problem, complete when built: rule code, severity, message, place, hint."""

    rule: str
    severity: Severity
    message: str
    location: Location
    hint: str | None = None
    # The loop or requirement the finding is about, when there is one (reports group by it).
    subject: str | None = None

    def sort_key(self) -> tuple[str, int, int, str, str]:
        loc = self.location
        return (loc.path, loc.line or 0, loc.column or 0, self.rule, self.message)
