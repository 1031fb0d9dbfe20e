"""Exact loop algebra: transfer-function blocks as polynomials in s and the gain.

Every block is kept as numerator and denominator exactly as written: two polynomials in
the Laplace variable ``S`` and the gain ``K`` with rational coefficients (sympy ``Poly``
over ``QQ`` with generators ``(S, K)``). Nothing is cancelled behind the user's back: a
common factor between blocks, or inside one, stays in the characteristic polynomial, which
is what internal stability needs.

The gain is always the internal symbol ``K``; the name the spec gives it (``K``, ``Kp``,
``gain``...) is kept in :attr:`LoopAlgebra.gain_symbol` for display only. A loop without a
tunable gain simply has polynomials that do not involve ``K``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from fractions import Fraction
from typing import Any

import sympy
from sympy.polys.polyclasses import DMP

from speclint.analysis.gainset import GainSet

S = sympy.Symbol("s")
K = sympy.Symbol("k")
GENS = (S, K)


def poly(expr: sympy.Expr | int) -> sympy.Poly:
    """A polynomial in (S, K) over the rationals, built from trusted internal expressions."""
    if type(expr) is int:
        # A whole number needs none of the expression machinery of the Poly constructor.
        return from_terms({(0, 0): sympy.QQ(expr)} if expr else {})
    return sympy.Poly(expr, *GENS, domain=sympy.QQ)


def from_terms(
    terms: Mapping[tuple[int, ...], Any], gens: tuple[sympy.Symbol, ...] = GENS
) -> sympy.Poly:
    """The Poly over QQ in ``gens`` with {exponents: non-zero QQ coefficient} ``terms``.

    Built straight from sympy's low-level representation: constructing a Poly from an
    expression costs tens of microseconds of option handling and conversion, this a few.
    """
    return sympy.Poly.new(DMP.from_dict(dict(terms), len(gens) - 1, sympy.QQ), *gens)


@dataclass(frozen=True, slots=True)
class Ratio:
    """A rational function num/den in (S, K), numerator and denominator as written."""

    num: sympy.Poly
    den: sympy.Poly

    @staticmethod
    def one() -> Ratio:
        return Ratio(_ONE, _ONE)


_ONE = poly(1)  # a Poly is immutable, so one instance serves every block


@dataclass(frozen=True, slots=True)
class LoopAlgebra:
    """The exact model of one loop, as the analysis stages receive it.

    ``limits`` is the gain set the spec allows: (0, ∞) when it gives no limits, the
    closed interval [lo, hi] when it does. ``nominal`` is None for a loop with no gain.
    """

    controller: Ratio
    plant: Ratio
    feedback: Ratio
    delay: Fraction | None
    nominal: Fraction | None
    limits: GainSet
    gain_symbol: str | None


def product(*blocks: Ratio) -> Ratio:
    """Series connection; numerators and denominators multiply, nothing cancels."""
    if not blocks:
        return Ratio.one()
    num, den = blocks[0].num, blocks[0].den
    for block in blocks[1:]:
        num, den = num * block.num, den * block.den
    return Ratio(num, den)


def forward_path(loop: LoopAlgebra) -> Ratio:
    """L = C·G (dead time excluded; it is carried in ``loop.delay``)."""
    return product(loop.controller, loop.plant)


def loop_transfer(loop: LoopAlgebra) -> Ratio:
    """The open loop broken at the summing junction, C·G·H (dead time excluded)."""
    return product(loop.controller, loop.plant, loop.feedback)


def characteristic(loop: LoopAlgebra) -> sympy.Poly:
    """Dc·Dg·Dh + Nc·Ng·Nh from the blocks as written (delay-free part).

    Built from the blocks, not from a simplified L·H, so that a pole cancelled by a zero of
    another block stays a closed-loop root: that is internal stability.
    """
    c, g, h = loop.controller, loop.plant, loop.feedback
    return c.den * g.den * h.den + c.num * g.num * h.num


def at_gain(p: sympy.Poly, k: Fraction) -> sympy.Poly:
    """p with the gain fixed at k, as a polynomial in S alone over the rationals."""
    if p.is_zero:
        return from_terms({}, (S,))
    if p.gens != GENS or p.domain != sympy.QQ:
        # Poly.eval substitutes in the polynomial's own representation; going through an
        # expression and subs gave the same polynomial at twenty times the cost.
        fixed = p.eval(K, sympy.Rational(k.numerator, k.denominator))
        return sympy.Poly(fixed.as_expr(), S, domain=sympy.QQ) if fixed.gens != (S,) else fixed
    # The usual case, summed term by term over the exact coefficients: Poly.eval builds
    # several Poly and domain objects on the way and costs about five times as much.
    value = sympy.QQ(k.numerator, k.denominator)
    powers = [sympy.QQ(1)]
    fixed_terms: dict[tuple[int, ...], Any] = {}
    for (i, j), c in p.as_dict(native=True).items():
        while len(powers) <= j:
            powers.append(powers[-1] * value)
        fixed_terms[(i,)] = fixed_terms.get((i,), 0) + c * powers[j]
    return from_terms({m: c for m, c in fixed_terms.items() if c}, (S,))


def degree_in_s(p: sympy.Poly) -> int:
    """Degree in s of a polynomial in (S, K), the gain left free; -1 for the zero polynomial."""
    return -1 if p.is_zero else int(p.degree(S))


def relative_degree(block: Ratio, gain: Fraction | None = None) -> int:
    """Poles minus zeros of a block (at the given gain, else for a generic gain)."""
    num, den = block.num, block.den
    if gain is not None:
        num, den = at_gain(num, gain), at_gain(den, gain)
    return degree_in_s(den) - degree_in_s(num)


def is_proper(item: Ratio | LoopAlgebra, gain: Fraction | None = None) -> bool:
    """True when no block, and not the loop, has more zeros than poles (see improper_parts)."""
    if isinstance(item, Ratio):
        return relative_degree(item, gain) >= 0
    return not improper_parts(item, gain)


def improper_parts(loop: LoopAlgebra, gain: Fraction | None = None) -> tuple[str, ...]:
    """The parts of a loop with more zeros than poles, by name, in a fixed order.

    Names: "controller", "plant", "feedback", "loop" (C·G·H), "equivalent forward path"
    (Ge; it can have more zeros than poles while every block and the loop are proper, when
    L(∞)·(H(∞) − 1) = −1; the error figures stay valid then, so the caller may report that
    entry as a note rather than refuse the model). With ``gain`` the degrees are those at
    that gain; without, those of a generic gain (a leading coefficient vanishing only at an
    isolated gain is not seen then).
    """
    if gain is not None:
        # Fixing the gain commutes with + and ·, so the blocks are fixed first and the rest
        # worked out in s alone.
        loop = replace(
            loop,
            controller=_at_gain_block(loop.controller, gain),
            plant=_at_gain_block(loop.plant, gain),
            feedback=_at_gain_block(loop.feedback, gain),
        )
    c, g, h = loop.controller, loop.plant, loop.feedback
    nc, ng, nh = degree_in_s(c.num), degree_in_s(g.num), degree_in_s(h.num)
    dc, dg, dh = degree_in_s(c.den), degree_in_s(g.den), degree_in_s(h.den)
    # Degrees add under products (the coefficients in s, polynomials in k or numbers, have
    # no zero divisors), so the loop and Ge need no multiplication; only Ge's denominator,
    # Dc·Dg·Dh + Nc·Ng·(Nh − Dh), is built when its two terms tie in degree and the
    # leading terms may cancel.
    plain, feedback_part = _degree_of_product(dc, dg, dh), _degree_of_product(nc, ng)
    feedback_part = _degree_of_product(feedback_part, degree_in_s(h.num - h.den))
    if plain != feedback_part:
        ge_den = max(plain, feedback_part)
    else:
        ge_den = degree_in_s(unity_equivalent(loop).den)
    degrees = {
        "controller": (nc, dc),
        "plant": (ng, dg),
        "feedback": (nh, dh),
        "loop": (_degree_of_product(nc, ng, nh), plain),
        "equivalent forward path": (_degree_of_product(nc, ng, dh), ge_den),
    }
    return tuple(name for name, (num, den) in degrees.items() if den - num < 0)


def _degree_of_product(*degrees: int) -> int:
    """The degree of a product from its factors' degrees; -1 (the zero polynomial) wins."""
    return -1 if min(degrees) < 0 else sum(degrees)


def _at_gain_block(block: Ratio, k: Fraction) -> Ratio:
    return Ratio(at_gain(block.num, k), at_gain(block.den, k))


def unity_equivalent(loop: LoopAlgebra) -> Ratio:
    """Ge = L/(1 + L·(H − 1)), L = C·G: the unity-feedback forward path with the same e = r − y.

    As polynomials: Nc·Ng·Dh / (Dc·Dg·Dh + Nc·Ng·(Nh − Dh)), nothing cancelled (dead time
    excluded; see speclint.analysis.steady for how it enters).
    """
    c, g, h = loop.controller, loop.plant, loop.feedback
    forward = c.num * g.num
    return Ratio(forward * h.den, c.den * g.den * h.den + forward * (h.num - h.den))
