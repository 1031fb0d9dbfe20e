"""Time speclint's steady-state analysis against sympy's limit on random loops.

200 seeded random loops (loop denominator degree 2-8, 0-3 integrators, unity, lagging or
non-unity feedback). The fast route is steady_state plus the three tracking errors; the
reference route takes sympy's limit of s^n·Ge (Kp, Kv, Ka, and s³·Ge when the type needs
it) and of s·E(s) for the three references. Results must be identical.

The reference route calls sympy.cancel before limit, which makes it two to four times
faster than limit on the raw expression: that stronger baseline is the one the ratio uses.
The raw route is timed on the first few loops only and reported separately.

Run from the worktree root: python benchmarks/bench_steady.py [--loops 200] [--raw 5]
"""

from __future__ import annotations

import argparse
import random
import sys
import time
from fractions import Fraction
from pathlib import Path

import sympy

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from speclint.analysis import forget, steady
from speclint.analysis.algebra import K, LoopAlgebra, Ratio, S
from speclint.analysis.gainset import INF, GainSet
from speclint.expr import parse_block

REFERENCES = ("step", "ramp", "parabola")
FEEDBACKS = ("1", "1", "1/({a}*s + 1)", "({b}*s + 1)/({a}*s + 1)", "{c}", "{c}/({a}*s + 1)")


def _q(rng: random.Random, lo: int, hi: int, den: int = 10) -> Fraction:
    return Fraction(rng.randint(lo * den, hi * den), den)


def _text(q: Fraction) -> str:
    return f"({q.numerator}/{q.denominator})"


def random_loop(rng: random.Random) -> LoopAlgebra:
    degree = rng.randint(2, 8)
    integrators = rng.randint(0, min(3, degree - 1))
    other_poles = degree - integrators
    factors: list[str] = []
    remaining = other_poles
    while remaining > 0:
        if remaining >= 2 and rng.random() < 0.3:
            factors.append(f"(s^2 + {_text(_q(rng, 1, 4))}*s + {_text(_q(rng, 1, 20))})")
            remaining -= 2
        else:
            factors.append(f"(s + {_text(_q(rng, 1, 10))})")
            remaining -= 1
    zeros = [f"(s + {_text(_q(rng, -2, 10))})" for _ in range(rng.randint(0, degree - 1))]
    controller = f"K/s^{integrators}"
    plant = f"{'*'.join(zeros) or '1'}/({'*'.join(factors)})"
    feedback = rng.choice(FEEDBACKS).format(
        a=_text(_q(rng, 0, 1, 100) or Fraction(1, 100)),
        b=_text(_q(rng, 0, 2, 10)),
        c=_text(rng.choice([Fraction(1, 2), Fraction(2), Fraction(9, 10)])),
    )
    nominal = _q(rng, 0, 20) or Fraction(1, 10)
    blocks = []
    for text in (controller, plant, feedback):
        block = parse_block(text, "K", {})
        assert isinstance(block, Ratio), (text, block)
        blocks.append(block)
    return LoopAlgebra(*blocks, None, nominal, GainSet.positive(), "K")


def fast(loop: LoopAlgebra) -> tuple[object, ...]:
    forget()  # every memo emptied, as between two loops of a run: each loop is timed cold
    ss = steady.steady_state(loop)
    errors = tuple(steady.tracking_error(ss, r, Fraction(1)) for r in REFERENCES)
    return (ss.type, ss.kp, ss.kv, ss.ka, *errors)


def by_limit(loop: LoopAlgebra, simplify: bool) -> tuple[object, ...]:
    assert loop.nominal is not None
    gain = sympy.Rational(loop.nominal.numerator, loop.nominal.denominator)
    c, g, h = (
        (b.num.as_expr() / b.den.as_expr()).subs(K, gain)
        for b in (loop.controller, loop.plant, loop.feedback)
    )
    ge = c * g / (1 + c * g * (h - 1))
    error = 1 - c * g / (1 + c * g * h)

    def lim(expr: sympy.Expr) -> sympy.Expr:
        value = sympy.limit(sympy.cancel(expr) if simplify else expr, S, 0, "+")
        return INF if value in (sympy.oo, -sympy.oo, sympy.zoo) else value

    kp, kv, ka = (lim(S**n * ge) for n in range(3))
    loop_type = next((n for n, x in enumerate((kp, kv, ka)) if x is not INF), None)
    n = 3
    while loop_type is None:
        if lim(S**n * ge) is not INF:
            loop_type = n
        n += 1
    errors = tuple(lim(error / S**j) for j in range(3))
    return (loop_type, kp, kv, ka, *errors)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--loops", type=int, default=200)
    parser.add_argument("--raw", type=int, default=5, help="loops timed with limit on raw text")
    parser.add_argument("--seed", type=int, default=20240611)
    args = parser.parse_args(argv)

    rng = random.Random(args.seed)
    loops = [random_loop(rng) for _ in range(args.loops)]

    start = time.perf_counter()
    ours = [fast(loop) for loop in loops]
    t_fast = time.perf_counter() - start

    start = time.perf_counter()
    reference = [by_limit(loop, simplify=True) for loop in loops]
    t_limit = time.perf_counter() - start

    mismatches = [i for i, (a, b) in enumerate(zip(ours, reference, strict=True)) if a != b]
    types = sorted({r[0] for r in ours})
    print(f"{args.loops} loops (seed {args.seed}), types seen: {types}")
    print(
        f"steady_state + 3 tracking errors : {t_fast:8.3f} s  ({t_fast / args.loops * 1e3:.2f} ms/loop)"
    )
    print(
        f"sympy limit (after cancel)       : {t_limit:8.3f} s  ({t_limit / args.loops * 1e3:.2f} ms/loop)"
    )
    print(f"ratio                            : {t_limit / t_fast:8.1f}x")
    print(f"identical results                : {not mismatches} ({len(mismatches)} mismatches)")
    for i in mismatches[:5]:
        print(f"  loop {i}: ours {ours[i]} vs limit {reference[i]}")

    if args.raw:
        subset = loops[: args.raw]
        start = time.perf_counter()
        raw = [by_limit(loop, simplify=False) for loop in subset]
        t_raw = time.perf_counter() - start
        start = time.perf_counter()
        for loop in subset:
            fast(loop)
        t_sub = time.perf_counter() - start
        same = raw == ours[: args.raw]
        print(
            f"sympy limit on raw expressions   : {t_raw:8.3f} s for {args.raw} loops "
            f"({t_raw / t_sub:.0f}x our time on them; identical: {same})"
        )
    return 1 if mismatches else 0


if __name__ == "__main__":
    raise SystemExit(main())
