"""The reader's polynomials against sympy Poly arithmetic done step by step on the same tree.

The reader works in a sparse polynomial ring and builds each block's ``Poly`` once at the
end; these checks hold that result to the ``Poly`` that sympy's own ``Poly`` arithmetic gives
for the same expression, written the same way (``a/b + c/d`` as ``(a·d + c·b)/(b·d)``,
nothing cancelled), down to the generators and the domain.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import pytest
import sympy
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from speclint.analysis.algebra import GENS, K, Ratio, S
from speclint.expr import MAX_DEGREE, ExprError, common_factor, parse_block

CONSTANTS = {"kt": Fraction(9, 10), "tau": Fraction(1, 250)}


def _poly(expr: sympy.Expr | int) -> sympy.Poly:
    return sympy.Poly(expr, *GENS, domain=sympy.QQ)


@dataclass(frozen=True)
class Written:
    """An expression's text and its numerator and denominator by sympy Poly arithmetic."""

    text: str
    num: sympy.Poly
    den: sympy.Poly
    divides_by_zero: bool = False


def _leaf(text: str, value: sympy.Expr) -> Written:
    return Written(text, _poly(value), _poly(1))


_LEAVES = st.sampled_from(
    [
        _leaf("s", S),
        _leaf("K", K),
        _leaf("kt", sympy.Rational(9, 10)),
        _leaf("tau", sympy.Rational(1, 250)),
        _leaf("0", sympy.Integer(0)),
        _leaf("1", sympy.Integer(1)),
        _leaf("3", sympy.Integer(3)),
        _leaf("0.5", sympy.Rational(1, 2)),
        _leaf("2.5e-3", sympy.Rational(1, 400)),
        _leaf("12", sympy.Integer(12)),
    ]
)


def _combine(op: str, a: Written, b: Written) -> Written:
    zero = a.divides_by_zero or b.divides_by_zero
    text = f"({a.text}) {op} ({b.text})"
    if op == "*":
        return Written(text, a.num * b.num, a.den * b.den, zero)
    if op == "/":
        return Written(text, a.num * b.den, a.den * b.num, zero or b.num.is_zero)
    if op == "+":
        return Written(text, a.num * b.den + b.num * a.den, a.den * b.den, zero)
    return Written(text, a.num * b.den - b.num * a.den, a.den * b.den, zero)


def _power(a: Written, n: int) -> Written:
    text = f"({a.text})^{n}"
    if n == 0:
        return Written(text, _poly(1), _poly(1), a.divides_by_zero)
    return Written(text, a.num**n, a.den**n, a.divides_by_zero)


def _negate(a: Written) -> Written:
    return Written(f"-({a.text})", -a.num, a.den, a.divides_by_zero)


def _extend(children: st.SearchStrategy[Written]) -> st.SearchStrategy[Written]:
    return st.one_of(
        st.builds(_combine, st.sampled_from(["+", "-", "*", "/"]), children, children),
        st.builds(_power, children, st.integers(0, 3)),
        st.builds(_negate, children),
    )


_TREES = st.recursive(_LEAVES, _extend, max_leaves=12)


def _small(p: sympy.Poly) -> bool:
    # Keeps the generated trees inside every size limit (degree 40, 10^±100, 4000 bits).
    if p.is_zero:
        return True
    if max(p.degree(g) for g in GENS) > MAX_DEGREE:
        return False
    return all(sympy.Rational(1, 10**90) < abs(c) < 10**90 for c in p.coeffs())


@settings(max_examples=100, deadline=None)
@given(_TREES)
def test_reader_matches_sympy_poly_arithmetic(tree: Written) -> None:
    # Reference: sympy Poly arithmetic over QQ in (s, k) (sympy, polys module).
    assume(_small(tree.num) and _small(tree.den))
    result = parse_block(tree.text, "K", CONSTANTS)
    if tree.divides_by_zero:
        assert isinstance(result, ExprError)
        assert result.kind == "division-by-zero"
    elif tree.num.is_zero:
        assert isinstance(result, ExprError)
        assert result.kind == "zero"
    else:
        assert isinstance(result, Ratio), result
        assert result.num == tree.num
        assert result.den == tree.den
        assert result.num.gens == GENS and result.den.gens == GENS
        assert result.num.domain == sympy.QQ and result.den.domain == sympy.QQ


@pytest.mark.parametrize(
    ("text", "num", "den"),
    [
        # Worked by hand from the as-written rule (common practice): nothing cancels.
        ("(s + 1)/(s + 1)", S + 1, S + 1),
        ("1/s - 1/s", sympy.Integer(0), S**2),
        ("kt*K/(tau*s + 1)^2", sympy.Rational(9, 10) * K, (sympy.Rational(1, 250) * S + 1) ** 2),
        ("-(s - K)^3", -((S - K) ** 3), 1),
    ],
)
def test_written_examples(text: str, num: sympy.Expr, den: sympy.Expr) -> None:
    result = parse_block(text, "K", CONSTANTS)
    if _poly(num).is_zero:
        assert isinstance(result, ExprError) and result.kind == "zero"
        return
    assert isinstance(result, Ratio), result
    assert result.num == _poly(num)
    assert result.den == _poly(den)


def test_zero_factor_has_no_degree() -> None:
    # Common practice: 0·p is the zero polynomial whatever the degree of p, so a product
    # with a zero factor is within the degree limit even when p alone is near it.
    result = parse_block("(0*s)*(s^20*s^20) + 1", "K", CONSTANTS)
    assert isinstance(result, Ratio)
    assert result.num == _poly(1)


_TERMS = st.dictionaries(
    st.tuples(st.integers(0, 3), st.integers(0, 2)),
    st.fractions(min_value=-9, max_value=9, max_denominator=5).filter(bool),
    min_size=1,
    max_size=4,
)


@settings(max_examples=80, deadline=None)
@given(_TERMS, st.tuples(st.integers(0, 3), st.integers(0, 2)), st.booleans())
def test_common_factor_with_a_single_term(
    terms: dict[tuple[int, int], Fraction], powers: tuple[int, int], single_below: bool
) -> None:
    # Reference: sympy's Poly.gcd over QQ (monic), on a block with a one-term side.
    many = sympy.Poly.from_dict(
        {m: sympy.Rational(c.numerator, c.denominator) for m, c in terms.items()},
        *GENS,
        domain=sympy.QQ,
    )
    single = sympy.Poly.from_dict({powers: sympy.Rational(-3, 7)}, *GENS, domain=sympy.QQ)
    block = Ratio(many, single) if single_below else Ratio(single, many)
    expected = many.gcd(single)
    found = common_factor(block)
    if expected.total_degree() == 0:
        assert found is None
    else:
        assert found == expected


@pytest.mark.parametrize(
    ("text", "factor"),
    [
        # Worked by hand (common practice): the lowest powers shared with the single term.
        ("K*(s + 12)/s", None),
        ("K*s*(s + 1)/s^2", S),
        ("(K*s^2 + K^2*s)/(K*s^3)", K * S),
        ("s^2/(s^2 + 1)", None),
    ],
)
def test_common_factor_examples(text: str, factor: sympy.Expr | None) -> None:
    block = parse_block(text, "K", CONSTANTS)
    assert isinstance(block, Ratio)
    found = common_factor(block)
    assert found == (None if factor is None else _poly(factor))
