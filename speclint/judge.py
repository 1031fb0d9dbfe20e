"""Judge stage: each requirement of a loop against what the loop achieves.

Runs per loop, after its analysis: the verdict for a requirement needs the gain sets of
its criteria and the stable set of its loop, and a conflict is a property of all the
requirements of one loop together.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from speclint.findings import Finding
from speclint.model import Loop, Requirement
from speclint.results import LoopResult, RequirementResult


@dataclass(slots=True)
class Outcome:
    loop: LoopResult
    requirements: list[RequirementResult]
    findings: list[Finding] = field(default_factory=list)


def unanalysed_loop(loop: Loop) -> LoopResult:
    gain = loop.gain
    return LoopResult(
        id=loop.name,
        path=loop.location.path,
        line=loop.location.line or 0,
        gain_symbol=gain.symbol if gain else None,
        nominal=float(gain.nominal) if gain else None,
    )


def invalid(req: Requirement, why: str) -> RequirementResult:
    return RequirementResult(
        req.id,
        req.location.path,
        req.location.line or 0,
        req.loop,
        "invalid" if req.criteria else None,
        why,
    )


def judge_loop(loop: Loop, requirements: list[Requirement]) -> Outcome:
    """The loop's figures and a verdict for each of its requirements."""
    return Outcome(unanalysed_loop(loop), [invalid(r, "not analysed yet") for r in requirements])
