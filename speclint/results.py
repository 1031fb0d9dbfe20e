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


@dataclass(frozen=True, slots=True)
class TraceCriterion:
    """One limit of a requirement as the spec states it, before or without analysis."""

    kind: str
    detail: dict[str, str]
    required: str  # exact, with its relation and unit: "≤ 0.5 rad/s", "≥ 40 °"


@dataclass(frozen=True, slots=True)
class TraceNode:
    """One requirement's place in the trace: its links both ways, verification and review.

    Review is "none" (never reviewed), "current", "changed" (with the parts that changed
    in `changed` when the stored fingerprint tells them), or "unknown" (its loop has
    errors, so the fingerprint cannot be computed).
    """

    id: str
    path: str
    line: int
    title: str | None = None
    text: str | None = None
    origin: str | None = None
    loop: str | None = None
    parents: tuple[str, ...] = ()  # resolved traces_to links, as written
    children: tuple[str, ...] = ()  # requirements tracing to this one, sorted
    dangling: tuple[str, ...] = ()  # traces_to links that resolve to nothing
    criteria: tuple[TraceCriterion, ...] = ()
    verification: str | None = None
    evidence: tuple[str, ...] = ()
    review: str = "none"
    reviewed_by: str | None = None
    reviewed_on: str | None = None
    changed: tuple[str, ...] = ()


@dataclass(slots=True)
class RunResult:
    """Everything one run produced; the reports format it and nothing else."""

    files: list[str]
    findings: list[Finding]
    loops: list[LoopResult] = field(default_factory=list)
    requirements: list[RequirementResult] = field(default_factory=list)
    sources: dict[str, str] = field(default_factory=dict)  # path -> text, for excerpts
    # The requirements' trace, by (path, line): links, verification, review state.
    trace: list[TraceNode] = field(default_factory=list)
