"""Stability margins of one loop, its stable gains with dead time, and margin criteria as gain sets.

The loop is broken at the summing junction: L(s) = C·G·H·e^{-sT} with C, G, H the blocks as
written (:func:`speclint.analysis.algebra.loop_transfer`) and T = ``loop.delay``. Frequencies
are in rad/s, margins in dB and degrees, times in seconds.

Conventions (they follow the JSON contract in DESIGN.md; python-control's ``stability_margins``
picks its governing crossovers the same way):

* A *gain crossover* is a frequency ω ≥ 0 with |L(jω)| = 1; a *phase crossover* is a frequency
  ω ≥ 0 where L(jω) is finite, non-zero, real and negative (phase -180° modulo 360°). ω = 0 is
  a phase crossover when L(0) is finite and negative, and a gain crossover when |L(0)| = 1.
* Gain margin: -20·log10|L(jω)| at the phase crossover whose |L| lies closest to 1 (smallest
  |dB|; the lower frequency on a tie). Positive: the gain may grow by that much; negative: it
  may only fall by that much (conditionally stable or open-loop unstable loops). No phase
  crossover: infinite. L(jω) real and negative over a whole band (a double integrator, an
  undamped even loop): undefined (None), since every frequency of the band is a "crossover".
* Phase margin: at every gain crossover, 180° + ∠L(jω) wrapped into (-180°, 180°]; the
  governing one is the smallest in magnitude (the crossover closest in angle to the critical
  point -1), the lower frequency on a tie. It is signed: with several gain crossovers a stable
  loop can have a negative governing margin. No gain crossover: infinite. |L(jω)| = 1 at every
  frequency (an all-pass loop): None.
* Delay margin: the smallest extra dead time that puts L(jω)·e^{-jωτ} through -1, over all gain
  crossovers ω > 0: τ = ((phase margin) mod 360°, in radians) / ω. Dead time cannot move ω = 0.
  A biproper loop with |L(∞)| ≥ 1 tolerates no added dead time at all: 0 (the closed loop then
  has infinitely many roots near the imaginary axis). No gain crossover: infinite. For a loop
  that is stable this is exactly the delay at which it first becomes unstable.
* Sensitivity peak: sup over ω ≥ 0 of |1/(1 + L(jω))|, limits at 0 and ∞ included; its
  frequency is 0.0 or ``inf`` when the peak is such a limit, ``inf`` (with an infinite peak)
  when a closed-loop pole lies on the imaginary axis.
* Margins never decide stability. A loop that is unstable in open loop, or whose blocks cancel
  a right-half-plane pole, carries a note saying so; the closed-loop verdict comes from the
  stable gain set (Routh-Hurwitz without dead time, :func:`stable_gains_delayed` with it).

Margin criteria (:func:`margin_gains`) are read as robustness bands around the gain: a
minimum gain margin of m dB holds where no phase crossover puts the loop within m dB of a
critical gain, i.e. |gain margin| ≥ m; a minimum phase margin of m degrees holds where every
gain crossover keeps at least m degrees from -180°, i.e. |phase margin| ≥ m. Whether the loop
is stable there is a separate question: the feasibility logic intersects these sets with the
stable gain set (``admissible_gains``), and so must any other caller.

Accuracy. Without dead time, gain and phase crossovers and the sensitivity peak's stationary
points are real roots of polynomials with rational coefficients, isolated exactly (integer
arithmetic in :mod:`speclint.analysis.realroots`, sympy where that search gives up) and
refined to a rational within 1e-20 (relative) of the root; |L|, the phase and |S| are then
evaluated exactly at that rational and rounded once, so reported frequencies and margins are
correct to double precision (relative error below 1e-13; a float polynomial evaluation would
lose most digits next to a lightly damped pole). With dead time, gain crossovers stay exact;
the unwrapped phase ψ(ω) = ∠L0(jω) - ωT is split exactly into monotone pieces (the zeros of
dψ/dω are roots of a polynomial with rational coefficients, because T is rational), so every
phase crossover is bracketed once and only once, then refined by scipy's ``brentq`` on a
double-precision ψ (frequency relative error about 1e-14 times the conditioning of N and D
there; phases within 1e-9 rad of a level at a stationary point count as touching it). The
sensitivity peak with dead time is a maximum over a grid (200 points per decade, 32 per
period of e^{-jωT}, 17 across every lightly damped pole or zero) refined by ``brentq`` on
the exact derivative: the peak is accurate to about 1e-12 relative, but a resonance narrower
than the grid spacing could be missed; past the grid, |L| is bounded exactly so that nothing
there can exceed the peak found. Gain-set ends are sympy ``Float``s (15 digits): about 1e-12
relative, 1e-7 where an end comes from a tangency (a double root), about 1e-10 for
sensitivity-peak ends with dead time (a bounded Brent search). A float end is always open:
within that accuracy the end itself is undecided.
"""

from __future__ import annotations

import bisect
import cmath
import dataclasses
import functools
import itertools
import math
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache
from typing import ParamSpec, TypeVar

import numpy as np
import numpy.typing as npt
import sympy
from sympy.external.pythonmpq import PythonMPQ

from speclint.analysis import realroots
from speclint.analysis.algebra import K, LoopAlgebra, S, at_gain, loop_transfer
from speclint.analysis.gainset import INF, GainSet, Interval

W = sympy.Symbol("w")  # the angular frequency ω
X = sympy.Symbol("x")  # ω², where every even polynomial in ω lives

FloatArray = npt.NDArray[np.float64]
_P = ParamSpec("_P")
_T = TypeVar("_T")

_TWO_PI = 2.0 * math.pi
# Two phases closer than this (radians) count as equal: far below the 1e-13 rad the
# evaluation achieves near a regular point, far above it at a stationary point (tangency).
_PHASE_TOL = 1e-9
_LIST_FLOOR = 0.1  # dead time: phase crossovers are listed down to |L| = this (-20 dB)
_MAX_HITS = 20_000  # a guard: no real loop needs this many phase crossovers
_MAX_GRID = 400_000  # a guard on the sensitivity grid with dead time


class MarginsUnsupported(ValueError):
    """The loop's form is outside what this analysis handles; the message says why."""


_OUT_OF_RANGE = (
    "the loop's coefficients, dead time or frequencies span more than double precision "
    "can resolve; rescale the model (units) or drop negligible terms"
)
# The frequency analysis works in double precision (about 1e±308): coefficients and the dead
# time must each be representable, and their ratios must leave room for the powers of ω that
# an evaluation forms. Beyond this span a phase or magnitude is rounding noise.
_FLOAT_SPAN = 1e150
# The same bounds as exact rationals: a Fraction compares with a float by converting the
# float exactly, so comparing with these gives the same answers without converting each time.
_SPAN_EXACT = Fraction(_FLOAT_SPAN)
_SPAN_INVERSE_EXACT = Fraction(1 / _FLOAT_SPAN)


@dataclass(frozen=True, slots=True)
class Margins:
    """Margins of a loop at one gain; floats in rad/s, dB, degrees, seconds (see module doc)."""

    gain_margin: float | None  # absolute, 1/|L|; inf: no phase crossover; None: undefined
    gain_margin_db: float | None
    phase_margin_deg: float | None  # governing, in (-180, 180]; inf: no gain crossover
    gain_crossovers: tuple[float, ...]  # all, ascending
    phase_crossovers: tuple[float, ...]  # all without dead time; with it, see the notes
    gain_crossover_rad_s: float | None  # where the governing phase margin is
    phase_crossover_rad_s: float | None  # where the governing gain margin is (inf: a limit)
    delay_margin_s: float | None  # inf: no gain crossover; None: undefined (all-pass)
    sensitivity_peak: float  # sup |1/(1 + L)|, inf when unbounded
    sensitivity_peak_rad_s: float  # 0.0 or inf when the peak is a limit
    notes: tuple[str, ...]


@dataclass(frozen=True, slots=True)
class DelayedStability:
    """Stable gains of a loop with dead time; ``gains`` is None when ``unsupported`` says why."""

    gains: GainSet | None
    unsupported: str | None
    notes: tuple[str, ...]


# --------------------------------------------------------------------------------------------
# Exact polynomial helpers


def _poly_s(terms: dict[tuple[int, ...], sympy.Rational]) -> sympy.Poly:
    if not terms:
        return sympy.Poly.from_dict({(0,): 0}, S, domain=sympy.QQ)
    # The dense rational list directly: the same Poly as Poly.from_dict builds (equal,
    # same hash), without its options processing and conversions (~0.15 ms a call).
    from sympy.polys.polyclasses import DMP

    qq = sympy.QQ
    n = max(i for (i,) in terms)
    coeffs = [qq.zero] * (n + 1)
    for (i,), c in terms.items():
        coeffs[n - i] = qq(int(c.p), int(c.q))
    start = 0
    while start < n and not coeffs[start]:
        start += 1
    return sympy.Poly.new(DMP.from_list(coeffs[start:], 0, qq), S)


def _jw_parts(p: sympy.Poly) -> tuple[sympy.Poly, sympy.Poly]:
    """p(jω) = A(ω) + j·B(ω) with A, B real polynomials in ω."""
    re: dict[tuple[int, ...], sympy.Rational] = {}
    im: dict[tuple[int, ...], sympy.Rational] = {}
    for (n,), c in p.terms():
        sign = 1 if n % 4 in (0, 1) else -1
        target = re if n % 2 == 0 else im
        target[(n,)] = target.get((n,), 0) + sign * c
    return (
        sympy.Poly.from_dict(re or {(0,): 0}, W, domain=sympy.QQ),
        sympy.Poly.from_dict(im or {(0,): 0}, W, domain=sympy.QQ),
    )


def _even_in_x(p: sympy.Poly) -> sympy.Poly:
    """An even polynomial in ω as a polynomial in x = ω²."""
    terms = {(n // 2,): c for (n,), c in p.terms() if c != 0}
    assert all(n % 2 == 0 for (n,), c in p.terms() if c != 0)
    return sympy.Poly.from_dict(terms or {(0,): 0}, X, domain=sympy.QQ)


def _root_value(p: sympy.Poly, a: sympy.Rational, b: sympy.Rational) -> sympy.Rational:
    """p's root isolated in [a, b], as the midpoint of its interval narrowed to relative
    width 1e-20: a rational, so values at the root can be computed exactly from it."""
    a, b = sympy.Rational(a), sympy.Rational(b)
    scale = max(abs(a), abs(b))
    if scale != 0 and a != b:
        # Refinement counts roots with multiplicity: work on the square-free part.
        p = p.sqf_part()
        a, b = (sympy.Rational(v) for v in p.refine_root(a, b, eps=scale / 10**20))
    return (a + b) / 2


def _ints(p: sympy.Poly) -> list[int]:
    """p's coefficients (rational, highest power first) scaled to coprime integers."""
    return realroots.integer_coefficients([_fraction(c) for c in p.rep.to_list()])


def _rational(x: Fraction) -> sympy.Rational:
    return sympy.Rational(x.numerator, x.denominator)


def _fraction(x: sympy.Rational | PythonMPQ) -> Fraction:
    return Fraction(int(x.numerator), int(x.denominator))


def _nonneg_roots_x(p: sympy.Poly, *, include_zero: bool) -> list[Fraction]:
    """Distinct real roots x ≥ 0 (x > 0 unless `include_zero`) of p, sorted, each as a
    rational within 1e-20 (relative) of the root."""
    if p.is_zero or p.degree() <= 0:
        return []
    fast = realroots.positive_roots(_ints(p), include_zero)
    if fast is not None:
        return fast
    return _slow_nonneg_roots(p, include_zero)


def _roots_x(p: Sequence[int], *, include_zero: bool) -> list[Fraction]:
    """The same for an integer polynomial (highest power first, no leading zero)."""
    if len(p) <= 1:
        return []
    fast = realroots.positive_roots(p, include_zero)
    if fast is not None:
        return fast
    return _slow_nonneg_roots(sympy.Poly(list(p), X, domain=sympy.QQ), include_zero)


def _slow_nonneg_roots(p: sympy.Poly, include_zero: bool) -> list[Fraction]:
    """_nonneg_roots_x by sympy's own isolation, where the fast search gave up."""
    out: list[sympy.Rational] = []
    for (a, b), _mult in p.intervals():
        if a == b == 0:
            if include_zero:
                out.append(sympy.Integer(0))
            continue
        # Isolating intervals of non-zero roots do not contain 0 (it would be the root).
        if b <= 0 or (a < 0 and p.eval(0) != 0 and _root_value(p, a, b) < 0):
            continue
        out.append(_root_value(p, a, b))
    return [_fraction(x) for x in sorted(set(out))]


# Integer polynomials for the work done once per sample gain (a gain set is decided at many):
# the same exact values and roots as sympy's rational polynomials, at a fraction of the cost
# of building and combining ``Poly`` objects for every sample.


@dataclass(frozen=True, slots=True)
class _IntPoly:
    """scale·(coeffs[0]·x^n + ... + coeffs[n]): coprime integers, highest power first, the
    first non-zero (an empty tuple: the zero polynomial), and a non-zero rational scale."""

    coeffs: tuple[int, ...]
    scale: Fraction

    @property
    def degree(self) -> int:
        return len(self.coeffs) - 1  # -1: the zero polynomial

    def at(self, x: Fraction) -> Fraction:
        """The exact value at x."""
        if not self.coeffs:
            return Fraction(0)
        num, den = x.numerator, x.denominator
        acc, power = self.coeffs[0], 1
        for c in self.coeffs[1:]:
            power *= den
            acc = acc * num + c * power
        return self.scale * Fraction(acc, power)

    def parts_at(self, x: Fraction) -> tuple[int, int]:
        """(n, d), d > 0, with n/d the exact value at x, unreduced: a float of it is
        n / d (int division rounds correctly, as float() of the Fraction does), without
        the gcds a Fraction takes of these large integers."""
        if not self.coeffs:
            return 0, 1
        num, den = x.numerator, x.denominator
        acc, power = self.coeffs[0], 1
        for c in self.coeffs[1:]:
            power *= den
            acc = acc * num + c * power
        return self.scale.numerator * acc, self.scale.denominator * power

    def lead(self) -> Fraction:
        return self.scale * self.coeffs[0]


def _int_poly(p: sympy.Poly) -> _IntPoly:
    coeffs = [_fraction(c) for c in p.rep.to_list()]
    if not coeffs:
        return _IntPoly((), Fraction(1))
    ints = realroots.integer_coefficients(coeffs)
    return _IntPoly(tuple(ints), coeffs[0] / ints[0])


def _scaled(coeffs: Sequence[int], factor: Fraction) -> _IntPoly:
    """factor·coeffs as an _IntPoly whose scale is positive (the sign kept in coeffs)."""
    prim = _primitive(coeffs)
    if not prim.coeffs:
        return prim
    if factor < 0:
        return _IntPoly(tuple(-c for c in prim.coeffs), -factor * prim.scale)
    return _IntPoly(prim.coeffs, factor * prim.scale)


def _poly_x(p: _IntPoly) -> sympy.Poly:
    """p as a sympy polynomial in x over the rationals."""
    n = p.degree
    terms = {
        (n - i,): sympy.Rational(c * p.scale.numerator, p.scale.denominator)
        for i, c in enumerate(p.coeffs)
        if c
    }
    return sympy.Poly.from_dict(terms or {(0,): 0}, X, domain=sympy.QQ)


def _jw_split(coeffs: Sequence[int]) -> tuple[list[int], list[int]]:
    """p(jω) = A(ω) + j·B(ω) for p with integer coefficients (highest power first); A and B
    lowest power first."""
    re: list[int] = []
    im: list[int] = []
    for k, c in enumerate(reversed(coeffs)):
        sign = 1 if k % 4 in (0, 1) else -1
        re.append(sign * c if k % 2 == 0 else 0)
        im.append(sign * c if k % 2 == 1 else 0)
    return re, im


def _plus(a: Sequence[int], b: Sequence[int]) -> list[int]:
    return [x + y for x, y in zip(a, b, strict=True)]


def _primitive(coeffs: Sequence[int], den: int = 1) -> _IntPoly:
    """(coeffs/den) as an _IntPoly: leading zeros dropped, the content taken out."""
    start = 0
    while start < len(coeffs) and coeffs[start] == 0:
        start += 1
    ints = list(coeffs[start:])
    g = 0
    for c in ints:
        g = math.gcd(g, c)
    if g == 0:
        return _IntPoly((), Fraction(1))
    return _IntPoly(tuple(c // g for c in ints), Fraction(g, den))


def _combine(*terms: tuple[Fraction, _IntPoly]) -> _IntPoly:
    """Σ c·p, exactly."""
    return _linear([(c * p.scale, p.coeffs) for c, p in terms])


def _linear(terms: Sequence[tuple[Fraction, Sequence[int]]]) -> _IntPoly:
    """Σ c·p for integer polynomials p, exactly."""
    den = 1
    for f, _p in terms:
        den = den * f.denominator // math.gcd(den, f.denominator)
    size = max(len(p) for _f, p in terms)
    acc = [0] * size
    for f, p in terms:
        m = f.numerator * (den // f.denominator)
        offset = size - len(p)
        for i, c in enumerate(p):
            acc[offset + i] += m * c
    return _primitive(acc, den)


def _int_mul(a: Sequence[int], b: Sequence[int]) -> list[int]:
    if not a or not b:
        return []
    out = [0] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        if x:
            for j, y in enumerate(b):
                out[i + j] += x * y
    return out


def _int_diff(a: Sequence[int]) -> list[int]:
    n = len(a) - 1
    return [c * (n - i) for i, c in enumerate(a[:-1])]


def _int_sub(a: Sequence[int], b: Sequence[int]) -> list[int]:
    size = max(len(a), len(b))
    out = [0] * (size - len(a)) + list(a)
    for i, c in enumerate(b):
        out[size - len(b) + i] -= c
    return out


def _wronskian_roots(a: _IntPoly, b: _IntPoly) -> list[Fraction]:
    """Roots x > 0 of a'·b - a·b' (where a/b is stationary), as _nonneg_roots_x."""
    ca, cb = a.coeffs, b.coeffs
    m = _int_sub(_int_mul(_int_diff(ca), cb), _int_mul(ca, _int_diff(cb)))
    return _roots_x(_primitive(m).coeffs, include_zero=False)


def _strip_common(q: sympy.Poly, p: sympy.Poly) -> sympy.Poly:
    """q with every root it shares with p divided out."""
    while True:
        g = sympy.gcd(q, p)
        if g.degree() <= 0:
            return q
        q = sympy.quo(q, g)


def _roots_with_sign(q: sympy.Poly, p: sympy.Poly) -> list[tuple[Fraction, int]]:
    """Roots x > 0 of q (as in _nonneg_roots_x) with the exact sign of p there; q and p
    share no root."""
    out: list[tuple[Fraction, int]] = []
    if q.is_zero or q.degree() <= 0:
        return out
    fast = realroots.positive_roots_with_sign(_ints(q), _ints(p))
    if fast is not None:
        return fast
    for (a, b), _mult in q.intervals():
        if b <= 0:
            continue
        a, b = sympy.Rational(a), sympy.Rational(b)
        # Narrow the isolating interval until p has no root in it: p's sign is then the
        # sign at any point of the interval, decided in rational arithmetic.
        while a != b and p.count_roots(a, b) > 0:
            a, b = (sympy.Rational(v) for v in q.sqf_part().refine_root(a, b, eps=(b - a) / 4))
        mid = (a + b) / 2
        sign = 1 if p.eval(mid) > 0 else -1
        out.append((_fraction(_root_value(q, a, b)), sign))
    return sorted(out)


def _closed_rhp_roots(p: sympy.Poly) -> tuple[int, int]:
    """(roots with Re > 0, roots on the imaginary axis) of a polynomial in s, with
    multiplicity, counted exactly.

    The factor E = gcd(p(s), p(-s)) holds every root z whose mirror -z is a root too (axis
    roots among them); E is even or odd, E = s^k·f(s²), so its roots are read off f's real
    roots. What remains has neither, and its right-half-plane roots follow from the Cauchy
    index of its real and imaginary parts on the axis, by a Sturm chain (the argument
    principle in exact arithmetic; sympy's rectangle count is unreliable on the boundary).
    Most polynomials are settled first, and much faster, by Routh's array (_routh_rhp).
    """
    fast = _routh_rhp(p)
    if fast is not None:
        return fast
    rhp = axis = 0
    rest = p
    while rest.degree() > 0:
        mirror = rest.compose(sympy.Poly(-S, S, domain=sympy.QQ))
        e = sympy.gcd(rest, mirror)
        if e.degree() <= 0:
            break
        rest = sympy.quo(rest, e)
        k = min(n for (n,), c in e.terms() if c != 0)
        f = _even_in_x(_w_of_s(sympy.quo(e, sympy.Poly(S**k, S, domain=sympy.QQ))))
        # f(0) ≠ 0, so an isolating interval ending at 0 (sympy gives (-1, 0) for a root
        # in between) holds a negative root too.
        negative = sum(m for (lo, hi), m in f.intervals() if hi <= 0)
        axis += k + 2 * negative
        rhp += f.degree() - negative
    if rest.degree() > 0:
        a, b = _jw_parts(rest)
        if a.degree() > b.degree():
            turns = -_cauchy_index(a, b)
        else:
            turns = _cauchy_index(b, a)
        rhp += (rest.degree() - turns) // 2
    return rhp, axis


def _routh_rhp(p: sympy.Poly) -> tuple[int, int] | None:
    """_closed_rhp_roots by Routh's array, exactly, when p = s^k·r(s) and r's array is
    regular (no zero in its first column). Then no root of r lies on the imaginary axis (nor
    is the mirror of another), and the sign changes down the first column count r's roots
    with Re > 0 (Routh-Hurwitz); the k roots at s = 0 are on the axis. None otherwise."""
    coeffs = [_fraction(c) for c in p.rep.to_list()]
    at_zero = 0
    while len(coeffs) > 1 and coeffs[-1] == 0:
        coeffs.pop()
        at_zero += 1
    if len(coeffs) <= 1:
        return 0, at_zero
    prev, cur = coeffs[0::2], coeffs[1::2]
    column = [prev[0]]
    while cur:
        if cur[0] == 0:
            return None
        column.append(cur[0])
        ratio = prev[0] / cur[0]
        prev, cur = (
            cur,
            [
                prev[j + 1] - ratio * cur[j + 1] if j + 1 < len(cur) else prev[j + 1]
                for j in range(len(prev) - 1)
            ],
        )
    return sum(1 for a, b in itertools.pairwise(column) if (a > 0) != (b > 0)), at_zero


def _w_of_s(p: sympy.Poly) -> sympy.Poly:
    """The same coefficients with s renamed ω (for an even polynomial read in x = s²)."""
    return sympy.Poly.from_dict(dict(p.terms()) or {(0,): 0}, W, domain=sympy.QQ)


def _cauchy_index(den: sympy.Poly, num: sympy.Poly) -> int:
    """Cauchy index of num/den over the real line, V(-∞) - V(+∞) of the Sturm chain."""
    chain = [den, num]
    while not chain[-1].is_zero:
        chain.append(-chain[-2].rem(chain[-1]))
    chain.pop()

    def changes(sign_at: Callable[[sympy.Poly], int]) -> int:
        signs = [sign_at(c) for c in chain if not c.is_zero]
        return sum(1 for u, v in itertools.pairwise(signs) if u * v < 0)

    def at_minus(c: sympy.Poly) -> int:
        lead = 1 if c.LC() > 0 else -1
        return lead if c.degree() % 2 == 0 else -lead

    return changes(at_minus) - changes(lambda c: 1 if c.LC() > 0 else -1)


def _axis_roots(p: sympy.Poly) -> tuple[tuple[float, int], ...]:
    """Roots jω of p on the imaginary axis, as (ω, multiplicity), ω of either sign; exact."""
    # p = s^k·r(s): when r(jω)'s real and imaginary parts are coprime (checked modulo a
    # prime), the only axis root is s = 0, k times; else sympy's gcd decides.
    coeffs = _ints(p)
    k = 0
    while len(coeffs) > 1 and coeffs[-1] == 0:
        coeffs.pop()
        k += 1
    n = len(coeffs) - 1
    re = [c * (-1) ** ((n - i) // 2) if (n - i) % 2 == 0 else 0 for i, c in enumerate(coeffs)]
    im = [c * (-1) ** ((n - i) // 2) if (n - i) % 2 == 1 else 0 for i, c in enumerate(coeffs)]
    re, im = _strip(re), _strip(im)
    if n == 0 or (realroots.coprime(re, im) if len(re) >= len(im) else realroots.coprime(im, re)):
        return ((0.0, k),) if k else ()
    a, b = _jw_parts(p)
    h = sympy.gcd(a, b)
    if h.degree() <= 0:
        return ()
    out: list[tuple[float, int]] = []
    for (lo, hi), mult in h.intervals():
        out.append((float(_root_value(h, lo, hi)), int(mult)))
    return tuple(out)


def _in_double_precision(fn: Callable[_P, _T]) -> Callable[_P, _T]:
    """Run a frequency analysis with floating-point overflow, division by zero and invalid
    operations raised rather than carried along as inf or nan, and reported as the loop being
    out of double precision's range: a figure built on such a value would be noise."""

    @functools.wraps(fn)
    def checked(*args: _P.args, **kwargs: _P.kwargs) -> _T:
        try:
            with np.errstate(over="raise", divide="raise", invalid="raise"):
                return fn(*args, **kwargs)
        except (OverflowError, ZeroDivisionError, FloatingPointError):
            raise MarginsUnsupported(_OUT_OF_RANGE) from None

    return checked


# Scalar complex arithmetic in plain Python, bit for bit what numpy's scalar polyval and
# complex division give (Horner from zero; Smith's division with a reciprocal, as numpy
# does it), at a tenth of the cost per call: the phase and sensitivity searches call these
# hundreds of thousands of times, and the same floats keep every result unchanged.


def _horner(coeffs: tuple[float, ...], x: complex) -> complex:
    y = 0j
    for c in coeffs:
        y = y * x + c
    return y


def _fdiv(a: float, b: float) -> float:
    if b != 0.0:
        return a / b
    if a == 0.0 or math.isnan(a):
        return math.nan
    return math.copysign(math.inf, a) * math.copysign(1.0, b)


def _cdiv(a: complex, b: complex) -> complex:
    ar, ai, br, bi = a.real, a.imag, b.real, b.imag
    abs_r, abs_i = abs(br), abs(bi)
    if abs_r >= abs_i:
        if abs_r == 0.0:
            return complex(_fdiv(ar, abs_r), _fdiv(ai, abs_r))
        rat = bi / br
        scl = _fdiv(1.0, br + bi * rat)
        return complex((ar + ai * rat) * scl, (ai - ar * rat) * scl)
    rat = br / bi
    scl = _fdiv(1.0, bi + br * rat)
    return complex((ar * rat + ai) * scl, (ai * rat - ar) * scl)


def _coeffs(p: sympy.Poly) -> FloatArray:
    return np.array([float(c) for c in p.all_coeffs()], dtype=np.float64)


def _float_coeffs(p: _IntPoly, derivative: bool = False) -> FloatArray:
    """p's (or p''s) coefficients rounded to floats, highest power first; [0.0] for zero."""
    n = p.degree
    if derivative:
        values = [float(p.scale * (c * (n - i))) for i, c in enumerate(p.coeffs[:-1])]
    else:
        values = [float(p.scale * c) for c in p.coeffs]
    return np.array(values or [0.0], dtype=np.float64)


def _check_range(num: sympy.Poly, den: sympy.Poly, delay: Fraction) -> None:
    """Refuse a loop whose numbers double precision cannot carry (see _FLOAT_SPAN)."""
    # Fractions compare exactly with the float bounds, as sympy's Rationals do.
    sizes = [abs(_fraction(c)) for p in (num, den) for c in p.rep.to_list() if c != 0]
    if delay:
        sizes.append(delay)
    if sizes and max(sizes) / min(sizes) > _SPAN_EXACT:
        raise MarginsUnsupported(_OUT_OF_RANGE)
    if any(not _SPAN_INVERSE_EXACT <= x <= _SPAN_EXACT for x in sizes):
        raise MarginsUnsupported(_OUT_OF_RANGE)


# --------------------------------------------------------------------------------------------
# The frequency response of a reduced loop N/D·e^{-sT}


@dataclass(frozen=True, slots=True, eq=False)
class _Resp:
    """Everything about N(jω)/D(jω)·e^{-jωT} that the analyses share; N, D coprime."""

    num: sympy.Poly
    den: sympy.Poly
    delay: Fraction
    n2i: _IntPoly  # |N(jω)|² in x = ω²
    d2i: _IntPoly  # |D(jω)|²
    pi: _IntPoly  # Re N(jω)·conj D(jω), in x
    qi: _IntPoly  # Im N(jω)·conj D(jω) = ω·q(ω²)
    num_c: FloatArray
    den_c: FloatArray
    dnum_c: FloatArray
    dden_c: FloatArray
    num_f: tuple[float, ...]  # the same coefficients for scalar evaluation (_horner)
    den_f: tuple[float, ...]
    dnum_f: tuple[float, ...]
    dden_f: tuple[float, ...]
    t: float  # the dead time as a float
    zeros: tuple[complex, ...]  # roots off the imaginary axis, numeric
    poles: tuple[complex, ...]
    axis_zeros: tuple[tuple[float, int], ...]  # exact positions, as floats
    axis_poles: tuple[tuple[float, int], ...]
    # (Im z, -Re z, Re z > 0) for each of zeros and poles, in the same order: what
    # psi_rough needs for arg(jω - z), unpacked once rather than at every evaluation.
    zero_args: tuple[tuple[float, float, bool], ...]
    pole_args: tuple[tuple[float, float, bool], ...]
    lead_negative: bool
    rel_degree: int  # deg D - deg N
    c_inf: float  # |L(∞)|: 0 strictly proper, inf improper

    # p and q as sympy polynomials in x, for the exact work done once per loop (built on
    # each use: read once where they are needed).
    @property
    def p(self) -> sympy.Poly:
        return _poly_x(self.pi)

    @property
    def q(self) -> sympy.Poly:
        return _poly_x(self.qi)

    def l0(self, w: float) -> complex:
        s = 1j * w
        return _cdiv(_horner(self.num_f, s), _horner(self.den_f, s))

    def value(self, w: float) -> complex:
        return self.l0(w) * cmath.exp(-1j * w * self.t)

    def mag(self, w: float) -> float:
        if math.isinf(w):
            return self.c_inf
        for wp, _m in self.axis_poles:
            if w == wp:
                return math.inf
        for wz, _m in self.axis_zeros:
            if w == wz:
                return 0.0
        # Exact at the binary ω, then rounded once: see _phase_deg on why not polyval.
        return math.sqrt(_ratio(self.n2i, self.d2i, Fraction(w) ** 2))

    def psi_rough(self, w: float, side: int = 0) -> float:
        """Continuous phase from the factors; `side` picks a limit at an axis root."""
        total = math.pi if self.lead_negative else 0.0
        # arg(jω - z) = atan((ω - Im z)/(-Re z)), plus π right of the axis: continuous in ω
        # for Re z ≠ 0, where atan2 would jump. Inlined, as the phase searches call this
        # tens of thousands of times.
        atan, pi = math.atan, math.pi
        for im, minus_re, right in self.zero_args:
            value = atan((w - im) / minus_re)
            total += value + pi if right else value
        for im, minus_re, right in self.pole_args:
            value = atan((w - im) / minus_re)
            total -= value + pi if right else value
        for wr, m in self.axis_zeros:
            total += m * _axis_arg(w, wr, side)
        for wr, m in self.axis_poles:
            total -= m * _axis_arg(w, wr, side)
        return total - w * self.t

    def psi(self, w: float) -> float:
        """The unwrapped phase ψ(ω) of L(jω): exact branch from the factors, value from L."""
        fine = cmath.phase(self.l0(w)) - w * self.t
        rough = self.psi_rough(w)
        return fine + _TWO_PI * round((rough - fine) / _TWO_PI)


def _axis_arg(w: float, wr: float, side: int) -> float:
    # arg(jω - jωr) is -π/2 below ωr and +π/2 above; at ωr the path passes to the right of
    # the root (the Nyquist indentation), so the limit from the chosen side is taken.
    if w > wr or (w == wr and side > 0):
        return math.pi / 2
    if w < wr or (w == wr and side < 0):
        return -math.pi / 2
    return 0.0


def _numeric_roots(p: sympy.Poly, axis: tuple[tuple[float, int], ...]) -> tuple[complex, ...]:
    # Square-free factors first: numpy's roots of a multiple root are only ~eps^(1/m) good.
    # These roots only choose the 2π branch of the phase (an error below π/2 is harmless).
    roots: list[complex] = []
    ints = _ints(p)
    if len(ints) > 1 and realroots.coprime(ints, _int_diff(ints)):
        # Square-free already: sympy's one factor would be p made monic.
        monic = [float(Fraction(c, ints[0])) for c in ints]
        roots.extend(complex(r) for r in np.roots(np.array(monic, dtype=np.float64)))
    elif len(ints) > 1:
        for factor, mult in sympy.sqf_list(p)[1]:
            if factor.degree() > 0:
                found = np.roots(_coeffs(factor))
                roots.extend(complex(r) for r in found for _ in range(mult))
    for wr, m in axis:
        for _ in range(m):
            nearest = min(range(len(roots)), key=lambda i: abs(roots[i] - 1j * wr))
            roots.pop(nearest)
    return tuple(roots)


@lru_cache(maxsize=256)
def _resp(num: sympy.Poly, den: sympy.Poly, delay: Fraction) -> _Resp:
    _check_range(num, den, delay)
    axis_zeros = _axis_roots(num) if not num.is_zero else ()
    axis_poles = _axis_roots(den)
    n, d = _int_poly(num), _int_poly(den)
    lead = n.lead() / d.lead() if n.coeffs else Fraction(0)
    rel = den.degree() - num.degree()
    c_inf = 0.0 if rel > 0 else (math.inf if rel < 0 else abs(float(lead)))
    num_c, den_c = _float_coeffs(n), _float_coeffs(d)
    dnum_c, dden_c = _float_coeffs(n, derivative=True), _float_coeffs(d, derivative=True)
    an, bn = _jw_split(n.coeffs)
    ad, bd = _jw_split(d.coeffs)
    # Even (odd) polynomials in ω, lowest power first: every other coefficient is x's.
    n2 = _plus(_int_mul(an, an), _int_mul(bn, bn))[::2]
    d2 = _plus(_int_mul(ad, ad), _int_mul(bd, bd))[::2]
    p = _plus(_int_mul(an, ad), _int_mul(bn, bd))[::2]
    q = _plus(_int_mul(bn, ad), [-c for c in _int_mul(an, bd)])[1::2]
    zeros = _numeric_roots(num, axis_zeros) if not num.is_zero else ()
    poles = _numeric_roots(den, axis_poles)
    return _Resp(
        num=num,
        den=den,
        delay=delay,
        n2i=_scaled(n2[::-1], n.scale * n.scale),
        d2i=_scaled(d2[::-1], d.scale * d.scale),
        pi=_scaled(p[::-1], n.scale * d.scale),
        qi=_scaled(q[::-1], n.scale * d.scale),
        num_c=num_c,
        den_c=den_c,
        dnum_c=dnum_c,
        dden_c=dden_c,
        num_f=tuple(num_c.tolist()),
        den_f=tuple(den_c.tolist()),
        dnum_f=tuple(dnum_c.tolist()),
        dden_f=tuple(dden_c.tolist()),
        t=float(delay),
        zeros=zeros,
        poles=poles,
        axis_zeros=axis_zeros,
        axis_poles=axis_poles,
        zero_args=tuple((z.imag, -z.real, z.real > 0) for z in zeros),
        pole_args=tuple((z.imag, -z.real, z.real > 0) for z in poles),
        lead_negative=bool(lead < 0),
        rel_degree=rel,
        c_inf=c_inf,
    )


@lru_cache(maxsize=64)
def _with_delay(resp: _Resp, delay: Fraction) -> _Resp:
    """The same response with another dead time (only the delay's fields depend on it)."""
    _check_range(resp.num, resp.den, delay)
    return dataclasses.replace(resp, delay=delay, t=float(delay))


# --------------------------------------------------------------------------------------------
# Monotone pieces of the phase and the points where it meets a level


@lru_cache(maxsize=256)
def _stationary_psi(resp: _Resp) -> tuple[float, ...] | None:
    """Frequencies ω > 0 where dψ/dω = 0; None when ψ is piecewise constant (T = 0 only).

    ψ' = (P·Q' - Q·P')/(P² + Q²) - T with P + jQ = N(jω)·conj D(jω): the numerator is a
    polynomial with rational coefficients, even in ω, so its roots are isolated exactly.
    """
    # With P = p(x), Q = ω·q(x), x = ω²: the numerator in x is
    # p·q + 2x·(p·q' - q·p') - T·(p² + x·q²).
    p, q = resp.pi.coeffs, resp.qi.coeffs
    cp, cq, t = resp.pi.scale, resp.qi.scale, resp.delay
    pq = _int_mul(p, q)
    cross = _int_sub(_int_mul(p, _int_diff(q)), _int_mul(q, _int_diff(p)))
    m = _linear(
        [
            (cp * cq, pq),
            (2 * cp * cq, [*cross, 0]),
            (-t * cp * cp, _int_mul(p, p)),
            (-t * cq * cq, [*_int_mul(q, q), 0]),
        ]
    )
    if not m.coeffs:
        return None
    return tuple(math.sqrt(x) for x in _roots_x(m.coeffs, include_zero=False))


@lru_cache(maxsize=256)
def _stationary_mag(resp: _Resp) -> tuple[float, ...]:
    """Frequencies ω > 0 where d|L0(jω)|/dω = 0 (roots of n2'·d2 - n2·d2' in x)."""
    return tuple(math.sqrt(x) for x in _wronskian_roots(resp.n2i, resp.d2i))


@dataclass(frozen=True, slots=True)
class _Piece:
    """A stretch of the Nyquist path on which the phase is monotone (or constant)."""

    lo: float
    hi: float  # equal to lo on an indentation arc; inf for the last run
    u: float  # phase at the start (a limit where the start is singular)
    v: float  # phase at the end; -inf at ω → ∞ with dead time
    arc: bool


@dataclass(frozen=True, slots=True)
class _Hit:
    """The phase meets `level` at ω: once (weight 1) or at the end of a piece (weight 1/2)."""

    omega: float
    level: float
    direction: int  # +1 when the phase increases through the level
    weight: float
    r: float  # |L0(jω)|, inf on an indentation arc
    tail: bool  # beyond every stationary point of phase and magnitude


def _round_quarter(x: float) -> float:
    return round(x / (math.pi / 2)) * (math.pi / 2)


@lru_cache(maxsize=256)
def _pieces(resp: _Resp) -> tuple[_Piece, ...]:
    """The path ω: 0 → ∞ with right indentations at axis poles, cut into monotone pieces."""
    stationary = _stationary_psi(resp) or ()
    axis = sorted(
        {w for w, _ in resp.axis_zeros if w > 0} | {w for w, _ in resp.axis_poles if w > 0}
    )
    cuts = sorted({0.0, *stationary, *axis})
    pole_at = {w: m for w, m in resp.axis_poles}
    pieces: list[_Piece] = []
    # Values at ω = 0 and ω = ∞ are multiples of π/2 exactly (L is real there or has a pole
    # or zero of known order), so they are snapped to remove rounding.
    start = _round_quarter(resp.psi_rough(0.0, side=+1))
    m0 = pole_at.get(0.0, 0)
    if m0:
        pieces.append(_Piece(0.0, 0.0, start + m0 * math.pi / 2, start, arc=True))
    ends = [*cuts[1:], math.inf]
    for lo, hi in zip(cuts, ends, strict=True):
        if lo == 0.0:
            u = start
        elif lo in axis:
            u = resp.psi_rough(lo, side=+1)
        else:
            u = resp.psi(lo)
        if math.isinf(hi):
            if resp.delay > 0:
                v = -math.inf
            else:
                v = _round_quarter(_psi_at_infinity(resp))
        elif hi in axis:
            v = resp.psi_rough(hi, side=-1)
        else:
            v = resp.psi(hi)
        pieces.append(_Piece(lo, hi, u, v, arc=False))
        if hi in pole_at:
            pieces.append(_Piece(hi, hi, v, v - pole_at[hi] * math.pi, arc=True))
    return tuple(pieces)


def _psi_at_infinity(resp: _Resp) -> float:
    """lim ψ(ω) as ω → ∞ without dead time: each factor tends to ±π/2 exactly."""
    # arg(jω - z) → π/2 for every root, on either side of the axis.
    zeros = len(resp.zeros) + sum(m for _w, m in resp.axis_zeros)
    poles = len(resp.poles) + sum(m for _w, m in resp.axis_poles)
    return (math.pi if resp.lead_negative else 0.0) + (zeros - poles) * math.pi / 2


def _is_flat(piece: _Piece) -> bool:
    return not piece.arc and math.isfinite(piece.v) and abs(piece.v - piece.u) <= _PHASE_TOL


def _end_mag(resp: _Resp, w: float) -> float:
    return resp.mag(w)


def _solve_level(resp: _Resp, piece: _Piece, level: float) -> float:
    """The single ω in the monotone piece where ψ(ω) = level (strictly inside the piece)."""

    def f(w: float) -> float:
        if w == piece.lo:
            return piece.u - level
        if w == piece.hi:
            return piece.v - level
        return resp.psi(w) - level

    lo, hi = piece.lo, piece.hi
    if math.isinf(hi):
        # Monotone to the end: step out until the level is passed.
        hi = max(2.0 * lo, lo + 1.0)
        sign_lo = math.copysign(1.0, piece.u - level)
        while math.copysign(1.0, f(hi)) == sign_lo:
            lo, hi = hi, 2.0 * hi
            if hi > 1e300:
                # A dead time so short against the loop's dynamics that its phase reaches
                # -180° only beyond double precision's range of frequencies.
                raise MarginsUnsupported(_OUT_OF_RANGE)
    # Imported here: only the frequency searches need it, and it costs ~0.5 s to import.
    from scipy.optimize import brentq

    try:
        return float(brentq(f, lo, hi, xtol=1e-300, rtol=8.9e-16, maxiter=400))
    except RuntimeError:  # no convergence: the phase is noise at this scale of frequency
        raise MarginsUnsupported(_OUT_OF_RANGE) from None


def _piece_hits(resp: _Resp, piece: _Piece, base: float, tail_from: float) -> Iterator[_Hit]:
    """Points where the phase on `piece` meets base + 2πj, in the order the path meets them."""
    if piece.u == piece.v or _is_flat(piece):
        return
    direction = 1 if piece.v > piece.u else -1
    if direction > 0:
        j = math.ceil((piece.u - _PHASE_TOL - base) / _TWO_PI)
        j_end: int | None = math.floor((piece.v + _PHASE_TOL - base) / _TWO_PI)
    else:
        j = math.floor((piece.u + _PHASE_TOL - base) / _TWO_PI)
        j_end = (
            math.ceil((piece.v - _PHASE_TOL - base) / _TWO_PI) if math.isfinite(piece.v) else None
        )
    while j_end is None or (j <= j_end if direction > 0 else j >= j_end):
        level = base + _TWO_PI * j
        if abs(level - piece.u) <= _PHASE_TOL:
            w = piece.lo
            r = math.inf if piece.arc else _end_mag(resp, w)
            yield _Hit(w, level, direction, 0.5, r, tail=w > tail_from)
        elif math.isfinite(piece.v) and abs(level - piece.v) <= _PHASE_TOL:
            w = piece.hi
            r = math.inf if piece.arc else _end_mag(resp, w)
            yield _Hit(w, level, direction, 0.5, r, tail=w > tail_from)
        elif piece.arc:
            yield _Hit(piece.lo, level, direction, 1.0, math.inf, tail=False)
        else:
            w = _solve_level(resp, piece, level)
            yield _Hit(w, level, direction, 1.0, resp.mag(w), tail=w > tail_from)
        j += direction


def _tail_start(resp: _Resp) -> float:
    """Beyond this frequency the phase and |L0| are both monotone."""
    marks = [0.0, *(_stationary_psi(resp) or ()), *_stationary_mag(resp)]
    marks += [w for w, _ in resp.axis_poles + resp.axis_zeros]
    return max(marks)


def _hits(resp: _Resp, base: float) -> Iterator[_Hit]:
    """Every point of the path (ω ≥ 0) where the phase meets base modulo 2π, by frequency.

    The level at -180° is asked for by the stability count, the phase crossovers and the
    delay-margin set of the same loop, each reading on to its own stopping point: the hits
    found so far are remembered per (response, level) and only the rest are searched for.
    """
    return iter(_hit_stream(resp, base))


def _search_hits(resp: _Resp, base: float) -> Iterator[_Hit]:
    tail_from = _tail_start(resp)
    for piece in _pieces(resp):
        yield from _piece_hits(resp, piece, base, tail_from)


class _HitStream:
    """A search for hits read by several callers: what one has found, the next one reads
    back; an error the search raised is raised again at the same point for every reader."""

    __slots__ = ("error", "found", "search")

    def __init__(self, search: Iterator[_Hit]) -> None:
        self.search: Iterator[_Hit] | None = search
        self.found: list[_Hit] = []
        self.error: BaseException | None = None

    def __iter__(self) -> Iterator[_Hit]:
        i = 0
        while True:
            if i < len(self.found):
                yield self.found[i]
                i += 1
                continue
            if self.error is not None:
                raise self.error
            if self.search is None:
                return
            try:
                hit = next(self.search)
            except StopIteration:
                self.search = None
                return
            except BaseException as exc:  # a time budget's stop too: never a short list
                self.search = None
                self.error = exc
                raise
            self.found.append(hit)


@lru_cache(maxsize=256)
def _hit_stream(resp: _Resp, base: float) -> _HitStream:
    return _HitStream(_search_hits(resp, base))


def _real_band(resp: _Resp) -> bool:
    """L(jω) real on the whole axis (T = 0 and Im N·conj D ≡ 0) with some dynamics."""
    return resp.delay == 0 and not resp.qi.coeffs and resp.den.degree() + resp.num.degree() > 0


# --------------------------------------------------------------------------------------------
# The loop at a gain, and the gain as a factor


@dataclass(frozen=True, slots=True, eq=False)
class _Fixed:
    """A loop reduced for frequency analysis: L = kappa·N/D·e^{-sT}, N and D coprime."""

    resp: _Resp
    kappa: Fraction  # > 0
    open_rhp: int  # open right-half-plane roots of the blocks' denominators as written
    hidden: int  # closed right-half-plane roots cancelled between blocks (internal instability)


def _split_gain(loop: LoopAlgebra) -> tuple[sympy.Poly, sympy.Poly] | str:
    """(N1, D1) with L = K·N1/D1 when the gain is a plain factor of L; else the reason."""
    lt = loop_transfer(loop)
    if lt.num.is_zero:
        return "the loop transfer is zero"
    kn = {j for (_i, j) in lt.num.monoms()}
    kd = {j for (_i, j) in lt.den.monoms()}
    if kn == {0} and kd == {0}:
        return "the loop has no gain symbol"
    if len(kn) != 1 or len(kd) != 1 or kn.pop() - kd.pop() != 1:
        return (
            "the gain does not enter as a plain factor of the loop transfer "
            "(L = K·L0(s)); only that form is analysed here"
        )
    n1 = _poly_s({(i,): c for (i, _j), c in lt.num.terms()})
    d1 = _poly_s({(i,): c for (i, _j), c in lt.den.terms()})
    return n1, d1


def _reduce(n: sympy.Poly, d: sympy.Poly) -> tuple[sympy.Poly, sympy.Poly, int]:
    if not n.is_zero and not d.is_zero:
        ni, di = _ints(n), _ints(d)
        if realroots.coprime(ni, di) if len(ni) >= len(di) else realroots.coprime(di, ni):
            return n, d, 0  # nothing cancels
    g = sympy.gcd(n, d)
    rhp, axis = _closed_rhp_roots(g)
    return sympy.quo(n, g), sympy.quo(d, g), rhp + axis


def _delay_of(loop: LoopAlgebra) -> Fraction:
    return loop.delay if loop.delay is not None else Fraction(0)


@lru_cache(maxsize=128)
def _factor_form(loop: LoopAlgebra) -> tuple[_Resp, int, int] | str:
    split = _split_gain(loop)
    if isinstance(split, str):
        return split
    n1, d1 = split
    n0, d0, hidden = _reduce(n1, d1)
    open_rhp, _axis = _closed_rhp_roots(d1)
    return _resp(n0, d0, _delay_of(loop)), open_rhp, hidden


def _fixed(loop: LoopAlgebra, k: Fraction | None) -> _Fixed:
    if k is None:
        k = loop.nominal
    form = _factor_form(loop)
    if k is not None and k > 0 and not isinstance(form, str):
        resp, open_rhp, hidden = form
        return _Fixed(resp, k, open_rhp, hidden)
    lt = loop_transfer(loop)
    uses_gain = lt.num.degree(K) > 0 or lt.den.degree(K) > 0
    if k is None:
        if uses_gain:
            raise MarginsUnsupported("the loop has a gain symbol but no gain value was given")
        k = Fraction(0)
    n, d = at_gain(lt.num, k), at_gain(lt.den, k)
    if d.is_zero:
        raise MarginsUnsupported(f"the loop transfer has a zero denominator at gain {k}")
    if n.is_zero:
        raise MarginsUnsupported(f"the loop transfer is zero at gain {k}")
    n0, d0, hidden = _reduce(n, d)
    open_rhp, _axis = _closed_rhp_roots(d)
    return _Fixed(_resp(n0, d0, _delay_of(loop)), Fraction(1), open_rhp, hidden)


# --------------------------------------------------------------------------------------------
# Margins at one gain


def _wrap180(deg: float) -> float:
    y = (deg + 180.0) % 360.0 - 180.0
    return 180.0 if y == -180.0 else y


def _phase_deg(resp: _Resp, w: float) -> float:
    """Principal phase of L(jω) in degrees (the gain factor is positive).

    N(jω)·conj D(jω) = P + jQ is computed exactly at the (binary, so rational) ω: a
    double-precision polynomial value cancels down to a few digits near a lightly damped
    pole or zero, an exact one is correctly rounded.
    """
    wq = Fraction(w)
    x = wq * wq
    re_n, re_d = resp.pi.parts_at(x)
    im_n, im_d = resp.qi.parts_at(x)
    im = wq.numerator * im_n / (wq.denominator * im_d)
    return math.degrees(math.atan2(im, re_n / re_d) - w * resp.t)


def _gain_crossovers(resp: _Resp, kappa: Fraction) -> tuple[float, ...] | None:
    """Frequencies with κ|L0(jω)| = 1, exact roots of κ²|N|² - |D|²; None if identically 1."""
    g = _combine((kappa * kappa, resp.n2i), (Fraction(-1), resp.d2i))
    if not g.coeffs:
        return None
    return tuple(math.sqrt(x) for x in _roots_x(g.coeffs, include_zero=True))


def _phase_margins(resp: _Resp, gcs: tuple[float, ...]) -> list[float]:
    return [_wrap180(180.0 + _phase_deg(resp, w)) for w in gcs]


def _governing_pm(resp: _Resp, gcs: tuple[float, ...]) -> tuple[float, float | None]:
    pms = _phase_margins(resp, gcs)
    if not pms:
        return math.inf, None
    i = min(range(len(pms)), key=lambda i: (abs(pms[i]), gcs[i]))
    return pms[i], gcs[i]


def _delay_margin(resp: _Resp, kappa: Fraction, gcs: tuple[float, ...]) -> float:
    if resp.rel_degree <= 0 and resp.c_inf * float(kappa) >= 1.0:
        return 0.0
    best = math.inf
    for w, pm in zip(gcs, _phase_margins(resp, gcs), strict=True):
        lag = math.radians(pm % 360.0)
        if w == 0.0:
            if lag == 0.0:
                best = 0.0
            continue
        best = min(best, lag / w)
    return best


def _phase_crossovers(resp: _Resp, floor: float) -> tuple[tuple[float, float], ...] | None:
    """(ω, |L0(jω)|) at every phase crossover; None when L is real and negative over a band.

    With dead time there are infinitely many; beyond the last stationary point of phase and
    magnitude |L0| only falls, so they are listed up to and including the first with
    |L0| < floor: every one left out lies farther from any |L0| = 1/κ ≥ floor than that one.
    Without dead time the floor plays no part, so every floor shares one remembered list.
    """
    return _phase_crossovers_to(resp, floor if resp.delay > 0 else 0.0)


@lru_cache(maxsize=256)
def _phase_crossovers_to(resp: _Resp, floor: float) -> tuple[tuple[float, float], ...] | None:
    out: list[tuple[float, float]] = []
    if resp.delay == 0:
        if not resp.qi.coeffs:
            # L(jω) = p(ω²)/|D|² is real everywhere: negative over a band unless p ≥ 0.
            if not resp.pi.coeffs or not _negative_somewhere(resp.p):
                return ()
            return None
        zero = Fraction(0)
        p0 = resp.pi.at(zero)
        d0 = resp.d2i.at(zero)
        if d0 != 0 and p0 < 0:
            out.append((0.0, math.sqrt(float(resp.n2i.at(zero) / d0))))
        q, p = resp.qi.coeffs, resp.pi.coeffs
        found = None
        if len(q) > 1 and p and realroots.coprime(q, p):
            # Nothing to strip: q's roots with p's sign straight from the integers.
            found = realroots.positive_roots_with_sign(q, p)
        if found is None:
            p_x = resp.p
            found = _roots_with_sign(_strip_common(resp.q, p_x), p_x)
        for x, sign in found:
            if sign < 0:
                w = math.sqrt(x)
                out.append((w, math.sqrt(_ratio(resp.n2i, resp.d2i, x))))
        return tuple(out)
    for hit in _hits(resp, math.pi):
        if hit.r == 0.0 or math.isinf(hit.r):
            continue
        if out and hit.omega == out[-1][0]:
            continue
        out.append((hit.omega, hit.r))
        if hit.tail and resp.rel_degree == 0:
            # Biproper with dead time: the crossovers pile up towards ω → ∞ with |L0| tending
            # to |L0(∞)| monotonically; that limit stands for all of them.
            out.append((math.inf, resp.c_inf))
            break
        if (hit.tail and hit.r < floor) or len(out) > _MAX_HITS:
            break
    return tuple(out)


def _negative_somewhere(p: sympy.Poly) -> bool:
    """p(x) < 0 for some x > 0."""
    roots = _nonneg_roots_x(p, include_zero=False)
    points = [0.5 * roots[0]] if roots else []
    points += [0.5 * (a + b) for a, b in itertools.pairwise(roots)]
    points.append(2.0 * roots[-1] + 1.0 if roots else 1.0)
    return any(float(p.eval(sympy.Rational(x))) < 0 for x in points)


def _ratio(a: _IntPoly, b: _IntPoly, x: Fraction) -> float:
    # Exact: a float polyval can lose every digit next to a lightly damped root.
    an, ad = a.parts_at(x)
    bn, bd = b.parts_at(x)
    num, den = an * bd, ad * bn
    if den < 0:
        num, den = -num, -den  # a zero ratio stays +0.0, as the Fraction's float is
    return num / den  # the exact ratio, rounded once


def _gain_margin(
    pcs: tuple[tuple[float, float], ...] | None, kappa: float
) -> tuple[float | None, float | None, float | None]:
    """(absolute, dB, frequency) of the governing gain margin at gain factor kappa."""
    if pcs is None:
        return None, None, None
    if not pcs:
        return math.inf, math.inf, None
    best = min(pcs, key=lambda wr: (abs(math.log10(kappa * wr[1])), wr[0]))
    r = kappa * best[1]
    return 1.0 / r, -20.0 * math.log10(r) + 0.0, best[0]


def _sensitivity_exact(resp: _Resp, kappa: Fraction) -> tuple[float, float, list[str]]:
    """sup |1/(1 + κL0(jω))| without dead time, from exact stationary points in x = ω²."""
    a = resp.d2i
    b = _combine((Fraction(1), a), (2 * kappa, resp.pi), (kappa * kappa, resp.n2i))
    notes: list[str] = []
    if not b.coeffs:
        # 1 + L ≡ 0 (say L = -1): no closed loop exists, so the sensitivity is infinite at
        # every frequency.
        notes.append("1 + L(s) is identically zero: the loop is ill-posed at this gain")
        return math.inf, 0.0, notes
    # |D + κN|² in x has no root x ≥ 0 when its constant term is non-zero and its
    # coefficients keep one sign (Descartes' rule of signs): the usual case, settled
    # without isolating roots.
    on_axis: list[Fraction] = []
    if b.coeffs[-1] == 0 or realroots.sign_variations(b.coeffs) > 0:
        on_axis = _roots_x(b.coeffs, include_zero=True)
    if on_axis:
        notes.append(
            "a closed-loop pole lies on the imaginary axis: the sensitivity peak is infinite"
        )
        return math.inf, math.sqrt(on_axis[0]), notes
    stationary = _wronskian_roots(a, b)
    best, where = _ratio(a, b, Fraction(0)), 0.0
    for x in stationary:
        value = _ratio(a, b, x)
        if value > best:
            best, where = value, math.sqrt(x)
    if a.degree > b.degree:
        limit = math.inf
    elif a.degree < b.degree:
        limit = 0.0
    else:
        limit = float(a.lead() / b.lead())
    if limit > best:
        best, where = limit, math.inf
        notes.append("the sensitivity peak is the limit as ω → ∞")
    return math.sqrt(best), where, notes


def _grid(resp: _Resp, w_hi: float) -> FloatArray:
    """Frequencies fine enough for the shape of L(jω)·e^{-jωT} up to w_hi."""
    roots = [z for z in (*resp.zeros, *resp.poles) if abs(z) > 0]
    marks = [abs(z) for z in roots] + [wr for wr, _ in resp.axis_poles + resp.axis_zeros if wr > 0]
    t = resp.t
    if t > 0:
        marks.append(1.0 / t)
    lo = min(marks, default=1.0) * 1e-3
    hi = max(marks, default=1.0) * 1e2
    if math.isfinite(w_hi):
        hi = max(hi, w_hi)
    parts = [np.array([0.0]), np.geomspace(lo, hi, int(200 * math.log10(hi / lo)) + 2)]
    for z in roots:
        # Resonances: a root at distance |Re z| from the axis shapes L over a band that wide.
        if z.imag > 0:
            width = max(abs(z.real), 1e-12 * abs(z))
            parts.append(z.imag + width * np.linspace(-4.0, 4.0, 17))
    if t > 0:
        step = _TWO_PI / t / 32.0
        count = min(int(hi / step) + 2, _MAX_GRID)
        parts.append(np.linspace(0.0, min(hi, step * count), count))
    grid = np.unique(np.concatenate(parts))
    return grid[grid >= 0.0]


def _sensitivity_delayed(resp: _Resp, kappa: Fraction) -> tuple[float, float, list[str]]:
    """sup |1/(1 + κL0(jω)e^{-jωT})| by a grid and brentq on the exact derivative."""
    from scipy.optimize import brentq

    kap = float(kappa)
    notes: list[str] = []
    limit = 0.0
    if resp.rel_degree <= 0:
        edge = kap * resp.c_inf
        if edge >= 1.0:
            notes.append("|L(∞)| ≥ 1 with dead time: the sensitivity is unbounded as ω → ∞")
            return math.inf, math.inf, notes
        limit = 1.0 / (1.0 - edge)
    elif resp.rel_degree > 0:
        limit = 1.0

    def dist2(w: float) -> float:
        return abs(1.0 + kap * resp.value(w)) ** 2

    def dist2_all(ws: FloatArray) -> FloatArray:
        s = 1j * ws
        ell = np.polyval(resp.num_c, s) / np.polyval(resp.den_c, s) * np.exp(-s * resp.t)
        return np.asarray(np.abs(1.0 + kap * ell) ** 2, dtype=np.float64)

    def slope(w: float) -> float:
        s = 1j * w
        n, d = _horner(resp.num_f, s), _horner(resp.den_f, s)
        dn, dd = _horner(resp.dnum_f, s), _horner(resp.dden_f, s)
        e = cmath.exp(-s * resp.t)
        ell = _cdiv(n, d) * e
        dl = 1j * (_cdiv(dn * d - n * dd, d * d) * e - resp.t * ell)
        return float(2.0 * ((1.0 + kap * ell).conjugate() * kap * dl).real)

    axis_poles = {wp for wp, _ in resp.axis_poles}
    best_d2, where = math.inf, 0.0
    w_hi = 1.0
    while True:
        grid = _grid(resp, w_hi)
        grid = grid[~np.isin(grid, list(axis_poles))] if axis_poles else grid
        vals = dist2_all(grid)
        i_best = int(np.argmin(vals))
        if vals[i_best] < best_d2:
            best_d2, where = float(vals[i_best]), float(grid[i_best])
        inner = np.nonzero((vals[1:-1] <= vals[:-2]) & (vals[1:-1] <= vals[2:]))[0] + 1
        # Past the frequency where κ|L0| < 1 - √best for good, |1 + κL| > √best: no local
        # minimum there can improve on the best (a margin of 1e-6 covers the rounding), so
        # those minima are not refined. The result is the same; with dead time they are
        # most of the minima (one per period of e^{-jωT}).
        prune = math.inf
        ell_prune = 1.0 - math.sqrt(best_d2) * (1.0 + 1e-6)
        if ell_prune > 0.0:
            prune = _beyond(resp, kap, ell_prune)
        for i in inner:
            a, b = float(grid[i - 1]), float(grid[i + 1])
            if a > prune:
                break
            if slope(a) < 0.0 < slope(b):
                w = float(brentq(slope, a, b, xtol=1e-300, rtol=8.9e-16))
                value = dist2(w)
                if value < best_d2:
                    best_d2, where = value, w
        if best_d2 == 0.0:
            notes.append(
                "a closed-loop pole lies on the imaginary axis: the sensitivity peak is infinite"
            )
            return math.inf, where, notes
        peak = 1.0 / math.sqrt(best_d2)
        # Beyond w_tail, κ|L0| < ell, so |S| ≤ 1/(1 - ell): choose ell so nothing there can
        # beat the peak found, and make sure the grid reached that far.
        ell = 1.0 - 1.0 / peak if peak > 1.0 else 0.0
        w_needed = _beyond(resp, kap, ell)
        if not math.isfinite(w_needed) or len(grid) >= _MAX_GRID:
            notes.append(
                f"sensitivity peak searched up to {float(grid[-1]):.6g} rad/s only: "
                "no bound was found for the rest"
            )
            break
        if w_needed <= float(grid[-1]):
            break
        w_hi = w_needed
    if limit > peak:
        notes.append("the sensitivity peak is the limit as ω → ∞")
        return limit, math.inf, notes
    return peak, where, notes


def _beyond(resp: _Resp, kap: float, ell: float) -> float:
    """A frequency past which κ|L0(jω)| < ell for good (inf when it never falls that low)."""
    if ell <= 0.0 or resp.c_inf * kap >= ell:
        return math.inf if resp.rel_degree > 0 and ell > 0 else 0.0
    level = Fraction(ell / kap) ** 2
    largest = _largest_root_x(_combine((Fraction(1), resp.n2i), (-level, resp.d2i)).coeffs)
    marks = [_tail_start(resp), *([] if largest is None else [math.sqrt(largest)])]
    return max(marks) * 1.01


def _largest_root_x(p: Sequence[int]) -> Fraction | None:
    """The largest root x ≥ 0 of the integer polynomial p, the very rational
    _roots_x(p, include_zero=True) ends with (the same isolation, the same refinement of
    that root, the others left unrefined); None when there is no such root."""
    q = list(p)
    while q and q[0] == 0:
        q.pop(0)
    if len(q) < 2:
        return None
    zero = q[-1] == 0
    while q[-1] == 0:
        q.pop()
    if len(q) >= 2:
        sqf = realroots.square_free(q)
        isolated = realroots.isolate_positive(sqf)
        if isolated is None:  # the fast search gave up: the exact slow route, all roots
            roots = _roots_x(p, include_zero=True)
            return roots[-1] if roots else None
        if isolated:
            return realroots.refine(sqf, *isolated[-1])
    return Fraction(0) if zero else None


@_in_double_precision
def margins_at(loop: LoopAlgebra, k: Fraction | None) -> Margins:
    """Gain, phase and delay margins, crossovers and sensitivity peak at gain k (None: nominal)."""
    fx = _fixed(loop, k)
    resp, kappa = fx.resp, fx.kappa
    notes: list[str] = []
    if fx.open_rhp:
        notes.append(
            f"open-loop unstable ({fx.open_rhp} right-half-plane pole"
            f"{'s' if fx.open_rhp > 1 else ''}): margins alone do not decide stability; "
            "see the closed-loop verdict"
        )
    if fx.hidden:
        notes.append(
            "a pole in the closed right half-plane cancels between blocks: the loop is "
            "internally unstable whatever the margins say"
        )
    if resp.rel_degree < 0:
        notes.append("improper loop transfer: |L(jω)| grows without bound")

    gcs = _gain_crossovers(resp, kappa)
    if gcs is None:
        notes.append("|L(jω)| = 1 at every frequency: phase margin undefined")
        pm: float | None = None
        wgc: float | None = None
        gcs = ()
        dm: float | None = 0.0 if resp.rel_degree <= 0 else None
    else:
        pm, wgc = _governing_pm(resp, gcs)
        dm = _delay_margin(resp, kappa, gcs)
        if len(gcs) > 1:
            notes.append(
                f"{len(gcs)} gain crossovers: the phase margin is the one smallest in magnitude"
            )
    if resp.rel_degree <= 0 and resp.c_inf * float(kappa) >= 1.0:
        notes.append("biproper loop with |L(∞)| ≥ 1: any added dead time destabilises it")

    pcs = _phase_crossovers(resp, _LIST_FLOOR / float(kappa))
    gm, gm_db, wpc = _gain_margin(pcs, float(kappa))
    if pcs is None:
        notes.append("L(jω) is real over a band: gain margin undefined")
    elif resp.delay > 0:
        notes.append(
            "dead time: phase crossovers are listed up to the first with |L(jω)| < 0.1; "
            "infinitely many lie beyond"
        )

    if resp.delay == 0:
        peak, wpk, more = _sensitivity_exact(resp, kappa)
    else:
        peak, wpk, more = _sensitivity_delayed(resp, kappa)
    notes.extend(more)

    return Margins(
        gain_margin=gm,
        gain_margin_db=gm_db,
        phase_margin_deg=pm,
        gain_crossovers=tuple(gcs),
        phase_crossovers=tuple(w for w, _ in (pcs or ())),
        gain_crossover_rad_s=wgc,
        phase_crossover_rad_s=wpc,
        delay_margin_s=dm,
        sensitivity_peak=peak,
        sensitivity_peak_rad_s=wpk,
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# Closed-loop stability with dead time: the Nyquist criterion, the delay taken exactly


def _unstable_roots(hits: Sequence[_Hit], open_rhp: int, kappa: float) -> int:
    """Z = P + N: closed-loop right-half-plane roots at gain factor kappa.

    Each passage of κL(jω) through the real axis left of -1 turns 1 + κL once about the
    origin; counted over ω ≥ 0 and doubled by symmetry, a passage with the phase rising
    (counter-clockwise) removes one unstable root and a falling one adds one. A passage at
    an end of the path (ω = 0, ω = ∞) counts half, as it is shared with ω < 0.
    """
    turns = sum(h.weight * h.direction for h in hits if h.r * kappa > 1.0)
    z = open_rhp - 2.0 * turns
    if abs(z - round(z)) > 1e-9 or round(z) < 0:
        raise ArithmeticError(f"inconsistent encirclement count {z}")  # pragma: no cover
    return round(z)


@lru_cache(maxsize=256)
def _nyquist_hits(resp: _Resp, upper: float) -> tuple[tuple[_Hit, ...], float]:
    """Passages of the phase through -180° that matter for gains below `upper`, and the gain
    above which the loop is unstable for every gain (inf when there is none).

    With dead time the phase falls without bound, so passages never end; past the last
    stationary point of phase and magnitude each one has a falling phase and a larger gain
    1/|L0| than the one before, so each adds two unstable roots. Once one of them lies above
    every earlier boundary gain, no gain beyond it can be stable.
    """
    hits: list[_Hit] = []
    highest = 0.0
    for hit in _hits(resp, math.pi):
        hits.append(hit)
        if len(hits) > _MAX_HITS:
            raise MarginsUnsupported("more than 20000 phase crossovers: the loop is out of range")
        gain = 1.0 / hit.r if 0.0 < hit.r < math.inf else None
        if not hit.tail or resp.delay == 0:
            if gain is not None and gain < upper:
                highest = max(highest, gain)
            continue
        if gain is not None and gain > highest:
            return tuple(hits), gain
    return tuple(hits), math.inf


def _float_end(x: float) -> sympy.Expr:
    if math.isinf(x):
        return INF
    if x == 0.0:
        return sympy.Integer(0)
    return sympy.Float(x, 15)


def _dedupe(values: list[float]) -> list[float]:
    out: list[float] = []
    for v in sorted(values):
        if not out or v - out[-1] > 1e-12 * max(abs(v), 1e-300):
            out.append(v)
    return out


def _sample(lo: float, hi: float) -> Fraction:
    if math.isinf(hi):
        return Fraction(2.0 * lo + 1.0) if lo == 0.0 else Fraction(2.0 * lo)
    return Fraction((lo + hi) / 2.0)


def _decide(
    cands: list[float],
    top: float,
    holds: Callable[[Fraction], bool],
    within: GainSet | None = None,
) -> GainSet:
    """The gains in (0, top) where `holds`, given every gain where its truth can change.

    Each open interval between candidates is decided at one rational sample; a candidate
    itself belongs to the set only when both neighbouring intervals do (a float end is open).
    The caller keeps only the part of the set inside `within` (when given): an interval
    whose closure lies apart from every piece of `within` is not decided (taken as false).
    Its points and its ends are outside `within`, so the set intersected with `within` is
    the same, and so is every end of that intersection (each lies inside or at a piece of
    `within`, where nothing changed).
    """
    ends = [0.0, *_dedupe([c for c in cands if 0.0 < c < top]), top]
    spans = _spans(within)
    truth = [
        _meets(lo, hi, spans) and holds(_sample(lo, hi)) for lo, hi in itertools.pairwise(ends)
    ]
    pieces = [
        Interval(_float_end(lo), _float_end(hi))
        for (lo, hi), ok in zip(itertools.pairwise(ends), truth, strict=True)
        if ok
    ]
    for i in range(1, len(ends) - 1):
        if truth[i - 1] and truth[i]:
            point = _float_end(ends[i])
            pieces.append(Interval(point, point, True, True))
    return GainSet.of(pieces)


_Span = tuple[Fraction | None, Fraction | None]  # a closed hull; None: unbounded


def _spans(within: GainSet | None) -> list[_Span] | None:
    """The closures of within's pieces as exact (lo, hi) pairs; None when not given or an
    end is not a rational or Float (then every interval is decided)."""
    if within is None:
        return None
    out: list[_Span] = []
    for iv in within.intervals:
        lo = None if iv.lo == -INF else _exact_end(iv.lo)
        hi = None if iv.hi is INF else _exact_end(iv.hi)
        if (lo is None and iv.lo != -INF) or (hi is None and iv.hi is not INF):
            return None
        out.append((lo, hi))
    return out


def _exact_end(x: sympy.Expr) -> Fraction | None:
    """A rational or finite Float end as the exact rational it is; None otherwise."""
    if x.is_Rational:
        return Fraction(int(x.p), int(x.q))
    if x.is_Float and x.is_finite:
        sign, man, exp, _bits = x._mpf_
        return Fraction(-int(man) if sign else int(man)) * Fraction(2) ** int(exp)
    return None


def _meets(lo: float, hi: float, spans: list[_Span] | None) -> bool:
    """Whether [lo, hi] (hi may be inf) meets some span (exact comparisons)."""
    if spans is None:
        return True
    for a, b in spans:
        if b is not None and b < lo:
            continue
        if a is not None and math.isfinite(hi) and a > hi:
            continue
        return True
    return False


def _stability_checks(resp: _Resp, hidden: int) -> str | None:
    if hidden:
        return (
            "a pole in the closed right half-plane cancels between blocks: the loop is "
            "internally unstable for every gain"
        )
    if _real_band(resp):
        # L0(jω) real for every ω means L0(s) = L0(-s): the closed-loop roots are symmetric
        # about the imaginary axis, so they are never all in the open left half-plane.
        return "L(jω) is real at every frequency: the closed loop is not stable for any gain"
    return None


def stable_gains_delayed(loop: LoopAlgebra) -> DelayedStability:
    """Gains in loop.limits ∩ (0, ∞) for which the closed loop with dead time is stable.

    Needs L = K·L0(s)·e^{-sT} (else ``unsupported`` says why). Boundaries are the gains
    1/|L0(jω)| at the phase crossovers; each interval between them is decided by the
    encirclement count Z = P + N at a sample gain. Internal stability: a closed-right-half-
    plane root cancelled between blocks makes every gain unstable. Without dead time (T = 0)
    the same count applies and gives a numeric cross-check of the exact Routh set.
    """
    try:
        return _stable_gains_delayed(loop)
    except MarginsUnsupported as exc:
        return DelayedStability(None, str(exc), ())


@_in_double_precision
def _stable_gains_delayed(loop: LoopAlgebra) -> DelayedStability:
    form = _factor_form(loop)
    if isinstance(form, str):
        return DelayedStability(None, form, ())
    resp, open_rhp, hidden = form
    if resp.rel_degree < 0:
        return DelayedStability(
            None, "improper loop transfer (more zeros than poles): not analysed", ()
        )
    allowed = loop.limits.intersect(GainSet.positive())
    notes = [
        "Nyquist criterion with the dead time taken exactly (no Padé approximation); "
        "interval ends are floats accurate to about 1e-12 relative"
    ]
    reason = _stability_checks(resp, hidden)
    if reason is not None:
        return DelayedStability(GainSet.empty(), None, (*notes, reason))
    upper = math.inf
    if resp.delay > 0 and resp.rel_degree == 0:
        upper = 1.0 / resp.c_inf
        notes.append(
            f"biproper loop with dead time: unstable for every gain ≥ {upper:.6g}, "
            "where |L(∞)| ≥ 1 puts infinitely many closed-loop roots on the right"
        )
    try:
        hits, unstable_above = _nyquist_hits(resp, upper)
    except MarginsUnsupported as exc:
        return DelayedStability(None, str(exc), tuple(notes))
    top = min(upper, unstable_above)
    cands = [1.0 / h.r for h in hits if 0.0 < h.r < math.inf]

    def holds(k: Fraction) -> bool:
        return _unstable_roots(hits, open_rhp, float(k)) == 0

    stable = _decide(cands, top, holds, allowed)
    return DelayedStability(stable.intersect(allowed), None, tuple(notes))


@_in_double_precision
def stable_at_delayed(loop: LoopAlgebra, k: Fraction | None) -> bool:
    """Closed-loop stability with dead time at gain k (None: nominal), by the Nyquist criterion.

    Any form of gain works here (the gain is substituted first); raises MarginsUnsupported
    when no gain value is known or the loop is degenerate (zero loop transfer).
    """
    fx = _fixed(loop, k)
    resp, kappa = fx.resp, float(fx.kappa)
    if resp.rel_degree < 0 or _stability_checks(resp, fx.hidden) is not None:
        return False
    if resp.delay > 0 and resp.rel_degree == 0 and kappa * resp.c_inf >= 1.0:
        return False
    hits: list[_Hit] = []
    for hit in _hits(resp, math.pi):
        if resp.delay > 0 and hit.tail and hit.r * kappa < 1.0:
            break  # the tail's |L0| only falls (or stays below |L0(∞)| < 1/κ)
        hits.append(hit)
        if len(hits) > _MAX_HITS:
            raise MarginsUnsupported("more than 20000 phase crossovers: the loop is out of range")
    if any(abs(h.r * kappa - 1.0) <= 1e-12 for h in hits):
        return False  # a closed-loop root on the imaginary axis
    return _unstable_roots(hits, fx.open_rhp, kappa) == 0


# --------------------------------------------------------------------------------------------
# Margin criteria as gain sets


def _level_gains(resp: _Resp, base: float, floor: float) -> list[float]:
    """Gains 1/|L0| where the phase meets base mod 2π on the path, down to |L0| = floor."""
    out: list[float] = []
    for hit in _hits(resp, base):
        if 0.0 < hit.r < math.inf:
            out.append(1.0 / hit.r)
        if resp.delay > 0 and hit.tail and (hit.r < floor or resp.rel_degree == 0):
            break
        if len(out) > _MAX_HITS:
            raise MarginsUnsupported("more than 20000 phase crossovers: the loop is out of range")
    return out


def _crossing_gains(resp: _Resp) -> list[float]:
    """Gains at which gain crossovers appear or vanish: |L0| stationary, at ω = 0, at ω → ∞."""
    out = [1.0 / resp.mag(w) for w in _stationary_mag(resp)]
    for w in (0.0, math.inf):
        r = resp.mag(w)
        if 0.0 < r < math.inf:
            out.append(1.0 / r)
    return [g for g in out if 0.0 < g < math.inf]


def _pm_set(resp: _Resp, minimum: float, top: float, within: GainSet) -> GainSet:
    floor = 1.0 / top if math.isfinite(top) else 0.0
    m = math.radians(minimum)
    cands = _crossing_gains(resp)
    cands += _level_gains(resp, math.pi + m, floor) + _level_gains(resp, math.pi - m, floor)

    def holds(k: Fraction) -> bool:
        gcs = _gain_crossovers(resp, k)
        if gcs is None:
            return False
        return all(abs(pm) >= minimum for pm in _phase_margins(resp, gcs))

    return _decide(cands, top, holds, within)


def _gm_set(resp: _Resp, minimum: float, top: float, within: GainSet) -> GainSet:
    # Beyond 6000 dB the spread leaves double precision; every finite gain margin falls short
    # there, which `holds` decides exactly, so the candidates only need to stay finite.
    spread = 10.0 ** min(abs(minimum) / 20.0, 300.0)
    floor = 1.0 / (spread * top) if math.isfinite(top) else 0.0
    pcs = _phase_crossovers(resp, floor)
    if pcs is None:
        return GainSet.empty()  # the gain margin is undefined for every gain
    cands = [g for _w, r in pcs for g in (1.0 / (spread * r), spread / r)]

    def holds(k: Fraction) -> bool:
        return all(abs(20.0 * math.log10(float(k) * r)) >= minimum for _w, r in pcs)

    return _decide(cands, top, holds, within)


def _dm_set(resp: _Resp, minimum: Fraction, top: float, within: GainSet) -> GainSet:
    if minimum <= 0:
        return GainSet.positive()
    shifted = _with_delay(resp, resp.delay + minimum)
    # Every gain crossover above 2π/τ has a delay margin below τ: a gain so high that all its
    # crossovers lie above that frequency fails the criterion, which bounds the search.
    reach = 2.0 * math.pi / float(minimum) * 1.001
    lowest = min(
        [resp.mag(w) for w in (0.0, reach, *_stationary_mag(resp)) if w <= reach],
        default=math.inf,
    )
    if lowest > 0.0:
        top = min(top, 1.0 / lowest)
    if resp.rel_degree == 0:
        top = min(top, 1.0 / resp.c_inf)
    if math.isinf(top):
        raise MarginsUnsupported(
            "delay-margin criterion: the loop's gain crossovers need not rise with the gain "
            "(a zero on the imaginary axis); not analysed"
        )
    floor = 1.0 / top
    cands = _crossing_gains(resp) + _level_gains(shifted, math.pi, floor)
    cands += [*_level_gains(resp, math.pi, floor), top]

    def holds(k: Fraction) -> bool:
        gcs = _gain_crossovers(resp, k)
        return gcs is not None and _delay_margin(resp, k, gcs) >= float(minimum)

    return _decide(cands, top, holds, within)


def _ms_candidates_exact(resp: _Resp, peak: Fraction) -> list[float]:
    """Gains where sup|S| can pass `peak`, without dead time, from exact polynomials.

    sup|S| ≤ M ⇔ F(x, K) = |D + K·N|² - |D|²/M² ≥ 0 for every x = ω² ≥ 0. The truth changes
    only where F gains or loses a root x ≥ 0: a double root (the discriminant in x vanishes),
    a root at x = 0, or one from x = ∞ (the leading coefficient in x vanishes).
    """
    rho2 = Fraction(peak.denominator, peak.numerator) ** 2
    d2, p, n2 = resp.d2i, resp.pi, resp.n2i
    # F over the integers (a positive constant factor: the same roots), as rows in x
    # (highest power first), each a polynomial in K (highest power first).
    factors = [n2.scale, 2 * p.scale, (1 - rho2) * d2.scale]
    den = 1
    for f in factors:
        den = den * f.denominator // math.gcd(den, f.denominator)
    scaled = [f.numerator * (den // f.denominator) for f in factors]
    size = max(len(n2.coeffs), len(p.coeffs), len(d2.coeffs))

    def padded(c: tuple[int, ...]) -> list[int]:
        return [0] * (size - len(c)) + list(c)

    rows = [
        [m * c for m, c in zip(scaled, column, strict=True)]
        for column in zip(padded(n2.coeffs), padded(p.coeffs), padded(d2.coeffs), strict=True)
    ]
    while rows and not any(rows[0]):
        rows.pop(0)
    polys = [rows[-1], rows[0]]  # F at x = 0; F's leading coefficient in x
    if len(rows) > 1:
        # The discriminant in x (up to a constant factor): the resultant of F and dF/dx.
        polys.append(_resultant_in_x(rows))
    out: list[float] = []
    for poly in polys:
        coeffs = _primitive(poly).coeffs
        if len(coeffs) > 1:
            out.extend(_positive_roots(coeffs))
    return out


def _resultant_in_x(rows: Sequence[Sequence[int]]) -> list[int]:
    """Res_x(F, dF/dx) for F = Σ rows[i](K)·x^(n-i) (each row a polynomial in K, highest power
    first, rows[0] not zero), as a polynomial in K: exactly the polynomial sympy's resultant
    over the integers returns (the Sylvester determinant).

    Evaluated at D + 1 consecutive integers K, D a bound on its degree, and interpolated
    exactly: a univariate resultant of integers at each point costs far less than the
    subresultant sequence over polynomials in K. Specialising K commutes with the resultant
    while F's leading coefficient stays non-zero; where it vanishes at a point, sympy's
    bivariate resultant is used instead.
    """
    n = len(rows) - 1
    # K-degree of the coefficient of x^(n-i); the Sylvester matrix's column j holds the
    # coefficients i = j - r of its shifted rows, so its determinant's degree is at most the
    # sum over columns of their largest degree (and over rows likewise).
    deg = [len(_strip(row)) - 1 for row in rows]
    by_columns = sum(max(deg[max(0, j - n + 1) : min(j, n) + 1]) for j in range(2 * n - 1))
    by_rows = (n - 1) * max(deg) + n * max(deg[:-1])
    bound = max(min(by_columns, by_rows), 0)
    nodes = range(-(bound // 2), bound - bound // 2 + 1)
    values: list[int] = []
    for k in nodes:
        f = [_horner_int(row, k) for row in rows]
        if f[0] == 0:
            return _resultant_in_x_by_sympy(rows)
        values.append(_res_with_derivative(f))
    return _interpolate_consecutive(nodes[0], values)


def _horner_int(p: Sequence[int], k: int) -> int:
    acc = 0
    for c in p:
        acc = acc * k + c
    return acc


def _resultant_in_x_by_sympy(rows: Sequence[Sequence[int]]) -> list[int]:
    from sympy.polys.domains import ZZ
    from sympy.polys.euclidtools import dmp_resultant

    degree = len(rows) - 1
    fz = [_strip(row) for row in rows]
    fx = [_strip([(degree - i) * c for c in row]) for i, row in enumerate(rows[:-1])]
    return [int(c) for c in dmp_resultant(fz, fx, 1, ZZ)]


def _res_with_derivative(f: Sequence[int]) -> int:
    """Res(f, f') for an integer polynomial of degree ≥ 1 (highest power first, f[0] ≠ 0)."""
    n = len(f) - 1
    return _int_resultant(list(f), [(n - i) * c for i, c in enumerate(f[:-1])])


def _int_resultant(a: list[int], b: list[int]) -> int:
    """The resultant (Sylvester determinant) of integer polynomials with deg a > deg b ≥ 0,
    leading coefficients non-zero, by the subresultant algorithm (H. Cohen, "A Course in
    Computational Algebraic Number Theory", algorithm 3.3.7, from memory): every division
    in it is exact, so it stays in integers."""
    da, db = len(a) - 1, len(b) - 1
    ca, cb = _content(a), _content(b)
    a = [c // ca for c in a]
    b = [c // cb for c in b]
    scale: int = ca**db * cb**da
    if db == 0:
        return scale * int(b[0] ** da)
    sign, g, h = 1, 1, 1
    while True:
        delta = da - db
        if da % 2 and db % 2:
            sign = -sign
        r = _pseudo_remainder(a, b)
        if not r:
            return 0
        div = g * h**delta
        a, da = b, db
        b = [c // div for c in r]
        db = len(b) - 1
        g = a[0]
        h = g**delta // h ** (delta - 1) if delta else h
        if db == 0:
            return sign * scale * int(b[0] ** da // h ** (da - 1))


def _content(p: Sequence[int]) -> int:
    g = 0
    for c in p:
        g = math.gcd(g, c)
    return g


def _pseudo_remainder(a: Sequence[int], b: Sequence[int]) -> list[int]:
    """r with lc(b)^(deg a - deg b + 1)·a = q·b + r, leading zeros dropped."""
    r = list(a)
    lead, m = b[0], len(b)
    for _ in range(len(a) - m + 1):
        top = r[0]
        r = [lead * c for c in r[1:]]
        if top:
            for i in range(1, m):
                r[i - 1] -= top * b[i]
    return _strip(r)


def _interpolate_consecutive(start: int, values: Sequence[int]) -> list[int]:
    """The integer polynomial (highest power first, leading zeros dropped) of degree <
    len(values) taking values[i] at start + i. Over consecutive integers a divided
    difference of order j is Δ^j/j!, an integer for a polynomial with integer coefficients,
    so Newton's table divides exactly."""
    c = list(values)
    size = len(c)
    for j in range(1, size):
        for i in range(size - 1, j - 1, -1):
            c[i] = (c[i] - c[i - 1]) // j
    out = [c[-1]]
    for i in range(size - 2, -1, -1):
        node = start + i
        # out·(K - node) + c[i]
        shifted = [*out, 0]
        for t, v in enumerate(out):
            shifted[t + 1] -= node * v
        shifted[-1] += c[i]
        out = shifted
    return _strip(out)


def _strip(coeffs: Sequence[int]) -> list[int]:
    """Leading zeros dropped (sympy's dense form)."""
    start = 0
    while start < len(coeffs) and coeffs[start] == 0:
        start += 1
    return list(coeffs[start:])


def _positive_roots(p: Sequence[int]) -> list[float]:
    fast = realroots.positive_roots(p)
    if fast is not None:
        return [float(x) for x in fast]
    poly = sympy.Poly(list(p), X, domain=sympy.QQ)
    out = []
    for (a, b), _m in poly.intervals():
        if b > 0:
            out.append(float(_root_value(poly, a, b)))
    return out


def _ms_candidates_delayed(resp: _Resp, peak: Fraction, top: float) -> list[float]:
    """The same gains with dead time, from the extrema over ω of the two roots K±(ω) of
    |1 + K·L(jω)| = 1/M (a grid, then a bounded Brent search: about 1e-10 relative)."""
    from scipy.optimize import minimize_scalar

    rho = float(Fraction(peak.denominator, peak.numerator))
    floor = (1.0 - rho) / top if rho < 1.0 else 1.0 / top
    grid = _grid(resp, _beyond(resp, 1.0, floor))  # past it no K ≤ top reaches the circle
    axis = {wp for wp, _ in resp.axis_poles} | {wz for wz, _ in resp.axis_zeros}

    def from_value(ell: complex, sign: float) -> float:
        r2 = abs(ell) ** 2
        disc = ell.real**2 - r2 * (1.0 - rho**2)
        if r2 == 0.0 or disc < 0.0:
            return math.nan
        return (-ell.real + sign * math.sqrt(disc)) / r2

    def branch(w: float, sign: float) -> float:
        return from_value(resp.value(w), sign)

    out: list[float] = []
    if resp.rel_degree == 0:
        out += [(1.0 - rho) / resp.c_inf, (1.0 + rho) / resp.c_inf]
    points = [float(w) for w in grid if float(w) not in axis]
    # Where |L0| < (1 - ρ)/top for good, every K with |1 + K·L| = ρ exceeds top, and the
    # caller keeps only candidates below top: extrema past that frequency need no search
    # (with a margin far above the rounding of K).
    count = len(points)
    if rho < 1.0 and math.isfinite(top):
        cut = _beyond(resp, 1.0, floor * (1.0 - 1e-9))
        count = min(count, bisect.bisect_right(points, cut) + 2)
    ells = [resp.value(w) for w in points[:count]]
    for sign in (1.0, -1.0):
        vals = [from_value(ell, sign) for ell in ells]
        if vals and math.isfinite(vals[0]):
            out.append(vals[0])
        for i in range(1, len(vals) - 1):
            a, b, c = vals[i - 1], vals[i], vals[i + 1]
            if not (math.isfinite(a) and math.isfinite(b) and math.isfinite(c)):
                continue
            if (b - a) * (c - b) <= 0.0 and (a, b) != (b, c):
                lo, hi = points[i - 1], points[i + 1]
                flip = -1.0 if b >= a else 1.0

                def obj(w: float, s: float = sign, f: float = flip) -> float:
                    v = branch(w, s)
                    return f * v if math.isfinite(v) else math.inf

                res = minimize_scalar(
                    obj, bounds=(lo, hi), method="bounded", options={"xatol": 1e-13 * hi}
                )
                out.append(branch(float(res.x), sign) if math.isfinite(res.fun) else b)
    return [g for g in out if math.isfinite(g) and g > 0.0]


def _ms_set(resp: _Resp, maximum: Fraction, top: float, within: GainSet) -> GainSet:
    if maximum <= 0:
        return GainSet.empty()
    if resp.delay == 0:
        cands = _ms_candidates_exact(resp, maximum)
    else:
        cands = _ms_candidates_delayed(resp, maximum, top)

    def holds(k: Fraction) -> bool:
        if resp.delay == 0:
            peak, _w, _n = _sensitivity_exact(resp, k)
        else:
            peak, _w, _n = _sensitivity_delayed(resp, k)
        return peak <= float(maximum)

    return _decide(cands, top, holds, within)


def _as_fraction(x: Fraction | float | int) -> Fraction:
    return x if isinstance(x, Fraction) else Fraction(x)


@_in_double_precision
def margin_gains(
    loop: LoopAlgebra,
    min_gain_margin_db: Fraction | float | None = None,
    min_phase_margin_deg: Fraction | float | None = None,
    min_delay_margin_s: Fraction | float | None = None,
    max_sensitivity_peak: Fraction | float | None = None,
) -> GainSet:
    """Gains in loop.limits ∩ (0, ∞) where every given margin criterion holds.

    Needs L = K·L0(s)·e^{-sT}; raises MarginsUnsupported otherwise. Criteria read as in the
    module docstring (|gain margin| ≥ m, |phase margin| ≥ m, delay margin ≥ τ, peak ≤ M);
    stability is not part of them: intersect with the stable set. With dead time the set is
    cut at the gain above which the delayed loop is unstable for every gain (beyond it the
    criteria are moot, and infinitely many phase crossovers would make the set an infinite
    union). Boundaries come from the candidate gains where a criterion's truth can change,
    each interval decided at a rational sample with the same code as :func:`margins_at`.
    """
    form = _factor_form(loop)
    if isinstance(form, str):
        raise MarginsUnsupported(form)
    resp, _open_rhp, _hidden = form
    if resp.rel_degree < 0:
        raise MarginsUnsupported("improper loop transfer (more zeros than poles): not analysed")
    result = loop.limits.intersect(GainSet.positive())
    top = math.inf
    if resp.delay > 0:
        upper = 1.0 / resp.c_inf if resp.rel_degree == 0 else math.inf
        _hits_list, unstable_above = _nyquist_hits(resp, upper)
        top = min(upper, unstable_above)
    if math.isfinite(top):
        result = result.intersect(GainSet((Interval(sympy.Integer(0), _float_end(top)),)))
    # Each criterion is decided only where the gains left so far lie (see _decide).
    if min_gain_margin_db is not None:
        result = result.intersect(_gm_set(resp, float(min_gain_margin_db), top, result))
    if min_phase_margin_deg is not None:
        result = result.intersect(_pm_set(resp, float(min_phase_margin_deg), top, result))
    if min_delay_margin_s is not None:
        result = result.intersect(_dm_set(resp, _as_fraction(min_delay_margin_s), top, result))
    if max_sensitivity_peak is not None:
        result = result.intersect(_ms_set(resp, _as_fraction(max_sensitivity_peak), top, result))
    return result
