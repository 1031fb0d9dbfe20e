"""Exact stability: Routh table, stable gain sets, hidden modes.

Outside references: textbook worked examples (named beside each check), numpy.roots and
python-control's feedback + poles on gain grids with bisection, and mpmath root finding.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from fractions import Fraction

import control
import mpmath
import numpy as np
import pytest
import sympy
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S, poly
from speclint.analysis.gainset import (
    INF,
    ZERO,
    GainSet,
    Interval,
    _proven_irreducible,
    irreducible_factors,
    to_float,
)
from speclint.analysis.stability import (
    _S_RING,
    EPS,
    _first_column_parts,
    _shown_coprime,
    hidden_modes,
    is_hurwitz,
    routh_table,
    stable_gains,
)

# ----------------------------------------------------------------------------- helpers


def make_loop(
    controller: Ratio,
    plant: Ratio,
    feedback: Ratio | None = None,
    nominal: Fraction | None = Fraction(1),
    limits: GainSet | None = None,
    delay: Fraction | None = None,
) -> LoopAlgebra:
    return LoopAlgebra(
        controller=controller,
        plant=plant,
        feedback=feedback or Ratio.one(),
        delay=delay,
        nominal=nominal,
        limits=limits or GainSet.positive(),
        gain_symbol="K",
    )


def gain_times(num: sympy.Expr, den: sympy.Expr, **kw: object) -> LoopAlgebra:
    """Controller K, plant num/den, unity feedback."""
    return make_loop(Ratio(poly(K), poly(1)), Ratio(poly(num), poly(den)), **kw)  # type: ignore[arg-type]


def upoly(expr: sympy.Expr) -> sympy.Poly:
    return sympy.Poly(expr, S, domain=sympy.QQ)


def float_coeffs(expr: sympy.Expr) -> np.ndarray:
    return np.array([float(c) for c in sympy.Poly(expr, S).all_coeffs()])


def block_arrays(p: sympy.Poly) -> list[np.ndarray]:
    """Coefficients in s (highest first) of each power of K, as floats."""
    expr = p.as_expr()
    top = sympy.Poly(expr, S, K).degree(K) if expr.has(K) else 0
    out = []
    for j in range(top + 1):
        part = sympy.expand(expr).coeff(K, j) if j else sympy.expand(expr).subs(K, 0)
        out.append(float_coeffs(part) if part != 0 else np.array([0.0]))
    return out


def at_k(arrays: list[np.ndarray], k: float) -> np.ndarray:
    total = np.array([0.0])
    for j, a in enumerate(arrays):
        total = np.polyadd(total, a * k**j)
    return np.trim_zeros(total, "f")


class NumericLoop:
    """The loop's closed-loop poles in floating point, built from the blocks independently
    of speclint's characteristic(): numpy polynomial products and numpy.roots."""

    def __init__(self, loop: LoopAlgebra) -> None:
        blocks = (loop.controller, loop.plant, loop.feedback)
        self.nums = [block_arrays(b.num) for b in blocks]
        self.dens = [block_arrays(b.den) for b in blocks]

    def char(self, k: float) -> np.ndarray:
        num, den = np.array([1.0]), np.array([1.0])
        for n, d in zip(self.nums, self.dens, strict=True):
            num = np.polymul(num, at_k(n, k))
            den = np.polymul(den, at_k(d, k))
        return np.trim_zeros(np.polyadd(den, num), "f")

    def stable(self, k: float) -> bool:
        # numpy.roots: relative accuracy about 1e-13 for the simple roots met here
        return bool(np.max(np.roots(self.char(k)).real) < 0)

    def clearly_stable(self, k: float) -> bool:
        """Stable with a margin: roots within 1e-12·(1 + |s|max) of the axis count as on it,
        so a whole gain range of undamped roots (numerically ±1e-17) is not read as stable."""
        roots = np.roots(self.char(k))
        return bool(np.max(roots.real) < -1e-12 * (1 + np.max(np.abs(roots))))

    def control_stable(self, k: float) -> bool:
        """Same verdict from python-control: feedback() of the blocks, then poles()."""
        tfs = []
        for n, d in zip(self.nums, self.dens, strict=True):
            tfs.append(control.tf(at_k(n, k), at_k(d, k)))
        closed = control.feedback(tfs[0] * tfs[1], tfs[2])
        return bool(np.max(control.poles(closed).real) < 0)


def bisect(stable: Callable[[float], bool], a: float, b: float, rel: float = 1e-10) -> float:
    fa = stable(a)
    while b - a > rel * b:
        m = 0.5 * (a + b)
        if stable(m) == fa:
            a = m
        else:
            b = m
    return 0.5 * (a + b)


def numeric_boundaries(
    stable: Callable[[float], bool], lo: float, hi: float, points: int
) -> list[float]:
    grid = np.geomspace(lo, hi, points)
    flags = [stable(float(k)) for k in grid]
    return [
        bisect(stable, float(grid[i]), float(grid[i + 1]))
        for i in range(points - 1)
        if flags[i] != flags[i + 1]
    ]


def ends(gains: GainSet) -> list[float]:
    return [to_float(e) for iv in gains.intervals for e in (iv.lo, iv.hi) if e not in (ZERO, INF)]


def reference_counts(p: sympy.Poly) -> tuple[int, int]:
    """(right-half-plane, imaginary-axis) root counts from mpmath at 60 digits, root by
    root over sympy's square-free factorisation (so repeated roots do not blur)."""
    rhp = axis = 0
    for factor, multiplicity in p.sqf_list()[1]:
        if factor.degree() == 0:
            continue
        with mpmath.workdps(60):
            coeffs = [
                mpmath.mpf(sympy.Rational(c).p) / sympy.Rational(c).q for c in factor.all_coeffs()
            ]
            roots = mpmath.polyroots(coeffs, maxsteps=200, extraprec=200)
            for r in roots:
                if abs(mpmath.re(r)) < mpmath.mpf(10) ** -30:
                    axis += multiplicity
                elif mpmath.re(r) > 0:
                    rhp += multiplicity
    return rhp, axis


# ------------------------------------------------------------------------- Routh table


def test_classic_third_order_loop_stable_for_gain_below_six() -> None:
    # K/(s(s+1)(s+2)) is stable exactly for 0 < K < 6 and oscillates at ω = √2 there
    # (common practice; Ogata, Modern Control Engineering, Routh's criterion, from memory).
    result = stable_gains(gain_times(sympy.Integer(1), S * (S + 1) * (S + 2)))
    assert result.gains == GainSet((Interval(ZERO, sympy.Integer(6)),))
    assert len(result.boundaries) == 1
    boundary = result.boundaries[0]
    assert boundary.gain == 6 and boundary.crossing == "imaginary"
    assert boundary.omega == sympy.sqrt(2)
    assert boundary.describe() == "s = ±j·ω0 with ω0 = 1.41421"
    assert result.nominal_stable is True
    assert (
        stable_gains(
            gain_times(sympy.Integer(1), S * (S + 1) * (S + 2), nominal=Fraction(6))
        ).nominal_stable
        is False
    )


def test_routh_zero_in_first_column() -> None:
    # s^5+2s^4+2s^3+4s^2+11s+10: a zero in the first column, two right-half-plane roots
    # (Nise, Control Systems Engineering, Routh-Hurwitz chapter, from memory); numpy.roots.
    p = upoly(S**5 + 2 * S**4 + 2 * S**3 + 4 * S**2 + 11 * S + 10)
    table = routh_table(p)
    assert table.rows[2][0] == EPS
    assert any("replaced by ε" in note for note in table.notes)
    roots = np.roots([1, 2, 2, 4, 11, 10])
    assert table.rhp == int(np.sum(roots.real > 1e-9)) == 2
    assert table.imaginary == 0 and table.stable is False
    assert is_hurwitz(p) is False


def test_routh_row_of_zeros() -> None:
    # s^5+7s^4+6s^3+42s^2+8s+56: a row of zeros; auxiliary polynomial 7s^4+42s^2+56 with
    # roots ±j√2, ±j2 (Nise, Control Systems Engineering, Routh-Hurwitz chapter, from
    # memory); counts checked against numpy.roots.
    p = upoly(S**5 + 7 * S**4 + 6 * S**3 + 42 * S**2 + 8 * S + 56)
    table = routh_table(p)
    assert any("all zeros" in note for note in table.notes)
    assert table.rows[2] == (28, 84, 0)  # d/ds of 7s^4 + 42s^2 + 56
    roots = np.roots([1, 7, 6, 42, 8, 56])
    assert table.imaginary == int(np.sum(np.abs(roots.real) < 1e-9)) == 4
    assert table.rhp == int(np.sum(roots.real > 1e-9)) == 0
    assert table.stable is False and is_hurwitz(p) is False


def test_epsilon_followed_by_a_row_of_zeros_is_counted_exactly() -> None:
    # (s³ + s − 1)(s² + 1): a first-column zero, then a row of zeros; the ε table's sign
    # changes say 3, numpy.roots says one right-half-plane root and two on the axis.
    p = upoly((S**3 + S - 1) * (S**2 + 1))
    table = routh_table(p)
    roots = np.roots(float_coeffs(p.as_expr()))
    assert table.rhp == int(np.sum(roots.real > 1e-9)) == 1
    assert table.imaginary == int(np.sum(np.abs(roots.real) < 1e-9)) == 2
    assert any("Sturm" in note for note in table.notes)


@pytest.mark.parametrize(
    ("expr", "hurwitz"),
    [
        (sympy.Integer(-3), True),  # no roots at all
        (-S - 1, True),  # root at −1; sign of the leading coefficient does not matter
        (S, False),  # a root at s = 0 is not asymptotically stable
        (S**2 + 1, False),
        (S**3 + S**2 + 2 * S + 8, False),
        (S**3 + 6 * S**2 + 11 * S + 6, True),  # (s+1)(s+2)(s+3)
        (2 * S**4 + 3 * S**3 + 5 * S**2 + 2 * S + 1, True),
    ],
)
def test_is_hurwitz_small_cases(expr: sympy.Expr, hurwitz: bool) -> None:
    # Reference: numpy.roots, all real parts strictly negative (common practice).
    roots = np.roots(float_coeffs(expr)) if sympy.Poly(expr, S).degree() > 0 else np.array([])
    assert bool(np.all(roots.real < -1e-12)) is hurwitz
    assert is_hurwitz(upoly(expr)) is hurwitz
    assert routh_table(upoly(expr)).stable is hurwitz


def test_routh_rejects_non_rational_or_gain_polynomials() -> None:
    with pytest.raises(ValueError, match="zero polynomial"):
        routh_table(upoly(sympy.Integer(0)))
    with pytest.raises(ValueError, match="depends on k"):
        routh_table(poly(S + K))


@settings(max_examples=80, deadline=None)
@given(
    st.lists(st.integers(-3, 3), min_size=2, max_size=8).filter(lambda c: c[0] != 0),
    st.lists(
        st.sampled_from([S**2 + 1, S**2 + 4, S - 1, S, S**2 + S + 1, S**2 - 2, S**4 + 1]),
        max_size=2,
    ),
)
def test_routh_counts_against_mpmath(coeffs: list[int], factors: list[sympy.Expr]) -> None:
    # Small integer coefficients hit both special cases often; the factors add roots on
    # the imaginary axis and at s = 0. Reference: mpmath roots at 60 digits.
    expr = sympy.Poly(coeffs, S).as_expr()
    for f in factors:
        expr *= f
    p = upoly(expr)
    table = routh_table(p)
    assert (table.rhp, table.imaginary) == reference_counts(p)
    assert table.stable is is_hurwitz(p)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(
        st.lists(st.integers(-4, 6), min_size=1, max_size=3).map(
            lambda c: sympy.Poly(c, K, domain=sympy.QQ)
        ),
        min_size=2,
        max_size=8,
    ).filter(lambda cols: not cols[0].is_zero)
)
def test_fraction_free_first_column_against_the_textbook_recurrence(
    columns: list[sympy.Poly],
) -> None:
    # Reference: the Routh recurrence as the textbooks write it, each entry reduced by
    # sympy.cancel (Ogata, Modern Control Engineering, sec. 5-6, from memory); the
    # fraction-free entries must be the same rational functions up to a constant factor,
    # and stop at the same row when an entry vanishes for every gain.
    n = len(columns) - 1
    width = n // 2 + 1
    coeffs = [c.as_expr() for c in columns]
    prev = coeffs[0::2] + [sympy.Integer(0)] * (width - len(coeffs[0::2]))
    cur = coeffs[1::2] + [sympy.Integer(0)] * (width - len(coeffs[1::2]))
    textbook = [prev[0]]
    stop = None
    for power in range(n - 1, -1, -1):
        if sympy.cancel(cur[0]) == 0:
            stop = power
            break
        textbook.append(sympy.cancel(cur[0]))
        nxt = [
            sympy.cancel((cur[0] * prev[j + 1] - prev[0] * cur[j + 1]) / cur[0])
            for j in range(width - 1)
        ]
        prev, cur = cur, [*nxt, sympy.Integer(0)]
    parts, degenerate = _first_column_parts([[int(c) for c in p.all_coeffs()] for p in columns])
    assert degenerate == stop
    assert len(parts) == len(textbook)
    for (num, den), entry in zip(parts, textbook, strict=True):
        ratio = sympy.cancel(sympy.Poly(num, K).as_expr() / sympy.Poly(den, K).as_expr() / entry)
        assert ratio.is_Rational and ratio != 0
        textbook_num, textbook_den = sympy.fraction(sympy.cancel(entry))
        assert sympy.Poly(num, K).degree() == sympy.Poly(textbook_num, K).degree()
        assert sympy.Poly(den, K).degree() == sympy.Poly(textbook_den, K).degree()
    # Not in lowest terms: the same entries, and their numerators and denominators have
    # the same real roots taken together as the textbook's (sympy's real_roots).
    raw, raw_degenerate = _first_column_parts(
        [[int(c) for c in p.all_coeffs()] for p in columns], lowest_terms=False
    )
    assert raw_degenerate == stop
    for (num, den), entry in zip(raw, textbook, strict=True):
        ratio = sympy.cancel(sympy.Poly(num, K).as_expr() / sympy.Poly(den, K).as_expr() / entry)
        assert ratio.is_Rational and ratio != 0

    def roots(polys: list[sympy.Expr]) -> list[sympy.Float]:
        # By value, to 30 digits: sympy writes one root in several forms (CRootOf of k^3 +
        # 16k + 16, or 2·CRootOf of k^3 + 4k + 2), which compare unequal as expressions.
        found: list[sympy.Float] = []
        for q in polys:
            q_poly = sympy.Poly(q, K)
            if q_poly.degree() > 0:
                found.extend(sympy.N(r, 30) for r in q_poly.real_roots())
        distinct: list[sympy.Float] = []
        for r in sorted(found):
            if not distinct or abs(r - distinct[-1]) > 1e-20 * (1 + abs(r)):
                distinct.append(r)
        return distinct

    textbook_parts = [part for e in textbook for part in sympy.fraction(sympy.cancel(e))]
    raw_parts = [sympy.Poly(part, K).as_expr() for pair in raw for part in pair]
    ours, theirs = roots(raw_parts), roots(textbook_parts)
    assert len(ours) == len(theirs)
    assert all(abs(a - b) <= 1e-20 * (1 + abs(b)) for a, b in zip(ours, theirs, strict=True))


# ------------------------------------------------------------------ stable gain sets


def test_conditionally_stable_middle_band() -> None:
    # Own design: K(s+1)^2/(s^3(s+10)^2) is stable only between two gains (a conditionally
    # stable loop). Reference: closed-loop poles from numpy.roots and from python-control's
    # feedback + poles on a dense gain grid, each boundary bisected to 1e-9 relative.
    loop = gain_times((S + 1) ** 2, S**3 * (S + 10) ** 2)
    result = stable_gains(loop)
    exact_ends = ends(result.gains)
    assert len(result.gains.intervals) == 1 and len(exact_ends) == 2
    numeric = NumericLoop(loop)
    found_numpy = numeric_boundaries(numeric.stable, 1.0, 1e5, 1500)
    found_control = numeric_boundaries(numeric.control_stable, 1.0, 1e5, 300)
    for found in (found_numpy, found_control):
        assert len(found) == 2
        for e, f in zip(exact_ends, found, strict=True):
            assert abs(e - f) <= 1e-9 * e
    # ω0 of each crossing is where numpy finds the closed-loop pair at the boundary gain
    for b in result.boundaries:
        assert b.crossing == "imaginary" and b.omega is not None
        roots = np.roots(numeric.char(to_float(b.gain)))
        nearest = roots[np.argmin(np.abs(roots.real))]
        assert abs(abs(nearest.imag) - to_float(b.omega)) < 1e-6 * to_float(b.omega)


def test_stable_only_above_a_minimum_gain() -> None:
    # K(s+1)^2/(s^3(s+10)): Routh gives rows 0.8K and 2K − 12.5, so stable exactly for
    # K > 25/4 (hand Routh, common practice); checked against numpy.roots with bisection.
    loop = gain_times((S + 1) ** 2, S**3 * (S + 10))
    result = stable_gains(loop)
    assert result.gains == GainSet((Interval(sympy.Rational(25, 4), INF),))
    found = numeric_boundaries(NumericLoop(loop).stable, 0.1, 1e4, 400)
    assert len(found) == 1 and abs(found[0] - 6.25) < 1e-9 * 6.25
    assert result.nominal_stable is False  # nominal K = 1 lies below the minimum


def disjoint_loop(**kw: object) -> LoopAlgebra:
    # Own design: a lightly damped plant mode and a nearby zero pair make the root locus
    # cross the imaginary axis four times.
    z = sympy.Rational(1, 20)
    num = (S + 1) ** 2 * (S**2 + 2 * z * 4 * S + 16)
    den = S**3 * (S + 10) ** 2 * (S**2 + 2 * z * 3 * S + 9)
    return gain_times(num, den, **kw)


def test_several_disjoint_bands() -> None:
    # Reference: numpy.roots on a dense gain grid, boundaries bisected to 1e-9 relative.
    loop = disjoint_loop()
    result = stable_gains(loop)
    exact_ends = ends(result.gains)
    assert len(result.gains.intervals) == 2 and len(exact_ends) == 4
    found = numeric_boundaries(NumericLoop(loop).stable, 1.0, 1e4, 3000)
    assert len(found) == 4
    for e, f in zip(exact_ends, found, strict=True):
        assert abs(e - f) <= 1e-9 * e
    assert [b.crossing for b in result.boundaries] == ["imaginary"] * 4


def test_narrow_band_a_few_percent_wide() -> None:
    # Own design: K(s+a)^2/(s^3(s+10)^2) with a = 1.7155 is stable in a band about 4.5 %
    # wide, which a 200-point logarithmic grid over 1..10^4 (4.7 % steps) can step over.
    # Reference: numpy.roots; stable at the band's middle, and bisection from there outward
    # finds each end to 1e-9 relative.
    loop = gain_times((S + sympy.Rational(3431, 2000)) ** 2, S**3 * (S + 10) ** 2)
    result = stable_gains(loop)
    assert len(result.gains.intervals) == 1
    lo, hi = ends(result.gains)
    assert 0.01 < (hi - lo) / lo < 0.06
    numeric = NumericLoop(loop)
    mid = 0.5 * (lo + hi)
    assert numeric.stable(mid)
    assert not numeric.stable(lo * 0.98) and not numeric.stable(hi * 1.02)
    assert abs(bisect(numeric.stable, lo * 0.98, mid) - lo) <= 1e-9 * lo
    assert abs(bisect(numeric.stable, mid, hi * 1.02) - hi) <= 1e-9 * hi


def test_biproper_loop_crosses_through_infinity() -> None:
    # K(2 − s)/(s + 1): the closed-loop pole −(1 + 2K)/(1 − K) runs off to −∞ as K → 1
    # and returns from +∞ (1 + L(∞) = 1 − K = 0). Reference: python-control poles.
    loop = gain_times(2 - S, S + 1)
    result = stable_gains(loop)
    assert result.gains == GainSet((Interval(ZERO, sympy.Integer(1)),))
    assert [(b.gain, b.describe()) for b in result.boundaries] == [(1, "s = ∞")]
    numeric = NumericLoop(loop)
    assert numeric.control_stable(0.999) and not numeric.control_stable(1.001)
    assert stable_gains(gain_times(2 - S, S + 1, nominal=Fraction(1))).nominal_stable is False


def test_boundary_through_the_origin() -> None:
    # K(s − 1)/((s+1)(s+2)): P = s² + (3+K)s + 2 − K, a real root through s = 0 at K = 2
    # (common practice); reference: numpy.roots with bisection.
    loop = gain_times(S - 1, (S + 1) * (S + 2))
    result = stable_gains(loop)
    assert result.gains == GainSet((Interval(ZERO, sympy.Integer(2)),))
    assert [b.describe() for b in result.boundaries] == ["s = 0"]
    found = numeric_boundaries(NumericLoop(loop).stable, 0.01, 100, 200)
    assert len(found) == 1 and abs(found[0] - 2) < 1e-9 * 2


def test_gain_in_the_plant_denominator() -> None:
    # Controller K, plant 1/(s(Ks+1)(s+1)): P = Ks³ + (K+1)s² + s + K, stable exactly while
    # K² − K − 1 < 0, i.e. K < (1+√5)/2 (hand Routh); reference: numpy.roots, bisection.
    plant = Ratio(poly(1), poly(S * (K * S + 1) * (S + 1)))
    loop = make_loop(Ratio(poly(K), poly(1)), plant)
    result = stable_gains(loop)
    golden = (1 + sympy.sqrt(5)) / 2
    assert result.gains == GainSet((Interval(ZERO, golden),))
    found = numeric_boundaries(NumericLoop(loop).stable, 0.01, 100, 200)
    assert len(found) == 1 and abs(found[0] - float(golden)) < 1e-9 * float(golden)


def test_gain_squared_and_an_isolated_unstable_gain() -> None:
    # Controller (K−2)², plant 1/(s(s+1)(s+2)): stable while 0 < (K−2)² < 6, so K = 2 (a
    # root at s = 0) splits the set (from the classic 0 < K < 6, common practice).
    loop = make_loop(
        Ratio(poly((K - 2) ** 2), poly(1)), Ratio(poly(1), poly(S * (S + 1) * (S + 2)))
    )
    result = stable_gains(loop)
    top = 2 + sympy.sqrt(6)
    assert result.gains == GainSet(
        (Interval(ZERO, sympy.Integer(2)), Interval(sympy.Integer(2), top))
    )
    assert [b.describe() for b in result.boundaries] == ["s = 0", "s = ±j·ω0 with ω0 = 1.41421"]
    numeric = NumericLoop(loop)
    assert numeric.stable(1.9) and numeric.stable(2.1) and not numeric.stable(float(top) * 1.001)


def test_limits_cut_the_set_and_keep_closed_ends() -> None:
    # Limits are inclusive: [1/100, 50] ∩ (0 < K < 6) (classic loop, common practice).
    limits = GainSet.between(Fraction(1, 100), Fraction(50))
    result = stable_gains(gain_times(sympy.Integer(1), S * (S + 1) * (S + 2), limits=limits))
    assert result.gains.describe() == "0.01 ≤ K < 6"
    assert result.gains.contains(Fraction(1, 100))
    # Limits inside the stable range, and limits beyond it on either side.
    inside = GainSet.between(Fraction(1), Fraction(4))
    result = stable_gains(gain_times(sympy.Integer(1), S * (S + 1) * (S + 2), limits=inside))
    assert result.gains == GainSet((Interval(sympy.Integer(1), sympy.Integer(4), True, True),))
    assert result.ends == ()  # the loop sets neither end
    beyond = GainSet.between(Fraction(7), Fraction(9))
    assert stable_gains(
        gain_times(sympy.Integer(1), S * (S + 1) * (S + 2), limits=beyond)
    ).gains.is_empty()
    # K(s+1)^2/(s^3(s+10)^2) is stable only in a middle band, its lower end irrational
    # (conditionally stable, own design; see test_conditionally_stable_middle_band):
    # limits above the band leave nothing, limits across it keep the band's upper end.
    band = stable_gains(gain_times((S + 1) ** 2, S**3 * (S + 10) ** 2)).gains
    (piece,) = band.intervals
    above = GainSet.between(Fraction(int(piece.hi) + 1), Fraction(int(piece.hi) + 5))
    assert stable_gains(
        gain_times((S + 1) ** 2, S**3 * (S + 10) ** 2, limits=above)
    ).gains.is_empty()
    across = GainSet.between(Fraction(0), Fraction(int(piece.hi) + 1))
    cut = stable_gains(gain_times((S + 1) ** 2, S**3 * (S + 10) ** 2, limits=across)).gains
    assert cut == band


def test_loop_without_gain_is_all_or_nothing() -> None:
    # 1/(s+1) in unity feedback: pole at −2; 1/(2(s−1)): pole at +1/2 (common practice).
    good = make_loop(Ratio.one(), Ratio(poly(1), poly(S + 1)), nominal=None)
    bad = make_loop(Ratio.one(), Ratio(poly(1), poly(2 * (S - 1))), nominal=None)
    r_good, r_bad = stable_gains(good), stable_gains(bad)
    assert r_good.nominal_stable is True and r_good.gains == GainSet.positive()
    assert r_bad.nominal_stable is False and r_bad.gains.is_empty()
    assert not r_good.depends_on_gain


def test_dead_time_is_not_analysed_here() -> None:
    result = stable_gains(gain_times(sympy.Integer(1), S + 1, delay=Fraction(1, 1000)))
    assert result.unsupported is not None and "dead time" in result.unsupported
    assert result.nominal_stable is None


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
@given(
    st.integers(2, 5).flatmap(
        lambda n: st.tuples(
            st.lists(st.fractions(0, 9, max_denominator=4), min_size=n + 1, max_size=n + 1),
            st.integers(0, n).flatmap(
                lambda m: st.lists(
                    st.fractions(-9, 9, max_denominator=4), min_size=m + 1, max_size=m + 1
                )
            ),
        )
    )
)
def test_random_loops_against_numeric_sweep(
    coeffs: tuple[list[Fraction], list[Fraction]],
) -> None:
    # K·N/D with random rational coefficients (those of D non-negative, so that many loops
    # have a stable range at all); reference: numpy.roots on a 400-point logarithmic gain
    # grid over 1e-3..1e3, every stability change bisected; each numeric boundary must match
    # an exact one to 1e-6 relative, and across each exact boundary (±1e-6 relative) the
    # numeric verdicts must agree with the exact set and change.
    dc, nc = coeffs
    assume(dc[0] != 0 and nc[0] != 0)
    den = upoly(
        sum(sympy.Rational(c.numerator, c.denominator) * S**i for i, c in enumerate(reversed(dc)))
    )
    num = upoly(
        sum(sympy.Rational(c.numerator, c.denominator) * S**i for i, c in enumerate(reversed(nc)))
    )
    assume(den.gcd(num).degree() == 0)  # no fixed common root: its sign would be noise
    loop = gain_times(num.as_expr(), den.as_expr())
    result = stable_gains(loop)
    numeric = NumericLoop(loop)
    window = (1e-3, 1e3)
    exact_ends = sorted(
        {e for e in ends(result.gains)} | {to_float(b.gain) for b in result.boundaries}
    )
    inside = [e for e in exact_ends if 2 * window[0] < e < window[1] / 2]
    # Where D + K·N loses its leading term a closed-loop root passes through infinity; the
    # sweep's numpy roots are ill-conditioned so close to that gain (a huge root beside
    # small ones), and its boundary there is only good to about 1e-4 relative.
    through_infinity = -float(dc[0] / nc[0]) if len(nc) == len(dc) else None

    def tolerance(e: float) -> float:
        near = through_infinity is not None and abs(e - through_infinity) <= 1e-9 * abs(e)
        return 1e-4 if near else 1e-6

    for f in numeric_boundaries(numeric.clearly_stable, *window, 400):
        assert any(abs(f - e) <= tolerance(e) * e for e in exact_ends), (f, exact_ends)
    for e in inside:
        gaps = [abs(e - o) for o in exact_ends if o != e]
        delta = min([1e-6 * e, *(0.3 * g for g in gaps)])
        left, right = numeric.stable(e - delta), numeric.stable(e + delta)
        assert result.gains.contains(Fraction(e - delta)) == left
        assert result.gains.contains(Fraction(e + delta)) == right
        assert left != right or (left and right)  # a change, or an isolated unstable gain


def test_degree_six_loop_fast_and_right() -> None:
    # Own design, degree 6 in s: a middle band. Reference: numpy.roots on a gain grid with
    # bisection to 1e-9 relative. The time bound keeps the analysis fit for a pre-commit hook.
    loop = gain_times((S + 1) ** 2 * (S + 3), S**3 * (S + 10) ** 2 * (S + 20))
    start = time.perf_counter()
    result = stable_gains(loop)
    elapsed = time.perf_counter() - start
    assert elapsed < 5.0
    assert len(result.first_column) == 7
    found = numeric_boundaries(NumericLoop(loop).stable, 1.0, 1e6, 600)
    exact_ends = ends(result.gains)
    assert len(found) == len(exact_ends) == 2
    for e, f in zip(exact_ends, found, strict=True):
        assert abs(e - f) <= 1e-9 * e


# --------------------------------------------------------------------- hidden modes


def test_cancelled_unstable_pole_makes_every_gain_unstable() -> None:
    # Controller (s−1)/(s+2), plant K/((s−1)(s+3)): the reference-to-error map, where the
    # factor cancels, is 1/(1 + K/((s+2)(s+3))), stable for every K > 0; yet the loop keeps
    # the closed-loop pole at s = 1 (internal stability, common practice). References:
    # python-control minreal/feedback for the cancelled map, numpy.roots for the full one.
    controller = Ratio(poly(S - 1), poly(S + 2))
    plant = Ratio(poly(K), poly((S - 1) * (S + 3)))
    loop = make_loop(controller, plant)
    for k in (0.5, 5.0, 50.0):
        forward = control.minreal(
            control.tf([1, -1], [1, 2]) * control.tf([k], [1, 2, -3]), verbose=False
        )
        error_map = control.feedback(1, forward)
        assert np.max(control.poles(error_map).real) < 0
        assert np.any(np.abs(np.roots(NumericLoop(loop).char(k)) - 1) < 1e-9)
    result = stable_gains(loop)
    assert result.gains.is_empty() and result.nominal_stable is False
    modes = hidden_modes(loop)
    assert len(modes) == 1
    mode = modes[0]
    assert (mode.zero_block, mode.pole_block, mode.unstable) == ("controller", "plant", True)
    assert mode.factor == upoly(S - 1)
    assert mode.describe() == (
        "controller zero at s = 1 cancels an unstable plant pole: "
        "the loop is internally unstable for every gain"
    )


def test_cancelled_integrator_and_stable_cancellations() -> None:
    # A zero at s = 0 cancelling an integrator leaves a closed-loop root at s = 0 for every
    # gain (common practice); a cancelled stable pole (s+3) is harmless and not reported.
    controller = Ratio(poly(K * S * (S + 3)), poly(S + 5))
    plant = Ratio(poly(1), poly(S * (S + 3)))
    loop = make_loop(controller, plant)
    modes = hidden_modes(loop)
    assert [m.describe() for m in modes] == [
        "controller zero at s = 0 cancels a plant pole on the imaginary axis: "
        "the loop is not asymptotically stable for any gain"
    ]
    assert stable_gains(loop).gains.is_empty()


def test_plant_zero_against_feedback_poles_on_the_axis() -> None:
    # Plant zeros ±j2 against a sensor with poles ±j2: an undamped hidden mode (common
    # practice); numpy.roots of the full characteristic polynomial shows it for any K.
    plant = Ratio(poly(K * (S**2 + 4)), poly((S + 1) * (S + 2)))
    feedback = Ratio(poly(1), poly(S**2 + 4))
    loop = make_loop(Ratio.one(), plant, feedback)
    modes = hidden_modes(loop)
    assert [(m.zero_block, m.pole_block, m.unstable) for m in modes] == [
        ("plant", "feedback", False)
    ]
    assert modes[0].roots_text() == "s = ±j·2"
    assert modes[0].describe() == (
        "plant zeros at s = ±j·2 cancel feedback poles on the imaginary axis: "
        "the loop is not asymptotically stable for any gain"
    )
    roots = np.roots(NumericLoop(loop).char(3.0))
    assert np.sum(np.abs(np.abs(roots) - 2) < 1e-6) >= 2


# Factors with known roots (common practice): whether each has a root in the closed right
# half plane off the axis (True), only on the axis (False), or none (None).
_MENU = {
    S - 1: True,
    S**2 - S + 1: True,
    S: False,
    S**2 + 4: False,
    S + 2: None,
    S**2 + S + 1: None,
}


@st.composite
def blocks_with_shared_factors(draw: st.DrawFn) -> tuple[Ratio, Ratio, Ratio]:
    def side() -> sympy.Expr:
        picked = draw(st.lists(st.sampled_from(sorted(_MENU, key=str)), max_size=3))
        extra = draw(st.sampled_from([1, K, S + K, 2 * K + S**2]))
        return sympy.Mul(extra, *picked)

    def block() -> Ratio:
        return Ratio(poly(side()), poly(side() * draw(st.sampled_from([1, S + 5]))))

    return block(), block(), block()


@settings(max_examples=40, deadline=None)
@given(blocks_with_shared_factors())
def test_hidden_modes_against_the_two_variable_gcd(blocks: tuple[Ratio, Ratio, Ratio]) -> None:
    # Reference: sympy's gcd of the two polynomials in (s, k) and its factorization; the
    # factors' roots are known by construction (_MENU).
    loop = make_loop(*blocks)
    names = ("controller", "plant", "feedback")
    expected = set()
    for pole_name, pole in zip(names, blocks, strict=True):
        for zero_name, zero in zip(names, blocks, strict=True):
            common = sympy.Poly(pole.den.as_expr(), S, K).gcd(sympy.Poly(zero.num.as_expr(), S, K))
            for factor, multiplicity in common.factor_list()[1]:
                if factor.degree(K) > 0 or factor.degree(S) <= 0:
                    continue
                monic = sympy.Poly(factor.as_expr(), S).monic().as_expr()
                if _MENU[monic] is not None:
                    expected.add((zero_name, pole_name, monic, multiplicity, _MENU[monic]))
    found = {
        (m.zero_block, m.pole_block, m.factor.as_expr(), m.multiplicity, m.unstable)
        for m in hidden_modes(loop)
    }
    assert found == expected


# -- irreducibility shown modulo small primes ----------------------------------------------

_small = st.integers(-60, 60)
_lead = st.integers(1, 10**6)


@st.composite
def cubics_and_quartics(draw: st.DrawFn) -> list[int]:
    """Integer cubics and quartics: random ones (mostly irreducible) and products of
    smaller factors (reducible), times a random content."""
    kind = draw(st.sampled_from(["random3", "random4", "1x2", "1x3", "2x2", "1x1x2"]))
    if kind.startswith("random"):
        coeffs = [draw(_lead)] + [draw(st.integers(-(10**6), 10**6)) for _ in range(int(kind[-1]))]
    else:
        p = sympy.Poly(1, S)
        for degree in (int(d) for d in kind.split("x")):
            factor = [draw(st.integers(1, 40))] + [draw(_small) for _ in range(degree)]
            p = p * sympy.Poly(factor, S)
        coeffs = [int(c) for c in p.all_coeffs()]
    assume(coeffs[-1] != 0)  # the callers take the root 0 out first
    return [c * draw(st.sampled_from([1, -1, 6, 10**9])) for c in coeffs]


@settings(max_examples=100, deadline=None)
@given(cubics_and_quartics())
def test_irreducible_factors_of_cubics_and_quartics_against_sympy_factoring(p: list[int]) -> None:
    # Reference: sympy's factorization over the integers (factor_list, Zassenhaus).
    _, factors = sympy.Poly(p, S).factor_list()
    irreducible = len(factors) == 1 and factors[0][1] == 1
    if _proven_irreducible(p):
        assert irreducible
    expected = sorted(
        tuple(int(c) for c in (f if f.LC() > 0 else -f).all_coeffs()) for f, _ in factors
    )
    assert sorted(irreducible_factors(p)) == expected


def test_irreducibility_shown_without_factoring() -> None:
    # x^3 − 2 is irreducible (Eisenstein at 2, common practice) and has no root mod 7 (the
    # cubes mod 7 are 0, 1, 6). x^4 + 1 is irreducible but has a root or splits into
    # quadratics modulo every prime (a textbook example, e.g. Dummit and Foote, Abstract
    # Algebra, §9.4; from memory): the test cannot show it, and sympy's factoring decides.
    assert _proven_irreducible([1, 0, 0, -2])
    assert not _proven_irreducible([1, 0, 0, 0, 1])
    assert irreducible_factors([1, 0, 0, 0, 1]) == [(1, 0, 0, 0, 1)]
    assert not _proven_irreducible([1, -6, 11, -6])  # (x − 1)(x − 2)(x − 3)
    assert sorted(irreducible_factors([2, -12, 22, -12])) == [(1, -3), (1, -2), (1, -1)]


_s_factor = st.lists(
    st.fractions(min_value=-9, max_value=9, max_denominator=7), min_size=2, max_size=3
)


@settings(max_examples=100, deadline=None)
@given(st.lists(_s_factor, min_size=1, max_size=3), st.lists(_s_factor, min_size=1, max_size=3))
def test_shown_coprime_only_when_sympy_finds_no_common_factor(
    a_factors: list[list[Fraction]], b_factors: list[list[Fraction]]
) -> None:
    # Reference: sympy's gcd over Q[s]. Products of small factors share one now and then.
    # With coefficients this small the resultant of two coprime ones is far below the
    # prime, so the modular gcd shows every coprime pair too.
    def element(factors: list[list[Fraction]]) -> object:
        p = sympy.Poly(1, S, domain=sympy.QQ)
        for f in factors:
            p = p * sympy.Poly([sympy.Rational(c.numerator, c.denominator) for c in f], S)
        return _S_RING.from_dict(dict(p.as_dict(native=True)))

    a, b = element(a_factors), element(b_factors)
    assume(a and b and not a.is_ground and not b.is_ground)  # type: ignore[attr-defined]
    common = a.gcd(b)  # type: ignore[attr-defined]
    assert _shown_coprime(a, b) == common.is_ground
