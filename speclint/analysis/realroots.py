"""Positive real roots of polynomials with integer coefficients: exact, and fast.

sympy's root isolation (continued fractions over ``Poly``) is exact but slow on the
polynomials the margins produce: degree 10-30, coefficients of hundreds of digits (decimal
time constants, squared), roots spread over many decades. Here floating point only
*guides* the search and exact integer arithmetic *decides*:

1. numpy's companion-matrix roots suggest where the positive real roots are;
2. each suggestion is bracketed by two dyadic rationals where the exact sign of p differs;
3. Descartes' rule of signs, applied exactly to p mapped onto an interval by a Möbius
   transformation, proves that a bracket holds exactly one root and a gap between brackets
   none (Vincent-Collins-Akritas). The gaps are first cut at the real parts of numpy's
   complex roots, which would otherwise keep a gap's count positive through many
   bisections; an interval whose count is still undecided is bisected, so the search stays
   complete whatever numpy returned;
4. each root is refined by Newton steps in exact rational arithmetic (rounded to dyadic
   rationals) and accepted only once an exact sign change brackets it within 1e-20 of its
   size; a step that does not converge falls back to bisection.

Nothing here trusts a float: when a search grows beyond its budget the caller's exact
sympy route takes over (``None`` is returned). Coefficient lists are highest power first.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from fractions import Fraction

# Relative width to which roots are refined: their rational value lies within this
# fraction of the root's size.
REL_EPS = Fraction(1, 10**20)
_MAX_NODES = 400  # bisections before the search gives up and the exact sympy route runs
_NEWTON_STEPS = 8


def sign_variations(coeffs: Sequence[int]) -> int:
    """Sign changes along the non-zero coefficients (Descartes' bound)."""
    count, last = 0, 0
    for c in coeffs:
        if c:
            if last and (c > 0) != (last > 0):
                count += 1
            last = c
    return count


def _scaled_value(p: Sequence[int], x: Fraction) -> tuple[int, int]:
    """(a, d) with p(x) = a/d, d > 0: Horner's rule in integers, x = n/d' (no gcds)."""
    num, den = x.numerator, x.denominator
    acc, scale = p[0], 1
    for c in p[1:]:
        scale *= den
        acc = acc * num + c * scale
    return acc, scale


def value_sign(p: Sequence[int], x: Fraction) -> int:
    """Exact sign of p(x), p with integer coefficients (highest power first)."""
    acc, _scale = _scaled_value(p, x)
    return (acc > 0) - (acc < 0)


def _value(p: Sequence[int], x: Fraction) -> Fraction:
    return Fraction(*_scaled_value(p, x))


def _derivative(p: Sequence[int]) -> list[int]:
    n = len(p) - 1
    return [c * (n - i) for i, c in enumerate(p[:-1])]


def _taylor_shift(p: list[int], a: int) -> list[int]:
    """Coefficients of p(x + a) (integer a), highest power first."""
    q = list(p)
    n = len(q) - 1
    if a == 0:
        return q
    for i in range(n):
        for j in range(1, n - i + 1):
            q[j] += a * q[j - 1]
    return q


def _variations_on(p: Sequence[int], lo: Fraction, hi: Fraction | None) -> int:
    """Descartes' bound on the roots of p in the open interval (lo, hi) (hi None: ∞)."""
    n = len(p) - 1
    if hi is None:
        # p(lo + y/d)·d^n, lo = a/d: roots y > 0 are the roots of p above lo.
        d, a = lo.denominator, lo.numerator
        scaled = [c * d**i for i, c in enumerate(p)]
        return sign_variations(_taylor_shift(scaled, a))
    d = lo.denominator * hi.denominator // math.gcd(lo.denominator, hi.denominator)
    a, b = int(lo * d), int(hi * d)
    # S(x) = d^n·p(x/d); S(x + a) at x = (b - a)·t maps t ∈ (0, 1) onto (lo, hi).
    scaled = [c * d**i for i, c in enumerate(p)]
    shifted = _taylor_shift(scaled, a)
    width = b - a
    on_unit = [c * width ** (n - i) for i, c in enumerate(shifted)]
    # (1 + y)^n·q(1/(1 + y)): roots in t ∈ (0, 1) become roots y > 0.
    return sign_variations(_taylor_shift(on_unit[::-1], 1))


def _approx_roots(p: Sequence[int]) -> list[complex]:
    """Every root of p by numpy's companion matrix (a guide only; may be far off)."""
    import numpy as np

    top = max(abs(c).bit_length() for c in p)
    shift = max(top - 900, 0)  # keep every coefficient within the range of a double
    floats = [float(c >> shift) for c in p]
    while floats and floats[0] == 0.0:
        floats.pop(0)
    zeros = 0
    while len(floats) > 1 and floats[-1] == 0.0:
        floats.pop()
        zeros += 1
    if len(floats) < 2:
        return [0j] * zeros
    # The companion matrix's eigenvalues, as numpy.roots computes them (the same matrix,
    # so the same roots), without its argument checks: a third of its cost at these sizes.
    n = len(floats) - 1
    companion = np.eye(n, k=-1)
    companion[0, :] = -np.array(floats[1:]) / floats[0]
    try:
        found = np.linalg.eigvals(companion)
    except (np.linalg.LinAlgError, ValueError):
        return []
    return [complex(z) for z in found] + [0j] * zeros


def _guesses(roots: Sequence[complex]) -> list[float]:
    """Approximate positive real roots among numpy's (a guide only; may miss or invent)."""
    out = []
    for z in roots:
        re, im = z.real, z.imag
        if re > 0.0 and math.isfinite(re) and abs(im) <= 1e-3 * re:
            out.append(re)
    return sorted(out)


def _splits(roots: Sequence[complex], found: Sequence[tuple[Fraction, Fraction]]) -> list[Fraction]:
    """Points between the brackets at the real parts of the other roots right of the axis.

    An interval (a, b) of the positive axis whose Descartes count is positive but holds no
    real root owes it to roots in the disc with diameter [a, b] (and (a, ∞) to roots with
    real part above a): cutting at each such root's real part puts it on the edge of both
    pieces' discs, so their counts drop to 0 at once instead of after many bisections.
    """
    out: set[Fraction] = set()
    for z in roots:
        if not (z.real > 0.0 and math.isfinite(z.real)):
            continue
        # A short dyadic number: any point near the real part serves.
        mantissa, exponent = math.frexp(z.real)
        x = Fraction(round(mantissa * 2**24)) * Fraction(2) ** (exponent - 24)
        if not any(lo <= x <= hi for lo, hi in found):
            out.add(x)
    return sorted(out)


def _bracket(p: Sequence[int], r: float) -> tuple[Fraction, Fraction] | None:
    """Dyadic rationals close around r where the exact sign of p differs, if any."""
    for rel in (1e-13, 1e-10, 1e-7, 1e-4, 1e-2):
        lo, hi = Fraction(r * (1.0 - rel)), Fraction(r * (1.0 + rel))
        s_lo, s_hi = value_sign(p, lo), value_sign(p, hi)
        if s_lo == 0 or s_hi == 0:
            return None  # an exact rational root here: leave it to the bisection search
        if s_lo != s_hi:
            return lo, hi
    return None


def isolate_positive(p: Sequence[int]) -> list[tuple[Fraction, Fraction]] | None:
    """Disjoint intervals [lo, hi], 0 < lo ≤ hi, each holding exactly one positive root of
    the square-free p (lo = hi: that exact rational root), ascending; None when the search
    exceeded its budget. p must not vanish at 0."""
    p = list(p)
    if len(p) < 2 or sign_variations(p) == 0:
        return []
    roots = _approx_roots(p)
    found: list[tuple[Fraction, Fraction]] = []
    for r in _guesses(roots):
        br = _bracket(p, r)
        if br is not None and (not found or br[0] > found[-1][1]):
            found.append(br)
    if len(found) == sign_variations(p):
        # Each bracket holds an odd number of roots and Descartes allows no more in all:
        # exactly one each, none elsewhere.
        return found
    # Prove each piece, or bisect it until it is proven (a complete search on its own).
    result: list[tuple[Fraction, Fraction]] = []
    cuts = _splits(roots, found)
    for x in cuts:
        if value_sign(p, x) == 0:
            result.append((x, x))
    edges: list[Fraction | None] = [Fraction(0)]
    for a, b in sorted(found + [(x, x) for x in cuts]):
        edges += [a] if a == b else [a, b]
    edges.append(None)  # ∞
    pending = [(edges[i], edges[i + 1]) for i in range(len(edges) - 1)]
    nodes = 0
    while pending:
        lo, hi = pending.pop()
        assert lo is not None
        v = _variations_on(p, lo, hi)
        if v == 0:
            continue
        if v == 1 and hi is not None:
            result.append((lo, hi))
            continue
        nodes += 1
        if nodes > _MAX_NODES:
            return None
        # Split at the midpoint, or close the search on the right with Cauchy's bound.
        mid = (lo + hi) / 2 if hi is not None else lo + _cauchy_bound(p)
        if value_sign(p, mid) == 0:
            result.append((mid, mid))
        pending += [(lo, mid), (mid, hi)]
    result.sort()
    return result


def _cauchy_bound(p: Sequence[int]) -> Fraction:
    """Every root is smaller than this in size (Cauchy's bound)."""
    return 1 + Fraction(max(abs(c) for c in p[1:]), abs(p[0]))


def refine(p: Sequence[int], lo: Fraction, hi: Fraction) -> Fraction:
    """The single root of p in [lo, hi] (a sign change or an exact root), as a rational
    within REL_EPS of its size: the midpoint of an exactly checked bracket."""
    if lo == hi:
        return lo
    s_lo = value_sign(p, lo)
    if s_lo == 0:
        return lo
    if value_sign(p, hi) == 0:
        return hi
    dp = _derivative(p)
    x = _newton(p, dp, lo, hi)
    if x is not None:
        half = abs(x) * REL_EPS / 2
        # Dyadic ends keep the numbers small; any bracket inside [lo, hi] will do.
        a, b = _dyadic_below(x - half, x), _dyadic_above(x + half, x)
        if lo <= a and b <= hi:
            sa, sb = value_sign(p, a), value_sign(p, b)
            if sa == 0:
                return a
            if sb == 0:
                return b
            if sa != sb:
                return _exact_or_middle(p, a, b)
    while True:  # bisection: slow, sure
        mid = (lo + hi) / 2
        if hi - lo <= 2 * REL_EPS * min(abs(lo), abs(hi)):
            return _exact_or_middle(p, lo, hi)
        s_mid = value_sign(p, mid)
        if s_mid == 0:
            return mid
        if s_mid == s_lo:
            lo = mid
        else:
            hi = mid


def _exact_or_middle(p: Sequence[int], lo: Fraction, hi: Fraction) -> Fraction:
    """The root in [lo, hi] itself when it is the simplest rational there (an integer, a
    short decimal: data often has such roots), else the middle of the bracket."""
    simplest = _simplest_between(lo, hi)
    if value_sign(p, simplest) == 0:
        return simplest
    return (lo + hi) / 2


def _simplest_between(lo: Fraction, hi: Fraction) -> Fraction:
    """The rational with the smallest denominator in [lo, hi], 0 < lo ≤ hi (Stern-Brocot,
    by the continued fraction both ends share; a loop, not recursion: the fraction can
    be thousands of terms long). Plain integers throughout: a Fraction per step would
    reduce by a gcd each time, and the convergents come out in lowest terms anyway."""
    a, b = lo.numerator, lo.denominator  # lo = a/b, hi = c/d, not kept reduced
    c, d = hi.numerator, hi.denominator
    parts: list[int] = []
    while True:
        floor, rest = divmod(a, b)
        if rest == 0:
            num, den = floor, 1
            break
        if (floor + 1) * d <= c:
            num, den = floor + 1, 1
            break
        # lo and hi share the integer part: go on with the reciprocals of the remainders.
        parts.append(floor)
        a, b, c, d = d, c - floor * d, b, rest
    for floor in reversed(parts):
        num, den = floor * num + den, num
    return Fraction(num, den)


def _grid_scale(centre: Fraction) -> int:
    """2^k with about 80 bits below centre's leading bit (1 for a huge centre)."""
    bits = 80 - (abs(centre.numerator).bit_length() - centre.denominator.bit_length())
    return 1 << bits if bits >= 0 else 1


def _dyadic_below(x: Fraction, centre: Fraction) -> Fraction:
    scale = _grid_scale(centre)
    return Fraction(math.floor(x * scale), scale)


def _dyadic_above(x: Fraction, centre: Fraction) -> Fraction:
    scale = _grid_scale(centre)
    return Fraction(math.ceil(x * scale), scale)


def _newton(p: Sequence[int], dp: Sequence[int], lo: Fraction, hi: Fraction) -> Fraction | None:
    # In plain integers: x = u/v, p(x) = P/v^n and p'(x) = D/v^(n-1), so the Newton step is
    # P/(v·D) and the next point (u·D - P)/(v·D), rounded down to the dyadic grid; the
    # Fractions this replaces would reduce every intermediate by a gcd.
    x = (lo + hi) / 2
    for _ in range(_NEWTON_STEPS):
        u, v = x.numerator, x.denominator
        num, den = _homogeneous(p, u, v), v * _homogeneous(dp, u, v)
        if den == 0:
            return None
        if den < 0:
            num, den = -num, -den
        scale = _grid_scale(x)
        x = Fraction((u * (den // v) - num) * scale // den, scale)
        if not lo <= x <= hi:
            return None
        # |step| ≤ |x|·REL_EPS/8 with step = num/den, in integers.
        if abs(num) * 8 * REL_EPS.denominator * x.denominator <= abs(x.numerator) * den:
            return x
    return None


def _homogeneous(p: Sequence[int], u: int, v: int) -> int:
    """v^n·p(u/v), n = deg p."""
    acc, power = p[0], 1
    for c in p[1:]:
        power *= v
        acc = acc * u + c * power
    return acc


def positive_roots(p: Sequence[int], include_zero: bool = False) -> list[Fraction] | None:
    """Distinct real roots x ≥ 0 of p (x > 0 unless include_zero), ascending, each within
    REL_EPS of its size; None when the fast search gave up (use the exact slow route)."""
    p = _trim(p)
    if len(p) < 2:
        return []
    zero = p[-1] == 0
    while p[-1] == 0:
        p.pop()
    out: list[Fraction] = [Fraction(0)] if zero and include_zero else []
    if len(p) < 2:
        return out
    sqf = square_free(p)
    isolated = isolate_positive(sqf)
    if isolated is None:
        return None
    out.extend(refine(sqf, lo, hi) for lo, hi in isolated)
    return out


def _trim(p: Sequence[int]) -> list[int]:
    q = list(p)
    while q and q[0] == 0:
        q.pop(0)
    return q


def square_free(p: Sequence[int]) -> list[int]:
    """p divided by gcd(p, p'): the same roots, each once (primitive, positive leading)."""
    from sympy.polys.domains import ZZ
    from sympy.polys.sqfreetools import dup_sqf_part

    q = list(p)
    if len(q) <= 2:
        return q
    if coprime(q, _derivative(q)):
        # gcd(p, p') = 1: the square-free part is p itself, made primitive and positive
        # leading, as sympy's dup_sqf_part returns it.
        g = 0
        for c in q:
            g = math.gcd(g, c)
        g = g if q[0] > 0 else -g
        return [c // g for c in q]
    part = dup_sqf_part([ZZ(c) for c in q], ZZ)
    return [int(c) for c in part]


_PRIME = 2**30 - 35  # the largest prime below 2^30: residues and their products stay small


def coprime(p: Sequence[int], q: Sequence[int]) -> bool:
    """True when p and q (integers, highest power first, p[0] ≠ 0) provably share no root,
    from their gcd modulo a prime; False when they do or the test cannot tell.

    Were g = gcd(p, q) over the rationals of degree d ≥ 1,
    its primitive integer form would divide p over the integers (Gauss's lemma), so its
    leading coefficient would divide p's; a prime that does not divide p's leading
    coefficient keeps g of degree d modulo the prime, and g divides both residues there."""
    if not p or p[0] % _PRIME == 0:
        return False
    a = [c % _PRIME for c in p]
    b = [c % _PRIME for c in q]
    while b and b[0] == 0:
        b.pop(0)
    while b:
        if len(b) == 1:
            return True  # a non-zero constant: the residues are coprime
        # a mod b over the integers modulo the prime.
        inv = pow(b[0], -1, _PRIME)
        while len(a) >= len(b):
            factor = a[0] * inv % _PRIME
            if factor:
                for i in range(1, len(b)):
                    a[i] = (a[i] - factor * b[i]) % _PRIME
            a.pop(0)
            while a and a[0] == 0:
                a.pop(0)
        a, b = b, a
    return False  # the remainder sequence ended in a polynomial of positive degree


def integer_coefficients(coeffs: Sequence[Fraction]) -> list[int]:
    """Rational coefficients scaled to coprime integers (the same roots)."""
    den = 1
    for c in coeffs:
        den = den * c.denominator // math.gcd(den, c.denominator)
    ints = [int(c * den) for c in coeffs]
    g = 0
    for k in ints:
        g = math.gcd(g, k)
    return [k // g for k in ints] if g > 1 else ints


def positive_roots_with_sign(
    q: Sequence[int], p: Sequence[int]
) -> list[tuple[Fraction, int]] | None:
    """Distinct roots x > 0 of q (as positive_roots) with the exact sign of p at each; q and
    p share no root. None when the fast search gave up."""
    q = _trim(q)
    while len(q) > 1 and q[-1] == 0:
        q.pop()
    if len(q) < 2:
        return []
    sqf = square_free(q)
    isolated = isolate_positive(sqf)
    if isolated is None:
        return None
    out: list[tuple[Fraction, int]] = []
    for lo, hi in isolated:
        sign = _sign_of_other(sqf, lo, hi, p)
        if sign is None:
            return None
        out.append((refine(sqf, lo, hi), sign))
    return out


def _sign_of_other(q: Sequence[int], lo: Fraction, hi: Fraction, p: Sequence[int]) -> int | None:
    """Sign of p at the one root of q in [lo, hi]: shrink the bracket until Descartes shows
    p has no root in it, then p's sign anywhere in it is its sign at the root."""
    if lo == hi:
        s = value_sign(p, lo)
        return s if s != 0 else None
    s_lo = value_sign(q, lo)
    for _ in range(400):
        p_lo, p_hi = value_sign(p, lo), value_sign(p, hi)
        if p_lo != 0 and p_lo == p_hi and _variations_on(p, lo, hi) == 0:
            return p_lo
        mid = (lo + hi) / 2
        s_mid = value_sign(q, mid)
        if s_mid == 0:
            s = value_sign(p, mid)
            return s if s != 0 else None
        if s_mid == s_lo:
            lo = mid
        else:
            hi = mid
    return None
