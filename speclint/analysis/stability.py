"""Closed-loop stability, exactly: the Routh table, the stable gain set, hidden modes.

Everything here is exact rational arithmetic on the characteristic polynomial that
:func:`speclint.analysis.algebra.characteristic` builds from the blocks as written, so a
pole cancelled by a zero of another block stays a closed-loop root (internal stability).

Routh table (:func:`routh_table`). The polynomial is first made to have a positive leading
coefficient and its roots at s = 0 are taken out (they are counted on the imaginary axis).
The two special cases are handled as the textbooks do and recorded in ``notes``:

- a zero in the first column of an otherwise non-zero row is replaced by the symbol ε; the
  later rows are rational functions of ε, and the sign of each first-column entry is its
  sign as ε → 0+, read exactly off the lowest-order coefficients of its numerator and
  denominator;
- a row of zeros is replaced by the derivative of the auxiliary polynomial formed from the
  row above; the roots of that polynomial are roots of p(s), symmetric about the origin.

The root counts do not rest on the ε device, which can miscount when a row of zeros
follows an ε (roots on the imaginary axis perturbed to either side). They are exact:
g = gcd(p(s), p(−s)) holds every pair of roots z, −z (every imaginary-axis root among
them; it is the table's auxiliary polynomial up to a factor). g is even, g(s) = h(s²): each
negative real root w of h gives s = ±j·√(−w), each other root of g a pair ±z with one in
the right half plane. The rest, p/g, has no such pairs, and its right-half-plane roots come
from the Routh-Hurwitz theorem in Cauchy-index form evaluated by a Sturm sequence, which
needs no ε. In the textbook cases the sign changes of the first column agree; where they do
not, a note says so.

Stable gain set (:func:`stable_gains`). The Routh table is built once over the field of
rational functions in the gain k. Routh's theorem says P(s, k0) is Hurwitz exactly when
every first-column entry, evaluated at k0, has the sign of the leading coefficient; at a
gain where an entry is zero or undefined the polynomial is not Hurwitz. So every boundary of
the stable set is a real root of a numerator or denominator of a first-column entry (this
covers all three ways a root can leave the left half plane: through s = 0, where P(0, k)
vanishes; through s = ±jω, where the Hurwitz determinant Δ_{n−1}(k) vanishes; through
s = ∞, where the leading coefficient in s vanishes). Between consecutive candidates every
entry keeps its sign, so one exact rational sample per interval, decided by the numeric
Routh test on P(s, sample), settles the whole interval. The candidates themselves are never
stable. Each boundary is then classified by how it is crossed; ω0 of a crossing through
s = ±jω0 is a root of gcd(Res_k(m, Re P(jω, k)), Res_k(m, Im P(jω, k)/ω)) with m the
minimal polynomial of the boundary gain; when that gcd has several positive roots the right
one is picked by evaluating P(jω, k) at 50 significant digits (a choice between exact
numbers, not an approximation of one).

A gain at which the degree of P in s drops (a closed-loop pole through s = ∞; for a biproper
loop, 1 + L(∞) = 0) is never counted as stable: the feedback loop is ill-posed there.

Hidden modes (:func:`hidden_modes`): a factor common to the denominator of one block and the
numerator of another (or the same) block divides P(s, k) for every gain; when it has a root
in the closed right half plane the loop is internally unstable whatever the gain, even
though the reference-to-error map, where the factor cancels, looks fine.
"""

from __future__ import annotations

import functools
import itertools
import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Any, Literal

import sympy
from sympy.polys.domains import ZZ

from speclint.analysis import realroots
from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S, characteristic
from speclint.analysis.gainset import (
    INF,
    ZERO,
    Exact,
    GainSet,
    Interval,
    Number,
    exact,
    factor_roots,
    format_number,
    irreducible_factors,
    less,
    number_between,
    number_less,
    to_exact,
)

EPS = sympy.Symbol("ε", positive=True)
W = sympy.Symbol("w", positive=True)  # ω, the frequency of an imaginary-axis crossing

# Beyond this degree in s the exact analysis may take minutes; no drive loop comes close.
MAX_DEGREE = 40

_FIELD, _k = sympy.field([K], sympy.QQ)


# --------------------------------------------------------------------------- Routh table


@dataclass(frozen=True, slots=True)
class RouthTable:
    """The Routh table of one polynomial in s, with its special cases and root counts.

    ``rows[i]`` is the row of ``s**powers[i]``; entries are sympy Rationals, or rational
    functions of :data:`EPS` after a first-column zero. ``coefficients`` are those of the
    polynomial the table was built from (leading coefficient made positive, roots at s = 0
    taken out), highest power first. ``imaginary`` includes the ``zero_roots``.
    """

    coefficients: tuple[sympy.Rational, ...]
    rows: tuple[tuple[sympy.Expr, ...], ...]
    powers: tuple[int, ...]
    notes: tuple[str, ...]
    zero_roots: int
    rhp: int
    imaginary: int
    stable: bool

    @property
    def first_column_signs(self) -> tuple[int, ...]:
        """Sign of each first-column entry (as ε → 0+ where ε appears)."""
        return tuple(_limit_sign(row[0]) for row in self.rows)


def routh_table(p: sympy.Poly) -> RouthTable:
    """The exact Routh table of p(s) (rational coefficients), with its root counts."""
    coeffs = _coefficients(p)
    if not coeffs:
        raise ValueError("the zero polynomial has no Routh table")
    notes: list[str] = []
    if coeffs[0] < 0:
        coeffs = [-c for c in coeffs]
        notes.append("leading coefficient negative: the table is built for −p(s), same roots")
    zero_roots = 0
    while coeffs[-1] == 0:
        coeffs.pop()
        zero_roots += 1
    if zero_roots:
        plural = "root" if zero_roots == 1 else "roots"
        notes.append(f"{zero_roots} {plural} at s = 0 (factor s^{zero_roots}) taken out first")
    rows, powers, table_notes = _build_rows(coeffs)
    notes.extend(table_notes)
    signs = [_limit_sign(row[0]) for row in rows]
    sign_changes = sum(1 for a, b in itertools.pairwise(signs) if a != b)
    rhp, imaginary = _root_counts(coeffs)
    imaginary += zero_roots
    if sign_changes != rhp:
        notes.append(
            f"the first column changes sign {sign_changes} times, but ε next to roots on the "
            "imaginary axis can miscount: the root counts come from gcd(p(s), p(−s)) and a "
            "Sturm sequence instead"
        )
    return RouthTable(
        coefficients=tuple(coeffs),
        rows=tuple(tuple(r) for r in rows),
        powers=tuple(powers),
        notes=tuple(notes),
        zero_roots=zero_roots,
        rhp=rhp,
        imaginary=imaginary,
        stable=rhp == 0 and imaginary == 0,
    )


def is_hurwitz(p: sympy.Poly) -> bool:
    """True when every root of p(s) lies strictly in the left half plane (exact)."""
    coeffs = [Fraction(int(c.p), int(c.q)) for c in _coefficients(p)]
    return _hurwitz(realroots.integer_coefficients(coeffs) if coeffs else [])


def _hurwitz(coeffs: list[int]) -> bool:
    """is_hurwitz on integer coefficients, highest power first (leading zeros allowed).

    The Routh test without fractions: row i of the table times Δ(i−1) is an integer row
    F(i), F(i+1, j) = (F(i, 0)·F(i−1, j+1) − F(i−1, 0)·F(i, j+1)) / F(i−2, 0) exactly, and
    the first column is F(1, 0), F(i, 0)/F(i−1, 0): all positive exactly when every
    F(i, 0) = Δ(i) is (the Hurwitz criterion; see _first_column_parts)."""
    coeffs = list(itertools.dropwhile(lambda c: c == 0, coeffs))
    if not coeffs:
        return False
    if coeffs[0] < 0:
        coeffs = [-c for c in coeffs]
    n = len(coeffs) - 1
    if n == 0:
        return True  # a non-zero constant has no roots at all
    if any(c <= 0 for c in coeffs):
        return False  # a Hurwitz polynomial has all coefficients of one sign, none zero
    width = n // 2 + 1
    prev = _pad(coeffs[0::2], width)
    cur = _pad(coeffs[1::2], width)
    divisor = 1  # F(i−2, 0), or 1 for the first two rows
    for i in range(1, n):
        if cur[0] <= 0:
            return False
        nxt = [(cur[0] * prev[j + 1] - prev[0] * cur[j + 1]) // divisor for j in range(width - 1)]
        divisor = prev[0] if i >= 2 else 1
        prev, cur = cur, [*nxt, 0]
    return cur[0] > 0


def _coefficients(p: sympy.Poly) -> list[sympy.Rational]:
    """Rational coefficients in s, highest power first, leading zeros dropped."""
    if not (p.domain.is_QQ or p.domain.is_ZZ):
        raise ValueError(f"coefficients must be rational, not over {p.domain}")
    by_power: dict[int, sympy.Rational] = {}
    for monom, coeff in p.terms():
        power = 0
        for gen, e in zip(p.gens, monom, strict=True):
            if gen == S:
                power = e
            elif e:
                raise ValueError(f"the polynomial still depends on {gen}")
        by_power[power] = by_power.get(power, sympy.Integer(0)) + coeff
    if not by_power:
        return []
    top = max(by_power)
    coeffs = [sympy.Rational(by_power.get(i, 0)) for i in range(top, -1, -1)]
    while coeffs and coeffs[0] == 0:
        coeffs.pop(0)
    return coeffs


def _pad(xs: list[int], width: int) -> list[int]:
    return xs + [0] * (width - len(xs))


def _build_rows(
    coeffs: list[sympy.Rational],
) -> tuple[list[list[sympy.Expr]], list[int], list[str]]:
    n = len(coeffs) - 1
    width = n // 2 + 1
    zero = sympy.Integer(0)

    def padded(xs: list[sympy.Rational]) -> list[sympy.Expr]:
        return list(xs) + [zero] * (width - len(xs))

    rows: list[list[sympy.Expr]] = [padded(coeffs[0::2])]
    powers = [n]
    notes: list[str] = []
    if n == 0:
        return rows, powers, notes
    cur = padded(coeffs[1::2])
    power = n - 1
    while True:
        prev = rows[-1]
        if all(x == 0 for x in cur):
            above = power + 1
            aux = sum(
                (prev[i] * S ** (above - 2 * i) for i in range(width) if above - 2 * i >= 0),
                zero,
            )
            cur = [(above - 2 * i) * prev[i] if above - 2 * i > 0 else zero for i in range(width)]
            notes.append(
                f"row s^{power} all zeros: replaced by the derivative of the auxiliary "
                f"polynomial A(s) = {sympy.sstr(aux)} from row s^{above}; the roots of A(s) "
                "are roots of p(s), symmetric about the origin"
            )
        if cur[0] == 0:
            cur = [EPS, *cur[1:]]
            notes.append(f"first-column zero in row s^{power} replaced by ε; signs taken as ε → 0+")
        rows.append(cur)
        powers.append(power)
        if power == 0:
            return rows, powers, notes
        nxt = [_routh_entry(cur[0], prev[0], prev[j + 1], cur[j + 1]) for j in range(width - 1)]
        cur = [*nxt, zero]
        power -= 1


def _routh_entry(b0: sympy.Expr, a0: sympy.Expr, a1: sympy.Expr, b1: sympy.Expr) -> sympy.Expr:
    value = (b0 * a1 - a0 * b1) / b0
    if value.is_Rational:
        return value
    return sympy.cancel(value)


def _limit_sign(x: sympy.Expr) -> int:
    """Sign of x as ε → 0+ (x a rational number or a rational function of ε)."""
    if x.is_Rational:
        return int(sympy.sign(x))
    num, den = sympy.fraction(sympy.cancel(x))
    return _lowest_sign(num) * _lowest_sign(den)


def _lowest_sign(e: sympy.Expr) -> int:
    coeffs = sympy.Poly(e, EPS).all_coeffs()
    for c in reversed(coeffs):
        if c != 0:
            return int(sympy.sign(c))
    return 0


def _root_counts(coeffs: list[sympy.Rational]) -> tuple[int, int]:
    """(right-half-plane, imaginary-axis) root counts with multiplicity, given p(0) ≠ 0
    and a positive leading coefficient."""
    p = sympy.Poly(coeffs, S, domain=sympy.QQ)
    mirrored = sympy.Poly(
        [c if (len(coeffs) - 1 - i) % 2 == 0 else -c for i, c in enumerate(coeffs)],
        S,
        domain=sympy.QQ,
    )
    g = p.gcd(mirrored)
    imaginary = 0
    if g.degree() > 0:
        # g(s) = g(−s) up to sign, and g(0) ≠ 0, so g is even: g(s) = h(s²); each negative
        # root w of h gives s = ±j·√(−w), every other root of g a pair ±z, one with Re > 0.
        h = sympy.Poly(g.all_coeffs()[0::2], W, domain=sympy.QQ)
        for factor, multiplicity in h.sqf_list()[1]:
            imaginary += 2 * multiplicity * factor.count_roots(None, 0)
    rhp_symmetric = (g.degree() - imaginary) // 2
    return rhp_symmetric + _sturm_right_half_plane(p.quo(g)), imaginary


def _sturm_right_half_plane(q: sympy.Poly) -> int:
    """Right-half-plane roots of q, which has no two roots z and −z (so none on the axis).

    Routh-Hurwitz in Cauchy-index form (Gantmacher, The Theory of Matrices, vol. 2, ch. XV):
    with q = a0·s^n + a1·s^(n−1) + ..., a0 > 0, the index over the real line of
    (a1·ω^(n−1) − a3·ω^(n−3) + ...)/(a0·ω^n − a2·ω^(n−2) + ...) is n − 2k, k the number of
    right-half-plane roots; Sturm's signed remainder sequence gives the index exactly,
    whatever degree jumps (the first-column zeros of the table) it meets.
    """
    a = q.all_coeffs()
    if a[0] < 0:
        a = [-c for c in a]
    n = len(a) - 1
    if n == 0:
        return 0
    den = sympy.Poly(
        [(-1) ** (i // 2) * a[i] if i % 2 == 0 else 0 for i in range(n + 1)], W, domain=sympy.QQ
    )
    num = sympy.Poly(
        [(-1) ** (i // 2) * a[i] if i % 2 == 1 else 0 for i in range(1, n + 1)],
        W,
        domain=sympy.QQ,
    )
    sequence = [den, num]
    while True:
        r = -sequence[-2].rem(sequence[-1])
        if r.is_zero:
            break
        sequence.append(r)
    plus = [int(sympy.sign(f.LC())) for f in sequence]
    minus = [sign * (-1) ** f.degree() for sign, f in zip(plus, sequence, strict=True)]
    index = _variations(minus) - _variations(plus)
    return (n - index) // 2


def _variations(signs: list[int]) -> int:
    nonzero = [x for x in signs if x]
    return sum(1 for x, y in itertools.pairwise(nonzero) if x != y)


# ----------------------------------------------------------------------- stable gain set


@dataclass(frozen=True, slots=True)
class Boundary:
    """A gain at which a closed-loop root crosses into the closed right half plane.

    ``crossing`` says where: ``"zero"`` (through s = 0), ``"imaginary"`` (through
    s = ±j·omega), ``"infinity"`` (through s = ∞: the degree in s drops; for a biproper
    loop 1 + L(∞) = 0). ``omega`` is exact, or None when not an imaginary crossing.
    """

    gain: Exact
    crossing: Literal["zero", "imaginary", "infinity"]
    omega: Exact | None = None

    def describe(self) -> str:
        """'s = 0', 's = ∞' or 's = ±j·ω0 with ω0 = 1.41421'."""
        if self.crossing == "zero":
            return "s = 0"
        if self.crossing == "infinity":
            return "s = ∞"
        if self.omega is None:
            return "s = ±j·ω0"
        return f"s = ±j·ω0 with ω0 = {format_number(self.omega)}"


@dataclass(frozen=True, slots=True)
class StableSet:
    """The gains for which the closed loop is internally stable, and how it was decided.

    ``gains`` lies within ``loop.limits`` ∩ (0, ∞). ``first_column`` holds the Routh
    first-column entries as rational functions of the gain symbol ``algebra.K`` (the
    certificate a reader can check by hand); ``boundaries`` the ends of the stable
    intervals that the loop, not the limits, sets. ``nominal_stable`` is the exact verdict
    at ``loop.nominal`` (for a loop without gain: its one verdict), None when not decided.
    ``unsupported`` says why the set could not be computed; ``gains`` is then empty and
    must not be read as "unstable".

    ``boundaries``, ``first_column`` and ``nominal_table`` are worked out when read, not
    when the set is computed: finding each crossing frequency ω0 (resultants, a 50-digit
    choice) costs more than the whole set, writing the first column as expressions and
    building the nominal table with its root counts cost about as much as the set, and
    ``speclint check`` shows none of them. ``ends`` keeps what the boundaries need: each
    end the loop sets with its irreducible polynomial; ``k_coefficients`` the coefficients
    in s (polynomials in k, highest powers first; ``columns`` as sympy polynomials), and
    ``nominal_gain`` the gain of the nominal table (None: no table).
    """

    gains: GainSet
    nominal_stable: bool | None
    depends_on_gain: bool
    notes: tuple[str, ...] = ()
    unsupported: str | None = None
    ends: tuple[tuple[Exact, sympy.Poly], ...] = ()
    k_coefficients: tuple[tuple[Fraction, ...], ...] = ()
    nominal_gain: Exact | None = None

    @property
    def columns(self) -> tuple[sympy.Poly, ...]:
        """The coefficients of P(s, k) in s as polynomials in ``algebra.K``."""
        return tuple(
            sympy.Poly(
                [sympy.Rational(c.numerator, c.denominator) for c in coeffs], K, domain=sympy.QQ
            )
            if coeffs
            else sympy.Poly(0, K, domain=sympy.QQ)
            for coeffs in self.k_coefficients
        )

    @property
    def boundaries(self) -> tuple[Boundary, ...]:
        """How a root crosses at each end of the stable intervals that the loop sets."""
        return tuple(_classify(gain, factor, list(self.columns)) for gain, factor in self.ends)

    @property
    def first_column(self) -> tuple[sympy.Expr, ...]:
        """The Routh first-column entries as rational functions of ``algebra.K``."""
        if not self.depends_on_gain or not self.columns:
            return ()
        entries, _ = _symbolic_first_column(list(self.columns))
        return tuple(f.as_expr() for f in entries)

    @property
    def nominal_table(self) -> RouthTable | None:
        """The Routh table at the nominal gain (for a loop without gain: its only one)."""
        if self.nominal_gain is None:
            return None
        at_nominal = _poly_at(list(self.columns), self.nominal_gain)
        return None if at_nominal.is_zero else routh_table(at_nominal)


def stable_gains(loop: LoopAlgebra) -> StableSet:
    """The exact set of gains in limits ∩ (0, ∞) for which the delay-free loop is stable."""
    domain = loop.limits.intersect(GainSet.positive())
    p = characteristic(loop)
    depends = p.degree(K) > 0
    if loop.delay:
        return _unsupported(
            depends,
            f"dead time of {format_number(exact(loop.delay))} s: the closed loop has no "
            "characteristic polynomial; its stability needs the Nyquist criterion",
        )
    if p.is_zero:
        return _nowhere_stable(depends, "1 + L(s) = 0 for every s: the loop is ill-posed")
    degree = p.degree(S)
    if degree > MAX_DEGREE:
        return _unsupported(
            depends,
            f"characteristic polynomial of degree {degree} in s: beyond the exact "
            f"analysis (at most {MAX_DEGREE})",
        )
    blocks = (loop.controller, loop.plant, loop.feedback)
    # Degrees in s of the products of the denominators and of the numerators: over a field
    # the degrees of factors add (every block polynomial is non-zero).
    dens = sum(int(b.den.degree(S)) for b in blocks)
    nums = sum(int(b.num.degree(S)) for b in blocks)
    if degree < max(dens, nums):
        return _nowhere_stable(
            depends, "1 + L(∞) = 0 for every gain: the closed loop is improper (ill-posed)"
        )
    at_k = _coefficients_in_k(p, degree)
    columns = tuple(tuple(c) for c in at_k)
    ints = _integer_columns(at_k)
    nominal_stable, nominal_gain = _nominal_verdict(ints, loop.nominal, depends)
    if not depends:
        verdict = bool(nominal_stable)
        return StableSet(
            gains=domain if verdict else GainSet.empty(),
            nominal_stable=verdict,
            depends_on_gain=False,
            k_coefficients=columns,
            nominal_gain=nominal_gain,
        )

    # The candidates need the roots of the parts, not the parts in lowest terms: the roots of
    # Δ(i)/Δ(i−1) reduced and of Δ(i) over Δ(i−1) as they are, taken over all rows, are
    # the same set (a root of a common factor of Δ(i) and Δ(i−1) is a root of Δ(i−1), so
    # of an earlier entry, down to Δ(1) which is never reduced), and so are the
    # irreducible factors with such roots. One gcd per row saved.
    parts, degenerate = _first_column_parts(ints, lowest_terms=False)
    if degenerate is not None:
        return StableSet(
            gains=GainSet.empty(),
            nominal_stable=nominal_stable,
            depends_on_gain=True,
            k_coefficients=columns,
            nominal_gain=nominal_gain,
            notes=(
                f"the first-column entry of row s^{degenerate} of the Routh table is zero for "
                "every gain: no gain makes the loop stable",
            ),
        )

    candidates = _candidates(parts)
    ends: list[Number | None] = [Fraction(0), *(c for c, _ in candidates), None]
    verdicts = [_hurwitz_at(ints, number_between(lo, hi)) for lo, hi in itertools.pairwise(ends)]
    # Only the ends of stable pieces become sympy numbers (a radical or a CRootOf costs
    # milliseconds to write down; most candidates separate two unstable pieces), and only
    # those the limits do not cut off: a piece (open at both ends) wholly outside them is
    # dropped, an end beyond them is replaced by one the intersection cuts off the same
    # way (∞ above, 0 below: the limits lie in (0, ∞)).
    hull = _number_hull(domain)
    pieces = []
    for (lo, hi), ok in zip(itertools.pairwise(ends), verdicts, strict=True):
        if not ok:
            continue
        if hull is not None:
            assert lo is not None  # only the last end is ∞
            d, top = hull
            if (hi is not None and not number_less(d, hi)) or (
                top is not None and not number_less(lo, top)
            ):
                continue
            if top is not None and hi is not None and number_less(top, hi):
                hi = None
            if number_less(lo, d):
                lo = _ZERO
        pieces.append(Interval(_exact_end(lo), _exact_end(hi)))
    gains = GainSet.of(pieces).intersect(domain)
    ends_set = tuple(
        (exact_gain, _monic(factor))
        for i, (gain, factor) in enumerate(candidates)
        if (verdicts[i] or verdicts[i + 1])
        and _within(gain, hull)
        and domain.contains(exact_gain := to_exact(gain))
    )
    return StableSet(
        gains=gains,
        nominal_stable=nominal_stable,
        depends_on_gain=True,
        ends=ends_set,
        k_coefficients=columns,
        nominal_gain=nominal_gain,
    )


def _exact_end(x: Number | None) -> Exact:
    return INF if x is None else to_exact(x)


def _number_hull(domain: GainSet) -> tuple[Fraction, Fraction | None] | None:
    """The ends of a domain of one interval with rational ends (None: ∞ above) as numbers of
    the analysis; None for any other domain."""
    if len(domain.intervals) != 1:
        return None
    lo, hi = domain.intervals[0].lo, domain.intervals[0].hi
    if not lo.is_Rational or not (hi is INF or hi.is_Rational):
        return None
    top = None if hi is INF else Fraction(int(hi.p), int(hi.q))
    return Fraction(int(lo.p), int(lo.q)), top


def _within(x: Number, hull: tuple[Fraction, Fraction | None] | None) -> bool:
    """False when x lies beyond the hull's ends (then outside the domain); True otherwise."""
    if hull is None:
        return True
    d, top = hull
    return not number_less(x, d) and (top is None or not number_less(top, x))


def _integer_columns(at_k: list[list[Fraction]]) -> list[list[int]]:
    """P(s, k) times a positive constant, with integer coefficients (the same roots)."""
    den = 1
    for coeffs in at_k:
        for c in coeffs:
            den = den * c.denominator // math.gcd(den, c.denominator)
    return [[int(c * den) for c in coeffs] for coeffs in at_k]


def _hurwitz_at(ints: list[list[int]], k: Fraction) -> bool:
    """is_hurwitz of P(s, k), given P's coefficients in s as integer polynomials in k."""
    return _hurwitz(_values_at(ints, k))


def _values_at(ints: list[list[int]], k: Fraction) -> list[int]:
    """The coefficients at k = p/q times q^d, d the highest degree in k (same signs)."""
    p, q = k.numerator, k.denominator
    top = max(len(c) for c in ints) - 1
    out = []
    for coeffs in ints:
        acc, power = 0, 1
        for c in coeffs:
            acc = acc * p + c * power  # homogeneous Horner: Σ c_i·p^(m−i)·q^i
            power *= q
        out.append(acc * q ** (top - len(coeffs) + 1) if coeffs else 0)
    return out


def _monic(factor: tuple[int, ...]) -> sympy.Poly:
    return sympy.Poly(list(factor), K, domain=sympy.QQ).monic()


def _unsupported(depends: bool, why: str) -> StableSet:
    """No set computed; `why` says so. The empty set must not be read as "unstable"."""
    return StableSet(
        gains=GainSet.empty(),
        nominal_stable=None,
        depends_on_gain=depends,
        unsupported=why,
    )


def _nowhere_stable(depends: bool, note: str) -> StableSet:
    return StableSet(
        gains=GainSet.empty(),
        nominal_stable=False,
        depends_on_gain=depends,
        notes=(note,),
    )


def _coefficients_in_k(p: sympy.Poly, degree: int) -> list[list[Fraction]]:
    """Coefficients of P in s as polynomials in K (highest powers first; [] for zero),
    highest power of s first."""
    terms: list[dict[int, Fraction]] = [{} for _ in range(degree + 1)]
    i_s, i_k = p.gens.index(S), p.gens.index(K)
    for monom, c in p.as_dict(native=True).items():
        terms[degree - monom[i_s]][monom[i_k]] = Fraction(int(c.numerator), int(c.denominator))
    return [[t.get(j, Fraction(0)) for j in range(max(t), -1, -1)] if t else [] for t in terms]


def _poly_at(columns: list[sympy.Poly], k: Exact) -> sympy.Poly:
    return sympy.Poly([c.eval(k) for c in columns], S, domain=sympy.QQ)


def _nominal_verdict(
    ints: list[list[int]], nominal: Fraction | None, depends: bool
) -> tuple[bool | None, Exact | None]:
    """The exact verdict at the nominal gain, and that gain (for the Routh table)."""
    if depends and nominal is None:
        return None, None
    k = nominal if nominal is not None else Fraction(0)
    if _values_at(ints[:1], k)[0] == 0:
        # the degree drops: a closed-loop pole at s = ∞, the loop is ill-posed here
        return False, exact(k)
    # Hurwitz exactly when the table's root counts find every root in the left half plane.
    return _hurwitz_at(ints, k), exact(k)


def _symbolic_first_column(
    columns: list[sympy.Poly],
) -> tuple[list[Any], int | None]:
    """Routh first column over Q(k); also the power of the row whose entry is ≡ 0, if any."""
    n = len(columns) - 1
    # Straight from the coefficients: the same field elements as from_expr(as_expr()).
    elems = [_FIELD.field_new(_FIELD.ring.from_dict(c.as_dict(native=True))) for c in columns]
    width = n // 2 + 1
    zero = _FIELD.zero
    prev = elems[0::2] + [zero] * (width - len(elems[0::2]))
    cur = elems[1::2] + [zero] * (width - len(elems[1::2]))
    column = [prev[0]]
    for power in range(n - 1, -1, -1):
        if cur[0] == 0:
            return column, power
        column.append(cur[0])
        if power == 0:
            break
        nxt = [(cur[0] * prev[j + 1] - prev[0] * cur[j + 1]) / cur[0] for j in range(width - 1)]
        prev, cur = cur, [*nxt, zero]
    return column, None


def _first_column_parts(
    columns: list[list[int]], lowest_terms: bool = True
) -> tuple[list[tuple[list[int], list[int]]], int | None]:
    """Numerator and denominator of each first-column entry over Q(k), in lowest terms up
    to a constant factor (as Δ(i) and Δ(i−1) when not ``lowest_terms``; integer
    coefficients, highest power first), and the power of the row whose entry is ≡ 0, if
    any. Fraction-free: row i of the table times the Hurwitz determinant Δ(i−1) is a
    polynomial F(i) (a minor of the Hurwitz matrix), with
    F(i+1, j) = (F(i, 0)·F(i−1, j+1) − F(i−1, 0)·F(i, j+1)) / F(i−2, 0) an exact division
    and F(i, 0) = Δ(i); so the entries are F(0, 0), F(1, 0) and Δ(i)/Δ(i−1) (Gantmacher,
    The Theory of Matrices, vol. 2, ch. XV: the Routh scheme and the Hurwitz minors)."""
    from sympy.polys.densearith import dup_exquo, dup_mul, dup_sub
    from sympy.polys.euclidtools import dup_inner_gcd

    n = len(columns) - 1
    ints = [_strip(list(coeffs)) for coeffs in columns]
    width = n // 2 + 1

    def padded(xs: list[list[int]]) -> list[list[int]]:
        return xs + [[] for _ in range(width - len(xs))]

    prev, cur = padded(ints[0::2]), padded(ints[1::2])
    parts = [(prev[0], [1])]
    divisor: list[int] = [1]  # F(i−2, 0), or 1 for the first two rows
    for i in range(1, n + 1):
        if not cur[0]:
            return parts, n - i
        if i == 1:
            parts.append((cur[0], [1]))
        elif lowest_terms:
            _, num, den_part = dup_inner_gcd(cur[0], prev[0], ZZ)
            parts.append((num, den_part))
        else:
            parts.append((cur[0], prev[0]))
        if i == n:
            break
        nxt = [
            dup_exquo(
                dup_sub(dup_mul(cur[0], prev[j + 1], ZZ), dup_mul(prev[0], cur[j + 1], ZZ), ZZ),
                divisor,
                ZZ,
            )
            for j in range(width - 1)
        ]
        divisor = prev[0] if i >= 2 else [1]
        prev, cur = cur, [*nxt, []]
    return parts, None


def _strip(p: list[int]) -> list[int]:
    while p and p[0] == 0:
        p = p[1:]
    return p


def _candidates(parts: list[tuple[list[int], list[int]]]) -> list[tuple[Number, tuple[int, ...]]]:
    """Positive real roots of every numerator and denominator factor, sorted, each with its
    irreducible factor (integer coefficients, highest power first)."""
    factors: dict[tuple[int, ...], None] = {}
    seen: set[tuple[int, ...]] = set()
    for part in (q for pair in parts for q in pair):
        ints = _strip([int(c) for c in part])
        while len(ints) >= 2 and ints[-1] == 0:
            ints.pop()  # the root k = 0 is not a candidate
        key = tuple(ints)
        if len(ints) < 2 or key in seen:
            continue
        seen.add(key)
        if realroots.sign_variations(ints) == 0:
            continue  # no positive root (Descartes' rule of signs): nothing to factor
        factors.update(dict.fromkeys(irreducible_factors(ints)))
    found: list[tuple[Number, tuple[int, ...]]] = []
    for factor in factors:
        found.extend((root, factor) for root in factor_roots(factor) if number_less(_ZERO, root))
    return sorted(found, key=functools.cmp_to_key(_compare))


_ZERO = Fraction(0)


def _compare(a: tuple[Number, tuple[int, ...]], b: tuple[Number, tuple[int, ...]]) -> int:
    if number_less(a[0], b[0]):
        return -1
    return 1 if number_less(b[0], a[0]) else 0


def _classify(gain: Exact, factor: sympy.Poly, columns: list[sympy.Poly]) -> Boundary:
    """Tell how a root crosses at a boundary gain (a root of the irreducible `factor`)."""
    if columns[-1].rem(factor).is_zero:
        return Boundary(gain, "zero")
    if columns[0].rem(factor).is_zero:
        return Boundary(gain, "infinity")
    return Boundary(gain, "imaginary", _crossing_frequency(gain, factor, columns))


def _crossing_frequency(gain: Exact, factor: sympy.Poly, columns: list[sympy.Poly]) -> Exact | None:
    n = len(columns) - 1
    # P(jω, k) = Σ c_i(k)·(jω)^i split into real part and imaginary part over ω.
    real = sympy.Integer(0)
    imag = sympy.Integer(0)
    for idx, c in enumerate(columns):
        i = n - idx
        term = c.as_expr() * W**i
        if i % 2 == 0:
            real += (-1) ** (i // 2) * term
        else:
            imag += (-1) ** (i // 2) * term / W
    m = factor.as_expr()
    r1 = sympy.Poly(sympy.resultant(m, sympy.expand(real), K), W, domain=sympy.QQ)
    r2 = sympy.Poly(sympy.resultant(m, sympy.expand(imag), K), W, domain=sympy.QQ)
    common = r1.gcd(r2)
    if common.is_zero or common.degree() <= 0:
        return None
    roots = [r for r in common.real_roots(multiple=True) if less(ZERO, r)]
    distinct: list[Exact] = []
    for r in roots:
        if r not in distinct:
            distinct.append(r)
    if not distinct:
        return None
    if len(distinct) == 1:
        return distinct[0]
    # Several ω fit some conjugate of the gain; pick the one where P(jω, gain) vanishes,
    # judged at 50 significant digits (a choice between exact candidates, all far apart).
    p_at_gain = sum(
        (c.as_expr().subs(K, gain) * (sympy.I * W) ** (n - idx) for idx, c in enumerate(columns)),
        sympy.Integer(0),
    )

    def size(omega: Exact) -> float:
        return abs(complex(p_at_gain.subs(W, omega).evalf(50)))

    return min(distinct, key=size)


# ------------------------------------------------------------------------- hidden modes


BlockName = Literal["controller", "plant", "feedback"]


@dataclass(frozen=True, slots=True)
class HiddenMode:
    """A factor shared by the numerator of one block and the denominator of another (or the
    same) block, with a root in the closed right half plane: an internally unstable loop.

    ``factor`` is monic and irreducible over the rationals, in s alone; ``multiplicity`` is
    how many times it cancels; ``unstable`` is True when a root has Re s > 0 (otherwise all
    its roots lie on the imaginary axis).
    """

    factor: sympy.Poly
    zero_block: BlockName
    pole_block: BlockName
    multiplicity: int
    unstable: bool

    def roots_text(self) -> str:
        """The factor's roots as 's = 1', 's = ±j·2' or 's = 0.5 ± j·0.866'."""
        return "s = " + _roots_text(self.factor, self.multiplicity)

    def describe(self) -> str:
        """The finding's message, e.g. 'controller zero at s = 1 cancels an unstable plant
        pole: the loop is internally unstable for every gain'."""
        single = self.factor.degree() * self.multiplicity == 1
        zeros = "zero" if single else "zeros"
        verb = "cancels" if single else "cancel"
        if self.unstable:
            poles = (
                f"an unstable {self.pole_block} pole"
                if single
                else f"{self.pole_block} poles in the closed right half plane"
            )
            outcome = "the loop is internally unstable for every gain"
        else:
            poles = (
                f"a {self.pole_block} pole on the imaginary axis"
                if single
                else f"{self.pole_block} poles on the imaginary axis"
            )
            outcome = "the loop is not asymptotically stable for any gain"
        return f"{self.zero_block} {zeros} at {self.roots_text()} {verb} {poles}: {outcome}"


def hidden_modes(loop: LoopAlgebra) -> list[HiddenMode]:
    """Cancellations between (or inside) blocks whose roots lie in the closed RHP.

    A common factor that depends on the gain is not reported here (its roots move with the
    gain); :func:`stable_gains` accounts for it anyway, since it stays in P(s, k).
    """
    blocks: tuple[tuple[BlockName, Ratio], ...] = (
        ("controller", loop.controller),
        ("plant", loop.plant),
        ("feedback", loop.feedback),
    )
    found: list[HiddenMode] = []
    if any(p.gens != (S, K) for _, block in blocks for p in (block.num, block.den)):
        dens = nums = [_GENERAL] * len(blocks)
    else:
        # Each block's gain-free part once, not once for each of the nine pairs.
        dens = [_gain_free(block.den) for _, block in blocks]
        nums = [_gain_free(block.num) for _, block in blocks]
    for (pole_name, pole_block), den_part in zip(blocks, dens, strict=True):
        for (zero_name, zero_block), num_part in zip(blocks, nums, strict=True):
            common = _common_in_s(pole_block.den, zero_block.num, den_part, num_part)
            if common is None or common.total_degree() <= 0:
                continue
            for factor, multiplicity in common.factor_list()[1]:
                if factor.degree(K) > 0 or factor.degree(S) <= 0:
                    continue
                in_s = sympy.Poly(factor.as_expr(), S, domain=sympy.QQ).monic()
                if is_hurwitz(in_s):
                    continue
                unstable = routh_table(in_s).rhp > 0
                found.append(HiddenMode(in_s, zero_name, pole_name, multiplicity, unstable))
    return found


_S_RING, _ = sympy.ring([S], sympy.QQ)
_GENERAL = object()  # a polynomial in other generators: the general gcd decides


def _gain_free(p: sympy.Poly) -> Any:
    """The factors of p(s, k) free of the gain, with their multiplicities, as an element of
    _S_RING (up to a constant); the ring's zero for p = 0 (it shares every factor); None
    when there is none. A factor f(s) divides p = Σ p_j(s)·k^j exactly when it divides
    every p_j: so this is the gcd of those coefficients over Q[s], one-variable gcds
    instead of a two-variable one."""
    if p.is_zero:
        return _S_RING.zero
    if p.is_ground:
        return None  # a non-zero constant shares no factor
    parts: dict[int, dict[tuple[int], Any]] = {}
    for (i, j), c in p.as_dict(native=True).items():
        parts.setdefault(j, {})[(i,)] = c
    g = None
    for terms in parts.values():
        element = _S_RING.from_dict(terms)
        g = element if g is None else g.gcd(element)
        if g.is_ground:
            return None
    return g


def _common_in_s(a: sympy.Poly, b: sympy.Poly, a_part: Any, b_part: Any) -> sympy.Poly | None:
    """The factors free of the gain common to a and b, with their multiplicities (as a
    polynomial in (S, K)), from their gain-free parts (see _gain_free); None when there is
    none. Polynomials in other generators take the general gcd."""
    if a_part is _GENERAL or b_part is _GENERAL:
        return a.gcd(b)
    if a_part is None or b_part is None:
        return None
    if not a_part:
        g = b_part
    elif not b_part:
        g = a_part
    elif _shown_coprime(a_part, b_part):
        return None  # the usual answer, without a gcd over Q
    else:
        g = a_part.gcd(b_part)
    if not g or g.is_ground:
        return None
    return sympy.Poly.from_dict({(i, 0): c for (i,), c in g.items()}, S, K, domain=sympy.QQ)


_P = 2**61 - 1  # a prime


def _shown_coprime(a: Any, b: Any) -> bool:
    """True when a and b (non-zero elements of _S_RING) are shown to share no factor by
    their gcd modulo the prime _P; False when not shown. A common factor g over Q is, up to
    a constant, a common factor in Z[s] of the integer multiples of a and b (Gauss's lemma);
    when _P does not divide the leading coefficient of a, g keeps its degree modulo _P, so a
    gcd of degree 0 there rules it out (common practice: modular gcd)."""
    fa, fb = _mod_p(a), _mod_p(b)
    if fa is None or fb is None or not fa[0]:
        return False
    while fb:
        # fa mod fb over the integers mod _P
        inverse = pow(fb[0], -1, _P)
        while len(fa) >= len(fb) and fa:
            factor = fa[0] * inverse % _P
            for i, c in enumerate(fb):
                fa[i] = (fa[i] - factor * c) % _P
            while fa and not fa[0]:
                fa.pop(0)
        fa, fb = fb, fa
    return len(fa) == 1


def _mod_p(p: Any) -> list[int] | None:
    """Coefficients of p (highest power first, leading zeros dropped) modulo _P; None when
    _P divides a denominator."""
    terms = dict(p)
    top = max(e for (e,) in terms)
    out = []
    for e in range(top, -1, -1):
        c = terms.get((e,))
        if c is None:
            out.append(0)
            continue
        den = int(c.denominator) % _P
        if not den:
            return None
        out.append(int(c.numerator) * pow(den, -1, _P) % _P)
    while out and not out[0]:
        out.pop(0)
    return out


def _roots_text(factor: sympy.Poly, multiplicity: int) -> str:
    # Display only: roots of a degree ≥ 2 factor are printed from 30-digit floats.
    suffix = f" (×{multiplicity})" if multiplicity > 1 else ""
    if factor.degree() == 1:
        a, b = factor.all_coeffs()
        return format_number(-sympy.Rational(b) / sympy.Rational(a)) + suffix
    parts: list[str] = []
    for r in factor.nroots(n=30):
        re, im = sympy.re(r), sympy.im(r)
        if abs(im) < 1e-25:
            parts.append(_fmt(re))
        elif im > 0:
            if abs(re) < 1e-25:
                parts.append(f"±j·{_fmt(im)}")
            else:
                parts.append(f"{_fmt(re)} ± j·{_fmt(im)}")
    return ", ".join(parts) + suffix


def _fmt(x: sympy.Expr) -> str:
    return f"{float(x):.6g}"
