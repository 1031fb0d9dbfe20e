"""Steady-state figures of one loop: system type, Kp, Kv, Ka, tracking and disturbance errors.

Definitions (common practice). The tracked error is e = r − y. With forward path L = C·G,
feedback path H and dead time T in the forward path (P = e^{−sT}), the equivalent
unity-feedback forward path is Ge = L·P/(1 + L·P·(H − 1)), so that E/R = 1/(1 + Ge). The
system type is the number of poles of Ge at s = 0, Kp = lim Ge, Kv = lim s·Ge,
Ka = lim s²·Ge (s → 0), and the final values of e for the references R/s, R/s², R/s³ are
R/(1 + Kp), R/Kv, R/Ka. They are computed here as final values of e itself,
lim s·R(s)·E(s), which agree with those formulas whenever Ge exists. An infinite constant is
reported as +oo whatever the sign of Ge near s = 0 (the matching error is 0 either way); an
unbounded error is oo.

How. Every figure is a limit at s = 0 of a ratio of two functions F = A(s) + B(s)·P(s)
(polynomials A, B in s whose coefficients are polynomials in the gain). The limit needs only
the order of F at s = 0 and its lowest coefficient, found by expanding P exactly,
P = Σ (−sT)^n/n!. No symbolic limit is taken. The expansion stops, at the latest, at order
deg A + deg B + 1: a nonzero A + B·e^{−sT} (T > 0) vanishes at s = 0 to no higher order.
Proof: multiply by e^{sT} and differentiate deg B + 1 times; B disappears and A·e^{sT} turns
into Ã·e^{sT} with deg Ã = deg A and Ã ≠ 0 (each derivative maps A to A' + T·A), whose order
at 0 is at most deg A, and differentiating q + 1 times lowers an order by at most q + 1.
Dead time matters only through B = Nc·Ng·(Nh − Dh), i.e. with a non-unity feedback path,
and only when the low-order coefficients of A + B cancel; it then changes Kv or the type.

Values at the nominal gain substitute the gain into the coefficients first and take the
limit after, so a nominal gain where a generic formula would divide by zero is exact. The
expressions in the gain (``kp_expr`` ...) are the generic ones, for display.

Gain sets are over all real K > 0; stability and the spec's limits are the caller's to
intersect. They are exact: boundaries are roots of polynomials in K, a limit met with
equality counts as met, and the finitely many gains where a lowest coefficient vanishes
(where the type or the formula changes) are decided one by one.

Reasons for an empty set (an interface; {…} is filled in, numbers to 6 significant digits):

- ``type {n} loop: the {reference} error is infinite for every gain; add an integrator``
  (``add {m} integrators`` when more are missing)
- ``type {n} loop: the {reference} error is infinite for every gain; the feedback path's DC
  gain is {h}, not 1: integrators in the loop cannot remove it``
- ``the {reference} error is {value} for every gain, more than the allowed {max}``
  (``larger in size than the allowed {max}`` when the value is negative)
- ``no gain brings the {reference} error within {max}: it is at least {bound} for every gain``
- ``Kp is 0 for every gain: the equivalent forward path has a zero at s = 0``
- ``type {n} loop: {Kv|Ka} is 0 for every gain; add an integrator`` (or ``add {m} integrators``)
- ``{Kp|Kv|Ka} is {value} for every gain, less than the required {min}``
- ``no gain makes {Kp|Kv|Ka} reach {min}: it is at most {bound} for every gain``
- ``the output deviation after a step disturbance at the plant input grows without bound
  for every gain``
- ``the output deviation after a step disturbance at the plant input is {value} for every
  gain, more than the allowed {max}`` (or ``larger in size than``, as above)
- ``no gain brings the output deviation after a step disturbance at the plant input within
  {max}: it is at least {bound} for every gain``

Tracking and constant reasons of a finite value get ``; the feedback path's DC gain is {h},
not 1`` appended when it is; a disturbance reason gets ``; an integrator in the controller
removes it`` when the controller has none.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import sympy

from speclint.analysis import realroots
from speclint.analysis.algebra import K, LoopAlgebra, S, from_terms
from speclint.analysis.gainset import (
    INF,
    ZERO,
    GainSet,
    Interval,
    Number,
    exact,
    factor_roots,
    format_number,
    irreducible_factors,
    less,
    number_less,
    real_roots,
    to_exact,
    where_sign,
)

REFERENCES = ("step", "ramp", "parabola")
CONSTANTS = ("kp", "kv", "ka")
DEGENERATE_TYPE = 3

_ORDER = {"step": 0, "ramp": 1, "parabola": 2, "kp": 0, "kv": 1, "ka": 2}
_DISPLAY = {"kp": "Kp", "kv": "Kv", "ka": "Ka"}


@dataclass(frozen=True, slots=True)
class SteadyState:
    """Steady-state figures of the equivalent unity-feedback forward path Ge.

    ``type``, ``kp``, ``kv``, ``ka`` and the unit errors are at the nominal gain (exact:
    Rational, 0 or oo); ``kp_expr``, ``kv_expr``, ``ka_expr`` are the same constants as
    expressions in the gain symbol ``algebra.K``, written when read (``generic_constants``
    holds their limits; they are shown only for a loop with a gain, and an expression costs
    more to write than the limit). The unit errors are final values of e = r − y for R = 1.
    When 1 + L·(H − 1) vanishes identically the output equals the reference exactly: Ge
    does not exist, ``type`` is reported as DEGENERATE_TYPE and every error is 0.
    """

    type: int
    kp: sympy.Expr
    kv: sympy.Expr
    ka: sympy.Expr
    step_error: sympy.Expr
    ramp_error: sympy.Expr
    parabola_error: sympy.Expr
    generic_constants: tuple[_Limit, _Limit, _Limit]

    @property
    def kp_expr(self) -> sympy.Expr:
        """Kp as an expression in the gain."""
        return _value(self.generic_constants[0])

    @property
    def kv_expr(self) -> sympy.Expr:
        """Kv as an expression in the gain."""
        return _value(self.generic_constants[1])

    @property
    def ka_expr(self) -> sympy.Expr:
        """Ka as an expression in the gain."""
        return _value(self.generic_constants[2])


# -- series at s = 0 ------------------------------------------------------------------------

# Coefficients of s^0, s^1, ... are polynomials in the gain, kept as elements of sympy's
# sparse polynomial ring: the same exact arithmetic as Poly at a fraction of the cost. They
# become Poly only where root finding needs it (gain sets).
_RING, _ = sympy.ring([K], sympy.QQ)
_Gain = Any  # an element of _RING (sympy.polys.rings.PolyElement; sympy ships no types)
_Coefficients = Sequence[_Gain]


class _Product(Sequence[Any]):
    """The coefficients of s^0, s^1, ... of a product of two polynomials in s (each given by
    its coefficients the same way), worked out only as far as they are read: a limit at
    s = 0 looks at the lowest few, and multiplying out the whole product cost more than the
    rest of the steady-state figures. Over Q[K], which has no zero divisors, the degree of
    the product is the sum of the degrees, so its length is known beforehand."""

    __slots__ = ("_known", "_left", "_length", "_right")

    def __init__(self, left: _Coefficients, right: _Coefficients) -> None:
        self._left, self._right = left, right
        self._length = len(left) + len(right) - 1 if left and right else 0
        self._known: list[_Gain] = []

    def __len__(self) -> int:
        return self._length

    def __getitem__(self, n: Any) -> Any:
        if not isinstance(n, int) or not 0 <= n < self._length:
            raise IndexError(n)
        left, right, known = self._left, self._right, self._known
        while len(known) <= n:
            m = len(known)
            total = _RING.zero
            for i in range(max(0, m - len(right) + 1), min(m, len(left) - 1) + 1):
                x = left[i]
                if x:
                    y = right[m - i]
                    if y:
                        total = total + x * y
            known.append(total)
        return known[n]


def _product(*factors: _Coefficients) -> _Coefficients:
    out = factors[0]
    for f in factors[1:]:
        out = _Product(out, f)
    return out


@dataclass(frozen=True, slots=True)
class _Quasi:
    """A(s) + B(s)·e^{−sT} (T = 0 when ``delay`` is None), coefficients polynomials in K."""

    a: _Coefficients
    b: _Coefficients
    delay: Fraction | None

    def coefficient(self, n: int, delay_terms: Sequence[Any]) -> _Gain:
        total = self.a[n] if n < len(self.a) else _RING.zero
        for i in range(min(n, len(self.b) - 1) + 1):
            weight = delay_terms[n - i] if n - i < len(delay_terms) else 0
            if weight:
                total = total + self.b[i] * weight
        return total

    def search_limit(self) -> int:
        """The order by which a nonzero coefficient must have appeared (module docstring)."""
        if self.delay and self.b:
            return len(self.a) + len(self.b) - 1
        return max(len(self.a), len(self.b)) - 1


_ZeroTest = Callable[[_Gain], bool]


def _generic_zero(p: _Gain) -> bool:
    return not p


def _qq(x: Fraction) -> Any:
    return sympy.QQ(x.numerator, x.denominator)


def _by_power(p: sympy.Poly) -> _Coefficients:
    if p.is_zero:
        return ()
    rows: list[dict[tuple[int], Any]] = [{} for _ in range(int(p.degree(S)) + 1)]
    for (i, j), c in p.as_dict(native=True).items():
        rows[i][(j,)] = c
    return tuple(_RING.from_dict(row) if row else _RING.zero for row in rows)


def _to_poly(p: _Gain) -> sympy.Poly:
    return from_terms(dict(p), (K,))


@functools.lru_cache(maxsize=64)
def _delay_terms(delay: Fraction | None, count: int) -> tuple[Any, ...]:
    one = sympy.QQ(1)
    if not delay:
        return (one,)
    minus_t = -_qq(delay)
    terms = [one]
    for n in range(1, count):
        terms.append(terms[-1] * minus_t / n)
    return tuple(terms)


_Low = tuple[int, _Gain] | None


def _lowest(f: _Quasi, is_zero: _ZeroTest, start: int = 0) -> _Low:
    """Order at s = 0 and lowest coefficient of f; None when f vanishes identically. The
    coefficients below ``start`` are known to vanish."""
    limit = f.search_limit()
    terms = _delay_terms(f.delay, limit + 1)
    for n in range(start, limit + 1):
        c = f.coefficient(n, terms)
        if not is_zero(c):
            return n, c
    if f.delay and any(not is_zero(c) for c in f.b):
        raise AssertionError("A + B·e^{-sT} vanished beyond its order bound")  # proven above
    return None


# The lowest terms are looked up many times per loop (three constants, three errors, each
# gain set and its special gains); they are found once for each quasi-polynomial of the
# loop's series (cached like the series itself, and emptied with it by forget()).


@functools.lru_cache(maxsize=256)
def _generic_low(f: _Quasi) -> _Low:
    """_lowest of f for a generic gain."""
    return _lowest(f, _generic_zero)


@functools.lru_cache(maxsize=256)
def _low_at(f: _Quasi, value: Any) -> _Low:
    """_lowest of f with the gain fixed at value (an element of QQ; None: f is free of the
    gain). Fixing the gain commutes with the sums and products that make a coefficient, so
    only the coefficients looked at are evaluated."""
    if value is None:
        return _generic_low(f)
    gain = _RING.gens[0]
    limit = f.search_limit()
    terms = _delay_terms(f.delay, limit + 1)
    for n in range(limit + 1):
        c = f.coefficient(n, terms).evaluate(gain, value)
        if c:
            return n, _RING.ground_new(c)
    if f.delay and any(c.evaluate(gain, value) for c in f.b):
        raise AssertionError("A + B·e^{-sT} vanished beyond its order bound")  # proven above
    return None


@dataclass(frozen=True, slots=True)
class _Limit:
    """lim s→0 of s^shift·F1/F2: "zero", "inf", or "ratio" a/b of two polynomials in K."""

    kind: str
    a: _Gain = _RING.zero
    b: _Gain = _RING.zero


def _limit(f1: _Quasi, f2: _Quasi, shift: int, is_zero: _ZeroTest) -> _Limit:
    low2 = _lowest(f2, is_zero)
    if low2 is None:
        return _Limit("inf")
    return _from_lows(_lowest(f1, is_zero), low2, shift)


def _generic_limit(f1: _Quasi, f2: _Quasi, shift: int) -> _Limit:
    return _from_lows(_generic_low(f1), _generic_low(f2), shift)


def _from_lows(low1: _Low, low2: _Low, shift: int) -> _Limit:
    """lim s→0 of s^shift·F1/F2 from the lowest terms of F1 and F2."""
    if low2 is None:
        return _Limit("inf")
    if low1 is None:
        return _Limit("zero")
    order = low1[0] + shift - low2[0]
    if order > 0:
        return _Limit("zero")
    if order < 0:
        return _Limit("inf")
    return _Limit("ratio", low1[1], low2[1])


@dataclass(frozen=True, slots=True)
class _Series:
    nge: _Quasi  # numerator of Ge; e^{-sT} leaves its order and lowest coefficient alone
    dge: _Quasi  # denominator of Ge
    char: _Quasi  # nge + dge: the closed loop's characteristic quasi-polynomial
    dist: _Quasi  # numerator of Y/D for a disturbance at the plant input
    feedback_num: _Quasi
    feedback_den: _Quasi
    controller_den: _Quasi


@functools.lru_cache(maxsize=64)
def _series(loop: LoopAlgebra) -> _Series:
    c, g, h = loop.controller, loop.plant, loop.feedback
    nc, dc, ng, dg, nh, dh = (_by_power(p) for p in (c.num, c.den, g.num, g.den, h.num, h.den))
    forward = _product(nc, ng)
    delay = loop.delay if loop.delay else None
    a = _product(dc, dg, dh)
    return _Series(
        nge=_Quasi(_product(forward, dh), (), None),
        dge=_Quasi(a, _product(forward, _by_power(h.num - h.den)), delay),
        char=_Quasi(a, _product(forward, nh), delay),
        dist=_Quasi(_product(ng, dc, dh), (), None),
        feedback_num=_Quasi(nh, (), None),
        feedback_den=_Quasi(dh, (), None),
        controller_den=_Quasi(dc, (), None),
    )


def _nominal_value(loop: LoopAlgebra, series: _Series) -> Any:
    """The nominal gain as an element of QQ; None for a loop without gain (its blocks must
    then be free of it)."""
    if loop.nominal is None:
        if _involves_gain(series):
            raise ValueError("the loop's blocks hold the gain but the loop has no nominal gain")
        return None
    return _qq(loop.nominal)


def _involves_gain(series: _Series) -> bool:
    quasis = (series.nge, series.dge, series.char, series.dist)
    return any(c.degree() > 0 for q in quasis for c in (*q.a, *q.b))


def _type_of(low_n: _Low, low_d: _Low) -> int:
    if low_d is None:
        return DEGENERATE_TYPE
    if low_n is None:
        return 0
    return max(0, low_d[0] - low_n[0])


def _value(limit: _Limit) -> sympy.Expr:
    """The limit as a sympy number, or an expression in K when the coefficients hold it."""
    if limit.kind == "zero":
        return ZERO
    if limit.kind == "inf":
        return INF
    if limit.a.is_ground and limit.b.is_ground:
        # A number (every limit at the nominal gain): no gcd to take, no expression to build.
        return sympy.QQ.to_sympy(limit.a.LC / limit.b.LC)
    num, den = limit.a.cancel(limit.b)
    if den.is_ground:
        if num.is_ground:
            return sympy.QQ.to_sympy(num.LC / den.LC)
        return num.as_expr() / sympy.QQ.to_sympy(den.LC)
    return num.as_expr() / den.as_expr()


# -- exact texts ----------------------------------------------------------------------------
#
# A figure in the gain is shown as sympy's str printer writes the expression _value builds
# (sympy.sstr, the form the reports have always used), but written here straight from the
# coefficients: building that expression and printing it cost about a millisecond a figure
# on a cold sympy cache, the larger part of the steady-state cost of a loop. The shapes are
# few: a polynomial over a number, or a ratio of two polynomials in lowest terms. sympy's
# rules for them, followed below: the terms of a sum by descending power, except that a
# positive constant leads a sum of two terms whose other term has a negative coefficient; a
# product shows its sign first, then the numerator's factors (number first), then "/" and
# the denominator's, in parentheses when there are several; a sum inside a product is in
# parentheses. tests/test_steady.py compares these texts with sympy.sstr on random ratios.


def constant_text(ss: SteadyState, which: str, name: str) -> str:
    """Kp, Kv or Ka (``which``: "kp", "kv", "ka") in the gain, written with the gain called
    ``name``, exactly as ``sympy.sstr`` writes the ``kp_expr``... expression ("oo" if
    infinite)."""
    if which not in CONSTANTS:
        raise ValueError(f"unknown error constant {which!r}; expected one of {CONSTANTS}")
    return limit_text(ss.generic_constants[_ORDER[which]], name)


def limit_text(limit: _Limit, name: str) -> str:
    """``sympy.sstr(_value(limit))`` with K written as ``name``, without building the
    expression."""
    if limit.kind == "zero":
        return "0"
    if limit.kind == "inf":
        return "oo"
    num, den = limit.a.cancel(limit.b)
    if den.is_ground:
        lead = den.LC
        return _sum_text([(e, c / lead) for (e,), c in num.terms()], name)
    top, coefficient = _factor_text(num.terms(), name)
    den_terms = den.terms()
    bottom, below = _factor_text(den_terms, name)
    assert bottom is not None  # a polynomial that is not a number has a factor in K
    coefficient = coefficient / below
    if coefficient == 1 and top is None and len(den_terms) == 1 and den_terms[0][0][0] > 1:
        return f"{name}**(-{den_terms[0][0][0]})"  # a lone power, not a product
    sign = "-" if coefficient < 0 else ""
    p, q = abs(int(coefficient.numerator)), int(coefficient.denominator)
    above = ([str(p)] if p != 1 else []) + ([top] if top is not None else [])
    under = ([str(q)] if q != 1 else []) + [bottom]
    text = sign + ("*".join(above) if above else "1")
    return f"{text}/{under[0]}" if len(under) == 1 else f"{text}/({'*'.join(under)})"


def _factor_text(terms: list[tuple[tuple[int], Any]], name: str) -> tuple[str | None, Any]:
    """A polynomial as a factor of a product: its text without the number in front (None
    when it is a number), and that number (1 for a sum)."""
    if len(terms) > 1:
        return f"({_sum_text([(e, c) for (e,), c in terms], name)})", sympy.QQ(1)
    ((power,), c) = terms[0]
    return (_power_text(name, power) if power else None), c


def _power_text(name: str, power: int) -> str:
    return name if power == 1 else f"{name}**{power}"


def _sum_text(terms: list[tuple[int, Any]], name: str) -> str:
    """A polynomial from its (power, non-zero coefficient) terms by descending power."""
    if not terms:
        return "0"
    if len(terms) == 2 and terms[1][0] == 0 and terms[1][1] > 0 and terms[0][1] < 0:
        terms = [terms[1], terms[0]]  # sympy writes 2 - K, not -K + 2
    texts = [_term_text(power, c, name) for power, c in terms]
    out = texts[0]
    for text in texts[1:]:
        out += f" - {text[1:]}" if text.startswith("-") else f" + {text}"
    return out


def _term_text(power: int, c: Any, name: str) -> str:
    """c·name**power (c a non-zero rational)."""
    p, q = int(c.numerator), int(c.denominator)
    if not power:
        return str(p) if q == 1 else f"{p}/{q}"
    sign = "-" if p < 0 else ""
    x = _power_text(name, power)
    text = sign + (x if abs(p) == 1 else f"{abs(p)}*{x}")
    return text if q == 1 else f"{text}/{q}"


# -- figures at the nominal gain ----------------------------------------------------------


def steady_state(loop: LoopAlgebra) -> SteadyState:
    """Type, Kp, Kv, Ka and unit errors at the nominal gain, plus Kp, Kv, Ka in the gain.

    Raises ValueError when the blocks hold the gain but the loop has no nominal value.
    """
    generic = _series(loop)
    value = _nominal_value(loop, generic)
    n, d, c = (_low_at(f, value) for f in (generic.nge, generic.dge, generic.char))
    return SteadyState(
        type=_type_of(n, d),
        kp=_value(_from_lows(n, d, 0)),
        kv=_value(_from_lows(n, d, 1)),
        ka=_value(_from_lows(n, d, 2)),
        step_error=_value(_from_lows(d, c, 0)),
        ramp_error=_value(_from_lows(d, c, -1)),
        parabola_error=_value(_from_lows(d, c, -2)),
        generic_constants=(
            _generic_limit(generic.nge, generic.dge, 0),
            _generic_limit(generic.nge, generic.dge, 1),
            _generic_limit(generic.nge, generic.dge, 2),
        ),
    )


def tracking_error(ss: SteadyState, reference: str, magnitude: Fraction) -> sympy.Expr:
    """Final value of e = r − y for a step, ramp or parabola of magnitude R (signed; 0, oo)."""
    unit = {"step": ss.step_error, "ramp": ss.ramp_error, "parabola": ss.parabola_error}
    if reference not in unit:
        raise ValueError(f"unknown reference {reference!r}; expected one of {REFERENCES}")
    return _scaled(unit[reference], magnitude)


def disturbance_error(loop: LoopAlgebra, magnitude: Fraction) -> sympy.Expr:
    """Final output deviation after a step disturbance of that size at the plant input.

    lim s→0 of G/(1 + C·G·H·e^{−sT}) times the magnitude, at the nominal gain; signed, oo
    when it grows without bound.
    """
    series = _series(loop)
    value = _nominal_value(loop, series)
    unit = _from_lows(_low_at(series.dist, value), _low_at(series.char, value), 0)
    return _scaled(_value(unit), magnitude)


def _scaled(unit: sympy.Expr, magnitude: Fraction) -> sympy.Expr:
    if magnitude == 0:
        return ZERO
    if unit is INF:
        return INF
    return unit * exact(magnitude)


# -- gain sets ------------------------------------------------------------------------------

_Test = Callable[[_Gain, _Gain], _Gain]


def tracking_gains(
    loop: LoopAlgebra, reference: str, magnitude: Fraction, max_error: Fraction
) -> GainSet:
    """Gains K > 0 where |e_ss| ≤ max_error for that reference (stability not considered)."""
    order = _reference_order(reference)
    _check_limit(max_error)
    if magnitude == 0:
        return GainSet.positive()
    r, m = _qq(magnitude), _qq(max_error)
    series = _series(loop)
    return _gain_set(
        series.dge,
        series.char,
        -order,
        lambda a, b: (b * m) ** 2 - (a * r) ** 2,
        holds_at_zero=True,
        holds_at_inf=False,
    )


def constant_gains(loop: LoopAlgebra, which: str, minimum: Fraction) -> GainSet:
    """Gains K > 0 where Kp, Kv or Ka (``which``: "kp", "kv", "ka") is ≥ minimum."""
    if which not in CONSTANTS:
        raise ValueError(f"unknown error constant {which!r}; expected one of {CONSTANTS}")
    m = _qq(minimum)
    series = _series(loop)
    return _gain_set(
        series.nge,
        series.dge,
        _ORDER[which],
        lambda a, b: (a - b * m) * b,
        holds_at_zero=minimum <= 0,
        holds_at_inf=True,
    )


def disturbance_gains(loop: LoopAlgebra, magnitude: Fraction, max_error: Fraction) -> GainSet:
    """Gains K > 0 where a step disturbance at the plant input leaves |Δy| ≤ max_error."""
    _check_limit(max_error)
    if magnitude == 0:
        return GainSet.positive()
    d, m = _qq(magnitude), _qq(max_error)
    series = _series(loop)
    return _gain_set(
        series.dist,
        series.char,
        0,
        lambda a, b: (b * m) ** 2 - (a * d) ** 2,
        holds_at_zero=True,
        holds_at_inf=False,
    )


def _reference_order(reference: str) -> int:
    if reference not in REFERENCES:
        raise ValueError(f"unknown reference {reference!r}; expected one of {REFERENCES}")
    return _ORDER[reference]


def _check_limit(max_error: Fraction) -> None:
    if max_error < 0:
        raise ValueError("a largest allowed error cannot be negative")


def _gain_set(
    f1: _Quasi,
    f2: _Quasi,
    shift: int,
    test: _Test,
    holds_at_zero: bool,
    holds_at_inf: bool,
) -> GainSet:
    """K > 0 where the limit of s^shift·F1/F2 passes: a ratio a/b passes where
    test(a, b) ≥ 0 (b ≠ 0), "zero" and "inf" per the two flags."""
    generic = _generic_limit(f1, f2, shift)
    positive = GainSet.positive()
    if generic.kind == "ratio":
        result = where_sign(_to_poly(test(generic.a, generic.b)), positive=True, closed=True)
        result = result.intersect(positive)
    else:
        holds = holds_at_zero if generic.kind == "zero" else holds_at_inf
        result = positive if holds else GainSet.empty()
    for root, factor, at in _special_gains(f1, f2):
        at_root = _limit_at_root(f1, f2, shift, _divisible_by(factor))
        if at_root.kind == "ratio":
            holds = _sign_at(test(at_root.a, at_root.b), factor, at) >= 0
        else:
            holds = holds_at_zero if at_root.kind == "zero" else holds_at_inf
        result = _with_point(result, root, holds)
    return result


def _limit_at_root(f1: _Quasi, f2: _Quasi, shift: int, is_zero: _ZeroTest) -> _Limit:
    """_limit with a zero test for one gain: the coefficients below the generic order vanish
    for every gain, so the search starts at the generic lowest term."""
    low2 = _low_from_generic(f2, is_zero)
    if low2 is None:
        return _Limit("inf")
    return _from_lows(_low_from_generic(f1, is_zero), low2, shift)


def _low_from_generic(f: _Quasi, is_zero: _ZeroTest) -> _Low:
    generic = _generic_low(f)
    if generic is None:
        return None  # f vanishes for every gain
    if not is_zero(generic[1]):
        return generic
    return _lowest(f, is_zero, generic[0] + 1)


def _special_gains(f1: _Quasi, f2: _Quasi) -> list[tuple[sympy.Expr, _Gain, Number]]:
    """Gains K > 0 where a generic lowest coefficient of F1 or F2 vanishes, each with its
    irreducible polynomial (an element of the ring) and the root in the analysis' form."""
    low2 = _generic_low(f2)
    if low2 is None:
        return []  # F2 vanishes for every gain: the limit is infinite everywhere
    special = low2[1]
    low1 = _generic_low(f1)
    if low1 is not None:
        special = special * low1[1]
    if special.degree() <= 0:
        return []
    ints = realroots.integer_coefficients(_fractions(special))
    while ints[-1] == 0:
        ints.pop()  # the root K = 0 is not a gain
    if len(ints) < 2:
        return []
    points = []
    for factor in irreducible_factors(ints):
        element = _RING.from_dict({(len(factor) - 1 - i,): c for i, c in enumerate(factor) if c})
        for root in factor_roots(factor):
            if number_less(_NO_GAIN, root):
                points.append((to_exact(root), element, root))
    return points


_NO_GAIN = Fraction(0)


def _fractions(p: _Gain) -> list[Fraction]:
    """Coefficients of a polynomial in K, highest power first."""
    terms = dict(p)
    top = max(e for (e,) in terms)
    return [_fraction(terms.get((e,), 0)) for e in range(top, -1, -1)]


def _fraction(c: Any) -> Fraction:
    return Fraction(int(c.numerator), int(c.denominator))


def _divisible_by(factor: _Gain) -> _ZeroTest:
    # factor is irreducible over Q, so p(root) = 0 exactly when factor divides p.
    if factor.degree() == 1:
        # A rational root: evaluating there is a third of the cost of a division.
        gain = _RING.gens[0]
        root = -factor.coeff(1) / factor.coeff(gain)
        return lambda p: not p.evaluate(gain, root)
    return lambda p: not p % factor


def _sign_at(gain_poly: _Gain, factor: _Gain, root: Number) -> int:
    """Exact sign of a polynomial at a real root of the irreducible ``factor``."""
    if not gain_poly or not gain_poly % factor:
        return 0
    p = realroots.integer_coefficients(_fractions(gain_poly))  # a positive multiple
    if isinstance(root, Fraction):
        return realroots.value_sign(p, root)
    # p(root) ≠ 0: once the root's isolating interval has parted from every real root of p
    # (each comparison narrows it until they part), p keeps one sign on that interval.
    for other in real_roots([Fraction(c) for c in p]):
        number_less(root, other)
    return realroots.value_sign(p, (root.lo + root.hi) / 2)


def _with_point(gains: GainSet, point: sympy.Expr, present: bool) -> GainSet:
    pieces: list[Interval] = []
    for iv in gains.intervals:
        if iv.contains(point):
            pieces.append(Interval(iv.lo, point, iv.lo_closed, False))
            pieces.append(Interval(point, iv.hi, False, iv.hi_closed))
        else:
            pieces.append(iv)
    if present:
        pieces.append(Interval(point, point, True, True))
    return GainSet.of(pieces)


# -- reasons --------------------------------------------------------------------------------


def why_tracking_unreachable(
    loop: LoopAlgebra, reference: str, magnitude: Fraction, max_error: Fraction
) -> str | None:
    """Why no gain K > 0 meets the tracking limit (stability aside); None when some does."""
    if not tracking_gains(loop, reference, magnitude, max_error).is_empty():
        return None
    order = _reference_order(reference)
    series = _series(loop)
    generic = _generic_limit(series.dge, series.char, -order)
    h0 = _feedback_dc_gain(series)
    if generic.kind == "ratio":
        value = _ratio(generic) * exact(magnitude)
        return _too_large(f"the {reference} error", value, max_error) + _h_note(h0)
    loop_type = _type_of(_generic_low(series.nge), _generic_low(series.dge))
    reason = f"type {loop_type} loop: the {reference} error is infinite for every gain"
    if h0 is not None and h0 != 1:
        return (
            f"{reason}; the feedback path's DC gain is {format_number(h0)}, not 1: "
            "integrators in the loop cannot remove it"
        )
    return reason + _integrators(order - loop_type)


def why_constant_unreachable(loop: LoopAlgebra, which: str, minimum: Fraction) -> str | None:
    """Why no gain K > 0 gives Kp, Kv or Ka ≥ minimum; None when some gain does."""
    if not constant_gains(loop, which, minimum).is_empty():
        return None
    series = _series(loop)
    name = _DISPLAY[which]
    generic = _generic_limit(series.nge, series.dge, _ORDER[which])
    if generic.kind == "ratio":
        return _too_small(name, _ratio(generic), minimum) + _h_note(_feedback_dc_gain(series))
    if which == "kp":
        return "Kp is 0 for every gain: the equivalent forward path has a zero at s = 0"
    loop_type = _type_of(_generic_low(series.nge), _generic_low(series.dge))
    reason = f"type {loop_type} loop: {name} is 0 for every gain"
    return reason + _integrators(_ORDER[which] - loop_type)


def why_disturbance_unreachable(
    loop: LoopAlgebra, magnitude: Fraction, max_error: Fraction
) -> str | None:
    """Why no gain K > 0 keeps the step-disturbance deviation within the limit; None if one does."""
    if not disturbance_gains(loop, magnitude, max_error).is_empty():
        return None
    series = _series(loop)
    generic = _generic_limit(series.dist, series.char, 0)
    if generic.kind != "ratio":
        return (
            "the output deviation after a step disturbance at the plant input grows without "
            "bound for every gain"
        )
    value = _ratio(generic) * exact(magnitude)
    what = "the output deviation after a step disturbance at the plant input"
    reason = _too_large(what, value, max_error)
    controller_poles = _lowest(series.controller_den, _generic_zero)
    if controller_poles is None or controller_poles[0] == 0:
        reason += "; an integrator in the controller removes it"
    return reason


def _ratio(limit: _Limit) -> sympy.Expr:
    return _value(limit)


def _too_large(what: str, value: sympy.Expr, limit: Fraction) -> str:
    shown = format_number(exact(limit))
    if not value.free_symbols:
        size = "more than" if value > 0 else "larger in size than"
        return f"{what} is {format_number(value)} for every gain, {size} the allowed {shown}"
    bound = format_number(_extreme(value, upper=False))
    return f"no gain brings {what} within {shown}: it is at least {bound} for every gain"


def _too_small(name: str, value: sympy.Expr, minimum: Fraction) -> str:
    shown = format_number(exact(minimum))
    if not value.free_symbols:
        return f"{name} is {format_number(value)} for every gain, less than the required {shown}"
    bound = format_number(_extreme(value, upper=True))
    return f"no gain makes {name} reach {shown}: it is at most {bound} for every gain"


def _integrators(missing: int) -> str:
    if missing <= 0:
        return ""
    return "; add an integrator" if missing == 1 else f"; add {missing} integrators"


def _h_note(h0: sympy.Expr | None) -> str:
    if h0 is None or h0 == 1:
        return ""
    return f"; the feedback path's DC gain is {format_number(h0)}, not 1"


def _feedback_dc_gain(series: _Series) -> sympy.Expr | None:
    """H(0) when it is a finite number free of the gain, else None."""
    limit = _limit(series.feedback_num, series.feedback_den, 0, _generic_zero)
    value = _value(limit)
    if value is INF or value.free_symbols:
        return None
    return value


def _extreme(value: sympy.Expr, upper: bool) -> sympy.Expr:
    """For display: sup of value(K) (upper) or inf of |value(K)| over K > 0.

    Candidates are the limits at 0+ and ∞ and the values at stationary points and zeros;
    stationary points that are irrational enter as 20-digit floats (display only).
    """
    num_expr, den_expr = sympy.fraction(sympy.cancel(value))
    num = sympy.Poly(num_expr, K, domain=sympy.QQ)
    den = sympy.Poly(den_expr, K, domain=sympy.QQ)
    candidates = [_end_value(num, den, at_zero=True), _end_value(num, den, at_zero=False)]
    stationary = num.diff(K) * den - num * den.diff(K)
    for p in (stationary, num):
        if p.degree() <= 0:
            continue
        for root in p.real_roots():
            if less(ZERO, root) and den.eval(root) != 0:
                candidates.append(sympy.Float((num_expr / den_expr).subs(K, root).evalf(20), 20))
    if upper:
        return max(candidates, key=_float_key)
    return min((abs(c) for c in candidates), key=_float_key)


def _end_value(num: sympy.Poly, den: sympy.Poly, at_zero: bool) -> sympy.Expr:
    if at_zero:
        n_order = min(m[0] for m in num.monoms())
        d_order = min(m[0] for m in den.monoms())
        n_lead, d_lead = num.nth(n_order), den.nth(d_order)
        # value ~ (n_lead/d_lead)·K^(n_order − d_order) as K → 0+
        gap = d_order - n_order
    else:
        n_lead, d_lead = num.LC(), den.LC()
        gap = num.degree() - den.degree()
    ratio = sympy.Rational(n_lead) / sympy.Rational(d_lead)
    if gap == 0:
        return ratio
    if gap < 0:
        return ZERO
    return INF if ratio > 0 else -INF


def _float_key(x: sympy.Expr) -> float:
    if x is INF:
        return float("inf")
    if x == -INF:
        return float("-inf")
    return float(x)
