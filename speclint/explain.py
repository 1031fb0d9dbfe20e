"""`speclint explain`: one loop's derivation, step by step, as an engineer checks it on paper.

The derivation is not computed here: :func:`speclint.judge.judge_loop` computes it for
`speclint check` too, and keeps the exact objects behind its records
(:class:`speclint.judge.Workings`). This module finds the loop a name refers to, runs that
one computation, and lays its exact objects out as plain records (:class:`Explanation`):
strings for exact forms, floats where a figure is numeric. The console layout is
``speclint.report.explain_console``; :func:`as_json` is the JSON form.

Exact forms are written by sympy's string printer with ``^`` for powers, in the user's
gain symbol; transfer functions as a constant times factors irreducible over the
rationals, numerator and denominator kept apart so that nothing cancels on the page
either; characteristic polynomials by descending powers of s.
"""

from __future__ import annotations

import difflib
import itertools
import math
from dataclasses import dataclass, fields, is_dataclass
from fractions import Fraction
from pathlib import Path
from typing import Any, Literal

import sympy

from speclint import judge, trace
from speclint.analysis import algebra, feasibility, stability, steady
from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S
from speclint.analysis.gainset import INF, Exact, GainSet, exact, to_float
from speclint.discover import Config
from speclint.findings import Finding, Location, Severity
from speclint.model import Loop, Requirement
from speclint.pipeline import LOOP_BUDGET_S, BudgetExceeded, read_specs, time_budget
from speclint.results import RequirementResult
from speclint.rules import finding

FORMAT = 1
# Verdict findings repeat what the requirements section says; they are left out there.
_VERDICT_RULES = frozenset({"SL401", "SL402", "SL403"})
_CONSTANTS = (
    ("Kp", "kp", "lim s→0 Ge(s)"),
    ("Kv", "kv", "lim s→0 s·Ge(s)"),
    ("Ka", "ka", "lim s→0 s^2·Ge(s)"),
)
_CROSSINGS = {
    "zero": "a real root crosses s = 0",
    "infinity": "a root leaves through s = ∞ (the degree of P in s drops: 1 + L(∞) = 0)",
    "imaginary": "a pair of roots crosses the imaginary axis",
}


# -- records -------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Number:
    """A value exactly (``exact``: "7/20", "sqrt(2)", "∞") and as a float (None: not a number)."""

    exact: str
    value: float | None


@dataclass(frozen=True, slots=True)
class Gains:
    """A gain set: 6-digit text, exact text, and float intervals."""

    text: str
    exact: str
    intervals: tuple[tuple[float, float], ...]


@dataclass(frozen=True, slots=True)
class Head:
    subject: Literal["loop", "requirement"]
    name: str
    loop: str
    path: str
    line: int
    description: str | None
    output_unit: str | None
    gain_symbol: str | None
    nominal: Number | None
    limits: tuple[Number, Number] | None
    delay: Number | None


@dataclass(frozen=True, slots=True)
class Block:
    symbol: str  # "C(s)", "G(s)", "H(s)"
    role: str  # "controller", "plant", "feedback"
    written: str | None  # the spec's text; None when the block is absent (taken as 1)
    exact: str


@dataclass(frozen=True, slots=True)
class Paths:
    constants: tuple[tuple[str, str], ...]  # (name, exact value) as substituted
    blocks: tuple[Block, ...]
    dead_time: str | None  # "e^(-3/10000*s)"
    forward_path: str  # L = C·G (times the dead time, when there is one)
    loop_transfer: str | None  # C·G·H when H ≠ 1: the margins are taken on it
    equivalent_forward_path: str | None  # Ge when H ≠ 1


@dataclass(frozen=True, slots=True)
class ErrorConstant:
    name: str  # "Kp", "Kv", "Ka"
    definition: str  # "lim s→0 s·Ge(s)"
    in_gain: str | None  # as a function of the gain; None for a loop without gain
    at_nominal: Number


@dataclass(frozen=True, slots=True)
class Steady:
    type: int
    degenerate: bool  # 1 + L·(H − 1) ≡ 0: y = r exactly, Ge does not exist
    constants: tuple[ErrorConstant, ...]
    unit_errors: tuple[tuple[str, Number], ...]  # (reference, final error for R = 1)


@dataclass(frozen=True, slots=True)
class RouthRow:
    power: int
    entries: tuple[str, ...]


@dataclass(frozen=True, slots=True)
class RouthView:
    gain: Number | None  # where the table is taken; None for a loop without gain
    polynomial: str  # the polynomial the table is built from (after the special handling)
    rows: tuple[RouthRow, ...]
    special_cases: tuple[str, ...]
    signs: tuple[int, ...]  # of the first column (as ε → 0+ where ε appears)
    sign_changes: int
    right_half_plane_roots: int
    imaginary_axis_roots: int


@dataclass(frozen=True, slots=True)
class FirstColumnEntry:
    power: int
    entry: str


@dataclass(frozen=True, slots=True)
class BoundaryView:
    gain: Number
    crossing: str  # "zero", "imaginary", "infinity"
    omega: Number | None  # rad/s, for a crossing of the imaginary axis
    text: str


@dataclass(frozen=True, slots=True)
class Stability:
    method: Literal["Routh-Hurwitz", "Nyquist"]
    characteristic: str | None  # P(s) without dead time
    delay_free_part: str | None  # with dead time: A(s) in A(s) + B(s)·e^(-sT)
    delayed_part: str | None  # B(s)
    routh: RouthView | None
    first_column: tuple[FirstColumnEntry, ...]
    boundaries: tuple[BoundaryView, ...]
    stable_gains: Gains | None
    within_limits: str | None  # the limits the set is cut to
    nominal_stable: bool | None
    hidden_modes: tuple[str, ...]
    notes: tuple[str, ...]
    undecided: str | None


@dataclass(frozen=True, slots=True)
class MarginsView:
    gain: Number | None
    gain_crossovers_rad_s: tuple[float, ...]
    phase_crossovers_rad_s: tuple[float, ...]
    gain_margin: float | None
    gain_margin_db: float | None
    phase_crossover_rad_s: float | None
    phase_margin_deg: float | None
    gain_crossover_rad_s: float | None
    delay_margin_s: float | None
    sensitivity_peak: float | None
    sensitivity_peak_rad_s: float | None
    notes: tuple[str, ...]
    unsupported: str | None


@dataclass(frozen=True, slots=True)
class CriterionView:
    kind: str
    label: str
    detail: dict[str, str]
    required: float | None
    achieved: float | None
    met_at_nominal: bool | None
    holds: Gains  # stability aside
    admissible: Gains | None  # ∩ the stable gains; None when stability is undecided
    reason: str | None  # why no gain meets it, stability aside


@dataclass(frozen=True, slots=True)
class RequirementView:
    id: str
    path: str
    line: int
    title: str | None
    text: str | None
    traces_to: tuple[str, ...]
    status: str | None
    message: str | None
    criteria: tuple[CriterionView, ...]
    admissible: Gains | None


@dataclass(frozen=True, slots=True)
class Together:
    gains: Gains | None  # the gains that satisfy every requirement of the loop
    text: str


@dataclass(frozen=True, slots=True)
class Explanation:
    head: Head
    paths: Paths
    steady: Steady
    stability: Stability
    margins: MarginsView
    requirements: tuple[RequirementView, ...]
    together: Together
    findings: tuple[Finding, ...]


@dataclass(frozen=True, slots=True)
class Refusal:
    """Nothing to explain. ``usage``: the name is unknown or names no loop (exit 2);
    otherwise the model has errors, listed in ``findings`` (exit 1)."""

    message: str
    usage: bool
    findings: tuple[Finding, ...] = ()


# -- finding the loop ------------------------------------------------------------------------


def explain(config: Config, name: str, given: list[str], cwd: Path) -> Explanation | Refusal:
    """The derivation for a loop or a requirement ID of the spec set, or why there is none."""
    read, _, found = read_specs(config, given, cwd)
    loop = found.loops.get(name)
    requirement = None
    if loop is None:
        requirement = trace.first_definitions(found).get(name)
        if requirement is None:
            return _unknown(name, found, read.findings)
        if requirement.loop is None:
            return Refusal(
                f"{name} is a textual requirement: it names no loop, so there is nothing to derive",
                usage=True,
            )
        loop = found.loops.get(requirement.loop)
        if loop is None:
            why = "has errors" if requirement.loop in found.broken_loops else "is not defined"
            return Refusal(
                f"{name} is on loop {requirement.loop!r}, which {why}",
                usage=False,
                findings=_loop_findings(requirement.loop, read.findings),
            )
    mine = [r for r in found.requirements if r.loop == loop.name]
    try:
        with time_budget(LOOP_BUDGET_S):
            outcome = judge.judge_loop(loop, mine)
    except BudgetExceeded:
        msg = (
            f"loops.{loop.name}: the analysis took longer than {LOOP_BUDGET_S:g} s and was stopped"
        )
        stopped = finding("SL407", msg, loop.location, subject=loop.name)
        return Refusal(f"loop {loop.name!r} cannot be analysed", usage=False, findings=(stopped,))
    workings = outcome.workings
    if workings is None:
        errors = tuple(f for f in outcome.findings if f.severity is Severity.ERROR)
        return Refusal(f"loop {loop.name!r} cannot be analysed", usage=False, findings=errors)
    try:
        # Writing out the exact forms factors polynomials: a budget of its own, as above.
        with time_budget(LOOP_BUDGET_S):
            return _lay_out(loop, mine, requirement, name, outcome, workings, read.findings)
    except BudgetExceeded:
        msg = f"loops.{loop.name}: writing out the exact forms took longer than {LOOP_BUDGET_S:g} s"
        stopped = finding("SL407", msg, loop.location, subject=loop.name)
        return Refusal(f"loop {loop.name!r} cannot be explained", usage=False, findings=(stopped,))


def _lay_out(
    loop: Loop,
    mine: list[Requirement],
    requirement: Requirement | None,
    name: str,
    outcome: judge.Outcome,
    workings: judge.Workings,
    read_findings: list[Finding],
) -> Explanation:
    subject: Literal["loop", "requirement"] = "loop" if requirement is None else "requirement"
    shown = mine if requirement is None else [requirement]
    results = {r.id: r for r in outcome.requirements}
    verdicts: dict[str, feasibility.Verdict] = {}
    if workings.feasibility is not None:
        with_criteria = [r.id for r in mine if r.criteria]
        verdicts = dict(zip(with_criteria, workings.feasibility.verdicts, strict=True))
    symbol = workings.model.gain_symbol or "K"
    return Explanation(
        head=_head(subject, name, loop),
        paths=_paths(loop, workings.model),
        steady=_steady(workings),
        stability=_stability(loop, workings),
        margins=_margins(workings),
        requirements=tuple(
            _requirement(
                r, results[r.id], workings.limits.get(r.id, []), verdicts.get(r.id), symbol
            )
            for r in shown
        ),
        together=_together(workings, mine, symbol),
        findings=tuple(
            f
            for f in (*_loop_findings(loop.name, read_findings), *outcome.findings)
            if f.rule not in _VERDICT_RULES
        ),
    )


def _unknown(name: str, found: trace.Index, findings: list[Finding]) -> Refusal:
    if name in found.broken_loops:
        return Refusal(
            f"loop {name!r} has errors, so it cannot be explained",
            usage=False,
            findings=_loop_findings(name, findings),
        )
    for broken in found.broken_requirements:
        if broken.id == name:
            return Refusal(
                f"requirement {name!r} has errors, so it cannot be explained",
                usage=False,
                findings=_findings_of_item(broken.location, found, findings),
            )
    known = sorted({*found.loops, *(r.id for r in found.requirements)})
    close = difflib.get_close_matches(name, known, n=3, cutoff=0.6)
    if close:
        hint = "did you mean " + " or ".join(close) + "?"
    elif found.loops:
        hint = "the loops are " + ", ".join(sorted(found.loops))
    else:
        hint = "the spec set defines no loop"
    return Refusal(f"no loop or requirement named {name!r} in the spec set; {hint}", usage=True)


def _loop_findings(name: str, findings: list[Finding]) -> tuple[Finding, ...]:
    """Findings of the reading stages about one loop or requirement: by subject, or by the
    schema path their message starts with."""
    prefixes = (f"loops.{name}:", f"loops.{name}.", f"{name}:")
    return tuple(f for f in findings if f.subject == name or f.message.startswith(prefixes))


def _findings_of_item(
    where: Location, found: trace.Index, findings: list[Finding]
) -> tuple[Finding, ...]:
    """Findings from a broken requirement's line up to the next item of its file (the schema
    names it by position, not by ID)."""
    starts = [
        loc.line
        for loc in (
            *(r.location for r in found.requirements),
            *(b.location for b in found.broken_requirements),
            *(loop.location for loop in found.loops.values()),
        )
        if loc.path == where.path
        and loc.line is not None
        and where.line is not None
        and loc.line > where.line
    ]
    end = min(starts, default=None)
    return tuple(
        f
        for f in findings
        if f.location.path == where.path
        and f.location.line is not None
        and where.line is not None
        and where.line <= f.location.line
        and (end is None or f.location.line < end)
    )


# -- exact forms -------------------------------------------------------------------------------


def _show(expr: sympy.Expr) -> str:
    return str(sympy.sstr(expr)).replace("**", "^")


def _powers(text: str) -> str:
    """Notes from the analysis write powers as sympy does; here they read as elsewhere."""
    return text.replace("**", "^")


def _named(expr: sympy.Expr, symbol: str | None) -> sympy.Expr:
    return expr.subs(K, sympy.Symbol(symbol)) if symbol else expr


def _exact(x: Exact) -> str:
    """An exact number as text; a float end (from a transcendental equation) marked ≈."""
    if x is INF:
        return "∞"
    if x == -INF:
        return "-∞"
    if isinstance(x, sympy.Float):
        return f"≈{float(x):.15g}"
    return _show(x)


def _number(x: Exact | Fraction) -> Number:
    value = exact(x)
    return Number(_exact(value), to_float(value))


def _gains(gains: GainSet, symbol: str) -> Gains:
    return Gains(
        gains.describe(symbol),
        gains.describe(symbol, _exact),
        tuple((lo, hi) for lo, hi in gains.as_floats()),
    )


def _factors(constant: int, factors: list[tuple[sympy.Poly, int]], symbol: str | None) -> list[str]:
    parts = [str(constant)] if constant != 1 or not factors else []
    for factor, power in factors:
        in_s = sympy.Poly(factor.as_expr(), S, K, domain=sympy.QQ)
        text = (
            polynomial_text(in_s, symbol)
            if in_s.degree(S) > 0
            else _show(_named(factor.as_expr(), symbol))
        )
        if isinstance(factor.as_expr(), sympy.Add):
            text = f"({text})"
        parts.append(f"{text}^{power}" if power > 1 else text)
    return parts


def ratio_text(num: sympy.Poly, den: sympy.Poly, symbol: str | None) -> str:
    """num/den as a constant times irreducible factors, numerator and denominator apart."""
    if num.is_zero:
        return "0"
    c_num, f_num = num.factor_list()
    c_den, f_den = den.factor_list()
    c = sympy.Rational(c_num) / sympy.Rational(c_den)
    if c < 0:
        # Carry the sign into a sum of odd power: K/(1 - K) reads better than -K/(K - 1).
        for factors in (f_den, f_num):
            odd = [i for i, (f, m) in enumerate(factors) if m % 2 and len(f.terms()) > 1]
            if odd:
                f, m = factors[odd[-1]]
                factors[odd[-1]] = (-f, m)
                c = -c
                break
    sign = "-" if c < 0 else ""
    top = _factors(int(abs(c.p)), f_num, symbol)
    bottom = _factors(int(c.q), f_den, symbol) if f_den or c.q != 1 else []
    text = sign + "*".join(top)
    if not bottom:
        return text
    under = "*".join(bottom)
    return f"{text}/({under})" if len(bottom) > 1 else f"{text}/{under}"


def rational_text(expr: sympy.Expr, symbol: str | None) -> str:
    """A rational function of the gain with whole-number coefficients: '(6 - K)/3'."""
    if expr is INF:
        return "∞"
    num, den = sympy.fraction(sympy.cancel(sympy.together(expr)))
    gens = [K] if expr.has(K) else []
    if not gens:
        return _show(sympy.Rational(num) / sympy.Rational(den))
    p_num = sympy.Poly(num, *gens, domain=sympy.QQ)
    p_den = sympy.Poly(den, *gens, domain=sympy.QQ)
    k_num, p_num = p_num.clear_denoms()
    k_den, p_den = p_den.clear_denoms()
    scale = sympy.Rational(k_den) / sympy.Rational(k_num)
    top = _named(p_num.as_expr() * scale.p, symbol)
    bottom = _named(p_den.as_expr() * scale.q, symbol)
    lone_minus = not isinstance(top, sympy.Add) and top.could_extract_minus_sign()
    if bottom.is_negative or (isinstance(bottom, sympy.Add) and lone_minus):
        top, bottom = -top, -bottom
    top_text = _show(top)
    if bottom == 1:
        return top_text
    if isinstance(top, sympy.Add):
        top_text = f"({top_text})"
    bottom_text = _show(bottom)
    if not (bottom.is_Atom or isinstance(bottom, sympy.Pow)):
        bottom_text = f"({bottom_text})"
    return f"{top_text}/{bottom_text}"


def polynomial_text(p: sympy.Poly, symbol: str | None) -> str:
    """A polynomial in s whose coefficients may hold the gain, by descending powers of s."""
    by_power: dict[int, sympy.Expr] = {}
    i_s, i_k = p.gens.index(S), p.gens.index(K)
    for monom, coeff in p.terms():
        term = sympy.Rational(coeff) * K ** monom[i_k]
        by_power[monom[i_s]] = by_power.get(monom[i_s], sympy.Integer(0)) + term
    terms: list[str] = []
    for power in sorted(by_power, reverse=True):
        coeff = _named(by_power[power], symbol)
        if coeff == 0:
            continue
        if power and isinstance(coeff, sympy.Add):
            text = f"({_show(coeff)})*{_show(S**power)}"
        else:
            text = _show(coeff * S**power)
        terms.append(text)
    if not terms:
        return "0"
    out = terms[0]
    for text in terms[1:]:
        out += f" - {text[1:]}" if text.startswith("-") else f" + {text}"
    return out


def _s_poly(p: sympy.Poly) -> str:
    return polynomial_text(sympy.Poly(p.as_expr(), S, K, domain=sympy.QQ), None)


# -- the sections ----------------------------------------------------------------------------


def _head(subject: Literal["loop", "requirement"], name: str, loop: Loop) -> Head:
    gain = loop.gain
    return Head(
        subject=subject,
        name=name,
        loop=loop.name,
        path=loop.location.path,
        line=loop.location.line or 0,
        description=loop.description,
        output_unit=loop.output_unit,
        gain_symbol=gain.symbol if gain else None,
        nominal=_number(gain.nominal) if gain else None,
        limits=(_number(gain.limits[0]), _number(gain.limits[1]))
        if gain is not None and gain.limits is not None
        else None,
        delay=_number(loop.delay) if loop.delay else None,
    )


def _paths(loop: Loop, model: LoopAlgebra) -> Paths:
    symbol = model.gain_symbol
    roles = (
        ("C(s)", "controller", loop.controller, model.controller),
        ("G(s)", "plant", loop.plant, model.plant),
        ("H(s)", "feedback", loop.feedback, model.feedback),
    )
    blocks = tuple(
        Block(name, role, written.text if written else None, _ratio(block, symbol))
        for name, role, written, block in roles
    )
    dead = None
    if model.delay:
        dead = f"e^(-{_show(exact(model.delay))}*s)"
    forward = _ratio(algebra.forward_path(model), symbol)
    if dead:
        forward = f"{forward}·{dead}"
    unity = _is_one(model.feedback)
    loop_transfer = None
    equivalent = None
    if not unity:
        loop_transfer = _ratio(algebra.loop_transfer(model), symbol)
        if dead:
            loop_transfer = f"{loop_transfer}·{dead}"
        ge = algebra.unity_equivalent(model)
        if dead:
            c, g, h = model.controller, model.plant, model.feedback
            a = c.den * g.den * h.den
            b = c.num * g.num * (h.num - h.den)
            equivalent = (
                f"{_ratio(Ratio(ge.num, algebra.poly(1)), symbol)}·{dead}"
                f"/({polynomial_text(a, symbol)} + ({polynomial_text(b, symbol)})·{dead})"
            )
        else:
            equivalent = _ratio(ge, symbol)
    return Paths(
        constants=tuple((c.name, _exact(exact(c.value))) for c in loop.constants),
        blocks=blocks,
        dead_time=dead,
        forward_path=forward,
        loop_transfer=loop_transfer,
        equivalent_forward_path=equivalent,
    )


def _ratio(r: Ratio, symbol: str | None) -> str:
    return ratio_text(r.num, r.den, symbol)


def _is_one(r: Ratio) -> bool:
    return bool((r.num - r.den).is_zero)


def _steady(w: judge.Workings) -> Steady:
    ss = w.figures.steady
    symbol = w.model.gain_symbol
    constants = tuple(
        ErrorConstant(
            name,
            definition,
            rational_text(getattr(ss, f"{key}_expr"), symbol) if symbol else None,
            _number(getattr(ss, key)),
        )
        for name, key, definition in _CONSTANTS
    )
    errors = (
        ("step", ss.step_error),
        ("ramp", ss.ramp_error),
        ("parabola", ss.parabola_error),
    )
    return Steady(
        type=ss.type,
        degenerate=ss.type == steady.DEGENERATE_TYPE,
        constants=constants,
        unit_errors=tuple((name, _number(value)) for name, value in errors),
    )


def _stability(loop: Loop, w: judge.Workings) -> Stability:
    model, fig = w.model, w.figures
    symbol = model.gain_symbol
    shown = symbol or "K"
    within = None
    if loop.gain is not None and loop.gain.limits is not None:
        within = model.limits.describe(shown, _exact)
    hidden = tuple(m.describe() for m in fig.hidden)
    stable = _gains(fig.stable, shown) if fig.stable is not None else None
    c, g, h = model.controller, model.plant, model.feedback
    if model.delay:
        delayed = fig.nyquist
        return Stability(
            method="Nyquist",
            characteristic=None,
            delay_free_part=polynomial_text(c.den * g.den * h.den, symbol),
            delayed_part=polynomial_text(c.num * g.num * h.num, symbol),
            routh=None,
            first_column=(),
            boundaries=(),
            stable_gains=stable,
            within_limits=within,
            nominal_stable=fig.nominal_stable,
            hidden_modes=hidden,
            notes=delayed.notes if delayed is not None else (),
            undecided=fig.stability_note,
        )
    routh = fig.routh
    table = None
    column: tuple[FirstColumnEntry, ...] = ()
    boundaries: tuple[BoundaryView, ...] = ()
    notes: tuple[str, ...] = ()
    if routh is not None:
        if routh.nominal_table is not None:
            table = _routh_view(routh.nominal_table, model.nominal)
        # Row s^n first; a degenerate table stops at the row whose entry is zero for every gain.
        top = algebra.degree_in_s(algebra.characteristic(model))
        column = tuple(
            FirstColumnEntry(top - i, rational_text(entry, symbol))
            for i, entry in enumerate(routh.first_column)
        )
        boundaries = tuple(_boundary(b) for b in routh.boundaries)
        notes = tuple(_powers(n) for n in routh.notes)
    return Stability(
        method="Routh-Hurwitz",
        characteristic=polynomial_text(algebra.characteristic(model), symbol),
        delay_free_part=None,
        delayed_part=None,
        routh=table,
        first_column=column,
        boundaries=boundaries,
        stable_gains=stable,
        within_limits=within,
        nominal_stable=fig.nominal_stable,
        hidden_modes=hidden,
        notes=notes,
        undecided=fig.stability_note,
    )


def _routh_view(table: stability.RouthTable, nominal: Fraction | None) -> RouthView:
    signs = table.first_column_signs
    nonzero = [x for x in signs if x]
    changes = sum(1 for a, b in itertools.pairwise(nonzero) if a != b)
    coefficients = sympy.Poly(list(table.coefficients), S, domain=sympy.QQ)
    return RouthView(
        gain=_number(nominal) if nominal is not None else None,
        polynomial=_s_poly(coefficients),
        rows=tuple(
            RouthRow(power, tuple(_show(x) for x in row))
            for power, row in zip(table.powers, table.rows, strict=True)
        ),
        special_cases=tuple(_powers(n) for n in table.notes),
        signs=signs,
        sign_changes=changes,
        right_half_plane_roots=table.rhp,
        imaginary_axis_roots=table.imaginary,
    )


def _boundary(b: stability.Boundary) -> BoundaryView:
    omega = _number(b.omega) if b.omega is not None else None
    text = _CROSSINGS[b.crossing]
    if b.crossing == "imaginary":
        text += " at s = ±j·ω0" + (
            f", ω0 = {omega.exact} ≈ {omega.value:.6g} rad/s" if omega and omega.value else ""
        )
    return BoundaryView(_number(b.gain), b.crossing, omega, text)


def _margins(w: judge.Workings) -> MarginsView:
    m = w.figures.margins
    gain = _number(w.model.nominal) if w.model.nominal is not None else None
    if m is None:
        return MarginsView(
            gain, (), (), None, None, None, None, None, None, None, None, (),
            w.figures.margins_unsupported or "not computed",
        )  # fmt: skip
    return MarginsView(
        gain=gain,
        gain_crossovers_rad_s=m.gain_crossovers,
        phase_crossovers_rad_s=m.phase_crossovers,
        gain_margin=m.gain_margin,
        gain_margin_db=m.gain_margin_db,
        phase_crossover_rad_s=m.phase_crossover_rad_s,
        phase_margin_deg=m.phase_margin_deg,
        gain_crossover_rad_s=m.gain_crossover_rad_s,
        delay_margin_s=m.delay_margin_s,
        sensitivity_peak=m.sensitivity_peak,
        sensitivity_peak_rad_s=m.sensitivity_peak_rad_s,
        notes=m.notes,
        unsupported=None,
    )


def _requirement(
    req: Requirement,
    result: RequirementResult,
    limits: list[judge.Limit],
    verdict: feasibility.Verdict | None,
    symbol: str,
) -> RequirementView:
    per_criterion: tuple[GainSet | None, ...] = (
        verdict.criteria_admissible if verdict is not None else (None,) * len(limits)
    )
    criteria = tuple(
        CriterionView(
            kind=x.kind,
            label=x.label,
            detail=dict(x.detail),
            required=x.required,
            achieved=x.achieved,
            met_at_nominal=x.met,
            holds=_gains(x.gains, symbol),
            admissible=_gains(admissible, symbol) if admissible is not None else None,
            reason=x.reason,
        )
        for x, admissible in zip(limits, per_criterion, strict=True)
    )
    return RequirementView(
        id=req.id,
        path=req.location.path,
        line=req.location.line or 0,
        title=req.title,
        text=req.text,
        traces_to=req.traces_to,
        status=result.status,
        message=result.message,
        criteria=criteria,
        admissible=_gains(verdict.admissible, symbol) if verdict is not None else None,
    )


def _together(w: judge.Workings, requirements: list[Requirement], symbol: str) -> Together:
    decided = w.feasibility
    count = sum(1 for r in requirements if r.criteria)
    if count == 0:
        return Together(None, "no requirement with criteria names this loop")
    if decided is None:
        return Together(None, "not decided: the loop's stability could not be decided")
    gains = _gains(decided.together, symbol)
    if not decided.together.is_empty():
        nominal = w.model.nominal
        at = ""
        if nominal is not None:
            inside = decided.together.contains(nominal)
            at = f"; the nominal gain {symbol} = {_exact(exact(nominal))} is {'inside' if inside else 'outside'}"
        every = "the one requirement holds" if count == 1 else f"all {count} requirements hold"
        return Together(gains, f"{every} for {gains.text}{at}")
    if decided.conflict is not None:
        return Together(gains, f"no gain satisfies them all: {decided.conflict.message}")
    unreachable = [v.id for v in decided.verdicts if v.admissible.is_empty()]
    names = ", ".join(unreachable)
    return Together(gains, f"no gain satisfies them all: no stabilising gain meets {names}")


# -- JSON ---------------------------------------------------------------------------------------


def as_json(item: Explanation | Refusal, version: str, caution: str) -> dict[str, Any]:
    """The explanation as a JSON-ready dict (floats where numeric, "inf" for infinity)."""
    if isinstance(item, Refusal):
        return {
            "format": FORMAT,
            "version": version,
            "explained": False,
            "message": item.message,
            "findings": [_finding(f) for f in item.findings],
            "caution": caution,
        }
    body = _plain(item)
    assert isinstance(body, dict)
    return {"format": FORMAT, "version": version, "explained": True, **body, "caution": caution}


def _plain(x: Any) -> Any:
    if isinstance(x, Finding):
        return _finding(x)
    if is_dataclass(x) and not isinstance(x, type):
        return {f.name: _plain(getattr(x, f.name)) for f in fields(x)}
    if isinstance(x, tuple | list):
        return [_plain(v) for v in x]
    if isinstance(x, dict):
        return {str(k): _plain(v) for k, v in x.items()}
    if isinstance(x, float):
        if math.isnan(x):
            return None
        if math.isinf(x):
            return "inf" if x > 0 else "-inf"
    return x


def _finding(f: Finding) -> dict[str, Any]:
    return {
        "rule": f.rule,
        "severity": f.severity.value,
        "message": f.message,
        "path": f.location.path,
        "line": f.location.line,
        "column": f.location.column,
        "hint": f.hint,
    }
