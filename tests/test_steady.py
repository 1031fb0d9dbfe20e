"""Steady-state figures against the trade's table, textbook examples, sympy's limit and
python-control."""

from __future__ import annotations

from fractions import Fraction

import control
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from speclint.analysis import steady
from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S, at_gain
from speclint.analysis.gainset import INF, GainSet
from speclint.expr import parse_block

F = Fraction
ONE = Fraction(1)
ORDERS = {"step": 0, "ramp": 1, "parabola": 2}


def make_loop(
    c: str,
    g: str,
    h: str = "1",
    nominal: Fraction | None = ONE,
    delay: Fraction | None = None,
) -> LoopAlgebra:
    blocks = []
    for text in (c, g, h):
        block = parse_block(text, "K", {})
        assert isinstance(block, Ratio), block
        blocks.append(block)
    return LoopAlgebra(*blocks, delay, nominal, GainSet.positive(), "K")


# -- an independent route: sympy's limit on expressions built here ---------------------


def _expr(r: Ratio, gain: sympy.Expr | None) -> sympy.Expr:
    value = r.num.as_expr() / r.den.as_expr()
    return value if gain is None else value.subs(K, gain)


def _pieces(loop: LoopAlgebra, gain: sympy.Expr | None) -> tuple[sympy.Expr, ...]:
    if gain is None and loop.nominal is not None:
        gain = sympy.Rational(loop.nominal.numerator, loop.nominal.denominator)
    c, g, h = (_expr(b, gain) for b in (loop.controller, loop.plant, loop.feedback))
    delay = sympy.exp(-S * sympy.Rational(str(loop.delay))) if loop.delay else sympy.Integer(1)
    return c, g, h, delay


def _lim(expr: sympy.Expr) -> sympy.Expr:
    # cancel first: sympy's limit is far faster on one rational function (exp stays a symbol
    # to cancel). Either infinity is reported as oo, the convention of the module.
    value = sympy.limit(sympy.cancel(expr), S, 0, "+")
    return INF if value in (sympy.oo, -sympy.oo, sympy.zoo) else value


def limit_error(loop: LoopAlgebra, reference: str, gain: sympy.Expr | None = None) -> sympy.Expr:
    """Final value theorem: lim s·R(s)·E(s), E = R·(1 − T), T = L·P/(1 + L·P·H)."""
    c, g, h, p = _pieces(loop, gain)
    closed = c * g * p / (1 + c * g * p * h)
    return _lim(S * (1 - closed) / S ** (ORDERS[reference] + 1))


def limit_constants(loop: LoopAlgebra) -> tuple[sympy.Expr, ...]:
    """Kp, Kv, Ka as lim s^n·Ge, Ge = L·P/(1 + L·P·(H − 1)) (Nise's unity equivalent)."""
    c, g, h, p = _pieces(loop, None)
    ge = c * g * p / (1 + c * g * p * (h - 1))
    return tuple(_lim(S**n * ge) for n in range(3))


def limit_type(loop: LoopAlgebra) -> int:
    c, g, h, p = _pieces(loop, None)
    ge = c * g * p / (1 + c * g * p * (h - 1))
    for n in range(6):
        if _lim(S**n * ge) is not INF:
            return n
    raise AssertionError("type above 5")


def limit_disturbance(loop: LoopAlgebra, gain: sympy.Expr | None = None) -> sympy.Expr:
    c, g, h, p = _pieces(loop, gain)
    return _lim(g / (1 + c * g * h * p))


# Loops for the final-value checks; each is (controller, plant, feedback, nominal, delay).
LOOPS = [
    ("120", "(s + 2)/((s + 3)*(s + 4))", "1", None, None),
    ("K", "1/((s + 1)*(s + 2))", "1", F(7, 2), None),
    ("K*(s + 12)/s", "0.9/((0.0021*s + 0.004)*(0.002*s + 1))", "1/(0.0005*s + 1)", F(7, 20), None),
    ("K/s", "1", "2", F(3), None),
    ("K", "1/(s + 1)", "2", F(5), None),
    ("K", "s/(s*(s + 1))", "1", F(3), None),
    ("K", "s/(s + 1)", "1", F(3), None),
    ("K/s^2", "(s + 1)/(s + 5)", "1", F(4), None),
    ("K*(s + 1)^3/s^3", "1/((s + 5)^2*(s + 2))", "1", F(4), None),
    ("1", "100/(s*(s + 10))", "1/(s + 5)", None, None),
    ("K*(s + 1)/s", "1/(s + 2)", "0.8/(0.01*s + 1)", F(2), None),
    ("K/s", "1/(s + 1)", "(2*s + 1)/(s + 1)", F(1, 2), None),
    ("K", "1/(s + 1)", "0.5", F(2), F(1, 10)),
    ("K*(s + 2)/s", "1/(s + 3)", "1", F(3), F(1, 20)),
    ("K/s", "1/(s + 1)", "1/(0.1*s + 1)", F(1, 2), F(1, 5)),
    ("K*(s + 3)", "1/(s*(s + 1)*(s + 4))", "(2*s + 1)/(s + 1)", F(3, 2), F(1, 10)),
    ("-K", "1/(s + 2)", "1", F(1), None),
]


@pytest.mark.parametrize(("c", "g", "h", "nominal", "delay"), LOOPS)
def test_errors_match_the_final_value_theorem(
    c: str, g: str, h: str, nominal: Fraction | None, delay: Fraction | None
) -> None:
    # Reference: sympy's limit of s·E(s), E = R(s)·(1 − T(s)), computed independently here.
    loop = make_loop(c, g, h, nominal, delay)
    ss = steady.steady_state(loop)
    for reference in ORDERS:
        assert steady.tracking_error(ss, reference, F(1)) == limit_error(loop, reference)
    assert steady.disturbance_error(loop, F(1)) == limit_disturbance(loop)


@pytest.mark.parametrize(("c", "g", "h", "nominal", "delay"), LOOPS)
def test_type_and_constants_match_limits(
    c: str, g: str, h: str, nominal: Fraction | None, delay: Fraction | None
) -> None:
    # Reference: sympy's limit of s^n·Ge with Ge the unity-feedback equivalent.
    loop = make_loop(c, g, h, nominal, delay)
    ss = steady.steady_state(loop)
    assert (ss.kp, ss.kv, ss.ka) == limit_constants(loop)
    assert ss.type == limit_type(loop)


@pytest.mark.parametrize(("c", "g", "h", "nominal", "delay"), LOOPS)
def test_step_error_agrees_with_kp(
    c: str, g: str, h: str, nominal: Fraction | None, delay: Fraction | None
) -> None:
    # Common practice: e_step = R/(1 + Kp), e_ramp = R/Kv, e_parabola = R/Ka from Ge.
    ss = steady.steady_state(make_loop(c, g, h, nominal, delay))

    def over(x: sympy.Expr) -> sympy.Expr:
        return INF if x == 0 else (sympy.Integer(0) if x is INF else 1 / x)

    assert ss.step_error == over(INF if ss.kp is INF else 1 + ss.kp)
    assert ss.ramp_error == over(ss.kv)
    assert ss.parabola_error == over(ss.ka)


# -- the trade's table -----------------------------------------------------------------


@pytest.mark.parametrize(
    ("controller", "loop_type", "pattern"),
    [
        ("K", 0, ("finite", "inf", "inf")),
        ("K/s", 1, ("zero", "finite", "inf")),
        ("K/s^2", 2, ("zero", "zero", "finite")),
        ("K/s^3", 3, ("zero", "zero", "zero")),
    ],
)
def test_type_reference_error_table(
    controller: str, loop_type: int, pattern: tuple[str, str, str]
) -> None:
    # Common practice (also Ogata, Modern Control Engineering, table of steady-state errors
    # in unity-feedback systems, from memory): type 0 step R/(1 + Kp), ramp and parabola ∞;
    # type 1 step 0, ramp R/Kv; type 2 parabola R/Ka; type 3 none for all three.
    loop = make_loop(controller, "(s + 1)^3/((s + 2)*(s + 3)*(s + 4))", "1", F(6))
    ss = steady.steady_state(loop)
    assert ss.type == loop_type
    r = F(5)
    constants = {"step": 1 + ss.kp, "ramp": ss.kv, "parabola": ss.ka}
    for reference, expected in zip(ORDERS, pattern, strict=True):
        error = steady.tracking_error(ss, reference, r)
        if expected == "zero":
            assert error == 0
        elif expected == "inf":
            assert error is INF
        else:
            assert error == 5 / constants[reference]
            assert error not in (0, INF)


def test_loop_constant_at_the_matching_type() -> None:
    # Ogata (from memory): Kp = K for type 0, Kv = K for type 1, Ka = K for type 2 with the
    # other factors at unit DC gain.
    for n, name in enumerate(("kp_expr", "kv_expr", "ka_expr")):
        loop = make_loop(f"K/s^{n}", "6/((s + 2)*(s + 3))")
        assert getattr(steady.steady_state(loop), name) == K


# -- textbook worked examples ------------------------------------------------------------


def test_nise_unity_type_0_example() -> None:
    # Nise, Control Systems Engineering, steady-state error chapter (from memory): for
    # G = 120(s + 2)/((s + 3)(s + 4)) the errors for 5u(t), 5t·u(t), 5t²·u(t) are 5/21, ∞, ∞.
    loop = make_loop("120", "(s + 2)/((s + 3)*(s + 4))", nominal=None)
    ss = steady.steady_state(loop)
    assert ss.kp == 20
    assert steady.tracking_error(ss, "step", F(5)) == sympy.Rational(5, 21)
    assert steady.tracking_error(ss, "ramp", F(5)) is INF
    assert steady.tracking_error(ss, "parabola", F(10)) is INF  # 5t² is 10/s³


def test_nise_unity_type_1_example() -> None:
    # Nise, same chapter (from memory): G = 100(s + 2)(s + 6)/(s(s + 3)(s + 4)) gives 0,
    # 1/20 and ∞ for 5u(t), 5t·u(t), 5t²·u(t); Kv = 100.
    loop = make_loop("100", "(s + 2)*(s + 6)/(s*(s + 3)*(s + 4))", nominal=None)
    ss = steady.steady_state(loop)
    assert (ss.type, ss.kv) == (1, 100)
    assert steady.tracking_error(ss, "step", F(5)) == 0
    assert steady.tracking_error(ss, "ramp", F(5)) == sympy.Rational(1, 20)
    assert steady.tracking_error(ss, "parabola", F(10)) is INF


def test_nise_non_unity_feedback_example() -> None:
    # Nise, same chapter, non-unity feedback (from memory): G = 100/(s(s + 10)),
    # H = 1/(s + 5) is type 0 once made unity feedback, Kp = −5/4, unit-step error −4: the
    # output ends above the reference although G alone is type 1.
    loop = make_loop("1", "100/(s*(s + 10))", "1/(s + 5)", nominal=None)
    ss = steady.steady_state(loop)
    assert ss.type == 0
    assert ss.kp == sympy.Rational(-5, 4)
    assert ss.step_error == -4


def test_nise_disturbance_example() -> None:
    # Nise, same chapter, steady-state error for disturbances (from memory): with controller
    # G1 and plant G2, a unit step disturbance leaves e = −1/(1/G2(0) + G1(0)), i.e. the
    # output deviates by 1/(1/G2(0) + G1(0)). Our numbers: G1 = 10(s + 2)/(s + 5), G2 = 3/(s + 1).
    loop = make_loop("10*(s + 2)/(s + 5)", "3/(s + 1)", nominal=None)
    assert steady.disturbance_error(loop, F(1)) == sympy.Rational(3, 13)
    assert steady.disturbance_error(loop, F(-2)) == sympy.Rational(-6, 13)


# -- python-control ----------------------------------------------------------------------

TYPE_0 = [
    ("K", "1/((s + 1)*(s + 2))", "1", F(7, 2)),
    ("K/s", "1", "2", F(3)),
    ("K", "1/(s + 1)", "2", F(5)),
    ("K", "s/(s + 1)", "1", F(3)),
    ("1", "100/(s*(s + 10))", "1/(s + 5)", None),
    ("K*(s + 1)/s", "1/(s + 2)", "0.8/(0.01*s + 1)", F(2)),
    ("120", "(s + 2)/((s + 3)*(s + 4))", "1", None),
]


def _tf(r: Ratio, gain: Fraction | None) -> control.TransferFunction:
    num, den = r.num, r.den
    if gain is not None:
        num, den = at_gain(num, gain), at_gain(den, gain)
    coefficients = [sympy.Poly(p.as_expr(), S).all_coeffs() for p in (num, den)]
    return control.tf(*([float(x) for x in c] for c in coefficients))


@pytest.mark.parametrize(("c", "g", "h", "nominal"), TYPE_0)
def test_kp_matches_python_control_dcgain(c: str, g: str, h: str, nominal: Fraction | None) -> None:
    # Reference: python-control, Kp = dcgain of feedback(L, H − 1) and the step error
    # 1 − dcgain(feedback(L, H)); floats, relative tolerance 1e-9.
    loop = make_loop(c, g, h, nominal)
    el = _tf(loop.controller, nominal) * _tf(loop.plant, nominal)
    hh = _tf(loop.feedback, nominal)
    ss = steady.steady_state(loop)
    assert ss.type == 0
    assert float(ss.kp) == pytest.approx(float(control.feedback(el, hh - 1).dcgain()), rel=1e-9)
    closed = control.feedback(el, hh).dcgain()
    assert float(ss.step_error) == pytest.approx(1 - float(closed), rel=1e-9)


# -- the traps -------------------------------------------------------------------------


def test_zero_at_the_origin_gives_kp_zero() -> None:
    # Common practice: a differentiating forward path passes no DC, Kp = 0, step error R.
    ss = steady.steady_state(make_loop("K", "s/(s + 1)", nominal=F(3)))
    assert (ss.type, ss.kp, ss.step_error) == (0, 0, 1)
    assert limit_error(make_loop("K", "s/(s + 1)", nominal=F(3)), "step") == 1


def test_exact_cancellation_at_the_origin() -> None:
    # s/(s(s + 1)) is 1/(s + 1): type 0 (reference: sympy limit).
    loop = make_loop("K", "s/(s*(s + 1))", nominal=F(3))
    ss = steady.steady_state(loop)
    assert (ss.type, ss.kp, ss.kp_expr) == (0, 3, K)
    assert limit_type(loop) == 0


def test_feedback_dc_gain_not_one_makes_a_type_1_loop_behave_as_type_0() -> None:
    # Reference: sympy limit. L = K/s with H = 2: y settles at r/2, so the step error is r/2
    # for every gain and the ramp error is infinite, although L·H has an integrator.
    loop = make_loop("K/s", "1", "2", F(3))
    ss = steady.steady_state(loop)
    assert ss.type == 0
    assert ss.step_error == sympy.Rational(1, 2) == limit_error(loop, "step")
    assert steady.tracking_error(ss, "ramp", F(1)) is INF
    assert steady.why_tracking_unreachable(loop, "step", F(1), F(1, 10)) == (
        "the step error is 0.5 for every gain, more than the allowed 0.1; "
        "the feedback path's DC gain is 2, not 1"
    )
    assert steady.why_tracking_unreachable(loop, "ramp", F(1), F(1)) == (
        "type 0 loop: the ramp error is infinite for every gain; the feedback path's DC gain "
        "is 2, not 1: integrators in the loop cannot remove it"
    )


def test_negative_ramp_error_with_a_sensor_lag() -> None:
    # Reference: sympy limit. A lag τ in the sensor makes the output lead a ramp by R·τ
    # once the loop gain is high: e = R(1/(2700K) − 0.0005) for this loop.
    loop = make_loop(
        "K*(s + 12)/s", "0.9/((0.0021*s + 0.004)*(0.002*s + 1))", "1/(0.0005*s + 1)", F(7, 2)
    )
    error = steady.tracking_error(steady.steady_state(loop), "ramp", F(1))
    assert error < 0
    assert error == limit_error(loop, "ramp")
    assert error == sympy.Rational(1, 2700) / sympy.Rational(7, 2) - sympy.Rational(1, 2000)


def test_decimal_gain_factor_is_exact() -> None:
    ss = steady.steady_state(make_loop("0.1*K", "1/(s + 1)", nominal=F(3)))
    assert ss.kp_expr == K / 10
    assert ss.kp == sympy.Rational(3, 10)


def test_nominal_gain_at_a_special_value() -> None:
    # L = K/(s + 1), H = 1/2: 1 + L(H − 1) = (s + 1 − K/2)/(s + 1), so at K = 2 alone Ge
    # has a pole at s = 0 (type 1, Kv = 2) while the generic formula Kp = 2K/(2 − K)
    # divides by zero there. Reference: sympy limit at K = 2.
    loop = make_loop("K", "1/(s + 1)", "0.5", F(2))
    ss = steady.steady_state(loop)
    assert (ss.type, ss.kp, ss.kv) == (limit_type(loop), INF, 2)
    assert sympy.cancel(ss.kp_expr - 2 * K / (2 - K)) == 0
    assert ss.ramp_error == limit_error(loop, "ramp") == sympy.Rational(1, 2)


def test_dead_time_changes_kv_at_the_special_gain() -> None:
    # Same loop with 0.1 s dead time: the delay's first Taylor term enters, Kv = 2/(1 + T).
    # Reference: sympy limit with exp(−sT).
    loop = make_loop("K", "1/(s + 1)", "0.5", F(2), F(1, 10))
    ss = steady.steady_state(loop)
    assert ss.kv == sympy.Rational(20, 11) == limit_constants(loop)[1]
    assert ss.ramp_error == limit_error(loop, "ramp")


def test_dead_time_does_not_matter_with_unity_feedback() -> None:
    # Common practice: with H = 1, e^{-sT} → 1 at s = 0 and the constants are L's.
    plain = steady.steady_state(make_loop("K*(s + 2)/s", "1/(s + 3)", nominal=F(3)))
    delayed = steady.steady_state(make_loop("K*(s + 2)/s", "1/(s + 3)", "1", F(3), F(1, 2)))
    assert (plain.type, plain.kv) == (delayed.type, delayed.kv) == (1, 2)


def test_degenerate_loop_has_no_error() -> None:
    # L = 2/(s + 1), H = (1 − s)/2: 1 + L(H − 1) ≡ 0, the output equals the reference.
    loop = make_loop("2", "1/(s + 1)", "(1 - s)/2", None)
    ss = steady.steady_state(loop)
    assert ss.type == steady.DEGENERATE_TYPE
    for reference in ORDERS:
        assert steady.tracking_error(ss, reference, F(1)) == 0 == limit_error(loop, reference)


def test_zero_magnitude_has_no_error() -> None:
    ss = steady.steady_state(make_loop("K", "1/(s + 1)", nominal=F(1)))
    assert steady.tracking_error(ss, "ramp", F(0)) == 0


# -- gain sets ---------------------------------------------------------------------------


def test_limit_met_with_equality_is_met() -> None:
    # K/((s + 1)(s + 2)): step error 1/(1 + K/2) ≤ 1/10 ⟺ K ≥ 18 (common practice);
    # reference values by sympy limit at both sides of the end.
    loop = make_loop("K", "1/((s + 1)*(s + 2))", nominal=F(1))
    gains = steady.tracking_gains(loop, "step", F(1), F(1, 10))
    assert gains.contains(F(18))
    assert not gains.contains(F(17999, 1000))
    assert limit_error(loop, "step", sympy.Integer(18)) == sympy.Rational(1, 10)
    assert limit_error(loop, "step", sympy.Rational(17999, 1000)) > sympy.Rational(1, 10)


def test_ramp_requirement_and_kv_minimum() -> None:
    # K(s + 2)/(s(s + 3)): Kv = 2K/3 (common practice), ramp error 3/(2K).
    loop = make_loop("K*(s + 2)/s", "1/(s + 3)", nominal=F(1))
    assert steady.tracking_gains(loop, "ramp", F(1), F(1, 4)).describe() == "K ≥ 6"
    assert steady.constant_gains(loop, "kv", F(4)).describe() == "K ≥ 6"
    assert steady.constant_gains(loop, "kp", F(10**6)) == GainSet.positive()
    assert steady.why_constant_unreachable(loop, "ka", F(1)) == (
        "type 1 loop: Ka is 0 for every gain; add an integrator"
    )


@pytest.mark.parametrize(
    ("c", "g", "h", "reference", "max_error"),
    [
        ("K", "1/((s + 1)*(s + 2))", "1", "step", F(1, 10)),
        (
            "K*(s + 12)/s",
            "0.9/((0.0021*s + 0.004)*(0.002*s + 1))",
            "1/(0.0005*s + 1)",
            "ramp",
            F(1, 1000),
        ),
        ("K", "1/(s + 1)", "2", "step", F(3, 5)),
        ("K/s", "1/(s + 1)", "(2*s + 1)/(s + 1)", "ramp", F(1, 2)),
    ],
)
def test_gain_sets_match_limits_at_sample_gains(
    c: str, g: str, h: str, reference: str, max_error: Fraction
) -> None:
    # Reference: sympy limit of s·E(s) at each sampled gain.
    loop = make_loop(c, g, h)
    gains = steady.tracking_gains(loop, reference, F(1), max_error)
    for k in (F(1, 100), F(1, 3), F(7, 10), F(2), F(9), F(40)):
        error = limit_error(loop, reference, sympy.Rational(k.numerator, k.denominator))
        met = error is not INF and abs(error) <= sympy.Rational(
            max_error.numerator, max_error.denominator
        )
        assert gains.contains(k) == met, k


def test_special_gain_is_decided_on_its_own() -> None:
    # L = K/(s + 1), H = 1/2: the step error is zero and the ramp error finite only at K = 2.
    loop = make_loop("K", "1/(s + 1)", "0.5")
    assert steady.tracking_gains(loop, "step", F(1), F(0)).describe() == "K = 2"
    assert steady.tracking_gains(loop, "ramp", F(1), F(1, 2)).describe() == "K = 2"
    assert steady.tracking_gains(loop, "ramp", F(1), F(1, 3)).is_empty()


def test_irrational_special_gain() -> None:
    # G = 1/(s + K² − 2): Ge has a pole at s = 0 only at K = √2, where the ramp error is
    # 1/√2 (reference: sympy limit at K = √2).
    loop = make_loop("K", "1/(s + K^2 - 2)")
    assert limit_error(loop, "ramp", sympy.sqrt(2)) == 1 / sympy.sqrt(2)
    gains = steady.tracking_gains(loop, "ramp", F(1), F(1))
    assert [(iv.lo, iv.hi) for iv in gains.intervals] == [(sympy.sqrt(2), sympy.sqrt(2))]
    assert steady.tracking_gains(loop, "ramp", F(1), F(7, 10)).is_empty()
    assert steady.tracking_gains(loop, "ramp", F(1), F(71, 100)).contains(sympy.sqrt(2))


def test_loop_without_a_gain_is_all_or_nothing() -> None:
    loop = make_loop("120", "(s + 2)/((s + 3)*(s + 4))", nominal=None)  # step error 5/21
    assert steady.tracking_gains(loop, "step", F(5), F(1, 4)) == GainSet.positive()
    assert steady.tracking_gains(loop, "step", F(5), F(5, 21)) == GainSet.positive()
    assert steady.tracking_gains(loop, "step", F(5), F(1, 5)).is_empty()


def test_unreachable_reasons() -> None:
    type_0 = make_loop("K", "1/((s + 1)*(s + 2))")
    assert steady.why_tracking_unreachable(type_0, "ramp", F(1), F(1)) == (
        "type 0 loop: the ramp error is infinite for every gain; add an integrator"
    )
    assert steady.why_tracking_unreachable(type_0, "parabola", F(1), F(1)) == (
        "type 0 loop: the parabola error is infinite for every gain; add 2 integrators"
    )
    assert steady.why_tracking_unreachable(type_0, "step", F(1), F(1, 10)) is None
    assert steady.why_constant_unreachable(type_0, "kv", F(1)) == (
        "type 0 loop: Kv is 0 for every gain; add an integrator"
    )
    differentiating = make_loop("K", "s/(s + 1)")
    assert steady.why_constant_unreachable(differentiating, "kp", F(1)) == (
        "Kp is 0 for every gain: the equivalent forward path has a zero at s = 0"
    )
    bounded = make_loop("K", "1/(s + 1)", "2")  # step error (1 + K)/(1 + 2K) > 1/2
    assert steady.why_tracking_unreachable(bounded, "step", F(1), F(2, 5)) == (
        "no gain brings the step error within 0.4: it is at least 0.5 for every gain; "
        "the feedback path's DC gain is 2, not 1"
    )
    assert steady.why_constant_unreachable(bounded, "kp", F(2)) == (
        "no gain makes Kp reach 2: it is at most 1 for every gain; "
        "the feedback path's DC gain is 2, not 1"
    )


def test_disturbance_gains() -> None:
    # C = K, G = 1/(s(s + 25)): a unit step at the plant input leaves y = d/K (Nise's
    # disturbance formula, from memory); |y| ≤ 0.02 ⟺ K ≥ 50.
    loop = make_loop("K", "1/(s*(s + 25))", nominal=F(10))
    assert steady.disturbance_error(loop, F(1)) == sympy.Rational(1, 10) == limit_disturbance(loop)
    assert steady.disturbance_gains(loop, F(1), F(1, 50)).describe() == "K ≥ 50"
    integrating = make_loop("K*(s + 1)/s", "1/(s + 25)", nominal=F(10))
    assert steady.disturbance_error(integrating, F(1)) == 0
    plant_only = make_loop("2", "3/(s + 1)", nominal=None)  # y = 3/(1 + 6) for every gain
    assert steady.why_disturbance_unreachable(plant_only, F(1), F(1, 10)) == (
        "the output deviation after a step disturbance at the plant input is 0.428571 for "
        "every gain, more than the allowed 0.1; an integrator in the controller removes it"
    )


# -- random loops ------------------------------------------------------------------------

_root = st.fractions(min_value=F(1, 10), max_value=5, max_denominator=10)


@st.composite
def random_loops(draw: st.DrawFn) -> LoopAlgebra:
    integrators = draw(st.integers(0, 3))
    zeros = draw(st.lists(st.fractions(min_value=-3, max_value=5, max_denominator=4), max_size=2))
    poles = draw(st.lists(_root, min_size=len(zeros) + 1, max_size=len(zeros) + 3))
    feedback = draw(
        st.sampled_from(["1", "1/(0.1*s + 1)", "(2*s + 1)/(s + 1)", "0.5", "2/(s + 2)"])
    )
    delay = draw(st.sampled_from([None, None, F(1, 10)]))
    nominal = draw(st.fractions(min_value=F(1, 10), max_value=10, max_denominator=20))

    def factors(values: list[Fraction]) -> str:
        return "*".join(f"(s + {v.numerator}/{v.denominator})" for v in values) or "1"

    controller = f"K/s^{integrators}"
    plant = f"{factors(zeros)}/({factors(poles)})"
    return make_loop(controller, plant, feedback, nominal, delay)


@settings(max_examples=60, deadline=None)
@given(random_loops())
def test_random_loops_match_limits(loop: LoopAlgebra) -> None:
    # Reference: sympy's limit of s^n·Ge and of s·E(s) on the same loop.
    ss = steady.steady_state(loop)
    assert (ss.kp, ss.kv, ss.ka) == limit_constants(loop)
    assert ss.type == limit_type(loop)
    assert ss.step_error == limit_error(loop, "step")
    assert ss.ramp_error == limit_error(loop, "ramp")


# -- exact texts against sympy's printer ---------------------------------------------------

_coefficient = st.fractions(min_value=-200, max_value=200, max_denominator=12)
_polynomial = st.dictionaries(st.integers(0, 4), _coefficient, max_size=4).map(
    lambda terms: steady._RING.from_dict(
        {(e,): sympy.QQ(c.numerator, c.denominator) for e, c in terms.items() if c}
    )
)
_names = st.sampled_from(["K", "Kp", "gain", "k_i", "K2"])


def _sympy_expr(p: object, x: sympy.Symbol) -> sympy.Expr:
    # The polynomial built with sympy's own arithmetic, term by term.
    return sympy.Add(
        *(
            sympy.Rational(int(c.numerator), int(c.denominator)) * x**e
            for (e,), c in dict(p).items()
        )
    )  # type: ignore[attr-defined]


@settings(max_examples=100, deadline=None)
@given(_polynomial.filter(bool), _polynomial.filter(bool), _names)
def test_limit_text_is_what_sympy_prints(a: object, b: object, name: str) -> None:
    # Reference: sympy.sstr (sympy's str printer) of num/den built as sympy expressions,
    # num/den in lowest terms as sympy's rational-function cancel leaves them.
    num, den = a.cancel(b)  # type: ignore[attr-defined]
    x = sympy.Symbol(name)
    expected = sympy.sstr(_sympy_expr(num, x) / _sympy_expr(den, x))
    assert steady.limit_text(steady._Limit("ratio", a, b), name) == expected


@pytest.mark.parametrize(
    ("a", "b", "expected"),
    [
        # Shapes where sympy's printer departs from "descending powers, a/b" (a positive
        # constant leads a two-term sum, a lone negative power prints as a power), and
        # products with a number below the line. Reference: sympy.sstr, asserted here too.
        ({1: -1, 0: 2}, {0: 1}, "2 - K"),
        ({1: -1, 0: 1}, {0: 2}, "1/2 - K/2"),
        ({0: 1}, {2: 1}, "K**(-2)"),
        ({0: 1}, {1: 1}, "1/K"),
        ({0: -3}, {1: 2, 0: 4}, "-3/(2*K + 4)"),
        ({1: -7}, {1: 3, 0: -9}, "-7*K/(3*K - 9)"),
        ({1: 3, 0: -1}, {1: 2}, "(3*K - 1)/(2*K)"),
    ],
)
def test_limit_text_special_shapes(a: dict[int, int], b: dict[int, int], expected: str) -> None:
    def ring(terms: dict[int, int]) -> object:
        return steady._RING.from_dict({(e,): sympy.QQ(c) for e, c in terms.items()})

    limit = steady._Limit("ratio", ring(a), ring(b))
    assert steady.limit_text(limit, "K") == expected
    x = sympy.Symbol("K")
    assert sympy.sstr(steady._value(limit).xreplace({K: x})) == expected


@settings(max_examples=40, deadline=None)
@given(random_loops())
def test_constant_text_writes_the_constant_in_the_gain(loop: LoopAlgebra) -> None:
    # Reference: sympy.sstr of the constants as expressions, and their limits (above).
    ss = steady.steady_state(loop)
    for key in ("kp", "kv", "ka"):
        value = getattr(ss, f"{key}_expr")
        expected = sympy.sstr(value.xreplace({K: sympy.Symbol("Kp")}))
        assert steady.constant_text(ss, key, "Kp") == expected


_block_polynomial = st.dictionaries(
    st.tuples(st.integers(0, 4), st.integers(0, 2)),
    st.fractions(min_value=-9, max_value=9, max_denominator=5),
    max_size=5,
).map(
    lambda terms: sympy.Poly.from_dict(
        {m: c for m, c in terms.items() if c} or {(0, 0): 0}, S, K, domain=sympy.QQ
    )
)


@settings(max_examples=80, deadline=None)
@given(_block_polynomial, _block_polynomial, _block_polynomial)
def test_lazy_product_coefficients_are_the_products(
    p: sympy.Poly, q: sympy.Poly, r: sympy.Poly
) -> None:
    # Reference: sympy's Poly multiplication in (s, k), split by powers of s.
    product = steady._product(steady._by_power(p), steady._by_power(q), steady._by_power(r))
    expected = steady._by_power(p * q * r)
    assert len(product) == len(expected)
    for n in reversed(range(len(expected))):  # read out of order: later ones first
        assert product[n] == expected[n]
    assert list(product) == list(expected)
