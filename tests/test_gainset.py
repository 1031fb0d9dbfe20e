"""Exact real roots, comparisons and sign sets of gainset against sympy: its Poly.real_roots
(the very numbers, as it writes them), its solve_poly_inequality, and evaluation to 60
significant digits."""

from __future__ import annotations

import itertools
from fractions import Fraction

import sympy
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from speclint.analysis import gainset, steady
from speclint.analysis.gainset import (
    INF,
    GainSet,
    Root,
    less,
    number_between,
    number_less,
    rational_between,
    real_roots,
    to_exact,
    to_float,
    where_sign,
)

X = sympy.Symbol("k")

# Factors whose roots are rational, quadratic irrationals (written as radicals), roots of
# binomials (radicals again) and of irreducible cubics and quartics (written as CRootOf).
FACTORS = (
    X - sympy.Rational(3, 7),
    5 * X + 2,
    X,
    X**2 - 2,
    7 * X**2 - 30 * X + 11,
    X**2 + 1,
    X**3 - 3 * X + 1,
    X**3 - 2,
    16 * X**4 - 21,
    X**4 - 10 * X**2 + 1,
    3 * X**3 - 40 * X**2 + 7 * X + 50,
    X**5 + 512 * X + 1024,  # sympy writes its root 4*CRootOf(...): a scaled variable
)

polynomials = st.builds(
    lambda picks, scale, lead: sympy.Poly(
        sympy.Rational(lead, 7)
        * sympy.Mul(*(f.subs(X, scale * X) for f in picks)),  # scaled roots: k → c·k
        X,
        domain=sympy.QQ,
    ),
    st.lists(st.sampled_from(FACTORS), min_size=1, max_size=3),
    st.sampled_from([1, 2, 3, sympy.Rational(1, 10), 25]),
    st.integers(-9, 9).filter(bool),
)


def coefficients(p: sympy.Poly) -> list[Fraction]:
    return [Fraction(int(c.p), int(c.q)) for c in p.all_coeffs()]


def sympy_distinct_roots(p: sympy.Poly) -> list[sympy.Expr]:
    out: list[sympy.Expr] = []
    for r in p.real_roots():
        if not out or out[-1] != r:
            out.append(r)
    return out


@settings(max_examples=60, deadline=None)
@given(polynomials)
def test_real_roots_are_sympys_numbers(p: sympy.Poly) -> None:
    # Reference: sympy's Poly.real_roots; the same objects, written the same way.
    ours = [to_exact(r) for r in real_roots(coefficients(p))]
    theirs = sympy_distinct_roots(p)
    assert ours == theirs
    assert [sympy.sstr(r) for r in ours] == [sympy.sstr(r) for r in theirs]


def test_real_roots_of_known_polynomials() -> None:
    # Reference: sympy's Poly.real_roots, and the values by hand: the roots of
    # k^4 − 10k^2 + 1 are ±√2 ± √3 (common practice).
    p = sympy.Poly(X**4 - 10 * X**2 + 1, X)
    ours = [to_exact(r) for r in real_roots(coefficients(p))]
    assert ours == sympy_distinct_roots(p)
    by_hand = sorted(
        float(a * sympy.sqrt(2) + b * sympy.sqrt(3)) for a, b in itertools.product((1, -1), (1, -1))
    )
    assert [float(r) for r in ours] == by_hand
    scaled = sympy.Poly(X**5 + 512 * X + 1024, X)
    assert sympy.sstr(to_exact(real_roots(coefficients(scaled))[0])).startswith("4*CRootOf(")


def sixty_digits(x: sympy.Expr) -> sympy.Float:
    return sympy.Float(sympy.N(x, 60), 60)


@settings(max_examples=40, deadline=None)
@given(polynomials, polynomials)
def test_comparisons_agree_with_sixty_digits(p: sympy.Poly, q: sympy.Poly) -> None:
    # Reference: both numbers evaluated by sympy to 60 significant digits (no two of
    # these roots are closer than that).
    numbers = real_roots(coefficients(p)) + real_roots(coefficients(q))
    values = [sixty_digits(to_exact(n)) for n in numbers]
    for (a, va), (b, vb) in itertools.product(zip(numbers, values, strict=True), repeat=2):
        assert number_less(a, b) == bool(va < vb)
        assert less(to_exact(a), to_exact(b)) == bool(va < vb)
        if va < vb:
            mid = number_between(a, b)
            assert va < sixty_digits(sympy.Rational(mid.numerator, mid.denominator)) < vb
            between = rational_between(to_exact(a), to_exact(b))
            assert va < between < vb


def test_comparisons_with_infinity_and_floats() -> None:
    # Common practice: every finite number lies between −∞ and +∞; a Float end is the
    # binary number it holds.
    root = to_exact(real_roots(coefficients(sympy.Poly(X**3 - 3 * X + 1, X)))[2])
    assert less(root, INF) and less(-INF, root) and not less(INF, root)
    assert less(sympy.Float(1.5, 15), root) and not less(root, sympy.Float(1.5, 15))
    assert less(root, sympy.Float(1.6, 15))
    assert rational_between(-INF, root) < root < rational_between(root, INF)


@settings(max_examples=40, deadline=None)
@given(polynomials, st.booleans(), st.booleans())
def test_where_sign_matches_sympys_inequality(p: sympy.Poly, positive: bool, closed: bool) -> None:
    # Reference: sympy.solve_poly_inequality, probed at every root and between them.
    relation = {(True, False): ">", (True, True): ">=", (False, False): "<", (False, True): "<="}
    theirs = sympy.Union(*sympy.solve_poly_inequality(p, relation[positive, closed]))
    ours = where_sign(p, positive, closed)
    roots = [to_exact(r) for r in real_roots(coefficients(p))]
    ends = [-INF, *roots, INF]
    probes = list(roots)
    for lo, hi in itertools.pairwise(ends):
        probes.append(rational_between(lo, hi))
    for x in probes:
        assert ours.contains(x) == bool(theirs.contains(x)), x


def test_where_sign_with_irrational_ends_is_exact() -> None:
    # Reference: sympy.solve_poly_inequality; 2 − k² ≥ 0 exactly for |k| ≤ √2.
    p = sympy.Poly(2 - X**2, X, domain=sympy.QQ)
    ours = where_sign(p, positive=True, closed=True)
    assert ours == GainSet.between(-sympy.sqrt(2), sympy.sqrt(2))
    assert ours.contains(sympy.sqrt(2)) and not ours.contains(sympy.Rational(1415, 1000))


@settings(max_examples=30, deadline=None)
@given(polynomials, polynomials)
def test_sign_at_an_irrational_special_gain(p: sympy.Poly, q: sympy.Poly) -> None:
    # Reference: the value of q at the root, evaluated by sympy to 60 significant digits.
    factor = next((f for f, _ in p.factor_list()[1] if f.degree() >= 2), None)
    if factor is None:
        return
    ring = steady._RING
    element = ring.from_dict({(e,): c for (e,), c in factor.as_dict(native=True).items()})
    value = ring.from_dict({(e,): c for (e,), c in q.as_dict(native=True).items()})
    for root in real_roots(coefficients(factor)):
        assert isinstance(root, Root)
        at_root = sixty_digits(q.as_expr().subs(X, to_exact(root)))
        expected = 0 if q.rem(factor).is_zero else (1 if at_root > 0 else -1)
        assert steady._sign_at(value, element, root) == expected


def test_comparisons_of_close_numbers() -> None:
    # Reference: for positive numbers a < b exactly when a² < b² (common practice), decided
    # here on integers. √2 against the convergents of its continued fraction (alternately
    # below and above it, ever closer) and against √(2 + 10^-40), 3.5·10^-41 above it.
    sqrt2 = real_roots([Fraction(1), Fraction(0), Fraction(-2)])[1]
    near = real_roots([Fraction(10**40), Fraction(0), -Fraction(2 * 10**40 + 1)])[1]
    assert number_less(sqrt2, near) and not number_less(near, sqrt2)
    assert less(to_exact(sqrt2), to_exact(near))
    p, q = 1, 1
    for _ in range(60):
        p, q = p + 2 * q, p + q  # the next convergent p/q of √2
        x = Fraction(p, q)
        below = x * x < 2
        assert number_less(x, sqrt2) == below
        assert number_less(sqrt2, x) == (not below)
        assert less(to_exact(x), to_exact(sqrt2)) == below
    mid = number_between(sqrt2, near)
    assert 2 < mid * mid < 2 + Fraction(1, 10**40)


@settings(max_examples=40, deadline=None)
@given(polynomials)
def test_floats_of_roots_are_sympys(p: sympy.Poly) -> None:
    # Reference: sympy's own numbers for these roots (its real_roots, its isolation, its
    # evalf to 17 digits, then 15), as to_float has always written an end.
    theirs = [float(sympy.Float(r.evalf(17), 15)) for r in sympy_distinct_roots(p)]
    assert [to_float(to_exact(r)) for r in real_roots(coefficients(p))] == theirs


@settings(max_examples=100, deadline=None)
@given(
    st.lists(st.integers(-50, 50), min_size=2, max_size=8).filter(
        lambda c: c[0] != 0 and any(c[1:])
    ),
    st.sampled_from([1, 2, 3, 4, 6, 10, 100]),
    st.sampled_from([1, 7, 64, 1000]),
)
def test_variable_scale_is_sympys(coeffs: list[int], base: int, content: int) -> None:
    # Reference: sympy's preprocess_roots, whose scale shows in how roots are written.
    from sympy.polys.polyroots import preprocess_roots

    scaled = tuple(content * c * base**i for i, c in enumerate(coeffs))  # roots times base
    expected = int(preprocess_roots(sympy.Poly(list(scaled), X, domain=sympy.ZZ))[0])
    assert gainset._variable_scale(scaled) == expected


@settings(max_examples=80, deadline=None)
@given(
    st.lists(
        st.lists(st.integers(-60, 60), min_size=2, max_size=5).filter(lambda f: f[0] and f[-1]),
        min_size=1,
        max_size=3,
    )
)
def test_irreducible_factors_are_sympys(factors: list[list[int]]) -> None:
    # Products of random factors (repeated factors and reducible ones among them): the
    # distinct irreducible factors must be those of sympy's factor_list (a reference library),
    # each primitive with a positive leading coefficient.
    p = sympy.Poly(1, X)
    for f in factors:
        p *= sympy.Poly(f, X)
    found = [f.as_poly(X) for f, _m in sympy.factor_list(p.as_expr(), X)[1]]
    expected = sorted(
        tuple(int(c) for c in (f if f.LC() > 0 else -f).all_coeffs())
        for f in found
        if f.degree() > 0
    )
    ints = [int(c) for c in p.all_coeffs()]
    assert sorted(gainset.irreducible_factors(ints)) == expected
    if len(expected) > 1 or expected[0] != gainset._normal(ints):
        # A proof of irreducibility must never be found for a reducible polynomial.
        assert not gainset._proved_irreducible(ints)


@settings(max_examples=80, deadline=None)
@given(
    st.integers(1, 10**12),
    st.integers(-(10**12), 10**12).filter(bool),
    st.integers(-(10**12), 10**12).filter(bool),
    st.sampled_from([1, 4, 9, 12, 49 * 3, 8, 2**15 + 3]),
)
def test_quadratic_roots_are_sympys_radicals(a: int, b: int, c: int, square: int) -> None:
    # Reference: sympy's Poly.real_roots (the same objects, printed the same way) for
    # quadratics with large coefficients; `square` puts square factors (small, and beyond
    # sympy's trial division) into the discriminant.
    c *= square
    p = sympy.Poly(a * X**2 + b * X + c, X)
    theirs = sympy_distinct_roots(p)
    ours = [to_exact(r) for r in real_roots(coefficients(p))]
    assert ours == theirs
    assert [sympy.srepr(r) for r in ours] == [sympy.srepr(r) for r in theirs]
    assert [sympy.sstr(r) for r in ours] == [sympy.sstr(r) for r in theirs]


@settings(max_examples=80, deadline=None)
@given(
    st.sampled_from([X**2 - 2, 7 * X**2 - 30 * X + 11, X**2 - 10**6 * X + 3, 16 * X**4 - 21]),
    st.integers(0, 1),
    st.integers(1, 18),
    st.integers(-9, 9),
)
def test_float_ends_against_radicals_compare_as_sympy_does(
    p: sympy.Expr, index: int, digits: int, offset: int
) -> None:
    # Reference: sympy's own `<` between a 15-digit Float and the radical (or 4th root) it
    # writes for the root; a Float end is compared at its own precision, as sympy does, so
    # the exact shortcut must agree with sympy wherever it decides.
    root = to_exact(real_roots(coefficients(sympy.Poly(p, X)))[index])
    value = sympy.N(root, 40) * (1 + sympy.Rational(offset, 10**digits))
    end = sympy.Float(float(value), 15)
    assert less(end, root) == bool(end < root)
    assert less(root, end) == bool(root < end)


@settings(max_examples=100, deadline=None)
@given(
    st.integers(-(10**40), 10**40),
    st.integers(1, 10**40),
    st.floats(allow_nan=False, allow_infinity=False, min_value=-1e300, max_value=1e300),
)
def test_floats_of_rationals_and_float_ends_are_sympys(p: int, q: int, f: float) -> None:
    # Reference: sympy's evalf to 17 digits, rounded to 15 (the definition to_float states),
    # for rationals of every size and for 15-digit Float ends.
    for x in (sympy.Rational(p, q), sympy.Integer(p), sympy.Float(f, 15)):
        to_float.cache_clear()
        assert to_float(x) == float(sympy.Float(x.evalf(17), 15))


@settings(max_examples=100, deadline=None)
@given(
    st.floats(allow_nan=False, allow_infinity=False, min_value=-1e300, max_value=1e300),
    st.integers(-(10**30), 10**30),
    st.integers(1, 10**30),
    st.sampled_from([0, 1, -1, 2**-60]),
)
def test_float_and_rational_ends_compare_as_sympy_does(
    f: float, p: int, q: int, nudge: float
) -> None:
    # Reference: sympy's own `<` between Floats and Rationals, which is exact (the Float's
    # binary value against the rational); `nudge` puts the two Floats next to each other.
    x = sympy.Float(f, 15)
    y = sympy.Float(f * (1 + nudge), 15)
    r = sympy.Rational(p, q)
    exact_of_x = sympy.Rational(x)
    for a, b in ((x, y), (y, x), (x, r), (r, x), (x, exact_of_x), (exact_of_x, x)):
        assert less(a, b) == bool(a < b)


@given(st.sampled_from([(1, 2, -431), (1, 2, -(32771**2) * 3 + 1), (1, 4, 4 - 32771 * 32779)]))
@settings(max_examples=10, deadline=None)
def test_quadratic_radicals_with_awkward_discriminants(abc: tuple[int, int, int]) -> None:
    # Reference: sympy's Poly.real_roots. Discriminants 12^3 (a perfect power, which sympy
    # splits at its base), 4·(3·32771² - ...) and 4·32771·32779 (factors just above sympy's
    # trial-division limit): the same expressions, however they are built.
    a, b, c = abc
    p = sympy.Poly(a * X**2 + b * X + c, X)
    ours = [to_exact(r) for r in real_roots(coefficients(p))]
    theirs = sympy_distinct_roots(p)
    assert [sympy.srepr(r) for r in ours] == [sympy.srepr(r) for r in theirs]


@settings(max_examples=80, deadline=None)
@given(
    st.integers(1, 10**30),
    st.integers(-(10**30), 10**30),
    st.integers(-(10**30), 10**30).filter(bool),
)
def test_quadratic_isolating_intervals_hold_sympys_roots(a: int, b: int, c: int) -> None:
    # Reference: sympy's Poly.real_roots, evaluated to 200 digits; each interval must hold
    # exactly its root (ascending, apart) for an irreducible quadratic.
    p = sympy.Poly(a * X**2 + b * X + c, X)
    found = sympy.factor_list(p)[1]
    assume(len(found) == 1 and found[0][1] == 1 and found[0][0].degree() == 2)
    g = int(sympy.gcd_list([a, b, c]))
    intervals = gainset._isolate((a // g, b // g, c // g))
    roots = p.real_roots()
    assert len(intervals) == len(roots)
    for (lo, hi), root in zip(intervals, roots, strict=True):
        value = sympy.N(root, 200)
        assert sympy.Rational(lo.numerator, lo.denominator) < value
        assert value < sympy.Rational(hi.numerator, hi.denominator)
    if len(intervals) == 2:
        assert intervals[0][1] < intervals[1][0]
