"""Loop algebra additions: the equivalent unity-feedback path, properness, degrees."""

from __future__ import annotations

from fractions import Fraction

import control
import numpy as np
import pytest
import sympy
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from speclint.analysis.algebra import (
    K,
    LoopAlgebra,
    Ratio,
    S,
    at_gain,
    degree_in_s,
    improper_parts,
    is_proper,
    poly,
    relative_degree,
    unity_equivalent,
)
from speclint.analysis.gainset import GainSet
from speclint.expr import parse_block


def block(text: str) -> Ratio:
    result = parse_block(text, "K", {})
    assert isinstance(result, Ratio), result
    return result


def make_loop(c: str, g: str, h: str = "1", nominal: Fraction | None = Fraction(2)) -> LoopAlgebra:
    return LoopAlgebra(block(c), block(g), block(h), None, nominal, GainSet.positive(), "K")


def as_function(r: Ratio) -> sympy.Expr:
    return r.num.as_expr() / r.den.as_expr()


LOOPS = [
    ("K", "1/((s + 1)*(s + 2))", "1"),
    ("K*(s + 12)/s", "0.9/((0.0021*s + 0.004)*(0.002*s + 1))", "1/(0.0005*s + 1)"),
    ("K/s", "100/(s + 10)", "1/(s + 5)"),
    ("K", "1/(s + 1)", "2"),
    ("K*(s + 3)", "1/(s*(s + 1)*(s + 4))", "(2*s + 1)/(s + 1)"),
]


@pytest.mark.parametrize(("c", "g", "h"), LOOPS)
def test_unity_equivalent_gives_the_same_closed_loop(c: str, g: str, h: str) -> None:
    # Common practice: Ge/(1 + Ge) must equal the closed loop L/(1 + L·H); checked with
    # sympy's rational simplification.
    loop = make_loop(c, g, h)
    ge = as_function(unity_equivalent(loop))
    el = as_function(loop.controller) * as_function(loop.plant)
    eh = as_function(loop.feedback)
    assert sympy.cancel(ge / (1 + ge) - el / (1 + el * eh)) == 0


@pytest.mark.parametrize(("c", "g", "h"), LOOPS)
def test_unity_equivalent_matches_python_control(c: str, g: str, h: str) -> None:
    # Reference: python-control, Ge = feedback(L, H − 1) = L/(1 + L·(H − 1)), compared on
    # the imaginary axis (floating point, relative tolerance 1e-9).
    loop = make_loop(c, g, h)
    gain = Fraction(2)

    def tf(r: Ratio) -> control.TransferFunction:
        num = sympy.Poly(at_gain(r.num, gain), S).all_coeffs()
        den = sympy.Poly(at_gain(r.den, gain), S).all_coeffs()
        return control.tf([float(x) for x in num], [float(x) for x in den])

    el = tf(loop.controller) * tf(loop.plant)
    reference = control.feedback(el, tf(loop.feedback) - 1)
    ours = unity_equivalent(loop)
    num, den = at_gain(ours.num, gain), at_gain(ours.den, gain)
    for w in (0.01, 0.3, 1.0, 7.0, 40.0):
        s = 1j * w
        value = complex(num.eval(s)) / complex(den.eval(s))
        assert np.isclose(value, complex(reference(s)), rtol=1e-9, atol=0)


def test_unity_feedback_leaves_the_forward_path_alone() -> None:
    loop = make_loop("K*(s + 2)/s", "1/(s + 3)")
    ge = unity_equivalent(loop)
    assert ge.num == loop.controller.num * loop.plant.num
    assert ge.den == loop.controller.den * loop.plant.den


def test_nothing_is_cancelled_in_ge() -> None:
    loop = make_loop("K*(s + 1)/s", "1/(s + 1)", "1/(s + 5)")
    ge = unity_equivalent(loop)
    # Nc·Ng·Dh = K(s + 1)(s + 5); the factor s + 1 shared with Dc·Dg stays.
    assert ge.num == poly(K * (S + 1) * (S + 5))


def test_degrees() -> None:
    assert degree_in_s(poly(K * S**2 + S)) == 2
    assert degree_in_s(poly(K)) == 0
    assert degree_in_s(poly(0)) == -1
    assert relative_degree(block("(s + 1)/(s^3 + K)")) == 2


def test_pd_controller_is_improper_but_the_loop_is_not() -> None:
    # Common practice: an ideal PD term K(s + 2) has one zero and no pole.
    loop = make_loop("K*(s + 2)", "1/(s*(s + 1)*(s + 3))")
    assert improper_parts(loop) == ("controller",)
    assert not is_proper(loop)
    assert is_proper(loop.plant)


def test_improper_plant_makes_the_loop_improper() -> None:
    loop = make_loop("K", "s^2/(s + 1)")
    assert improper_parts(loop) == ("plant", "loop", "equivalent forward path")


def test_proper_model() -> None:
    assert improper_parts(make_loop("K*(s + 12)/s", "1/(s + 1)", "1/(0.1*s + 1)")) == ()


def test_ge_can_be_improper_alone() -> None:
    # L = 2, H = (0.5 s + 3)/(s + 1): 1 + L(H − 1) = 5/(s + 1), so Ge = 2(s + 1)/5.
    loop = make_loop("2", "1", "(0.5*s + 3)/(s + 1)")
    assert improper_parts(loop) == ("equivalent forward path",)
    assert unity_equivalent(loop).den == poly(5)


def test_properness_at_a_gain() -> None:
    # Proper for a generic gain; at K = 0 the denominator loses its s² term.
    b = block("s^2/(K*s^2 + s + 1)")
    assert is_proper(b)
    assert not is_proper(b, Fraction(0))


def test_ge_improper_at_one_gain_only() -> None:
    # Worked by hand: L = K, H = (0.5 s + 3)/(s + 1) give
    # 1 + L(H − 1) = ((1 − K/2)s + 1 + 2K)/(s + 1); at K = 2 the s term vanishes and
    # Ge = 2(s + 1)/5 has a zero and no pole.
    loop = make_loop("K", "1", "(0.5*s + 3)/(s + 1)")
    assert improper_parts(loop, Fraction(2)) == ("equivalent forward path",)
    assert improper_parts(loop, Fraction(1)) == ()
    assert improper_parts(loop) == ()


_coefficient = st.fractions(min_value=-20, max_value=20, max_denominator=12)


@settings(max_examples=60, deadline=None)
@given(
    st.dictionaries(st.tuples(st.integers(0, 4), st.integers(0, 4)), _coefficient, max_size=6),
    st.fractions(min_value=-10, max_value=10, max_denominator=9),
)
def test_at_gain_matches_sympy_substitution(
    terms: dict[tuple[int, int], Fraction], gain: Fraction
) -> None:
    # Reference: sympy's subs on the polynomial's expression, read back as a Poly in s.
    expr = sum(
        (sympy.Rational(c.numerator, c.denominator) * S**i * K**j for (i, j), c in terms.items()),
        sympy.Integer(0),
    )
    fixed = at_gain(poly(expr), gain)
    expected = expr.subs(K, sympy.Rational(gain.numerator, gain.denominator))
    assert fixed == sympy.Poly(expected, S, domain=sympy.QQ)
    assert fixed.gens == (S,) and fixed.domain == sympy.QQ


@pytest.mark.parametrize("value", [0, 1, -3, 10**40])
def test_poly_of_a_whole_number(value: int) -> None:
    # Reference: sympy's Poly constructor on the same integer.
    assert poly(value) == sympy.Poly(sympy.Integer(value), S, K, domain=sympy.QQ)
    assert poly(value).is_zero == (value == 0)


_small_poly = st.lists(
    st.tuples(
        st.sampled_from([-2, -1, 1, 2, sympy.Rational(1, 2)]), st.integers(0, 2), st.integers(0, 1)
    ),
    min_size=1,
    max_size=3,
).map(lambda terms: sum((c * S**i * K**j for c, i, j in terms), sympy.Integer(0)))


@settings(max_examples=100, deadline=None)
@given(
    st.lists(st.tuples(_small_poly, _small_poly), min_size=3, max_size=3),
    st.one_of(st.none(), st.sampled_from([Fraction(0), Fraction(1), Fraction(-2), Fraction(1, 2)])),
)
def test_improper_parts_match_expanded_degrees(
    pairs: list[tuple[sympy.Expr, sympy.Expr]], gain: Fraction | None
) -> None:
    # Reference: sympy expand on each part written out as an expression, then its degree in
    # s (the gain substituted first); Ge's denominator Dc·Dg·Dh + Nc·Ng·(Nh − Dh) is where
    # leading terms can cancel.
    assume(all(n != 0 and d != 0 for n, d in pairs))
    (nc, dc), (ng, dg), (nh, dh) = pairs
    written = {
        "controller": (nc, dc),
        "plant": (ng, dg),
        "feedback": (nh, dh),
        "loop": (nc * ng * nh, dc * dg * dh),
        "equivalent forward path": (nc * ng * dh, dc * dg * dh + nc * ng * (nh - dh)),
    }

    def degree(expr: sympy.Expr) -> int:
        if gain is not None:
            expr = expr.subs(K, sympy.Rational(gain.numerator, gain.denominator))
        expanded = sympy.expand(expr)
        return -1 if expanded == 0 else int(sympy.degree(expanded, S))

    expected = tuple(name for name, (n, d) in written.items() if degree(d) < degree(n))
    blocks = [Ratio(poly(n), poly(d)) for n, d in pairs]
    loop = LoopAlgebra(*blocks, None, gain, GainSet.positive(), "K")
    assert improper_parts(loop, gain) == expected
