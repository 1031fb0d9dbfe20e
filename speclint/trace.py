"""Trace stage: index loops and requirements across files, then check the links.

Indexing comes first and judging second: a link may point into a file read later.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from speclint.discover import Config
from speclint.findings import Finding, Location
from speclint.model import Loop, Requirement, SpecFile
from speclint.rules import finding


@dataclass(slots=True)
class Index:
    """Everything the spec set defines, across files."""

    loops: dict[str, Loop] = field(default_factory=dict)
    requirements: list[Requirement] = field(default_factory=list)
    # Left out by the build stage for errors already reported.
    broken_loops: set[str] = field(default_factory=set)
    broken_requirements: list[tuple[str, Location]] = field(default_factory=list)


def index(specs: list[SpecFile], findings: list[Finding]) -> Index:
    """Loops by name (the first definition wins; others are findings) and all requirements."""
    found = Index()
    loops, requirements = found.loops, found.requirements
    for spec in specs:
        found.broken_loops.update(spec.broken_loops)
        found.broken_requirements.extend(spec.broken_requirements)
        for loop in spec.loops:
            first = loops.get(loop.name)
            if first is not None:
                msg = f"loop {loop.name!r} is already defined at {first.location.path}:{first.location.line}"
                findings.append(finding("SL312", msg, loop.location, subject=loop.name))
                continue
            loops[loop.name] = loop
        requirements.extend(spec.requirements)
    return found


def check(specs: list[SpecFile], found: Index, config: Config) -> list[Finding]:
    """Findings about links between requirements and loops."""
    out: list[Finding] = []
    loops = found.loops
    for req in found.requirements:
        if req.loop is not None and req.loop not in loops and req.loop not in found.broken_loops:
            known = ", ".join(sorted(loops)) or "none"
            msg = f"{req.id}: loop {req.loop!r} is not defined in the spec set (loops: {known})"
            out.append(finding("SL311", msg, req.place("loop"), subject=req.id))
    return out
