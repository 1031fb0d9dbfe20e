"""Safe reader for transfer-function text: "K*(s + 12)/s" becomes an exact :class:`Ratio`.

The text is parsed with ``ast.parse(..., mode="eval")`` and then walked with one handler
per allowed node type; nothing is ever evaluated by Python or by sympy's string parser.
Numbers are read from the source text itself, so ``0.1`` is exactly 1/10. The numerator and
denominator are built as written: ``a/b + c/d`` is ``(a·d + c·b)/(b·d)`` with no cancellation,
because a cancelled factor can be a closed-loop root (see :func:`common_factor`).

Grammar: numbers (``12``, ``0.5``, ``2.5e-3``), the Laplace variable ``s``, the loop's gain
symbol, named constants, ``+ - * /``, ``^`` or ``**`` with a whole exponent 0..20, and
parentheses. Every refusal is an :class:`ExprError` with a kind, the 0-based character
offset inside the text, and a message. Kinds:

- ``syntax``: not an expression of that grammar (calls, attributes, strings, ...);
- ``unknown-name``: a name that is not ``s``, the gain or a constant (incl. look-alike
  Unicode letters such as Cyrillic 'ѕ');
- ``limit``: a size limit below was exceeded;
- ``division-by-zero``: a divisor that is exactly the zero polynomial;
- ``not-rational``: a negative, fractional or non-constant exponent;
- ``zero``: the whole block is identically 0.

Limits: MAX_LENGTH characters, MAX_NODES tree nodes, exponent MAX_EXPONENT, degree
MAX_DEGREE in s and in the gain, MAX_PAREN_DEPTH nested brackets, MAX_TREE_DEPTH levels of
operators, MAX_DIGITS digits per number, decimal exponents within ±MAX_DECIMAL_EXPONENT, and
coefficients of at most MAX_COEFF_BITS bits. Together they bound the work of every
operation, so any input is accepted or refused in milliseconds. Coefficients (and numbers)
also keep within 10^±MAX_MAGNITUDE, so that the loop's figures fit double precision.
"""

from __future__ import annotations

import ast
import re
import unicodedata
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from fractions import Fraction

import sympy
from sympy.polys.rings import PolyElement, ring

from speclint.analysis.algebra import GENS, Ratio, from_terms

MAX_LENGTH = 2000
MAX_NODES = 500
MAX_EXPONENT = 20
MAX_DEGREE = 40
MAX_PAREN_DEPTH = 50
MAX_TREE_DEPTH = 100
MAX_DIGITS = 30
MAX_DECIMAL_EXPONENT = 100
MAX_COEFF_BITS = 4000
# Every non-zero coefficient of a block, as multiplied out, lies within 10^±MAX_MAGNITUDE: the
# frequency analysis and every reported figure work in double precision (about 10^±308),
# and a loop multiplies up to three blocks together.
MAX_MAGNITUDE = 100

KINDS = ("syntax", "unknown-name", "limit", "division-by-zero", "not-rational", "zero")

_GRAMMAR = "numbers, names, + - * /, ^ (or **) and parentheses"
_NUMBER = re.compile(r"(?P<int>[0-9]*)(?:\.(?P<frac>[0-9]*))?(?:[eE](?P<exp>[+-]?[0-9]+))?")

# Look-alikes that NFKC does not map to ASCII; the Unicode name alone would not tell the
# engineer which letter they meant to type.
_CONFUSABLES = {
    "а": "a", "в": "B", "е": "e", "к": "k", "м": "M", "н": "H", "о": "o", "р": "p",
    "с": "c", "т": "T", "у": "y", "х": "x", "ѕ": "s", "і": "i", "ј": "j", "ԁ": "d",
    "А": "A", "В": "B", "Е": "E", "К": "K", "М": "M", "Н": "H", "О": "O", "Р": "P",
    "С": "C", "Т": "T", "Х": "X", "Ѕ": "S", "І": "I", "Ј": "J",
    "α": "a", "ε": "e", "ι": "i", "κ": "k", "ν": "v", "ο": "o", "ρ": "p", "τ": "t",
    "υ": "u", "χ": "x", "Κ": "K", "Ο": "O", "Ρ": "P", "Τ": "T", "Χ": "X",
}  # fmt: skip
_SYMBOL_HINTS = {
    "−": "-", "–": "-", "—": "-", "·": "*", "×": "*", "∙": "*", "⋅": "*", "÷": "/",
    "²": "^2", "³": "^3", "（": "(", "）": ")",
}  # fmt: skip

_DISALLOWED = {
    ast.Call: "a function call",
    ast.Attribute: "attribute access",
    ast.Lambda: "a lambda",
    ast.Compare: "a comparison",
    ast.BoolOp: "'and'/'or'",
    ast.IfExp: "'if ... else'",
    ast.Subscript: "indexing",
    ast.Slice: "a slice",
    ast.List: "a list",
    ast.Tuple: "a tuple (a comma)",
    ast.Set: "a set",
    ast.Dict: "a dict",
    ast.ListComp: "a comprehension",
    ast.SetComp: "a comprehension",
    ast.DictComp: "a comprehension",
    ast.GeneratorExp: "a generator",
    ast.NamedExpr: "':='",
    ast.Starred: "'*' unpacking",
    ast.JoinedStr: "a string",
    ast.Await: "'await'",
    ast.Yield: "'yield'",
    ast.YieldFrom: "'yield'",
}
_OPERATORS = {
    ast.FloorDiv: "//",
    ast.Mod: "%",
    ast.MatMult: "@",
    ast.LShift: "<<",
    ast.RShift: ">>",
    ast.BitOr: "|",
    ast.BitAnd: "&",
    ast.BitXor: "^",
}


@dataclass(frozen=True, slots=True)
class ExprError:
    """Why a block's text was refused, and where (0-based character offset in the text)."""

    kind: str
    offset: int
    message: str


class _Refused(Exception):
    def __init__(self, error: ExprError) -> None:
        super().__init__(error.message)
        self.error = error


def parse_block(
    text: str, gain_symbol: str | None, constants: Mapping[str, Fraction]
) -> Ratio | ExprError:
    """Read one transfer-function block exactly, or say why and where it cannot be read."""
    try:
        return _parse(text, gain_symbol, constants)
    except _Refused as refused:
        return refused.error
    except (RecursionError, MemoryError):
        return ExprError("limit", 0, "expression too deeply nested or too large to read")


def common_factor(block: Ratio) -> sympy.Poly | None:
    """The exact non-constant common factor of a block's numerator and denominator, if any."""
    num, den = block.num, block.den
    if any(p.is_ground and not p.is_zero for p in (num, den)):
        return None  # a non-zero constant shares no factor; most lags are written 1/(...)
    for single, other in ((den, num), (num, den)):
        if single.is_monomial and not single.is_zero and not other.is_zero:
            # gcd(c·s^a·k^b, q) = s^min(a, i)·k^min(b, j), i and j the lowest powers of s and
            # k in q (monic, as Poly.gcd gives it over QQ): no gcd needed for K*(s + a)/s.
            (powers,) = single.monoms()
            lowest = tuple(min(e, *(m[i] for m in other.monoms())) for i, e in enumerate(powers))
            return from_terms({lowest: sympy.QQ(1)}) if any(lowest) else None
    factor = num.gcd(den)
    if factor.is_zero or factor.total_degree() == 0:
        return None
    return factor


def _parse(text: str, gain_symbol: str | None, constants: Mapping[str, Fraction]) -> Ratio:
    if not isinstance(text, str):
        raise _Refused(ExprError("syntax", 0, "a transfer function must be written as text"))
    if len(text) > MAX_LENGTH:
        raise _Refused(
            ExprError("limit", MAX_LENGTH, f"expression longer than {MAX_LENGTH} characters")
        )
    _check_characters(text)
    source, back = _prepare(text)
    if not source.strip():
        raise _Refused(ExprError("syntax", 0, "empty expression"))
    try:
        tree = ast.parse(source, mode="eval")
    except SyntaxError as err:
        raise _Refused(_syntax_error(err, source, back)) from None
    except (ValueError, RecursionError, MemoryError):
        raise _Refused(ExprError("syntax", 0, "not a transfer-function expression")) from None
    _check_tree(tree.body, back)
    reader = _Reader(source, back, gain_symbol, constants)
    num, den = reader.read(tree.body)
    if not num:
        raise _Refused(ExprError("zero", 0, "the block is identically 0"))
    return Ratio(_to_poly(num), _to_poly(den))


# The reader works in sympy's sparse polynomial ring Q[s, k] and builds the two Poly of a
# block once at the end: a Poly per intermediate costs ten times the arithmetic itself.
_RING, _S, _K = ring(GENS, sympy.QQ)
_ONE = _RING.one
_GEN_NAMES = ("s", None)  # None: the gain, shown under the spec's own name

_Pair = tuple[PolyElement, PolyElement]  # numerator, denominator as written


def _to_poly(p: PolyElement) -> sympy.Poly:
    return from_terms(dict(p))


def _syntax_error(err: SyntaxError, source: str, back: list[int]) -> ExprError:
    # Python reports offset 0 (or none) when the text ends in the middle of an expression.
    column = err.offset - 1 if err.offset else len(source)
    at = back[min(max(column, 0), len(back) - 1)]
    if "leading zeros" in err.msg:
        return ExprError("syntax", at, "write numbers without leading zeros, e.g. 1 or 0.1")
    if column >= len(source):
        return ExprError("syntax", at, "the expression ends too early")
    return ExprError("syntax", at, f"not a transfer-function expression ({err.msg})")


def _check_characters(text: str) -> None:
    depth = 0
    for at, ch in enumerate(text):
        if ch in "([{":
            depth += 1
            if depth > MAX_PAREN_DEPTH:
                message = f"more than {MAX_PAREN_DEPTH} nested parentheses"
                raise _Refused(ExprError("limit", at, message))
        elif ch in ")]}":
            depth -= 1
        if ch.isspace():
            continue  # no-break and other Unicode spaces pasted from documents read as blanks
        if ch.isascii():
            if not ch.isprintable():
                message = f"control character U+{ord(ch):04X} in the expression"
                raise _Refused(ExprError("syntax", at, message))
            continue
        name = unicodedata.name(ch, f"U+{ord(ch):04X}")
        if unicodedata.category(ch).startswith("L"):
            suggestion = _CONFUSABLES.get(ch) or unicodedata.normalize("NFKC", ch)
            hint = f" (did you mean '{suggestion}'?)" if suggestion.isascii() else ""
            message = f"'{ch}' ({name}) is not an ASCII letter; names are written in ASCII{hint}"
            raise _Refused(ExprError("unknown-name", at, message))
        replacement = _SYMBOL_HINTS.get(ch)
        hint = f"; write '{replacement}'" if replacement else ""
        raise _Refused(ExprError("syntax", at, f"'{ch}' ({name}) is not allowed here{hint}"))


def _prepare(text: str) -> tuple[str, list[int]]:
    """Python's grammar for the text: '^' becomes '**', any whitespace a space, leading
    blanks dropped. ``back[i]`` is the offset in ``text`` of character i of the result."""
    chars: list[str] = []
    back: list[int] = []
    for at, ch in enumerate(text):
        if ch == "^":
            chars.append("**")
            back.extend((at, at))
        else:
            chars.append(" " if ch.isspace() else ch)
            back.append(at)
    back.append(len(text))
    source = "".join(chars)
    lead = len(source) - len(source.lstrip(" "))
    return source[lead:], back[lead:]


def _check_tree(root: ast.expr, back: list[int]) -> None:
    count = 0
    stack: list[tuple[ast.AST, int]] = [(root, 1)]
    while stack:
        node, depth = stack.pop()
        if isinstance(node, ast.expr):
            count += 1
            at = back[min(node.col_offset, len(back) - 1)]
            if count > MAX_NODES:
                message = f"expression has more than {MAX_NODES} parts"
                raise _Refused(ExprError("limit", at, message))
            if depth > MAX_TREE_DEPTH:
                message = f"expression nested more than {MAX_TREE_DEPTH} operators deep"
                raise _Refused(ExprError("limit", at, message))
        # ast.iter_child_nodes, inlined (same order): its generators cost more than the check.
        for name in node._fields:
            field = getattr(node, name, None)
            if isinstance(field, ast.AST):
                stack.append((field, depth + 1))
            elif isinstance(field, list):
                for item in field:
                    if isinstance(item, ast.AST):
                        stack.append((item, depth + 1))


class _Reader:
    """The whitelist walker: one handler per allowed node type."""

    def __init__(
        self,
        source: str,
        back: list[int],
        gain_symbol: str | None,
        constants: Mapping[str, Fraction],
    ) -> None:
        self.source = source
        self.back = back
        self.gain_symbol = gain_symbol
        self.constants = constants
        self.handlers: dict[type[ast.AST], Callable[[ast.AST], _Pair]] = {
            ast.BinOp: self._binop,
            ast.UnaryOp: self._unary,
            ast.Constant: self._constant,
            ast.Name: self._name,
        }

    def read(self, node: ast.AST) -> _Pair:
        handler = self.handlers.get(type(node))
        if handler is None:
            raise self._disallowed(node)
        return handler(node)

    # -- locations and refusals

    def _at(self, column: int) -> int:
        return self.back[min(max(column, 0), len(self.back) - 1)]

    def _refuse(self, kind: str, node: ast.AST, message: str) -> _Refused:
        column = getattr(node, "col_offset", 0)
        return _Refused(ExprError(kind, self._at(column), message))

    def _after(self, node: ast.expr, skip: str) -> int:
        """The offset of the first token after ``node`` that is not in ``skip``."""
        column = node.end_col_offset or node.col_offset
        while column < len(self.source) and self.source[column] in skip:
            column += 1
        return self._at(column)

    def _disallowed(self, node: ast.AST) -> _Refused:
        what = _DISALLOWED.get(type(node), "this construct")
        at = self._at(getattr(node, "col_offset", 0))
        if isinstance(node, ast.Call):
            at = self._after(node.func, " )")
            message = f"{what} is not allowed; for a product write '*', e.g. K*(s + 1)"
        elif isinstance(node, ast.Attribute):
            at = self._after(node.value, " )")
            message = f"{what} ('.{node.attr}') is not allowed; use only {_GRAMMAR}"
        else:
            message = f"{what} is not allowed; use only {_GRAMMAR}"
        return _Refused(ExprError("syntax", at, message))

    # -- handlers

    def _binop(self, node: ast.AST) -> _Pair:
        assert isinstance(node, ast.BinOp)
        op = type(node.op)
        if op is ast.Pow:
            return self._power(node)
        if op not in (ast.Add, ast.Sub, ast.Mult, ast.Div):
            symbol = _OPERATORS.get(op, "this operator")
            at = self._after(node.left, " )")
            message = f"operator '{symbol}' is not allowed; use only {_GRAMMAR}"
            raise _Refused(ExprError("syntax", at, message))
        left_num, left_den = self.read(node.left)
        right_num, right_den = self.read(node.right)
        if op is ast.Mult:
            return self._checked(node, (left_num, right_num), (left_den, right_den))
        if op is ast.Div:
            if not right_num:
                message = "division by zero: the divisor is identically 0"
                raise self._refuse("division-by-zero", node.right, message)
            return self._checked(node, (left_num, right_den), (left_den, right_num))
        self._check_sizes(
            node, [(left_num, right_den), (right_num, left_den), (left_den, right_den)]
        )
        first, second = _times(left_num, right_den), _times(right_num, left_den)
        num = first + second if op is ast.Add else first - second
        return self._verified(node, (num, _times(left_den, right_den)))

    def _power(self, node: ast.BinOp) -> _Pair:
        exponent = self._exponent(node.right)
        base = self.read(node.left)
        if exponent == 0:
            return _ONE, _ONE
        for p in base:
            # The zero polynomial has degree -oo: its powers never exceed the cap.
            if p and any(d * exponent > MAX_DEGREE for d in _degrees(p)):
                message = f"the power has degree above {MAX_DEGREE}"
                raise self._refuse("limit", node, message)
            if _bits(p) * exponent > MAX_COEFF_BITS:
                raise self._refuse("limit", node, _TOO_BIG)
        return self._verified(node, (base[0] ** exponent, base[1] ** exponent))

    def _exponent(self, node: ast.expr) -> int:
        num, den = self.read(node)
        if not num.is_ground or not den.is_ground:
            message = (
                "the exponent must be a constant whole number, not an expression in s or the gain"
            )
            raise self._refuse("not-rational", node, message)
        number = _as_fraction(num) / _as_fraction(den)
        if number < 0:
            message = "negative exponent: write 1/s^2 rather than s^-2"
            raise self._refuse("not-rational", node, message)
        if number.denominator != 1:
            message = f"fractional exponent {number}: only whole powers keep the block rational"
            raise self._refuse("not-rational", node, message)
        if number > MAX_EXPONENT:
            raise self._refuse("limit", node, f"exponent above {MAX_EXPONENT}")
        return int(number)

    def _unary(self, node: ast.AST) -> _Pair:
        assert isinstance(node, ast.UnaryOp)
        if isinstance(node.op, ast.USub):
            num, den = self.read(node.operand)
            return -num, den
        if isinstance(node.op, ast.UAdd):
            return self.read(node.operand)
        word = "'not'" if isinstance(node.op, ast.Not) else "'~'"
        raise self._refuse("syntax", node, f"{word} is not allowed; use only {_GRAMMAR}")

    def _constant(self, node: ast.AST) -> _Pair:
        assert isinstance(node, ast.Constant)
        value = node.value
        if isinstance(value, bool) or value is None:
            raise self._unknown(node, str(value))
        if isinstance(value, str | bytes):
            raise self._refuse(
                "syntax", node, f"text in quotes is not allowed; use only {_GRAMMAR}"
            )
        if isinstance(value, complex):
            raise self._refuse("syntax", node, "imaginary numbers are not allowed")
        if not isinstance(value, int | float):
            raise self._disallowed(node)
        end = node.end_col_offset if node.end_col_offset is not None else len(self.source)
        number = self._number(node, self.source[node.col_offset : end])
        return self._verified(node, (_constant_poly(number), _ONE))

    def _number(self, node: ast.AST, literal: str) -> Fraction:
        match = _NUMBER.fullmatch(literal)
        if match is None:
            message = f"'{literal}' is not a plain decimal number; write e.g. 12, 0.5 or 2.5e-3"
            raise self._refuse("syntax", node, message)
        whole, frac, exp = match["int"], match["frac"] or "", match["exp"] or "0"
        if len((whole + frac).lstrip("0")) > MAX_DIGITS:
            raise self._refuse("limit", node, f"number with more than {MAX_DIGITS} digits")
        exp_digits = exp.lstrip("+-").lstrip("0")
        if len(exp_digits) > 3 or abs(int(exp)) > MAX_DECIMAL_EXPONENT:
            message = f"decimal exponent beyond ±{MAX_DECIMAL_EXPONENT}"
            raise self._refuse("limit", node, message)
        mantissa = int(whole + frac or "0")
        power = int(exp) - len(frac)
        return Fraction(mantissa * 10**power) if power >= 0 else Fraction(mantissa, 10**-power)

    def _name(self, node: ast.AST) -> _Pair:
        assert isinstance(node, ast.Name)
        name = node.id
        # Precedence when a spec reuses a name: s, then the gain, then the constants.
        if name == "s":
            return _S, _ONE
        if name == self.gain_symbol:
            return _K, _ONE
        if name in self.constants:
            value = Fraction(self.constants[name])
            return _constant_poly(value), _ONE
        raise self._unknown(node, name)

    def _unknown(self, node: ast.AST, name: str) -> _Refused:
        known = ["s"]
        if self.gain_symbol:
            known.append(self.gain_symbol)
        known.extend(sorted(c for c in self.constants if c not in known))
        message = f"unknown name '{name}'; known names are {', '.join(known)}"
        close = [k for k in known if k.lower() == name.lower()]
        if close:
            message += f" (names are case-sensitive: did you mean '{close[0]}'?)"
        return self._refuse("unknown-name", node, message)

    # -- size guards

    def _check_sizes(self, node: ast.AST, pairs: list[_Pair]) -> None:
        for a, b in pairs:
            # A zero factor (degree -oo) makes a zero product, of no degree at all.
            if a and b:
                for name, da, db in zip(_GEN_NAMES, _degrees(a), _degrees(b), strict=True):
                    if da + db > MAX_DEGREE:
                        shown = name or self.gain_symbol or "the gain"
                        message = f"the result has degree above {MAX_DEGREE} in {shown}"
                        raise self._refuse("limit", node, message)
            if _bits(a) + _bits(b) > MAX_COEFF_BITS:
                raise self._refuse("limit", node, _TOO_BIG)

    def _checked(self, node: ast.AST, nums: _Pair, dens: _Pair) -> _Pair:
        self._check_sizes(node, [nums, dens])
        return self._verified(node, (_times(*nums), _times(*dens)))

    def _verified(self, node: ast.AST, result: _Pair) -> _Pair:
        for p in result:
            if _bits(p) > MAX_COEFF_BITS:
                raise self._refuse("limit", node, _TOO_BIG)
            for c in p.values():
                # |n/d| within [10^-M, 10^M], in integers: d <= |n|·10^M and |n| <= d·10^M.
                size, scale = abs(c.numerator), c.denominator
                if not (scale <= size * _LARGEST and size <= scale * _LARGEST):
                    raise self._refuse("limit", node, _OUT_OF_RANGE)
        return result


_TOO_BIG = f"the numbers in this expression grow beyond {MAX_COEFF_BITS} bits"
_OUT_OF_RANGE = (
    f"a coefficient here leaves the range 1e-{MAX_MAGNITUDE} to 1e{MAX_MAGNITUDE}; "
    "rescale the model (its units)"
)
_LARGEST = 10**MAX_MAGNITUDE


def _constant_poly(value: Fraction) -> PolyElement:
    return _RING.ground_new(sympy.QQ(value.numerator, value.denominator))


def _as_fraction(p: PolyElement) -> Fraction:
    """The value of a constant polynomial."""
    value = p.LC
    return Fraction(int(value.numerator), int(value.denominator))


def _times(a: PolyElement, b: PolyElement) -> PolyElement:
    # Most factors of a written block are a leaf's denominator 1: skip those products.
    if a is _ONE:
        return b
    if b is _ONE:
        return a
    return a * b


def _degrees(p: PolyElement) -> tuple[int, ...]:
    """Degrees of a non-zero polynomial in s and in the gain."""
    return tuple(map(max, zip(*p.keys(), strict=True)))


def _bits(p: PolyElement) -> int:
    """The largest numerator or denominator size among the coefficients, in bits.

    The zero polynomial counts as 1 bit (its coefficient 0 = 0/1), like any constant 1.
    """
    # bit_length(|n| | d) is the larger of the two sizes, and d >= 1 keeps it at least 1.
    largest = 1
    for c in p.values():
        largest = max(largest, abs(c.numerator) | c.denominator)
    return int(largest.bit_length())
