"""Sets of gain values: finite unions of intervals whose ends are exact real numbers.

Every set the analysis computes (the stable gains, the gains where a requirement holds,
their intersections) is one of these. Ends are exact sympy numbers: rationals, real
algebraic numbers (``CRootOf``, a root of a polynomial with rational coefficients), or
``sympy.oo``. Comparisons between them are exact: sympy refines the isolating interval of
an algebraic number until the order is decided, and two different algebraic numbers are
never equal, so "an error exactly equal to its maximum" is decidable.

Floating point enters only in :meth:`GainSet.as_floats` and :func:`describe`, for
display; they round to 15 significant digits (a double's faithful range).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass
from fractions import Fraction
from itertools import pairwise
from typing import TypeAlias

import sympy

Exact: TypeAlias = sympy.Expr  # Rational, CRootOf, or +/-oo

ZERO = sympy.Integer(0)
INF = sympy.oo


def exact(x: Fraction | int | sympy.Expr) -> Exact:
    """Turn a Fraction or int into a sympy Rational; leave sympy numbers alone."""
    if isinstance(x, Fraction):
        return sympy.Rational(x.numerator, x.denominator)
    if isinstance(x, int):
        return sympy.Integer(x)
    return x


def less(a: Exact, b: Exact) -> bool:
    """Exact a < b for the numbers a gain set holds."""
    if a == b:
        return False
    if a is INF or b == -INF:
        return False
    if b is INF or a == -INF:
        return True
    if a.is_Rational and b.is_Rational:
        return bool(a < b)
    decided = _compare_by_intervals(a, b)
    return bool(a < b) if decided is None else decided


# sympy decides `a < b` for real algebraic numbers by evaluating both to growing precision;
# narrowing their isolating intervals until they part decides it exactly, far faster.
_MAX_REFINEMENTS = 200


def _enclosure(x: Exact) -> tuple[Fraction, Fraction] | None:
    if x.is_Rational:
        q = Fraction(int(x.p), int(x.q))
        return q, q
    if x.is_Float:
        q = Fraction(float(x)) if x._prec <= 53 else Fraction(str(sympy.Rational(x)))
        return q, q
    if isinstance(x, sympy.CRootOf) and x.is_real:
        iv = x._get_interval()
        return Fraction(int(iv.a.numerator), int(iv.a.denominator)), Fraction(
            int(iv.b.numerator), int(iv.b.denominator)
        )
    return None


def _narrow(x: Exact) -> None:
    x._set_interval(x._get_interval().refine())


def _rational_between_enclosures(a: Exact, b: Exact) -> sympy.Rational | None:
    """A rational strictly between a < b: the middle of the gap between their isolating
    intervals once they part; None when either is not a number _enclosure handles."""
    for _ in range(_MAX_REFINEMENTS):
        ea, eb = _enclosure(a), _enclosure(b)
        if ea is None or eb is None:
            return None
        if ea[1] < eb[0]:
            mid = (ea[1] + eb[0]) / 2
            return sympy.Rational(mid.numerator, mid.denominator)
        wide = a if (ea[1] - ea[0]) >= (eb[1] - eb[0]) else b
        if wide.is_Rational or wide.is_Float:
            wide = b if wide is a else a
        if wide.is_Rational or wide.is_Float:
            return None
        _narrow(wide)
    return None


def _compare_by_intervals(a: Exact, b: Exact) -> bool | None:
    """a < b from isolating intervals; None when either is not a number this handles.
    a ≠ b: two different real algebraic numbers always part after enough refinement."""
    for _ in range(_MAX_REFINEMENTS):
        ea, eb = _enclosure(a), _enclosure(b)
        if ea is None or eb is None:
            return None
        if ea[1] < eb[0]:
            return True
        if eb[1] < ea[0]:
            return False
        wide = a if (ea[1] - ea[0]) >= (eb[1] - eb[0]) else b
        if ea[0] == ea[1] and eb[0] == eb[1]:
            return ea[0] < eb[0]
        if wide.is_Rational or wide.is_Float:
            wide = b if wide is a else a
        _narrow(wide)
    return None


def rational_between(a: Exact, b: Exact) -> sympy.Rational:
    """A rational strictly between a < b (either may be infinite)."""
    if a == -INF and b is INF:
        return sympy.Integer(0)
    if a == -INF:
        return sympy.floor(b) - 1 if b.is_Rational else sympy.floor(b.evalf(30)) - 1
    if b is INF:
        return sympy.floor(a) + 1 if a.is_Rational else sympy.floor(a.evalf(30)) + 1
    if a.is_Rational and b.is_Rational:
        return (a + b) / 2
    parted = _rational_between_enclosures(a, b)
    if parted is not None:
        return parted
    digits = 20
    while True:
        fa, fb = a.evalf(digits), b.evalf(digits)
        mid = sympy.Rational(str((fa + fb) / 2))
        if less(a, mid) and less(mid, b):
            return mid
        digits *= 2  # the two ends are closer than this precision resolves


@dataclass(frozen=True, slots=True)
class Interval:
    """An interval of gains; an end is in it only when marked closed (never at infinity)."""

    lo: Exact
    hi: Exact
    lo_closed: bool = False
    hi_closed: bool = False

    def contains(self, x: Exact) -> bool:
        x = exact(x)
        above = less(self.lo, x) or (self.lo_closed and x == self.lo)
        below = less(x, self.hi) or (self.hi_closed and x == self.hi)
        return above and below

    def is_empty(self) -> bool:
        if less(self.lo, self.hi):
            return False
        return not (self.lo == self.hi and self.lo_closed and self.hi_closed)


@dataclass(frozen=True, slots=True)
class GainSet:
    """A finite union of disjoint intervals, sorted by their lower ends."""

    intervals: tuple[Interval, ...] = ()

    @staticmethod
    def empty() -> GainSet:
        return GainSet(())

    @staticmethod
    def positive() -> GainSet:
        """All gains in (0, ∞): the set every analysis starts from."""
        return GainSet((Interval(ZERO, INF),))

    @staticmethod
    def between(
        lo: Fraction | Exact | None,
        hi: Fraction | Exact | None,
        closed: bool = True,
    ) -> GainSet:
        """The gains a loop's `limits` allow; a missing end is unbounded."""
        lo_e = -INF if lo is None else exact(lo)
        hi_e = INF if hi is None else exact(hi)
        iv = Interval(lo_e, hi_e, closed and lo is not None, closed and hi is not None)
        return GainSet(() if iv.is_empty() else (iv,))

    @staticmethod
    def of(intervals: Iterable[Interval]) -> GainSet:
        """Normalise: drop empty pieces, sort, and merge pieces that touch or overlap."""
        pieces = sorted(
            (iv for iv in intervals if not iv.is_empty()),
            key=lambda iv: (_SortKey(iv.lo), not iv.lo_closed),
        )
        merged: list[Interval] = []
        for iv in pieces:
            if merged:
                last = merged[-1]
                touches = less(iv.lo, last.hi) or (
                    iv.lo == last.hi and (iv.lo_closed or last.hi_closed)
                )
                if touches:
                    if less(last.hi, iv.hi):
                        hi, hi_closed = iv.hi, iv.hi_closed
                    elif last.hi == iv.hi:
                        hi, hi_closed = last.hi, last.hi_closed or iv.hi_closed
                    else:
                        hi, hi_closed = last.hi, last.hi_closed
                    merged[-1] = Interval(last.lo, hi, last.lo_closed, hi_closed)
                    continue
            merged.append(iv)
        return GainSet(tuple(merged))

    def is_empty(self) -> bool:
        return not self.intervals

    def contains(self, x: Fraction | Exact) -> bool:
        return any(iv.contains(x) for iv in self.intervals)

    def intersect(self, other: GainSet) -> GainSet:
        out: list[Interval] = []
        for a in self.intervals:
            for b in other.intervals:
                lo, lo_closed = _max_end(a.lo, a.lo_closed, b.lo, b.lo_closed)
                hi, hi_closed = _min_end(a.hi, a.hi_closed, b.hi, b.hi_closed)
                iv = Interval(lo, hi, lo_closed, hi_closed)
                if not iv.is_empty():
                    out.append(iv)
        return GainSet.of(out)

    def union(self, other: GainSet) -> GainSet:
        return GainSet.of(self.intervals + other.intervals)

    def as_floats(self) -> list[list[float]]:
        """Interval ends as floats (15 significant digits; infinity as float inf)."""
        return [[to_float(iv.lo), to_float(iv.hi)] for iv in self.intervals]

    def describe(self, symbol: str = "K", show: Callable[[Exact], str] | None = None) -> str:
        """The set as an engineer writes it: '0 < K < 6', '2 ≤ K < 6 or K > 9', 'no gain'.

        Ends are written by ``show`` (default: :func:`format_number`, 6 digits).
        """
        if not self.intervals:
            return "no gain"
        written = show or format_number
        return " or ".join(_describe_interval(iv, symbol, written) for iv in self.intervals)


class _SortKey:
    """Orders exact ends for sorted(); sympy numbers do not sort on their own."""

    __slots__ = ("value",)

    def __init__(self, value: Exact) -> None:
        self.value = value

    def __lt__(self, other: _SortKey) -> bool:
        return less(self.value, other.value)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, _SortKey) and self.value == other.value

    __hash__ = None  # type: ignore[assignment]


def _max_end(a: Exact, ac: bool, b: Exact, bc: bool) -> tuple[Exact, bool]:
    if a == b:
        return a, ac and bc
    return (b, bc) if less(a, b) else (a, ac)


def _min_end(a: Exact, ac: bool, b: Exact, bc: bool) -> tuple[Exact, bool]:
    if a == b:
        return a, ac and bc
    return (a, ac) if less(a, b) else (b, bc)


def to_float(x: Exact) -> float:
    if x is INF:
        return float("inf")
    if x == -INF:
        return float("-inf")
    return float(sympy.Float(x.evalf(17), 15))


def format_number(x: Exact, digits: int = 6) -> str:
    """A short decimal for display: 6 significant digits, exact integers as integers."""
    if x is INF:
        return "∞"
    if x.is_Integer:
        return str(int(x))
    return f"{to_float(x):.{digits}g}"


def _describe_interval(iv: Interval, symbol: str, show: Callable[[Exact], str]) -> str:
    lo, hi = iv.lo, iv.hi
    if lo == hi:
        return f"{symbol} = {show(lo)}"
    lo_op = "≤" if iv.lo_closed else "<"
    hi_op = "≤" if iv.hi_closed else "<"
    if hi is INF:
        if lo == -INF:
            return f"any {symbol}"
        return f"{symbol} {'≥' if iv.lo_closed else '>'} {show(lo)}"
    if lo == -INF:
        return f"{symbol} {hi_op} {show(hi)}"
    return f"{show(lo)} {lo_op} {symbol} {hi_op} {show(hi)}"


def where_sign(poly: sympy.Poly, positive: bool, closed: bool) -> GainSet:
    """Exact set of real k where poly(k) > 0 (or < 0 when not `positive`), with the roots
    themselves included when `closed`. `poly` is univariate with rational coefficients."""
    if poly.is_zero:
        return GainSet.of([Interval(-INF, INF)]) if closed else GainSet.empty()
    roots = _distinct_real_roots(poly)
    ends = [-INF, *roots, INF]
    pieces: list[Interval] = []
    for lo, hi in pairwise(ends):
        value = poly.eval(rational_between(lo, hi))
        if (value > 0) == positive:
            pieces.append(Interval(lo, hi, closed and lo != -INF, closed and hi is not INF))
    if closed:
        pieces.extend(Interval(r, r, True, True) for r in roots)
    return GainSet.of(pieces)


def _distinct_real_roots(poly: sympy.Poly) -> list[Exact]:
    """Distinct real roots, sorted, exact (rational roots come out as Rationals)."""
    roots: list[Exact] = []
    for r in poly.real_roots(multiple=True):
        if not roots or roots[-1] != r:
            roots.append(r)
    return roots
