"""Which gains satisfy each requirement of one loop, and the status that follows.

This module does not care where the gain sets come from: it takes the nominal gain, the
set of stabilising gains, and for each requirement its criteria, each with the exact
:class:`GainSet` where it holds (stability ignored) and, optionally, the reason to give when
that set is empty. Requirement and criterion sets include their limits (an error exactly
equal to its maximum meets it); that is the caller's business when it builds the sets.

Status of one requirement (the words are the JSON interface of the report):

- ``unstable``: the loop is unstable at the nominal gain; the message still names the
  gains that would meet the requirement, or why none does.
- ``met``: the nominal gain lies in the admissible set (criteria ∩ stable gains).
- ``retune``: the admissible set is not empty but misses the nominal gain.
- ``unreachable``: the admissible set is empty. The reason is, in this order: the
  criterion's own reason when its set is empty by itself; the criteria clashing with each
  other; the criteria clashing with stability.
- ``conflict``: each requirement is reachable alone, but not all of them together.

Conflict rule. Among the requirements of a loop whose admissible set is not empty, the
smallest sets of requirements that no single gain satisfies are searched by increasing
size (at most :data:`MAX_SUBSETS` subsets are examined; the message says when the search
stopped early). When the nominal loop is stable, every requirement that belongs to one of
these minimal sets gets ``conflict``, even one met at the nominal gain: if A and B cannot
both hold, keeping A means giving up B, so neither is settled until the engineer decides
which to relax. Requirements in no minimal set keep ``met`` or ``retune``. When the nominal
loop is unstable the statuses stay ``unstable`` and the conflict is still reported.
:class:`Conflict` names the first smallest set found (requirements in the order given) and
the largest group of requirements that hold together, with their common gains (ties go to
the group met at the nominal gain, if any, else to the group found at the lowest gain).

Messages (exact templates; an interface). ``{K}`` is the gain's display name, ``{k0}`` the
nominal gain as :func:`format_number` writes it, every set as :meth:`GainSet.describe`
writes it, ``{others}`` and ``{ids}`` requirement ids joined as "A", "A and B",
"A, B and C":

- met:            ``met at {K} = {k0}; it holds for {admissible}``
- met, no gain:   ``met (the loop has no tunable gain)``
- retune:         ``not met at {K} = {k0}; met for {admissible}``
- unreachable:    ``met by no stabilising gain: {reason}``
- unstable:       ``the loop is unstable at {K} = {k0}; met for {admissible}``, or
                  ``the loop is unstable at {K} = {k0}; met by no stabilising gain: {reason}``
- unstable, no gain: ``the loop is unstable (it has no tunable gain)``, followed by
                  ``; {reason}`` when the criteria fail by themselves
- conflict:       ``{met|not met} at {K} = {k0}; met for {admissible}, but never together
                  with {others}: {id} needs {admissible of id}[; {id} needs ...]``

Reasons:

- a criterion empty by itself: its own ``reason``, else ``{label} holds for no gain``
  (several are joined with "; ");
- criteria clashing: ``its criteria hold for no common gain: {label} needs {set}[; {label}
  needs {set}...]``;
- clash with stability: ``needs {set}, but the loop is stable only for {stable}``, or
  ``needs {set}, but no gain stabilises the loop``.

Conflict message: ``{ids} cannot hold together: {id} needs {admissible}[; ...]; the most
requirements that hold together are {best ids}, for {best set}``, followed by `` (search
stopped after {MAX_SUBSETS} subsets: a smaller conflicting set may exist)`` when capped.
"""

from __future__ import annotations

import functools
import itertools
from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Literal

from speclint.analysis.gainset import (
    INF,
    Exact,
    GainSet,
    Interval,
    exact,
    format_number,
    less,
    rational_between,
)

Status = Literal["met", "retune", "unreachable", "conflict", "unstable"]

# Subsets examined in the conflict search; 2**10 covers every subset of ten requirements.
MAX_SUBSETS = 1024

_EVERYTHING = GainSet((Interval(-INF, INF),))


@dataclass(frozen=True, slots=True)
class Criterion:
    """One criterion of a requirement: where it holds, stability ignored.

    ``label`` names it in messages (e.g. "ramp error ≤ 0.5"); ``reason`` is what to say
    when ``gains`` is empty (e.g. "type 0 loop: the ramp error is infinite for every gain;
    add an integrator").
    """

    label: str
    gains: GainSet
    reason: str | None = None


@dataclass(frozen=True, slots=True)
class RequirementGains:
    """A requirement of one loop, by id, with its criteria."""

    id: str
    criteria: tuple[Criterion, ...]


@dataclass(frozen=True, slots=True)
class Verdict:
    """The status of one requirement, its admissible gains (per criterion too), the message."""

    id: str
    status: Status
    admissible: GainSet
    criteria_admissible: tuple[GainSet, ...]
    message: str


@dataclass(frozen=True, slots=True)
class Conflict:
    """Requirements each reachable alone but not together.

    ``ids`` is a smallest set that cannot hold together; ``best_ids`` the largest group that
    can, over ``best_gains``; ``exhaustive`` is False when the search was capped.
    """

    ids: tuple[str, ...]
    best_ids: tuple[str, ...]
    best_gains: GainSet
    exhaustive: bool
    message: str


@dataclass(frozen=True, slots=True)
class LoopFeasibility:
    """The verdicts for every requirement of one loop, in the order given.

    ``together`` is the intersection of all their admissible sets (empty as soon as one is
    unreachable): the gains that satisfy them all.
    """

    verdicts: tuple[Verdict, ...]
    together: GainSet
    conflict: Conflict | None


def judge_loop(
    nominal: Fraction | None,
    stable: GainSet,
    requirements: Sequence[RequirementGains],
    symbol: str = "K",
    nominal_stable: bool | None = None,
) -> LoopFeasibility:
    """Status, admissible gains and message for each requirement of one loop.

    ``nominal_stable`` overrides the verdict read from ``stable`` (membership of the nominal
    gain; for a loop without gain, a non-empty set).
    """
    if nominal_stable is None:
        nominal_stable = not stable.is_empty() if nominal is None else stable.contains(nominal)
    at_nominal = _at_nominal(nominal, symbol)
    firsts: list[Verdict] = []
    for req in requirements:
        holds = _EVERYTHING
        for c in req.criteria:
            holds = holds.intersect(c.gains)
        admissible = holds.intersect(stable)
        per_criterion = tuple(c.gains.intersect(stable) for c in req.criteria)
        if not nominal_stable:
            status: Status = "unstable"
            if nominal is None:
                message = "the loop is unstable (it has no tunable gain)"
                if holds.is_empty():
                    message += f"; {_reason(req, holds, stable, symbol)}"
            elif admissible.is_empty():
                reason = _reason(req, holds, stable, symbol)
                message = (
                    f"the loop is unstable at {at_nominal}; met by no stabilising gain: {reason}"
                )
            else:
                message = (
                    f"the loop is unstable at {at_nominal}; met for {admissible.describe(symbol)}"
                )
        elif admissible.is_empty():
            status = "unreachable"
            message = f"met by no stabilising gain: {_reason(req, holds, stable, symbol)}"
        elif nominal is None:
            status, message = "met", "met (the loop has no tunable gain)"
        elif admissible.contains(nominal):
            status = "met"
            message = f"met at {at_nominal}; it holds for {admissible.describe(symbol)}"
        else:
            status = "retune"
            message = f"not met at {at_nominal}; met for {admissible.describe(symbol)}"
        firsts.append(Verdict(req.id, status, admissible, per_criterion, message))

    together = _EVERYTHING
    for v in firsts:
        together = together.intersect(v.admissible)
    reachable = [i for i, v in enumerate(firsts) if not v.admissible.is_empty()]
    conflict = None
    if len(reachable) >= 2 and _meet([firsts[i].admissible for i in reachable]).is_empty():
        conflict, members = _conflict(firsts, reachable, nominal, symbol)
        if nominal_stable:
            firsts = [
                _as_conflict(v, members[i], firsts, nominal, symbol) if i in members else v
                for i, v in enumerate(firsts)
            ]
    return LoopFeasibility(tuple(firsts), together, conflict)


def _at_nominal(nominal: Fraction | None, symbol: str) -> str:
    if nominal is None:
        return ""
    return f"{symbol} = {format_number(exact(nominal))}"


def _meet(sets: Sequence[GainSet]) -> GainSet:
    out = _EVERYTHING
    for s in sets:
        out = out.intersect(s)
    return out


def _reason(req: RequirementGains, holds: GainSet, stable: GainSet, symbol: str) -> str:
    empty = [c for c in req.criteria if c.gains.is_empty()]
    if empty:
        return "; ".join(c.reason or f"{c.label} holds for no gain" for c in empty)
    if holds.is_empty():
        needs = "; ".join(f"{c.label} needs {c.gains.describe(symbol)}" for c in req.criteria)
        return f"its criteria hold for no common gain: {needs}"
    if stable.is_empty():
        return f"needs {holds.describe(symbol)}, but no gain stabilises the loop"
    return (
        f"needs {holds.describe(symbol)}, but the loop is stable only for {stable.describe(symbol)}"
    )


def _join(ids: Sequence[str]) -> str:
    if len(ids) <= 1:
        return "".join(ids)
    return ", ".join(ids[:-1]) + " and " + ids[-1]


def _conflict(
    verdicts: list[Verdict], reachable: list[int], nominal: Fraction | None, symbol: str
) -> tuple[Conflict, dict[int, set[int]]]:
    """The minimal conflicting sets (and, per member, its partners) and the best group."""
    sets = {i: verdicts[i].admissible for i in reachable}
    meets: dict[tuple[int, ...], GainSet] = {(i,): sets[i] for i in reachable}
    minimal: list[tuple[int, ...]] = []
    examined = 0
    exhaustive = True
    for size in range(2, len(reachable) + 1):
        next_meets: dict[tuple[int, ...], GainSet] = {}
        for combo in itertools.combinations(reachable, size):
            if any(set(m) <= set(combo) for m in minimal):
                continue
            if examined >= MAX_SUBSETS:
                exhaustive = False
                break
            examined += 1
            meet = meets[combo[:-1]].intersect(sets[combo[-1]])
            if meet.is_empty():
                minimal.append(combo)
            else:
                next_meets[combo] = meet
        if not exhaustive or not next_meets:
            break
        meets = next_meets
    if not minimal:  # the cap hit before any proper subset failed: report them all
        minimal.append(tuple(reachable))
    members: dict[int, set[int]] = {}
    for combo in minimal:
        for i in combo:
            members.setdefault(i, set()).update(j for j in combo if j != i)

    best, best_gains = _best_group(verdicts, reachable, nominal)
    smallest = min(minimal, key=len)
    ids = [verdicts[i].id for i in smallest]
    needs = "; ".join(f"{verdicts[i].id} needs {sets[i].describe(symbol)}" for i in smallest)
    best_ids = [verdicts[i].id for i in best]
    message = (
        f"{_join(ids)} cannot hold together: {needs}; the most requirements that hold "
        f"together are {_join(best_ids)}, for {best_gains.describe(symbol)}"
    )
    if not exhaustive:
        message += (
            f" (search stopped after {MAX_SUBSETS} subsets: a smaller conflicting set may exist)"
        )
    conflict = Conflict(tuple(ids), tuple(best_ids), best_gains, exhaustive, message)
    return conflict, members


def _best_group(
    verdicts: list[Verdict], reachable: list[int], nominal: Fraction | None
) -> tuple[list[int], GainSet]:
    """The largest group of requirements met by one gain, and the gains that meet it."""
    ends: list[Exact] = []
    for i in reachable:
        for iv in verdicts[i].admissible.intervals:
            ends.extend((iv.lo, iv.hi))
    ordered = _distinct_sorted(ends)
    samples: list[Exact] = []
    for e in ordered:
        if e not in (INF, -INF):
            samples.append(e)
    for lo, hi in itertools.pairwise(ordered):
        samples.append(rational_between(lo, hi))
    samples.sort(key=functools.cmp_to_key(_compare))
    groups: list[list[int]] = []
    for x in samples:
        group = [i for i in reachable if verdicts[i].admissible.contains(x)]
        if group not in groups:
            groups.append(group)
    size = max(len(g) for g in groups)
    largest = [(g, _meet([verdicts[i].admissible for i in g])) for g in groups if len(g) == size]
    for g, gains in largest:
        if nominal is not None and gains.contains(nominal):
            return g, gains  # the group met without retuning, when there is one
    return largest[0]


def _compare(a: Exact, b: Exact) -> int:
    if less(a, b):
        return -1
    return 1 if less(b, a) else 0


def _distinct_sorted(values: list[Exact]) -> list[Exact]:
    out: list[Exact] = []
    for v in sorted(values, key=functools.cmp_to_key(_compare)):
        if not out or _compare(out[-1], v) != 0:
            out.append(v)
    return out


def _as_conflict(
    v: Verdict, partners: set[int], verdicts: list[Verdict], nominal: Fraction | None, symbol: str
) -> Verdict:
    met = nominal is not None and v.admissible.contains(nominal)
    others = sorted(partners)
    at = _at_nominal(nominal, symbol)
    head = f"{'met' if met else 'not met'} at {at}" if at else "met"
    needs = "; ".join(
        f"{verdicts[j].id} needs {verdicts[j].admissible.describe(symbol)}" for j in others
    )
    message = (
        f"{head}; met for {v.admissible.describe(symbol)}, but never together with "
        f"{_join([verdicts[j].id for j in others])}: {needs}"
    )
    return Verdict(v.id, "conflict", v.admissible, v.criteria_admissible, message)
