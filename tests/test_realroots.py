"""The fast exact root isolation against sympy's own exact root counting and known roots."""

from __future__ import annotations

from fractions import Fraction

import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from speclint.analysis import realroots

x = sympy.Symbol("x")


def _ints(expr: sympy.Expr) -> list[int]:
    poly = sympy.Poly(expr, x, domain=sympy.QQ)
    return realroots.integer_coefficients([Fraction(int(c.p), int(c.q)) for c in poly.all_coeffs()])


def _check_against_sympy(expr: sympy.Expr, include_zero: bool = True) -> list[Fraction]:
    """Every root found is bracketed by an exact sign change of the square-free part at
    ±1e-20 relative, and their number is sympy's Sturm count (the reference)."""
    poly = sympy.Poly(expr, x, domain=sympy.QQ)
    found = realroots.positive_roots(_ints(expr), include_zero)
    assert found is not None
    square_free = poly.sqf_part()
    expected = square_free.count_roots(0 if include_zero else sympy.Rational(1, 10**40), None)
    assert len(found) == expected, (expr, found)
    assert found == sorted(set(found))
    for root in found:
        if root == 0:
            assert poly.eval(0) == 0
            continue
        r = sympy.Rational(root.numerator, root.denominator)
        lo, hi = r * (1 - sympy.Rational(1, 10**20)), r * (1 + sympy.Rational(1, 10**20))
        assert square_free.eval(lo) * square_free.eval(hi) <= 0, (expr, root)
    return found


def test_known_integer_roots() -> None:
    # Wilkinson's polynomial, roots 1..12 (J. H. Wilkinson, Rounding Errors in Algebraic
    # Processes, 1963: the classic ill-conditioned case for floating-point root finders).
    expr = sympy.expand(sympy.prod(x - i for i in range(1, 13)))
    assert realroots.positive_roots(_ints(expr)) == [Fraction(i) for i in range(1, 13)]


def test_roots_spread_over_decades_with_decimal_coefficients() -> None:
    # |D(jω)|² of a loop with time constants from 10 s to 0.1 ms, shifted: the margins'
    # typical shape (common practice: |1 + jωτ|² = 1 + τ²ω²).
    taus = [
        sympy.Rational(10),
        sympy.Rational(3, 10),
        sympy.Rational(2, 1000),
        sympy.Rational(1, 10**4),
    ]
    d2 = sympy.prod(1 + t**2 * x for t in taus)
    _check_against_sympy(sympy.expand(sympy.Rational(7, 3) * 10**6 - d2))
    _check_against_sympy(sympy.expand((x - sympy.Rational(1, 10**6)) * (x - 10**6) * d2))


def test_multiple_and_clustered_roots() -> None:
    expr = sympy.expand((x - 2) ** 3 * (x - sympy.Rational(1, 3)) ** 2 * (x**2 + 1) * x)
    assert _check_against_sympy(expr) == [Fraction(0), Fraction(1, 3), Fraction(2)]
    cluster = sympy.expand(
        (x - sympy.Rational(5, 7))
        * (x - sympy.Rational(5, 7) - sympy.Rational(1, 10**15))
        * (x - 3)
    )
    assert len(_check_against_sympy(cluster)) == 3


def test_no_positive_roots() -> None:
    assert realroots.positive_roots(_ints(sympy.expand((x + 1) * (x**2 + x + 1)))) == []
    assert realroots.positive_roots(_ints(x**4), include_zero=False) == []
    assert realroots.positive_roots(_ints(x**4), include_zero=True) == [Fraction(0)]


def test_sign_of_another_polynomial_at_each_root() -> None:
    q = sympy.expand((x - 1) * (x - 4) * (x - 9))
    p = sympy.expand((x - 2) * (x - 5))  # positive at 1 and 9, negative at 4
    got = realroots.positive_roots_with_sign(_ints(q), _ints(p))
    assert got == [(Fraction(1), 1), (Fraction(4), -1), (Fraction(9), 1)]


coefficient = st.fractions(min_value=-1000, max_value=1000, max_denominator=10**6)


@settings(max_examples=80, deadline=None)
@given(st.lists(coefficient, min_size=2, max_size=12))
def test_random_polynomials_match_sympy(coeffs: list[Fraction]) -> None:
    expr = sum(sympy.Rational(c.numerator, c.denominator) * x**i for i, c in enumerate(coeffs))
    if sympy.Poly(expr, x).degree() < 1:
        return
    _check_against_sympy(expr)


# Roots with short denominators come back exactly (the simplest rational in the final
# bracket is tried); others within 1e-20 of their size, as checked above.
@settings(max_examples=60, deadline=None)
@given(
    st.lists(
        st.fractions(min_value=Fraction(1, 1000), max_value=10**5, max_denominator=1000),
        min_size=1,
        max_size=7,
    ),
    st.lists(st.integers(min_value=1, max_value=3), min_size=7, max_size=7),
)
def test_products_of_known_roots(roots: list[Fraction], multiplicity: list[int]) -> None:
    expr = sympy.expand(
        sympy.prod(
            (x - sympy.Rational(r.numerator, r.denominator)) ** m
            for r, m in zip(roots, multiplicity, strict=False)
        )
        * (x**2 + x + 1)
    )
    assert realroots.positive_roots(_ints(expr)) == sorted(set(roots))


def _damped_pair(w: sympy.Rational, zeta: sympy.Rational) -> sympy.Expr:
    # x² - 2ζw·x + w²: roots w(ζ ± j√(1 - ζ²)), right of the axis (common practice).
    return x**2 - 2 * zeta * w * x + w**2


def test_complex_roots_right_of_the_axis_between_real_ones() -> None:
    # Lightly damped pairs at 1e-3, 1 and 1e5 among real roots over ten decades: Descartes'
    # count of every gap stays positive until the pairs are cut off. Reference: sympy's
    # exact Sturm count, and the real roots known by construction.
    expr = sympy.expand(
        _damped_pair(sympy.Rational(1, 1000), sympy.Rational(1, 100))
        * _damped_pair(sympy.Integer(1), sympy.Rational(1, 50))
        * _damped_pair(sympy.Integer(10**5), sympy.Rational(3, 10))
        * (x - sympy.Rational(1, 10**5))
        * (x - sympy.Rational(7, 2))
        * (x - 3 * 10**4)
        * (x + 2)
    )
    found = _check_against_sympy(expr, include_zero=False)
    assert found == [Fraction(1, 10**5), Fraction(7, 2), Fraction(3 * 10**4)]


def test_search_is_complete_when_numpy_misleads(monkeypatch: pytest.MonkeyPatch) -> None:
    # numpy only guides: with its roots moved off by a factor of 3 (real ones made complex)
    # the exact search must still find every root. Reference: sympy's Sturm count.
    true_roots = realroots._approx_roots

    def misled(p: list[int]) -> list[complex]:
        return [complex(3.0 * z.real, 0.5 * z.real + z.imag) for z in true_roots(p)]

    monkeypatch.setattr(realroots, "_approx_roots", misled)
    expr = sympy.expand(
        _damped_pair(sympy.Integer(2), sympy.Rational(1, 20))
        * (x - sympy.Rational(1, 7))
        * (x - 5)
        * (x - 40)
    )
    assert _check_against_sympy(expr, include_zero=False) == [
        Fraction(1, 7),
        Fraction(5),
        Fraction(40),
    ]


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.integers(min_value=-6, max_value=6), min_size=1, max_size=5),
    st.lists(st.integers(min_value=-6, max_value=6), min_size=1, max_size=5),
    st.integers(min_value=1, max_value=3),
    st.sampled_from([1, 2**30 - 35]),  # the second: the prime of the modular test itself
)
def test_square_free_part_and_coprimality_match_sympy(
    roots_p: list[int], roots_q: list[int], power: int, lead: int
) -> None:
    # Reference: sympy's exact gcd and square-free part over the rationals. The roots are
    # small integers and ±j, so every common factor of p and q shows in a small resultant:
    # the modular test must then decide, except where the prime divides p's leading
    # coefficient (it must not claim coprimality it cannot prove).
    p_expr = (lead * x - 1) * sympy.prod((x - r) ** power for r in roots_p) * (x**2 + 1)
    q_expr = sympy.prod(x - r for r in roots_q)
    p, q = _ints(sympy.expand(p_expr)), _ints(sympy.expand(q_expr))
    p_poly, q_poly = sympy.Poly(p, x), sympy.Poly(q, x)
    shares = sympy.gcd(p_poly, q_poly).degree() > 0
    assert realroots.coprime(p, q) == (not shares and lead == 1)
    part = sympy.Poly(realroots.square_free(p), x)
    assert part.LC() > 0
    assert part.primitive()[0] == 1
    assert part.monic() == p_poly.sqf_part().monic()


@settings(max_examples=150, deadline=None)
@given(
    st.lists(st.integers(-(10**9), 10**9), min_size=2, max_size=14).filter(lambda p: p[0] != 0),
    st.integers(0, 3),
)
def test_the_guides_are_numpys_roots(p, zeros):
    # The guesses come from the companion matrix built without numpy.roots' checks; they
    # must be numpy.roots' own (numpy is the reference), bit for bit, zero roots included.
    import numpy as np

    p = p + [0] * zeros
    assert realroots._approx_roots(p) == [complex(z) for z in np.roots([float(c) for c in p])]
