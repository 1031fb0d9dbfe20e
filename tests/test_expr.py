"""The transfer-function reader: exact values, blocks kept as written, located refusals."""

from __future__ import annotations

import time
from fractions import Fraction

import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from speclint.analysis.algebra import GENS, K, Ratio, S, poly
from speclint.expr import KINDS, MAX_LENGTH, ExprError, common_factor, parse_block

CONSTANTS = {"kt": Fraction(9, 10), "J": Fraction(21, 10000), "b": Fraction(1, 250)}


def read(text: str, gain: str | None = "K", constants: dict[str, Fraction] | None = None) -> Ratio:
    result = parse_block(text, gain, CONSTANTS if constants is None else constants)
    assert isinstance(result, Ratio), result
    return result


def refused(text: str, gain: str | None = "K") -> ExprError:
    result = parse_block(text, gain, CONSTANTS)
    assert isinstance(result, ExprError), f"{text!r} was accepted: {result}"
    return result


def same_function(block: Ratio, expected: sympy.Expr) -> bool:
    # Reference: sympy's own rational-function arithmetic on an expression built here.
    return sympy.cancel(block.num.as_expr() / block.den.as_expr() - expected) == 0


def test_film_feed_plant_is_read_exactly() -> None:
    block = read("kt / (J*s + b) * 1/(0.002*s + 1)")
    r = sympy.Rational
    expected = r(9, 10) / (r(21, 10000) * S + r(1, 250)) / (r(2, 1000) * S + 1)
    assert same_function(block, expected)


def test_controller_with_gain_and_integrator() -> None:
    block = read("K*(s + 12)/s")
    assert block.num == poly(K * S + 12 * K)
    assert block.den == poly(S)


def test_caret_and_double_star_are_the_same_power() -> None:
    assert read("2.5e-3*s^2 + 1") == read("2.5e-3*s**2 + 1")
    assert read("2.5e-3*s^2 + 1").num == poly(sympy.Rational(1, 400) * S**2 + 1)


@pytest.mark.parametrize("literal", ["0.1", "2.5e-3", "1e-100", "123.456", ".5", "5.", "7E+2"])
def test_decimals_are_exact_rationals(literal: str) -> None:
    # Reference: fractions.Fraction's own exact reading of a decimal string.
    value = Fraction(literal)
    block = read(literal)
    assert block.num == poly(sympy.Rational(value.numerator, value.denominator))
    assert block.den == poly(1)


def test_point_one_is_not_a_float() -> None:
    # 0.1 as a double is 3602879701896397/36028797018963968; the reader must not go there.
    block = read("0.1*K")
    assert block.num.coeff_monomial(K) == sympy.Rational(1, 10)


def test_blocks_keep_numerator_and_denominator_as_written() -> None:
    # Common practice: a pole cancelled by a zero is still a closed-loop root.
    block = read("s*(s + 1)/(s*(s + 2))")
    assert block.num == poly(S**2 + S)
    assert block.den == poly(S**2 + 2 * S)
    assert common_factor(block) == poly(S)


def test_sum_of_fractions_multiplies_denominators() -> None:
    block = read("1/(s + 1) + 1/(s + 1)")
    assert block.num == poly(2 * S + 2)
    assert block.den == poly((S + 1) ** 2)
    assert common_factor(block) == poly(S + 1)


def test_no_common_factor() -> None:
    assert common_factor(read("(s + 2)/(s*(s + 3))")) is None


def test_common_factor_in_the_gain() -> None:
    assert common_factor(read("K*(s + 1)/(K*s)")) == poly(K)


def test_whitespace_and_newlines() -> None:
    assert read("  s\n + 1\t") == read("s + 1")


def test_unicode_spaces_read_as_blanks() -> None:
    assert read("K*(s\u00a0+ 12)/s") == read("K*(s + 12)/s")
    assert refused("s +\u00a0x").offset == 4


def test_gain_symbol_is_the_internal_k_whatever_its_name() -> None:
    assert read("Kp*s", gain="Kp").num == poly(K * S)
    assert read("gain/s", gain="gain").num == poly(K)


@pytest.mark.parametrize(
    ("text", "kind", "offset"),
    [
        ("K(s+1)", "syntax", 1),
        ("(s+1)(s+2)", "syntax", 5),
        ("s.real", "syntax", 1),
        ("s + x", "unknown-name", 4),
        ("S + 1", "unknown-name", 0),
        ("1/0", "division-by-zero", 2),
        ("1/(s-s)", "division-by-zero", 3),
        ("s - s", "zero", 0),
        ("s^-2", "not-rational", 2),
        ("s^0.5", "not-rational", 2),
        ("s^s", "not-rational", 2),
        ("s^21", "limit", 2),
        ("s**21", "limit", 3),
        ("(s+1)^20*(s+1)^20*s", "limit", 0),
        ("1" * 31, "limit", 0),
        ("1e301", "limit", 0),
        ("s ^ 2 % 3", "syntax", 6),
        ("s // 2", "syntax", 2),
        ("s +", "syntax", 3),
        ("0x1F", "syntax", 0),
        ("1j", "syntax", 0),
        ("'s'", "syntax", 0),
        ("True", "unknown-name", 0),
        ("s < 1", "syntax", 0),
        ("", "syntax", 0),
    ],
)
def test_refusals_are_located(text: str, kind: str, offset: int) -> None:
    error = refused(text)
    assert (error.kind, error.offset) == (kind, offset), error


def test_caret_offsets_map_back_to_the_original_text() -> None:
    # After '^' becomes '**' the later columns shift by one; offsets must not.
    error = refused("s^2 + s^2 + y")
    assert (error.kind, error.offset) == ("unknown-name", 12)


def test_unknown_name_lists_the_known_ones() -> None:
    error = refused("Kt/s")
    assert "'Kt'" in error.message
    assert "s, K, J, b, kt" in error.message
    assert "did you mean 'kt'" in error.message


def test_gain_name_unknown_when_the_loop_has_no_gain() -> None:
    assert refused("K/s", gain=None).kind == "unknown-name"


@pytest.mark.parametrize("text", ["ѕ + 1", "2*ѕ", "Κ*s", "ｓ + 1"])
def test_look_alike_letters_are_named(text: str) -> None:
    # Cyrillic dze, Greek kappa, full-width s: Python would accept the last one as 's'.
    error = refused(text)
    assert error.kind == "unknown-name"
    assert text[error.offset] not in "sK+*12 "
    assert "not an ASCII letter" in error.message


def test_look_alike_suggests_the_ascii_letter() -> None:
    assert "did you mean 's'" in refused("ѕ + 1").message
    assert "CYRILLIC" in refused("ѕ + 1").message


def test_typographic_minus_gets_a_hint() -> None:
    error = refused("2 − s")
    assert (error.kind, error.offset) == ("syntax", 2)
    assert "write '-'" in error.message


HOSTILE = [
    "__import__('os')",
    "__import__('os').system('true')",
    "(lambda: 1)()",
    "s**99999999",
    "9**9**9**9",
    "(" * 5000 + "s" + ")" * 5000,
    "(" * 999 + "s" + ")" * 999,
    "-" * 1999 + "s",
    "1" * 100000,
    "K(s+1)",
    "s.real",
    "[s for s in s]",
    "1/0",
    "((10^20)^20)^20",
    "(s+K+1)^20^20",
    "+".join(["s"] * 999),
    "s" + "*s" * 700,
    "\x00",
    "().__class__.__bases__[0].__subclasses__()",
    "open('/etc/passwd')",
]


@pytest.mark.parametrize("text", HOSTILE)
def test_hostile_text_is_refused_fast(text: str) -> None:
    start = time.perf_counter()
    result = parse_block(text, "K", CONSTANTS)
    elapsed = time.perf_counter() - start
    assert isinstance(result, ExprError)
    assert result.kind in KINDS
    assert 0 <= result.offset <= min(len(text), MAX_LENGTH)
    # A guard against a hang or a runaway computation, far above the milliseconds these
    # take, so that a loaded CI machine cannot fail it; speed itself is measured by
    # benchmarks/hostile_corpus.py, not asserted here.
    assert elapsed < 2.0, f"{elapsed * 1000:.1f} ms"


def test_refusal_kinds() -> None:
    assert refused("9**9**9**9").kind == "limit"
    assert refused("(" * 5000 + "s" + ")" * 5000).kind == "limit"
    assert refused("__import__('os')").kind == "syntax"
    assert refused("1/0").kind == "division-by-zero"


_ALPHABET = "sKJbkt0123456789.eE+-*/^()[]{} _'\",:;=<>!%&|~@#$\\\n\tѕΚｓ−·xyzS"


@settings(max_examples=300, deadline=None)
@given(st.one_of(st.text(alphabet=_ALPHABET, max_size=60), st.text(max_size=60)))
def test_random_text_never_raises(text: str) -> None:
    # Property (common practice for input readers): any text gives a result, never an exception.
    result = parse_block(text, "K", CONSTANTS)
    assert isinstance(result, Ratio | ExprError)
    if isinstance(result, ExprError):
        assert result.kind in KINDS
        assert 0 <= result.offset <= len(text)
        assert result.message


_small = st.fractions(min_value=-50, max_value=50, max_denominator=40)


@settings(max_examples=60, deadline=None)
@given(st.lists(_small, min_size=1, max_size=5), st.lists(_small, min_size=1, max_size=5))
def test_written_polynomials_round_trip(num: list[Fraction], den: list[Fraction]) -> None:
    # Reference: sympy Poly built directly from the same coefficients.
    def text(coefficients: list[Fraction]) -> str:
        terms = [f"({c.numerator}/{c.denominator})*s^{i}" for i, c in enumerate(coefficients)]
        return " + ".join(terms)

    def expected(coefficients: list[Fraction]) -> sympy.Poly:
        expr = sum(
            (sympy.Rational(c.numerator, c.denominator) * S**i for i, c in enumerate(coefficients)),
            sympy.Integer(0),
        )
        return sympy.Poly(expr, *GENS, domain=sympy.QQ)

    result = parse_block(f"K*({text(num)}) / ({text(den)})", "K", {})
    if expected(den).is_zero:
        assert isinstance(result, ExprError)
        assert result.kind == "division-by-zero"
    elif expected(num).is_zero:
        assert isinstance(result, ExprError)
        assert result.kind == "zero"
    else:
        # Constants such as (3/4) stay as written too, so compare as rational functions.
        assert isinstance(result, Ratio)
        assert result.num * expected(den) == expected(num) * poly(K) * result.den
