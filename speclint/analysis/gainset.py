"""Sets of gain values: finite unions of intervals whose ends are exact real numbers.

Every set the analysis computes (the stable gains, the gains where a requirement holds,
their intersections) is one of these. Ends are exact sympy numbers: rationals, real
algebraic numbers (a radical, or a ``CRootOf``: a root of a polynomial with rational
coefficients), or ``sympy.oo``; the margins add Float ends, values found in floating
point. Comparisons between them are exact: an algebraic number made here keeps its
isolating interval, which narrows until the order is decided, and two different algebraic
numbers are never equal, so "an error exactly equal to its maximum" is decidable. (A Float
end against a radical compares as sympy does, at the Float's precision; see
_float_against_form.)

Floating point enters only in :meth:`GainSet.as_floats` and :func:`describe`, for
display; they round to 15 significant digits (a double's faithful range). Floating point
also guides the search for roots (speclint.analysis.realroots), which exact signs decide.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from fractions import Fraction
from itertools import pairwise
from typing import TypeAlias

import sympy
from mpmath.libmp import (  # type: ignore[import-untyped]
    from_int,
    from_rational,
    fzero,
    mpf_pos,
)
from mpmath.libmp import to_float as mpf_to_float
from sympy.polys.domains import QQ, ZZ

from speclint.analysis import realroots

Exact: TypeAlias = sympy.Expr  # Rational, radical, CRootOf (or a multiple), Float, or +/-oo

ZERO = sympy.Integer(0)
INF = sympy.oo


def exact(x: Fraction | int | sympy.Expr) -> Exact:
    """Turn a Fraction or int into a sympy Rational; leave sympy numbers alone."""
    if isinstance(x, Fraction):
        return sympy.Rational(x.numerator, x.denominator)
    if isinstance(x, int):
        return sympy.Integer(x)
    return x


# -- exact real numbers ---------------------------------------------------------------------
#
# The analysis finds the ends of gain sets as real roots of polynomials with rational
# coefficients. It keeps each irrational root as a `Root`: an irreducible integer polynomial
# and an isolating interval with rational ends, found by speclint.analysis.realroots
# (floating point only suggests where to look; exact signs decide). Comparing two such
# numbers narrows their intervals by exact bisection until they part; sympy's own
# comparison of algebraic numbers, by evaluating them to growing precision, is far slower.
# A root becomes a sympy number (a radical, or a CRootOf) only when it ends up as the end of
# a set: the very number `sympy.Poly.real_roots` returns for it, so what is printed does
# not depend on how it was found. The sympy number remembers its Root (`_KNOWN`), so later
# comparisons of gain-set ends stay on the fast path.

Number: TypeAlias = "Fraction | Root"

_X = sympy.Symbol("x")  # the variable sympy writes CRootOf polynomials in
_NEG_INF = sympy.S.NegativeInfinity
_FZERO = fzero  # mpmath's zero
# Exact bisection steps before a comparison hands over to sympy (two different algebraic
# numbers always part; this only bounds the work on pathological inputs).
_MAX_BISECTIONS = 4000
_KNOWN_LIMIT = 50_000  # sympy numbers remembered at once; forgetting one only costs speed


class _Family:
    """The real roots of one irreducible integer polynomial of degree ≥ 2, ascending.

    ``context`` is the polynomial (this one, or a product it divides) whose real roots
    were asked for: sympy scales the variable by a factor it reads off that polynomial,
    and the scale shows in how a root is written (``4*CRootOf(...)``).
    """

    __slots__ = ("context", "poly", "roots")

    def __init__(self, poly: tuple[int, ...], context: tuple[int, ...]) -> None:
        self.poly = poly
        self.context = context
        self.roots = [Root(self, i, lo, hi) for i, (lo, hi) in enumerate(_isolate(poly))]


class Root:
    """A real algebraic number of degree ≥ 2: the single root of ``family.poly`` in the
    open interval (lo, hi), which narrows as comparisons need (its ends are never roots)."""

    __slots__ = ("_exact", "_sign_lo", "family", "hi", "index", "lo")

    def __init__(self, family: _Family, index: int, lo: Fraction, hi: Fraction) -> None:
        self.family = family
        self.index = index  # among the polynomial's real roots, ascending
        self.lo = lo
        self.hi = hi
        self._sign_lo = realroots.value_sign(family.poly, lo)
        self._exact: Exact | None = None

    @property
    def poly(self) -> tuple[int, ...]:
        return self.family.poly

    def narrow(self) -> None:
        """Halve the isolating interval (exact signs at the midpoint)."""
        mid = (self.lo + self.hi) / 2
        if realroots.value_sign(self.family.poly, mid) == self._sign_lo:
            self.lo = mid
        else:
            self.hi = mid

    def exact(self) -> Exact:
        """The sympy number for this root, as ``sympy.Poly.real_roots`` writes it."""
        if self._exact is None:
            self._exact = _sympy_root(self)
            if len(_KNOWN) >= _KNOWN_LIMIT:
                _KNOWN.clear()
            _KNOWN[self._exact] = self
        return self._exact


_KNOWN: dict[Exact, Root] = {}


def to_exact(x: Number) -> Exact:
    """A number of the analysis as a sympy number (Rational, radical or CRootOf)."""
    if isinstance(x, Fraction):
        return sympy.Rational(x.numerator, x.denominator)
    return x.exact()


def _bounds(x: Number) -> tuple[Fraction, Fraction]:
    if isinstance(x, Fraction):
        return x, x
    return x.lo, x.hi


def _same_root(a: Root, b: Root) -> bool:
    """Whether two roots of the same irreducible polynomial are one number: then it lies
    in both intervals, so the polynomial changes sign over their common part."""
    if a.family is b.family:
        return a.index == b.index
    if a.family.poly != b.family.poly:
        return False  # distinct irreducible polynomials share no root
    lo, hi = max(a.lo, b.lo), min(a.hi, b.hi)
    if lo >= hi:
        return False
    p = a.family.poly
    return realroots.value_sign(p, lo) != realroots.value_sign(p, hi)


def number_less(a: Number, b: Number) -> bool:
    """Exact a < b."""
    decided = _number_less(a, b)
    if decided is None:
        return bool(less(to_exact(a), to_exact(b)))
    return decided


def _number_less(a: Number, b: Number) -> bool | None:
    if isinstance(a, Fraction) and isinstance(b, Fraction):
        return a < b
    for _ in range(_MAX_BISECTIONS):
        alo, ahi = _bounds(a)
        blo, bhi = _bounds(b)
        if ahi < blo:
            return True
        if bhi < alo:
            return False
        if a is b or (isinstance(a, Root) and isinstance(b, Root) and _same_root(a, b)):
            return False
        # A rational is never a root of an irreducible polynomial of degree ≥ 2, so
        # narrowing the wider interval always makes progress.
        if isinstance(a, Root) and (isinstance(b, Fraction) or ahi - alo >= bhi - blo):
            a.narrow()
        else:
            assert isinstance(b, Root)
            b.narrow()
    return None


def number_between(a: Number | None, b: Number | None) -> Fraction:
    """A short rational strictly between a < b; None stands for -∞ (a) or +∞ (b)."""
    if a is None:
        return Fraction(0) if b is None else Fraction(math.floor(_bounds(b)[0]) - 1)
    if b is None:
        return Fraction(math.floor(_bounds(a)[1]) + 1)
    decided = _number_less(a, b)  # True only once the two intervals have parted
    if decided is None:
        return _fraction(_sympy_between(to_exact(a), to_exact(b)))
    if not decided:
        raise ValueError("number_between needs a < b")
    ahi, blo = _bounds(a)[1], _bounds(b)[0]
    quarter = (blo - ahi) / 4
    return _simplest(ahi + quarter, blo - quarter)


def _fraction(x: Exact) -> Fraction:
    return Fraction(int(x.p), int(x.q))


def _simplest(lo: Fraction, hi: Fraction) -> Fraction:
    """The rational with the smallest denominator in [lo, hi] (the shortest sample)."""
    if lo <= 0 <= hi:
        return Fraction(0)
    if hi < 0:
        return -_simplest(-hi, -lo)
    parts: list[int] = []
    while True:  # continued fraction of the two ends until they part
        whole = lo.numerator // lo.denominator
        if whole == lo or whole + 1 <= hi:
            value = Fraction(whole if whole == lo else whole + 1)
            break
        parts.append(whole)
        lo, hi = 1 / (hi - whole), 1 / (lo - whole)
    for whole in reversed(parts):
        value = whole + 1 / value
    return value


def as_number(x: Exact) -> Number | None:
    """The analysis' form of a finite sympy number: a Fraction (a Float end counts as the
    rational it stores), the Root it was made from, or None (a form this module did not
    make: comparisons then go through sympy)."""
    if x.is_Rational:
        return Fraction(int(x.p), int(x.q))
    if x.is_Float:
        if not x.is_finite:
            return None
        return Fraction(float(x)) if x._prec <= 53 else _fraction(sympy.Rational(x))
    return _KNOWN.get(x)


def real_roots(coeffs: Sequence[Fraction]) -> list[Number]:
    """Distinct real roots of a polynomial with rational coefficients (highest power
    first), ascending: the numbers ``sympy.Poly.real_roots`` gives, found faster."""
    p = _integer_poly(coeffs)
    if len(p) < 2:
        return []
    context = tuple(p)
    out: list[Number] = []
    while p[-1] == 0:
        p.pop()
        if not out:
            out.append(Fraction(0))
    if len(p) >= 2:
        for factor in irreducible_factors(p):
            out.extend(factor_roots(factor, context))
    return sorted(out, key=functools.cmp_to_key(_order))


def _order(a: Number, b: Number) -> int:
    if number_less(a, b):
        return -1
    return 1 if number_less(b, a) else 0


def factor_roots(factor: tuple[int, ...], context: tuple[int, ...] | None = None) -> list[Number]:
    """Real roots, ascending, of an irreducible, primitive integer polynomial with a
    positive leading coefficient; ``context`` is the polynomial whose roots were asked for
    (the factor itself when None: it decides how sympy writes them)."""
    if len(factor) == 2:
        return [Fraction(-factor[1], factor[0])]
    return list(_Family(factor, factor if context is None else context).roots)


def irreducible_factors(p: Sequence[int]) -> list[tuple[int, ...]]:
    """The distinct irreducible factors of an integer polynomial with p(0) ≠ 0, each
    primitive with a positive leading coefficient (degree ≤ 2 without sympy)."""
    if len(p) == 2:
        return [_normal(p)]
    if len(p) == 3:
        a, b, c = p
        disc = b * b - 4 * a * c
        if disc < 0:
            return [_normal(p)]
        r = math.isqrt(disc)
        if r * r != disc:
            return [_normal(p)]
        # two rational roots (-b ± r)/(2a), each giving a linear factor q·x - p
        found = {_normal([q.denominator, -q.numerator]) for q in _quadratic_roots(a, b, r)}
        return sorted(found)
    if (len(p) in (4, 5) and _proven_irreducible(p)) or _proved_irreducible(p):
        return [_normal(p)]
    from sympy.polys.factortools import dup_factor_list

    _, factors = dup_factor_list([int(c) for c in p], ZZ)
    return [_normal([int(c) for c in f]) for f, _ in factors if len(f) > 1]


# Two tests prove a factor irreducible before sympy factors it: roots modulo small primes
# for a cubic or quartic (about 20 us; almost every one the analysis meets), and the
# degree patterns of distinct-degree factorisation for any degree (about ten times that).
# Primes for the first; it gives up after _TRIES of them that do not divide the leading
# coefficient.
_LOW_PRIMES = tuple(int(q) for q in sympy.primerange(2, 240))
_TRIES = 24


def _proven_irreducible(p: Sequence[int]) -> bool:
    """True when the integer cubic or quartic p is shown irreducible over Q; False when not
    shown (it may still be).

    A polynomial that factors over Q factors over Z with factors of the same degrees
    (Gauss's lemma). Modulo a prime q that does not divide the leading coefficient the
    factors keep their degrees, so a linear factor gives a root mod q: no root mod some such
    q rules out a linear factor (for a cubic, the only way to factor). A quartic may also
    be a product g·h of two quadratics: then a root r mod q makes g or h equal to
    (x − r)(x − s) with s a root as well, so a single root r mod q with p'(r) ≢ 0 (not
    double) rules that out (Knuth, The Art of Computer Programming, vol. 2, §4.6.2, on
    factoring over the integers through factoring mod p; from memory)."""
    n = len(p) - 1
    no_linear = False
    no_quadratics = n == 3
    tries = _TRIES
    for q in _LOW_PRIMES:
        lead = p[0] % q
        if not lead:
            continue
        c = [x % q for x in p]
        roots = []
        for x in range(q):
            acc = 0
            for coefficient in c:
                acc = (acc * x + coefficient) % q
            if not acc:
                roots.append(x)
                if len(roots) > 1:
                    break
        if not roots:
            no_linear = True
        elif len(roots) == 1 and not no_quadratics:
            r = roots[0]
            slope = 0
            for i, coefficient in enumerate(c[:-1]):
                slope = (slope * r + (n - i) * coefficient) % q
            no_quadratics = slope != 0
        if no_linear and no_quadratics:
            return True
        tries -= 1
        if not tries:
            return False
    return False


# Small primes for the general test: arithmetic modulo them stays in machine-sized
# integers, and a dozen of them settle almost every polynomial the analysis meets.
_TEST_PRIMES = (101, 103, 107, 109, 113, 127, 131, 137, 139, 149, 151, 157)


def _proved_irreducible(p: Sequence[int]) -> bool:
    """True when p (integers, highest power first, degree ≥ 2) is irreducible over the
    rationals, proved from its factorisation patterns modulo small primes; False when the
    test cannot tell (sympy's factorisation decides then).

    Were p = g·h over the integers (Gauss's lemma), a prime q dividing neither p's leading
    coefficient nor its discriminant would keep deg g, and g mod q would be a product of
    some of the distinct irreducible factors of p mod q: deg g is a sum of some of their
    degrees for every such q. When no degree between 1 and deg p - 1 is such a sum for all
    the primes tried, p has no proper factor (the degree-pattern argument behind factoring
    modulo primes; J. von zur Gathen and J. Gerhard, "Modern Computer Algebra", from
    memory). The patterns come from distinct-degree factorisation modulo q."""
    n = len(p) - 1
    possible = set(range(1, n))
    for q in _TEST_PRIMES:
        if p[0] % q == 0:
            continue
        degrees = _factor_degrees_mod(p, q)
        if degrees is None:
            continue  # q divides the discriminant
        sums = {0}
        for d in degrees:
            sums |= {s + d for s in sums}
        possible &= sums
        if not possible:
            return True
    return False


def _factor_degrees_mod(p: Sequence[int], q: int) -> list[int] | None:
    """Degrees of the irreducible factors of p modulo the prime q (q not dividing p's
    leading coefficient), by distinct-degree factorisation; None when p is not square-free
    modulo q."""
    f = _monic_mod([c % q for c in reversed(p)], q)  # lowest power first from here on
    if len(_gcd_mod(f, _derivative_mod(f, q), q)) > 1:
        return None
    degrees: list[int] = []
    h = [0, 1]  # x
    d = 0
    while 2 * (d + 1) <= len(f) - 1:
        d += 1
        h = _pow_mod(h, q, f, q)  # x^(q^d) modulo f
        g = _gcd_mod(f, _sub_mod(h, [0, 1], q), q)
        if len(g) > 1:
            degrees += [d] * ((len(g) - 1) // d)
            f = _div_mod(f, g, q)
            h = _rem_mod(h, f, q)
    if len(f) > 1:
        degrees.append(len(f) - 1)
    return degrees


def _trim_mod(a: list[int]) -> list[int]:
    while a and a[-1] == 0:
        a.pop()
    return a


def _monic_mod(a: list[int], q: int) -> list[int]:
    a = _trim_mod(a)
    inv = pow(a[-1], -1, q)
    return [c * inv % q for c in a]


def _derivative_mod(a: Sequence[int], q: int) -> list[int]:
    return _trim_mod([i * a[i] % q for i in range(1, len(a))])


def _sub_mod(a: Sequence[int], b: Sequence[int], q: int) -> list[int]:
    size = max(len(a), len(b))
    out = [((a[i] if i < len(a) else 0) - (b[i] if i < len(b) else 0)) % q for i in range(size)]
    return _trim_mod(out)


def _rem_mod(a: Sequence[int], f: Sequence[int], q: int) -> list[int]:
    """a modulo the monic f."""
    r = list(a)
    m = len(f) - 1
    for top in range(len(r) - 1, m - 1, -1):
        c = r[top]
        if c:
            base = top - m
            for i in range(m):
                r[base + i] = (r[base + i] - c * f[i]) % q
        r[top] = 0
    return _trim_mod(r[:m] if len(r) > m else r)


def _div_mod(a: Sequence[int], f: Sequence[int], q: int) -> list[int]:
    """The quotient of a by the monic f (an exact division)."""
    r = list(a)
    m = len(f) - 1
    out = [0] * (len(r) - m)
    for top in range(len(r) - 1, m - 1, -1):
        c = r[top]
        out[top - m] = c
        if c:
            base = top - m
            for i in range(m + 1):
                r[base + i] = (r[base + i] - c * f[i]) % q
    return _trim_mod(out)


def _mul_mod(a: Sequence[int], b: Sequence[int], f: Sequence[int], q: int) -> list[int]:
    prod = [0] * (len(a) + len(b) - 1) if a and b else []
    for i, x in enumerate(a):
        if x:
            for j, y in enumerate(b):
                prod[i + j] += x * y
    return _rem_mod([c % q for c in prod], f, q)


def _pow_mod(a: list[int], e: int, f: Sequence[int], q: int) -> list[int]:
    result = [1]
    while e:
        if e & 1:
            result = _mul_mod(result, a, f, q)
        e >>= 1
        if e:
            a = _mul_mod(a, a, f, q)
    return result


def _gcd_mod(a: list[int], b: list[int], q: int) -> list[int]:
    """The monic gcd (a ≠ 0)."""
    a = _monic_mod(list(a), q)
    b = _trim_mod(list(b))
    while b:
        b = _monic_mod(b, q)
        a, b = b, _rem_mod(a, b, q)
    return a


def _quadratic_roots(a: int, b: int, r: int) -> tuple[Fraction, Fraction]:
    return Fraction(-b - r, 2 * a), Fraction(-b + r, 2 * a)


def _normal(p: Sequence[int]) -> tuple[int, ...]:
    g = 0
    for c in p:
        g = math.gcd(g, c)
    if p[0] < 0:
        g = -g
    return tuple(c // g for c in p)


def _integer_poly(coeffs: Sequence[Fraction]) -> list[int]:
    trimmed = list(coeffs)
    while trimmed and trimmed[0] == 0:
        trimmed.pop(0)
    if not trimmed:
        return []
    return realroots.integer_coefficients(trimmed)


def _isolate(p: tuple[int, ...]) -> list[tuple[Fraction, Fraction]]:
    """Isolating intervals of every real root of the irreducible p (degree ≥ 2, so no
    rational roots and p(0) ≠ 0), ascending."""
    if len(p) == 3:
        return _quadratic_intervals(*p)
    positive = realroots.isolate_positive(p)
    mirrored = [c if (len(p) - 1 - i) % 2 == 0 else -c for i, c in enumerate(p)]
    negative = realroots.isolate_positive(mirrored)
    if positive is None or negative is None:
        # The fast search gave up: sympy's exact isolation (continued fractions) instead.
        from sympy.polys.rootisolation import dup_isolate_real_roots_sqf

        found = dup_isolate_real_roots_sqf(list(p), ZZ)
        return [(_from_qq(lo), _from_qq(hi)) for (lo, hi) in found]
    return [(-hi, -lo) for lo, hi in reversed(negative)] + positive


def _quadratic_intervals(a: int, b: int, c: int) -> list[tuple[Fraction, Fraction]]:
    """Isolating intervals of the real roots of the irreducible a·x² + b·x + c (a > 0):
    (-b ∓ √D)/(2a) with √D, D = b² - 4ac not a square, between s/2^k and (s + 1)/2^k for
    s = isqrt(D·4^k) (strictly: D·4^k is no square either). The two intervals part as
    s ≥ 1, and their ends, rational, are not roots. k makes them narrow next to the
    smaller root, |r| ≥ 2|c|/(|b| + √D), so that comparisons rarely need to narrow them;
    root isolation by the general search costs a millisecond here."""
    d = b * b - 4 * a * c
    if d < 0:
        return []
    size = (abs(b) + math.isqrt(d) + 1).bit_length() - (4 * a * abs(c)).bit_length()
    k = 70 + max(size + 1, 0)
    s = math.isqrt(d << (2 * k))
    den = 2 * a << k
    top = -b << k
    return [
        (Fraction(top - s - 1, den), Fraction(top - s, den)),
        (Fraction(top + s, den), Fraction(top + s + 1, den)),
    ]


def _from_qq(x: object) -> Fraction:
    return Fraction(int(x.numerator), int(x.denominator))  # type: ignore[attr-defined]


@functools.lru_cache(maxsize=256)
def _variable_scale(context: tuple[int, ...]) -> int:
    """The factor c by which sympy substitutes x = c·y before finding the roots of
    `context` (sympy.polys.polyroots.preprocess_roots and _integer_basis, followed step by
    step on the integers); the roots are then written c·root."""
    from sympy import divisors, integer_nthroot

    p = _normal(context)  # what clear_denoms and primitive leave (the sign does not matter)
    n = len(p) - 1
    monoms = [n - i for i, c in enumerate(p) if c]
    sizes = [abs(c) for c in p if c]
    if not sizes[0] < sizes[-1]:
        return 1
    # Read from the constant end: y = x/c makes the coefficients smaller.
    sizes.reverse()
    monoms = [monoms[0] - m for m in reversed(monoms)]
    monoms, sizes = monoms[:-1], sizes[:-1]
    if len(monoms) == 1:
        root, exact = integer_nthroot(sizes[0], monoms[0])
        return int(root) if exact else 1
    g = 0
    for c in sizes:
        g = math.gcd(g, c)
    for div in reversed(divisors(g)[1:]):
        if all(c % div**m == 0 for m, c in zip(monoms, sizes, strict=True)):
            return int(div)
    return 1


def _sympy_root(root: Root) -> Exact:
    """The number sympy's real_roots returns for this root (same form, same printing)."""
    from sympy.polys import rootoftools
    from sympy.polys.rootisolation import RealInterval

    family = root.family
    scale = _variable_scale(family.context)
    n = len(family.poly) - 1
    # p(c·y) with integer coefficients, made primitive: the factor sympy finds.
    scaled = _normal([c * scale ** (n - i) for i, c in enumerate(family.poly)])
    if n == 2 and scaled[1] != 0:
        # sympy writes these as radicals (roots_quadratic): built here without its cost.
        radicals = _quadratic_radicals(*scaled)
        if radicals is not None:
            return _times(scale, radicals[root.index])
    pure = sympy.PurePoly(list(scaled), _X, domain=ZZ)
    trivial = rootoftools.CRootOf._roots_trivial(pure, True)
    if trivial is not None:
        base = trivial[root.index]
    else:
        cache = rootoftools._reals_cache
        if pure not in cache:
            # sympy's root isolation costs more than all the rest; hand it the intervals
            # found here (of y = x/c), in its own form.
            rep = pure.rep.to_list()
            cache[pure] = [
                RealInterval(
                    (_qq(r.lo / scale), _qq(r.hi / scale)),
                    rep,
                    ZZ,
                )
                for r in family.roots
            ]
        base = rootoftools.CRootOf._new(pure, root.index)
    return _times(scale, base)


def _times(scale: int, x: Exact) -> Exact:
    # 1·x is x itself; sympy's product would still spend a millisecond on a CRootOf.
    return x if scale == 1 else sympy.Integer(scale) * x


@functools.lru_cache(maxsize=1024)
def _quadratic_radicals(a: int, b: int, c: int) -> tuple[Exact, Exact] | None:
    """The roots of a·x² + b·x + c (a > 0, b ≠ 0, c ≠ 0, b² - 4ac > 0 and not a square),
    ascending, as the very expressions sympy's roots_quadratic gives: B ∓ q·√r with
    B = -b/(2a), where √(b² - 4ac) = m·√r as sympy's power of an integer writes it, q = m/(2a).

    sympy reaches that form by evaluating √(b² - 4ac), which splits off m and evaluates
    √r, and then the products, which evaluate √r once more (each evaluation a search for
    square factors, a millisecond or more), and simplifies the sums. Here the first two
    steps are sympy's own (its factorisation of the discriminant, its √r), the third is
    the repetition of the second, and the expressions are assembled from the parts
    without evaluation (in the canonical order). None where √r does not stay √r or the
    discriminant is a perfect power: sympy then builds the expressions itself."""
    split = _square_part(b * b - 4 * a * c)
    if split is None:
        return None
    m, r = split
    radical = sympy.Pow(sympy.Integer(r), sympy.S.Half)
    if not (radical.is_Pow and radical.base == r and radical.exp is sympy.S.Half):
        return None
    lead = sympy.Rational(-b, 2 * a)
    q = sympy.Rational(m, 2 * a)

    def term(coeff: sympy.Rational) -> Exact:
        return radical if coeff == 1 else sympy.Mul(coeff, radical, evaluate=False)

    return (
        sympy.Add(lead, term(-q), evaluate=False),
        sympy.Add(lead, term(q), evaluate=False),
    )


def _square_part(d: int) -> tuple[int, int] | None:
    """(m, r) with d = m²·r as sympy's Integer._eval_power splits a square root, from the
    factors sympy's factorint finds with trial division up to 2^15 (d > 0, not a square);
    None for a perfect power, which sympy splits at the power's base instead."""
    from sympy.ntheory.factor_ import perfect_power

    if perfect_power(d) is not False:
        return None
    m = r = 1
    for factor, exponent in sympy.Integer(d).factors(limit=2**15).items():
        m *= int(factor) ** (exponent // 2)
        if exponent % 2:
            r *= int(factor)
    return m, r


def _qq(x: Fraction) -> object:
    return QQ(x.numerator, x.denominator)


# -- comparisons of sympy numbers ---------------------------------------------------------


def less(a: Exact, b: Exact) -> bool:
    """Exact a < b for the numbers a gain set holds."""
    if a is b:
        return False
    if a is INF or b is _NEG_INF:
        return False
    if b is INF or a is _NEG_INF:
        return True
    if a.is_Rational and b.is_Rational:
        return bool(a.p * b.q < b.p * a.q)  # denominators are positive
    ra, rb = _ratio(a), _ratio(b)
    if ra is not None and rb is not None:
        return ra[0] * rb[1] < rb[0] * ra[1]
    na, nb = as_number(a), as_number(b)
    if na is not None and nb is not None:
        if _float_against_form(a, na, b, nb):
            decided = _clearly_less(na, nb)
        else:
            decided = _number_less(na, nb)
        if decided is not None:
            return decided
    return _sympy_less(a, b)


def _ratio(x: Exact) -> tuple[int, int] | None:
    """(n, d), d > 0, with x = n/d for a rational or a finite Float (the binary number it
    holds: mantissa·2^exponent); None for other numbers. Comparing these in integers is
    the exact comparison of the values, without a Fraction (and its gcd) for each."""
    if x.is_Rational:
        return int(x.p), int(x.q)
    if x.is_Float:
        sign, man, exp, _bits = x._mpf_
        if not man:
            return (0, 1) if x._mpf_ == _FZERO else None  # inf and nan have no mantissa
        n = -int(man) if sign else int(man)
        return (n << exp, 1) if exp >= 0 else (n, 1 << -exp)
    return None


def _clearly_less(a: Number, b: Number) -> bool | None:
    """a < b for a Float end (a rational) against an algebraic number sympy writes as a
    radical or a multiple of a CRootOf, where sympy's comparison, made at the Float's
    precision, is sure to agree with the exact order; None when they are too close to tell.

    sympy rounds to 53 bits either the other number or, for a radical, the Float plus the
    radical's rational part; every term involved is at most |F| + R in size, R a bound on
    the roots of the number's polynomial (a radical's rational part and its surd are half
    the sum and half the difference of the two roots, so neither exceeds the larger one).
    A gap wider than 2^-40 times that size leaves no doubt about the order sympy finds."""
    if isinstance(a, Fraction):
        if not isinstance(b, Root):
            return None
        flip = _clearly_less(b, a)
        return None if flip is None else not flip
    if not isinstance(b, Fraction):
        return None
    p = a.family.poly
    size = abs(b) + 1 + Fraction(max(abs(c) for c in p[1:]), abs(p[0]))  # Cauchy's bound
    tol = size / 2**40
    while True:
        if a.hi < b - tol:
            return True
        if a.lo > b + tol:
            return False
        if a.hi - a.lo < tol:
            return None
        a.narrow()


def _float_against_form(a: Exact, na: Number, b: Exact, nb: Number) -> bool:
    """Whether a Float end meets an algebraic number written as a radical or a multiple of
    a CRootOf. sympy compares those at the Float's own precision (the other side rounded
    to it), not exactly; a Float end is a 15-digit value from floating point, and that is
    the comparison its sets have always been built with, so it stays."""
    return (a.is_Float and isinstance(nb, Root) and not isinstance(b, sympy.CRootOf)) or (
        b.is_Float and isinstance(na, Root) and not isinstance(a, sympy.CRootOf)
    )


@functools.lru_cache(maxsize=4096)
def _sympy_less(a: Exact, b: Exact) -> bool:
    """a < b for numbers made elsewhere (a CRootOf from sympy itself), or a Float end
    against a radical; remembered, as the same pairs meet again in every set operation."""
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
    na = None if a is _NEG_INF else as_number(a)
    nb = None if b is INF else as_number(b)
    if (na is None and a is not _NEG_INF) or (nb is None and b is not INF):
        return _sympy_between(a, b)
    if na is not None and nb is not None and _float_against_form(a, na, b, nb):
        return _sympy_between(a, b)
    q = number_between(na, nb)
    return sympy.Rational(q.numerator, q.denominator)


def _sympy_between(a: Exact, b: Exact) -> sympy.Rational:
    """rational_between for numbers made elsewhere."""
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
        # The whole line leaves every piece of the other set as it is (the general loop
        # below would rebuild each one unchanged).
        if self._is_everything():
            return GainSet.of(other.intervals)
        if other._is_everything():
            return GainSet.of(self.intervals)
        out: list[Interval] = []
        for a in self.intervals:
            for b in other.intervals:
                lo, lo_closed = _max_end(a.lo, a.lo_closed, b.lo, b.lo_closed)
                hi, hi_closed = _min_end(a.hi, a.hi_closed, b.hi, b.hi_closed)
                iv = Interval(lo, hi, lo_closed, hi_closed)
                if not iv.is_empty():
                    out.append(iv)
        return GainSet.of(out)

    def _is_everything(self) -> bool:
        return (
            len(self.intervals) == 1
            and self.intervals[0].lo is _NEG_INF
            and self.intervals[0].hi is INF
        )

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


@functools.lru_cache(maxsize=4096)
def to_float(x: Exact) -> float:
    """x to 15 significant digits (remembered: an end is written in many messages)."""
    if x is INF:
        return float("inf")
    if x == -INF:
        return float("-inf")
    if x.is_Rational:
        p, q = int(x.p), int(x.q)
        return _as_sympy_rounds(from_int(p, 64) if q == 1 else from_rational(p, q, 64))
    if x.is_Float:
        return _as_sympy_rounds(x._mpf_)
    root = _KNOWN.get(x)
    if root is not None:
        return _float_of(root)
    return float(sympy.Float(x.evalf(17), 15))


def _as_sympy_rounds(mpf: tuple[int, int, int, int]) -> float:
    """float(sympy.Float(x.evalf(17), 15)) for a rational or Float x, given x as sympy's evalf
    first evaluates it (to 64 bits for 17 digits: from_int/from_rational, or the Float's own
    value): the same roundings, to 60 bits and then to 53, without building the sympy
    objects in between (tens of microseconds each, thousands of times a run)."""
    from sympy.core.numbers import mpf_norm

    return float(mpf_to_float(mpf_norm(mpf_norm(mpf, 60), 53)))


def _float_of(root: Root) -> float:
    """What to_float gives for a root's sympy number: its value rounded to nearest at 60 bits
    (evalf to 17 digits), then at 53 (15 digits). Found exactly, by narrowing the root's
    interval until both ends round alike at 60 bits, instead of by sympy's refinement of
    a CRootOf interval (a millisecond each)."""
    while True:
        lo = from_rational(root.lo.numerator, root.lo.denominator, 60, "n")
        if lo == from_rational(root.hi.numerator, root.hi.denominator, 60, "n"):
            return float(mpf_to_float(mpf_pos(lo, 53, "n")))
        root.narrow()


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
    coeffs = [_from_qq(c) for c in poly.rep.to_list()]
    roots = real_roots(coeffs)
    p = _integer_poly(coeffs)  # a positive multiple: the same signs
    ends: list[Number | None] = [None, *roots, None]
    pieces: list[Interval] = []
    for lo, hi in pairwise(ends):
        sample = number_between(lo, hi)
        if (realroots.value_sign(p, sample) > 0) == positive:
            pieces.append(
                Interval(
                    -INF if lo is None else to_exact(lo),
                    INF if hi is None else to_exact(hi),
                    closed and lo is not None,
                    closed and hi is not None,
                )
            )
    if closed:
        pieces.extend(Interval(to_exact(r), to_exact(r), True, True) for r in roots)
    return GainSet.of(pieces)
