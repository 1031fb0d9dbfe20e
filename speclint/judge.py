"""Judge stage: one loop's exact figures, and a verdict for each of its requirements.

Runs per loop, because a verdict needs the gain sets of a requirement's criteria and the
loop's stable set, and a conflict is a property of all the requirements of one loop
together. The steps:

1. read the blocks (``speclint.expr``) into exact polynomials; refuse an improper model;
2. steady state (type, Kp, Kv, Ka), the stable gain set (Routh-Hurwitz without dead time,
   the Nyquist criterion with it), hidden unstable modes, margins at the nominal gain;
3. for each criterion, the set of gains where it holds, and its value at the nominal gain;
4. statuses, admissible gains and conflicts (``speclint.analysis.feasibility``).

`speclint check` keeps the records (:class:`Outcome`); `speclint explain` also reads the
exact objects they were made from (:class:`Workings`), so both show one computation.

Steady-state figures of an unstable loop do not exist: its criteria report ``achieved``
as None. Exact values become floats only when they are put into the result records.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

import sympy

from speclint.analysis import feasibility, margins, stability, steady
from speclint.analysis.algebra import K, LoopAlgebra, Ratio, improper_parts
from speclint.analysis.gainset import GainSet, format_number, to_float
from speclint.analysis.margins import DelayedStability
from speclint.expr import ExprError, common_factor, parse_block
from speclint.findings import Finding
from speclint.model import (
    Disturbance,
    ErrorConstants,
    Expression,
    Loop,
    MarginLimits,
    Requirement,
    Tracking,
)
from speclint.results import CriterionResult, Interval, LoopResult, RequirementResult
from speclint.rules import finding

_EXPRESSION_RULES = {
    "syntax": "SL301",
    "not-rational": "SL301",
    "unknown-name": "SL302",
    "limit": "SL303",
    "division-by-zero": "SL304",
    "zero": "SL305",
}
# Margin notes that only describe how a figure was found; they stay out of the findings.
_QUIET_NOTES = ("dead time: phase crossovers are listed", "the sensitivity peak is the limit")
_STATUS_RULES = {"retune": "SL401", "unreachable": "SL402", "conflict": "SL403"}
_CONSTANT_LABEL = {"kp": "Kp", "kv": "Kv", "ka": "Ka"}
_MARGIN_LABEL = {
    "min_gain_margin_db": ("gain_margin_db", "gain margin ≥ {} dB"),
    "min_phase_margin_deg": ("phase_margin_deg", "phase margin ≥ {}°"),
    "min_delay_margin_s": ("delay_margin_s", "delay margin ≥ {} s"),
    "max_sensitivity_peak": ("sensitivity_peak", "sensitivity peak ≤ {}"),
}


@dataclass(slots=True)
class Outcome:
    loop: LoopResult
    requirements: list[RequirementResult]
    findings: list[Finding] = field(default_factory=list)
    # The exact objects behind the records; None when the model could not be read.
    workings: Workings | None = None


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
    status = "invalid" if req.criteria else None
    return RequirementResult(
        req.id, req.location.path, req.location.line or 0, req.loop, status, why
    )


def judge_loop(loop: Loop, requirements: list[Requirement]) -> Outcome:
    """The loop's figures and a verdict for each of its requirements."""
    found: list[Finding] = []
    model = read_model(loop, found)
    if model is None:
        why = f"loop {loop.name!r} cannot be analysed (see the findings)"
        return Outcome(unanalysed_loop(loop), [invalid(r, why) for r in requirements], found)
    figures = Figures.of(loop, model, found)
    results, limits, decided = _verdicts(loop, model, figures, requirements, found)
    workings = Workings(model, figures, limits, decided)
    return Outcome(figures.result(loop, model), results, found, workings)


# -- 1. the model ------------------------------------------------------------------------


def read_model(loop: Loop, found: list[Finding]) -> LoopAlgebra | None:
    """The loop's blocks as exact polynomials, or None with findings saying why not."""
    symbol = loop.gain.symbol if loop.gain else None
    constants = {c.name: c.value for c in loop.constants}
    blocks: dict[str, Ratio] = {}
    for name in ("controller", "plant", "feedback"):
        expression: Expression | None = getattr(loop, name)
        if expression is None:
            blocks[name] = Ratio.one()
            continue
        read = parse_block(expression.text, symbol, constants)
        if isinstance(read, ExprError):
            found.append(_expression_finding(loop, name, expression, read))
            continue
        blocks[name] = read
        factor = common_factor(read)
        if factor is not None:
            text = _show_poly(factor, symbol)
            msg = (
                f"loops.{loop.name}.{name}: numerator and denominator share the factor {text}; "
                "it is kept as written, so the root it cancels stays a closed-loop root"
            )
            found.append(finding("SL306", msg, expression.location, subject=loop.name))
    if len(blocks) < 3:
        return None
    gain = loop.gain
    limits = GainSet.positive()
    if gain is not None and gain.limits is not None:
        limits = GainSet.between(*gain.limits)
    model = LoopAlgebra(
        controller=blocks["controller"],
        plant=blocks["plant"],
        feedback=blocks["feedback"],
        delay=loop.delay,
        nominal=gain.nominal if gain else None,
        limits=limits,
        gain_symbol=symbol,
    )
    improper = [p for p in improper_parts(model, model.nominal) if p != "equivalent forward path"]
    if improper:
        what = " and ".join(improper)
        msg = (
            f"loops.{loop.name}: the {what} {'has' if len(improper) == 1 else 'have'} more zeros "
            "than poles; speclint analyses proper models only"
        )
        hint = "add the missing poles (a sensor or actuator lag, a derivative filter)"
        found.append(finding("SL307", msg, loop.location, hint, subject=loop.name))
        return None
    if gain is not None and not any(_uses_gain(b) for b in blocks.values()):
        msg = f"loops.{loop.name}: the gain {gain.symbol} appears in no expression, so tuning it changes nothing"
        found.append(
            finding("SL308", msg, loop.places.get("gain.symbol", loop.location), subject=loop.name)
        )
    return model


def _uses_gain(block: Ratio) -> bool:
    return bool(block.num.degree(K) > 0 or block.den.degree(K) > 0)


def _expression_finding(loop: Loop, name: str, expression: Expression, error: ExprError) -> Finding:
    where = expression.location_of(error.offset)
    msg = f"loops.{loop.name}.{name}: {error.message}"
    return finding(_EXPRESSION_RULES.get(error.kind, "SL301"), msg, where, subject=loop.name)


def _show_poly(p: sympy.Poly, symbol: str | None) -> str:
    expr = p.as_expr()
    if symbol is not None:
        expr = expr.subs(K, sympy.Symbol(symbol))
    return f"({sympy.sstr(sympy.factor(expr))})"


# -- 2. the figures ----------------------------------------------------------------------


@dataclass(slots=True)
class Figures:
    """A loop's exact figures at the nominal gain, and how its stability was decided."""

    steady: steady.SteadyState
    stable: GainSet | None  # None: not decided
    nominal_stable: bool | None
    stability_note: str | None
    margins: margins.Margins | None
    routh: stability.StableSet | None = None  # without dead time
    nyquist: DelayedStability | None = None  # with dead time
    hidden: tuple[stability.HiddenMode, ...] = ()
    margins_unsupported: str | None = None

    @staticmethod
    def of(loop: Loop, model: LoopAlgebra, found: list[Finding]) -> Figures:
        symbol = model.gain_symbol or "K"
        ss = steady.steady_state(model)
        note = None
        exact_set = None
        delayed = None
        if model.delay:
            delayed = margins.stable_gains_delayed(model)
            stable, note = delayed.gains, delayed.unsupported
            nominal_stable = None
            if stable is not None:
                nominal_stable = (
                    stable.contains(model.nominal)
                    if model.nominal is not None
                    else margins.stable_at_delayed(model, None)
                )
        else:
            exact_set = stability.stable_gains(model)
            stable, nominal_stable, note = (
                exact_set.gains,
                exact_set.nominal_stable,
                exact_set.unsupported,
            )
            if note is not None:
                stable = None
        if note is not None:
            msg = f"loops.{loop.name}: closed-loop stability not decided: {note}"
            found.append(finding("SL406", msg, loop.location, subject=loop.name))
        hidden = tuple(stability.hidden_modes(model))
        for mode in hidden:
            msg = f"loops.{loop.name}: {mode.describe()}"
            found.append(finding("SL405", msg, loop.location, subject=loop.name))
            if mode.unstable:
                nominal_stable = False
        if nominal_stable is False:
            at = (
                f" at {symbol} = {format_number(_q(model.nominal))}"
                if model.nominal is not None
                else ""
            )
            where = (
                f"; it is stable for {stable.describe(symbol)}"
                if stable is not None and model.nominal is not None
                else ""
            )
            msg = f"loops.{loop.name}: the closed loop is unstable{at}{where}"
            place = loop.places.get("gain.nominal", loop.location)
            found.append(finding("SL404", msg, place, subject=loop.name))
        found_margins = None
        margins_unsupported = None
        try:
            found_margins = margins.margins_at(model, model.nominal)
        except margins.MarginsUnsupported as exc:
            margins_unsupported = str(exc)
            msg = f"loops.{loop.name}: margins not computed: {exc}"
            found.append(finding("SL406", msg, loop.location, subject=loop.name))
        if found_margins is not None:
            for note_text in found_margins.notes:
                if note_text.startswith(_QUIET_NOTES):
                    continue
                found.append(
                    finding(
                        "SL501", f"loops.{loop.name}: {note_text}", loop.location, subject=loop.name
                    )
                )
        return Figures(
            ss,
            stable,
            nominal_stable,
            note,
            found_margins,
            exact_set,
            delayed,
            hidden,
            margins_unsupported,
        )

    def result(self, loop: Loop, model: LoopAlgebra) -> LoopResult:
        symbol = model.gain_symbol
        ss = self.steady
        exact: dict[str, str] = {}
        for key in ("kp", "kv", "ka"):
            exact[key] = _text(getattr(ss, key))
            if symbol is not None:
                exact[f"{key}(gain)"] = _shown(steady.constant_text(ss, key, symbol))
        if self.stable is not None and symbol is not None:
            exact["stable_gains"] = self.stable.describe(symbol)
        if self.stability_note:
            exact["stability"] = self.stability_note
        m = self.margins
        margin_figures = None
        if m is not None:
            margin_figures = {
                "gain_margin_db": m.gain_margin_db,
                "phase_margin_deg": m.phase_margin_deg,
                "gain_crossover_rad_s": m.gain_crossover_rad_s,
                "phase_crossover_rad_s": m.phase_crossover_rad_s,
                "delay_margin_s": m.delay_margin_s,
                "sensitivity_peak": m.sensitivity_peak,
                "sensitivity_peak_rad_s": m.sensitivity_peak_rad_s,
                "gain_margin": m.gain_margin,
            }
        stable_gains = None
        if self.stable is not None and symbol is not None:
            stable_gains = _floats(self.stable)
        return LoopResult(
            id=loop.name,
            path=loop.location.path,
            line=loop.location.line or 0,
            gain_symbol=symbol,
            nominal=float(model.nominal) if model.nominal is not None else None,
            analysed=True,
            type=ss.type,
            kp=to_float(ss.kp),
            kv=to_float(ss.kv),
            ka=to_float(ss.ka),
            stable=self.nominal_stable,
            stable_gains=stable_gains,
            margins=margin_figures,
            exact=exact,
        )


def _q(x: Fraction | None) -> sympy.Rational:
    assert x is not None
    return sympy.Rational(x.numerator, x.denominator)


def _text(value: sympy.Expr) -> str:
    """An exact figure as sympy.sstr writes it, "∞" for oo."""
    if value is sympy.oo:
        return "∞"
    if isinstance(value, sympy.Rational):
        # What sstr writes for a rational number, without setting up a printer (most of
        # the cost of writing one).
        return str(value.p) if value.q == 1 else f"{value.p}/{value.q}"
    return str(sympy.sstr(value))


def _shown(text: str) -> str:
    return "∞" if text == "oo" else text


def _floats(gains: GainSet) -> tuple[Interval, ...]:
    return tuple((lo, hi) for lo, hi in gains.as_floats())


# -- 3 and 4. criteria and verdicts --------------------------------------------------------


@dataclass(slots=True)
class Limit:
    """One limit of a requirement, ready for the feasibility logic and the report."""

    kind: str
    label: str
    gains: GainSet
    reason: str | None
    required: float | None
    achieved: float | None
    met: bool | None
    detail: dict[str, str]


def _limits(req: Requirement, model: LoopAlgebra, fig: Figures) -> list[Limit]:
    out: list[Limit] = []
    stable = fig.nominal_stable is True
    for crit in req.criteria:
        if isinstance(crit, Tracking):
            out.append(_tracking(crit, model, fig, stable))
        elif isinstance(crit, ErrorConstants):
            out.extend(_constants(crit, model, fig))
        elif isinstance(crit, Disturbance):
            out.append(_disturbance(crit, model, stable))
        elif isinstance(crit, MarginLimits):
            out.extend(_margin_limits(crit, model, fig))
    return out


def _tracking(crit: Tracking, model: LoopAlgebra, fig: Figures, stable: bool) -> Limit:
    ref, r, limit = crit.reference, crit.magnitude, crit.max_error
    error = steady.tracking_error(fig.steady, ref, r)
    label = f"{ref} error ≤ {_num(limit)}"
    detail = {"reference": ref, "magnitude": _num(r)}
    if stable:
        detail["achieved_exact"] = _text(error)
    if crit.percent is not None:
        detail["limit"] = f"{_num(crit.percent)}% of R"
    # The reason is asked for only when no gain meets the limit (it is None otherwise, and
    # would compute the same gain set a second time to find that out).
    gains = steady.tracking_gains(model, ref, r, limit)
    return Limit(
        "tracking",
        label,
        gains,
        steady.why_tracking_unreachable(model, ref, r, limit) if gains.is_empty() else None,
        float(limit),
        to_float(error) if stable else None,
        bool(abs(error) <= _qq(limit)) if stable else None,
        detail,
    )


def _constants(crit: ErrorConstants, model: LoopAlgebra, fig: Figures) -> list[Limit]:
    out = []
    for which, minimum in (("kp", crit.min_kp), ("kv", crit.min_kv), ("ka", crit.min_ka)):
        if minimum is None:
            continue
        value = getattr(fig.steady, which)
        gains = steady.constant_gains(model, which, minimum)
        out.append(
            Limit(
                "error_constants",
                f"{_CONSTANT_LABEL[which]} ≥ {_num(minimum)}",
                gains,
                steady.why_constant_unreachable(model, which, minimum)
                if gains.is_empty()
                else None,
                float(minimum),
                to_float(value),
                bool(value >= _qq(minimum)),
                {"constant": which, "achieved_exact": _text(value)},
            )
        )
    return out


def _disturbance(crit: Disturbance, model: LoopAlgebra, stable: bool) -> Limit:
    deviation = steady.disturbance_error(model, crit.magnitude)
    gains = steady.disturbance_gains(model, crit.magnitude, crit.max_error)
    why = None
    if gains.is_empty():
        why = steady.why_disturbance_unreachable(model, crit.magnitude, crit.max_error)
    return Limit(
        "disturbance",
        f"disturbance deviation ≤ {_num(crit.max_error)}",
        gains,
        why,
        float(crit.max_error),
        to_float(deviation) if stable else None,
        bool(abs(deviation) <= _qq(crit.max_error)) if stable else None,
        {"input": crit.input, "magnitude": _num(crit.magnitude)}
        | ({"achieved_exact": _text(deviation)} if stable else {}),
    )


def _margin_limits(crit: MarginLimits, model: LoopAlgebra, fig: Figures) -> list[Limit]:
    out = []
    for key, (figure_key, template) in _MARGIN_LABEL.items():
        bound = getattr(crit, key)
        if bound is None:
            continue
        achieved = getattr(fig.margins, figure_key) if fig.margins is not None else None
        try:
            gains = margins.margin_gains(model, **{key: bound})
            reason = None
        except margins.MarginsUnsupported as exc:
            gains, reason = GainSet.empty(), f"margins not computed: {exc}"
        met = None
        if achieved is not None:
            met = (
                achieved <= float(bound) if key.startswith("max") else abs(achieved) >= float(bound)
            )
        out.append(
            Limit(
                "margins",
                template.format(_num(bound)),
                gains,
                reason,
                float(bound),
                achieved,
                met,
                {"margin": figure_key},
            )
        )
    return out


@dataclass(slots=True)
class Workings:
    """The exact objects one loop's records come from (what `speclint explain` shows).

    ``limits`` holds, by requirement id, the limits of each requirement with criteria;
    ``feasibility`` the verdicts over them, None when the loop's stability is undecided.
    """

    model: LoopAlgebra
    figures: Figures
    limits: dict[str, list[Limit]]
    feasibility: feasibility.LoopFeasibility | None


def _verdicts(
    loop: Loop,
    model: LoopAlgebra,
    fig: Figures,
    requirements: list[Requirement],
    found: list[Finding],
) -> tuple[list[RequirementResult], dict[str, list[Limit]], feasibility.LoopFeasibility | None]:
    symbol = model.gain_symbol or "K"
    analysed = [r for r in requirements if r.criteria]
    limits = {r.id: _limits(r, model, fig) for r in analysed}
    results: dict[str, RequirementResult] = {}
    decided = None
    if fig.stable is None:
        for req in analysed:
            results[req.id] = _undecided(req, limits[req.id])
    else:
        asked = [
            feasibility.RequirementGains(
                req.id,
                tuple(feasibility.Criterion(x.label, x.gains, x.reason) for x in limits[req.id]),
            )
            for req in analysed
        ]
        decided = feasibility.judge_loop(
            model.nominal, fig.stable, asked, symbol, fig.nominal_stable
        )
        for req, verdict in zip(analysed, decided.verdicts, strict=True):
            criteria = tuple(
                CriterionResult(
                    x.kind,
                    x.required,
                    x.achieved,
                    x.met,
                    _floats(admissible),
                    {"label": x.label, "admissible_text": admissible.describe(symbol), **x.detail},
                )
                for x, admissible in zip(limits[req.id], verdict.criteria_admissible, strict=True)
            )
            results[req.id] = RequirementResult(
                req.id,
                req.location.path,
                req.location.line or 0,
                req.loop,
                verdict.status,
                verdict.message,
                criteria,
                _floats(verdict.admissible),
            )
            rule = _STATUS_RULES.get(verdict.status)
            if rule is not None:
                place = req.place(req.criteria[0].kind)
                found.append(finding(rule, f"{req.id}: {verdict.message}", place, subject=req.id))
    out = []
    for req in requirements:
        if req.id in results:
            out.append(results[req.id])
        else:
            out.append(
                RequirementResult(req.id, req.location.path, req.location.line or 0, req.loop, None)
            )
    return out, limits, decided


def _undecided(req: Requirement, limits: list[Limit]) -> RequirementResult:
    criteria = tuple(
        CriterionResult(x.kind, x.required, x.achieved, x.met, None, {"label": x.label, **x.detail})
        for x in limits
    )
    return RequirementResult(
        req.id,
        req.location.path,
        req.location.line or 0,
        req.loop,
        "invalid",
        "the loop's stability could not be decided, so no verdict is given",
        criteria,
    )


def _num(x: Fraction) -> str:
    return format_number(_qq(x))


def _qq(x: Fraction) -> sympy.Rational:
    return sympy.Rational(x.numerator, x.denominator)
