"""What a run found, as plain records every report reads.

Figures are floats here (infinity as float inf, "does not exist" as None), rounded from the
exact values at the one place they are made; the exact forms ride along as short strings
for the console and `explain`. Plain data on purpose: the analysis cache stores these
records as JSON, and no report needs the algebra library to print them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from speclint.findings import Finding

Interval = tuple[float, float]

STATUSES = ("met", "retune", "unreachable", "conflict", "unstable", "invalid")


@dataclass(frozen=True, slots=True)
class LoopResult:
    """The figures of one loop at its nominal gain (None where not analysed or undefined)."""

    id: str
    path: str
    line: int
    gain_symbol: str | None = None
    nominal: float | None = None
    analysed: bool = False
    type: int | None = None
    kp: float | None = None
    kv: float | None = None
    ka: float | None = None
    stable: bool | None = None
    stable_gains: tuple[Interval, ...] | None = None
    margins: dict[str, float | None] | None = None
    # Exact forms for people: {"kv": "12/5", "kv(K)": "24*K/5", "stable_gains": "0 < K < 6"}.
    exact: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True, slots=True)
class CriterionResult:
    """One limit of a requirement: what is required, what the loop achieves, which gains work."""

    kind: str
    required: float | None
    achieved: float | None
    met: bool | None
    admissible_gains: tuple[Interval, ...] | None = None
    # The limit's own words: {"reference": "ramp"}, {"constant": "kv"}, {"margin": "phase_margin_deg"}.
    detail: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True, slots=True)
class RequirementResult:
    id: str
    path: str
    line: int
    loop: str | None
    status: str | None  # one of STATUSES; None for a textual requirement (no criteria)
    message: str | None = None
    criteria: tuple[CriterionResult, ...] = ()
    admissible_gains: tuple[Interval, ...] | None = None


@dataclass(slots=True)
class RunResult:
    """Everything one run produced; the reports format it and nothing else."""

    files: list[str]
    findings: list[Finding]
    loops: list[LoopResult] = field(default_factory=list)
    requirements: list[RequirementResult] = field(default_factory=list)
    sources: dict[str, str] = field(default_factory=dict)  # path -> text, for excerpts
