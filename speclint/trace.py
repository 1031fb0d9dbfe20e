"""Trace stage: index loops and requirements across files, then check the links.

Indexing comes first and judging second: a link may point into a file read later. The
checks are small generators over the index; `check` runs them all and also lays out the
trace (each requirement's links both ways, verification and review state) for the
reports that draw it.

Decisions worth knowing:

* A requirement with neither `origin` nor `traces_to` is an orphan (SL604). One with both
  is a derived requirement that also cites a source (a standard clause, say): it is
  placed under its parents, and its origin is shown as a reference. That is allowed.
* When an ID is defined twice (SL601), the first definition in (path, line) order is the
  one links resolve to.
* A textual requirement (no loop, no criteria) is either refined by the requirements that
  trace to it or verified itself (its own `verification`); one that is neither is SL606.
* A link to a requirement that exists but has errors of its own resolves (no second
  finding), but the trace is not followed through it.
* Evidence paths are relative to the configuration's folder (the repository root);
  absolute paths and paths that leave that folder, also through a symbolic link, are
  refused (SL610): an audit pack must not depend on one machine's file system.
"""

from __future__ import annotations

import difflib
import re
from collections import deque
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from fractions import Fraction
from pathlib import Path, PurePosixPath, PureWindowsPath

from speclint import fingerprint
from speclint.discover import Config, ConfigError
from speclint.findings import Finding, Location
from speclint.model import (
    BrokenRequirement,
    Criterion,
    Disturbance,
    ErrorConstants,
    Loop,
    MarginLimits,
    Requirement,
    SpecFile,
    Tracking,
)
from speclint.results import TraceCriterion, TraceNode
from speclint.rules import finding


@dataclass(slots=True)
class Index:
    """Everything the spec set defines, across files."""

    loops: dict[str, Loop] = field(default_factory=dict)
    requirements: list[Requirement] = field(default_factory=list)
    # Left out by the build stage for errors already reported.
    broken_loops: set[str] = field(default_factory=set)
    broken_requirements: list[BrokenRequirement] = field(default_factory=list)


@dataclass(slots=True)
class Checked:
    """What the trace checks found, and the trace they laid out."""

    findings: list[Finding]
    nodes: list[TraceNode]


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


def check(specs: list[SpecFile], found: Index, config: Config) -> Checked:
    """Findings about links between requirements and loops, and the trace they form."""
    first = first_definitions(found)
    parents = {rid: tuple(p for p in req.traces_to if p in first) for rid, req in first.items()}
    out: list[Finding] = []
    out.extend(_unknown_loops(found))
    out.extend(_duplicate_ids(found))
    if config.id_pattern is not None:
        out.extend(_id_pattern(found, config.id_pattern))
    known = set(first) | {b.id for b in found.broken_requirements}
    suggest = _suggester(sorted(known))
    for req in found.requirements:
        out.extend(_links(req, known, suggest))
        out.extend(_unverified(req))
        out.extend(_evidence(req, config.root))
        out.extend(_stale_review(req, found))
    out.extend(_cycles(first, parents))
    children = _children(first, parents)
    out.extend(_unrefined(found, children))
    out.extend(_idle_loops(found))
    nodes = [_node(req, parents, children, found) for req in found.requirements]
    nodes.sort(key=lambda n: (n.path, n.line, n.id))
    return Checked(out, nodes)


def first_definitions(found: Index) -> dict[str, Requirement]:
    """Each built requirement by ID; of two with one ID, the first in (path, line) order."""
    first: dict[str, Requirement] = {}
    for req in sorted(found.requirements, key=_place_key):
        first.setdefault(req.id, req)
    return first


def _place_key(req: Requirement) -> tuple[str, int, int]:
    return (req.location.path, req.location.line or 0, req.location.column or 0)


# A spec set may define thousands of loops; a message names this many and counts the rest.
LISTED_LOOPS = 12
# A suggestion compares the dangling ID with every known one. Past this many dangling links in
# a run a typo is no longer the likely cause (a missing file is), and suggestions stop, which
# keeps a spec set of thousands of requirements from costing minutes.
MAX_SUGGESTIONS = 50


def _suggester(ordered: list[str]) -> Callable[[str], str | None]:
    left = [MAX_SUGGESTIONS]

    def suggest(target: str) -> str | None:
        if left[0] <= 0:
            return None
        left[0] -= 1
        close = difflib.get_close_matches(target, ordered, n=1)
        return close[0] if close else None

    return suggest


def _unknown_loops(found: Index) -> Iterator[Finding]:
    loops = found.loops
    names = sorted(loops)
    known = ", ".join(names[:LISTED_LOOPS]) or "none"
    if len(names) > LISTED_LOOPS:
        known += f" and {len(names) - LISTED_LOOPS:,} more"
    for req in found.requirements:
        if req.loop is not None and req.loop not in loops and req.loop not in found.broken_loops:
            msg = f"{req.id}: loop {req.loop!r} is not defined in the spec set (loops: {known})"
            yield finding("SL311", msg, req.place("loop"), subject=req.id)


def _duplicate_ids(found: Index) -> Iterator[Finding]:
    entries = [(r.id, r.place("id")) for r in found.requirements]
    entries.extend((b.id, b.location) for b in found.broken_requirements)
    entries.sort(key=lambda e: (e[1].path, e[1].line or 0, e[1].column or 0))
    seen: dict[str, Location] = {}
    for rid, where in entries:
        before = seen.setdefault(rid, where)
        if before is not where:
            msg = f"requirement ID {rid!r} is already used at {before.path}:{before.line}"
            hint = "IDs are unique across every file of the spec set; renumber one of them"
            yield finding("SL601", msg, where, hint, subject=rid)


# The configured id_pattern comes from the repository, so a pull request can change it: a
# pattern that backtracks exponentially ("(a+)+b") would hold the run for ever. Legitimate
# patterns match thousands of IDs in milliseconds.
ID_PATTERN_BUDGET_S = 2.0


def _id_pattern(found: Index, pattern: str) -> Iterator[Finding]:
    from speclint.pipeline import BudgetExceeded, time_budget

    compiled = re.compile(pattern)
    try:
        with time_budget(ID_PATTERN_BUDGET_S):
            off = [req for req in found.requirements if compiled.fullmatch(req.id) is None]
    except BudgetExceeded:
        raise ConfigError(
            f"id_pattern {pattern!r} took more than {ID_PATTERN_BUDGET_S:g} s to match the "
            "requirement IDs; it backtracks (a repeated group holding a repetition, such as "
            "(a+)+): write it without nesting"
        ) from None
    for req in off:
        msg = f"requirement ID {req.id!r} does not match the configured id_pattern {pattern!r}"
        yield finding("SL602", msg, req.place("id"), subject=req.id)


def _links(
    req: Requirement, known: set[str], suggest: Callable[[str], str | None]
) -> Iterator[Finding]:
    if req.origin is None and not req.traces_to:
        msg = f"{req.id}: states neither an origin nor a traces_to link, so nothing says why it exists"
        hint = "give a root an origin (a customer document, a standard clause, a hazard item); trace any other requirement to its parent"
        yield finding("SL604", msg, req.place("id"), hint, subject=req.id)
    for i, target in enumerate(req.traces_to):
        if target in known:
            continue
        msg = f"{req.id}: traces_to {target!r}, which no file of the spec set defines"
        close = suggest(target)
        hint = f"did you mean {close!r}?" if close else "check the ID, or add the requirement"
        yield finding("SL603", msg, req.place(f"traces_to[{i}]"), hint, subject=req.id)


def _unverified(req: Requirement) -> Iterator[Finding]:
    if req.criteria and req.verification is None:
        msg = f"{req.id}: has criteria but states no verification method"
        hint = "add verification: {method: analysis} (or test, inspection, demonstration)"
        yield finding("SL608", msg, req.place("id"), hint, subject=req.id)


def _evidence(req: Requirement, root: Path) -> Iterator[Finding]:
    if req.verification is None:
        return
    for i, raw in enumerate(req.verification.evidence):
        problem = evidence_problem(raw, root)
        if problem is not None:
            code, why, hint = problem
            yield finding(
                code, f"{req.id}: evidence {raw!r} {why}", req.place(f"evidence[{i}]"), hint, req.id
            )


def evidence_problem(raw: str, root: Path) -> tuple[str, str, str] | None:
    """(code, reason, hint) when the evidence path `raw` is unusable under `root`, else None."""
    relative_hint = "evidence paths are relative to the repository root (the folder of the speclint configuration)"
    if PurePosixPath(raw).is_absolute() or PureWindowsPath(raw).drive or raw.startswith("\\"):
        return "SL610", "is an absolute path", relative_hint
    depth = 0
    for part in PurePosixPath(raw).parts:
        depth += -1 if part == ".." else (0 if part == "." else 1)
        if depth < 0:
            return "SL610", "leads out of the repository", relative_hint
    target = root / raw
    try:
        real = target.resolve()
        if not real.is_relative_to(root.resolve()):
            return "SL610", "leads out of the repository through a symbolic link", relative_hint
        if target.exists():
            return None
    except (OSError, RuntimeError) as exc:  # a name too long, a symbolic-link loop
        return "SL609", f"cannot be looked up ({exc})", relative_hint
    hint = relative_hint
    if "\\" in raw:
        hint += "; separate folders with '/', on every system"
    return "SL609", "does not exist in the repository", hint


def current_fingerprint(req: Requirement, found: Index) -> str | None:
    """The fingerprint of `req` now; None when its loop is missing or has errors."""
    loop = None
    if req.loop is not None:
        loop = found.loops.get(req.loop)
        if loop is None:
            return None
    return fingerprint.fingerprint(req, loop)


def review_state(req: Requirement, found: Index) -> tuple[str, tuple[str, ...] | None]:
    """("none" | "current" | "changed" | "unknown", the changed parts when they are known)."""
    if req.reviewed is None:
        return "none", ()
    now = current_fingerprint(req, found)
    if now is None:
        return "unknown", ()
    if now == req.reviewed.fingerprint:
        return "current", ()
    return "changed", fingerprint.changed_parts(req.reviewed.fingerprint, now)


def _stale_review(req: Requirement, found: Index) -> Iterator[Finding]:
    state, parts = review_state(req, found)
    if state != "changed" or req.reviewed is None:
        return
    review = req.reviewed
    if parts is None:
        what = (
            "its fingerprint no longer matches (it is not in the three-part form "
            "speclint writes, so which part changed cannot be told)"
        )
    else:
        what = "changed: " + ", ".join(parts)
    msg = f"{req.id}: {what} since its review by {review.by} on {review.date}"
    hint = f"have it reviewed again, then record that with: speclint stamp {req.id} --by NAME"
    yield finding("SL611", msg, req.place("reviewed"), hint, subject=req.id)


def _cycles(
    first: dict[str, Requirement], parents: dict[str, tuple[str, ...]]
) -> Iterator[Finding]:
    for group in strongly_connected(parents):
        start = min(group)
        if len(group) == 1 and start not in parents[start]:
            continue
        path = _shortest_cycle(start, group, parents)
        req = first[start]
        where = req.place(f"traces_to[{req.traces_to.index(path[1])}]")
        msg = f"{start}: traces_to links lead back to it: {' → '.join(path)}"
        others = sorted(group - set(path))
        if others:
            msg += f" (also caught in these links: {', '.join(others)})"
        hint = "a requirement serves those above it; remove the link that points back down"
        yield finding("SL605", msg, where, hint, subject=start)


def strongly_connected(edges: dict[str, tuple[str, ...]]) -> list[set[str]]:
    """Tarjan's strongly connected components, iterative (a long chain must not hit the
    recursion limit); nodes and edges are visited in sorted order for stable output."""
    order: dict[str, int] = {}
    low: dict[str, int] = {}
    on_stack: set[str] = set()
    stack: list[str] = []
    groups: list[set[str]] = []
    for root in sorted(edges):
        if root in order:
            continue
        work: list[tuple[str, Iterator[str]]] = [(root, iter(sorted(edges[root])))]
        order[root] = low[root] = len(order)
        stack.append(root)
        on_stack.add(root)
        while work:
            node, successors = work[-1]
            advanced = False
            for succ in successors:
                if succ not in order:
                    order[succ] = low[succ] = len(order)
                    stack.append(succ)
                    on_stack.add(succ)
                    work.append((succ, iter(sorted(edges.get(succ, ())))))
                    advanced = True
                    break
                if succ in on_stack:
                    low[node] = min(low[node], order[succ])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == order[node]:
                group = set()
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    group.add(member)
                    if member == node:
                        break
                groups.append(group)
    return groups


def _shortest_cycle(start: str, group: set[str], edges: dict[str, tuple[str, ...]]) -> list[str]:
    came_from: dict[str, str] = {}
    queue = deque([start])
    while queue:
        node = queue.popleft()
        for succ in sorted(edges[node]):
            if succ not in group:
                continue
            if succ == start:
                path = [node]
                while path[-1] != start:
                    path.append(came_from[path[-1]])
                return [*reversed(path), start]
            if succ not in came_from:
                came_from[succ] = node
                queue.append(succ)
    raise AssertionError("a strongly connected group always holds a cycle")


def _children(
    first: dict[str, Requirement], parents: dict[str, tuple[str, ...]]
) -> dict[str, tuple[str, ...]]:
    out: dict[str, set[str]] = {rid: set() for rid in first}
    for rid, ups in parents.items():
        for up in ups:
            out[up].add(rid)
    return {rid: tuple(sorted(kids)) for rid, kids in out.items()}


def _unrefined(found: Index, children: dict[str, tuple[str, ...]]) -> Iterator[Finding]:
    for req in found.requirements:
        textual = req.loop is None and not req.criteria
        if textual and req.verification is None and not children.get(req.id):
            msg = f"{req.id}: a textual requirement that no requirement traces to and nothing verifies"
            hint = "trace the requirements that carry it out to it, or state how it is verified"
            yield finding("SL606", msg, req.place("id"), hint, subject=req.id)


def _idle_loops(found: Index) -> Iterator[Finding]:
    named = {req.loop for req in found.requirements}
    for name, loop in found.loops.items():
        if name not in named:
            msg = f"loop {name!r} is named by no requirement, so nothing says what it must achieve"
            yield finding("SL607", msg, loop.location, subject=name)


def _node(
    req: Requirement,
    parents: dict[str, tuple[str, ...]],
    children: dict[str, tuple[str, ...]],
    found: Index,
) -> TraceNode:
    state, changed = review_state(req, found)
    loop = found.loops.get(req.loop) if req.loop is not None else None
    unit = loop.output_unit if loop is not None else None
    resolved = set(parents.get(req.id, ()))
    known = resolved | {b.id for b in found.broken_requirements}
    return TraceNode(
        id=req.id,
        path=req.location.path,
        line=req.location.line or 0,
        title=req.title,
        text=req.text,
        origin=req.origin,
        loop=req.loop,
        parents=tuple(p for p in req.traces_to if p in resolved),
        children=children.get(req.id, ()),
        dangling=tuple(p for p in req.traces_to if p not in known),
        criteria=tuple(c for crit in req.criteria for c in trace_criteria(crit, unit)),
        verification=req.verification.method if req.verification else None,
        evidence=req.verification.evidence if req.verification else (),
        review=state,
        reviewed_by=req.reviewed.by if req.reviewed else None,
        reviewed_on=req.reviewed.date if req.reviewed else None,
        changed=changed or (),
    )


def exact(x: Fraction | int) -> str:
    """A number as exact text: a terminating decimal as a decimal, anything else as n/d."""
    x = Fraction(x)
    d = x.denominator
    twos = fives = 0
    while d % 2 == 0:
        d, twos = d // 2, twos + 1
    while d % 5 == 0:
        d, fives = d // 5, fives + 1
    if d != 1:
        return f"{x.numerator}/{x.denominator}"
    places = max(twos, fives)
    scaled = abs(x.numerator) * (10**places // x.denominator)
    digits = str(scaled).rjust(places + 1, "0")
    whole, frac = digits[: len(digits) - places], digits[len(digits) - places :]
    sign = "-" if x < 0 else ""
    return f"{sign}{whole}.{frac}" if places else f"{sign}{whole}"


_MARGINS = (
    ("min_gain_margin_db", "gain_margin_db", "≥", "dB"),
    ("min_phase_margin_deg", "phase_margin_deg", "≥", "°"),
    ("min_delay_margin_s", "delay_margin_s", "≥", "s"),
    ("max_sensitivity_peak", "sensitivity_peak", "≤", ""),
)


def trace_criteria(c: Criterion, unit: str | None) -> list[TraceCriterion]:
    """The limits a criterion states, one per figure, as exact text."""

    def limit(relation: str, x: Fraction, what: str | None = unit) -> str:
        if not what:
            return f"{relation} {exact(x)}"
        return f"{relation} {exact(x)}{'' if what == '°' else ' '}{what}"

    if isinstance(c, Tracking):
        required = limit("≤", c.max_error)
        if c.percent is not None:
            required += f" ({exact(c.percent)}% of {exact(c.magnitude)})"
        return [TraceCriterion(c.kind, {"reference": c.reference}, required)]
    if isinstance(c, ErrorConstants):
        pairs = (("kp", c.min_kp, None), ("kv", c.min_kv, "1/s"), ("ka", c.min_ka, "1/s²"))
        return [
            TraceCriterion(c.kind, {"constant": name}, limit("≥", value, what))
            for name, value, what in pairs
            if value is not None
        ]
    if isinstance(c, Disturbance):
        detail = {"input": c.input, "magnitude": exact(c.magnitude)}
        return [TraceCriterion(c.kind, detail, limit("≤", c.max_error))]
    if isinstance(c, MarginLimits):
        out = []
        for attr, name, relation, what in _MARGINS:
            value = getattr(c, attr)
            if value is not None:
                out.append(TraceCriterion(c.kind, {"margin": name}, limit(relation, value, what)))
        return out
    raise TypeError(f"unknown criterion {c!r}")  # pragma: no cover
