"""Property-based fuzzing: whatever the spec file, `speclint check` ends with located findings.

Documents are built from the spec schema's own vocabulary (every key it defines, its enum
values) with values drawn from numbers (ordinary, huge, tiny, non-finite spellings),
strings, transfer-function expressions and nested mappings and lists; some are placed in a
well-formed skeleton so that they reach the loop analysis, others are raw YAML text mutated
byte by byte. The property (common practice for input readers): exit 0 or 1, nothing on
stderr, no internal error (SL001), and every finding carries a line and a column.

The normal suite runs a bounded number of examples; for a long run set
SPECLINT_FUZZ_EXAMPLES, e.g. ``SPECLINT_FUZZ_EXAMPLES=5000 python -m pytest tests/test_fuzz.py``.
"""

from __future__ import annotations

import io
import json
import os
import tempfile
from pathlib import Path
from typing import Any

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from speclint.cli import main
from speclint.expr import parse_block
from speclint.validate import spec_schema

EXAMPLES = int(os.environ.get("SPECLINT_FUZZ_EXAMPLES", "0")) or None
FUZZ = settings(
    max_examples=EXAMPLES or 100,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)


def _vocabulary() -> tuple[list[str], list[str]]:
    keys: set[str] = set()
    enums: set[str] = set()

    def walk(node: object) -> None:
        if isinstance(node, dict):
            for key, value in node.items():
                if key == "properties" and isinstance(value, dict):
                    keys.update(value)
                if key == "enum" and isinstance(value, list):
                    enums.update(str(v) for v in value)
                walk(value)
        elif isinstance(node, list):
            for item in node:
                walk(item)

    walk(spec_schema())
    return sorted(keys), sorted(enums)


KEYS, ENUMS = _vocabulary()

# -- expressions ---------------------------------------------------------------------------

# Mostly the atoms of real models; now and then a zero, huge, tiny or look-alike one.
_COMMON = ["s", "s", "s", "s", "K", "K", "k", "J", "1", "2", "3", "0.5", "12", "2.5e-3"]
_ODD = ["0", "1e99", "1e-99", "1e101", "ѕ", "Κ"]
_ATOMS = st.sampled_from([*_COMMON, *_ODD])


def _combine(children: st.SearchStrategy[str]) -> st.SearchStrategy[str]:
    binary = st.tuples(children, st.sampled_from(["+", "-", "*", "/"]), children).map(
        lambda t: f"{t[0]} {t[1]} {t[2]}"
    )
    # Small exponents keep the loops' degree low enough for the analysis to stay quick.
    power = st.tuples(children, st.sampled_from(["^2", "^3", "**2", "^0", "^-1", "^0.5", "^s"]))
    return st.one_of(
        binary,
        binary,
        children.map(lambda c: f"({c})"),
        children.map(lambda c: f"-{c}"),
        power.map(lambda t: f"({t[0]}){t[1]}"),
        st.tuples(children, children).map(lambda t: f"{t[0]}({t[1]})"),  # a call
    )


GRAMMAR = st.recursive(_ATOMS, _combine, max_leaves=8)
NOISE = st.text(
    alphabet="sK0123456789.eE+-*/^()[]{}_,:;=<>!%&|~@#$'\"\\ \t\x00\x1bѕ·−", max_size=30
)
EXPRESSIONS = st.one_of(GRAMMAR, GRAMMAR, NOISE)
# Blocks shaped like real ones (a random numerator over known poles), so that most loops are
# proper and reach the analysis; the rest are free.
PLANTS = st.one_of(
    GRAMMAR.map(lambda g: f"({g})/(s*(s + 2)*(s + 5))"),
    GRAMMAR.map(lambda g: f"({g})/((s + 1)^2*(s^2 + 0.4*s + 4))"),
    GRAMMAR.map(lambda g: f"k/(J*s^2 + {g})"),
    EXPRESSIONS,
)
CONTROLLERS = st.one_of(
    st.just("K"),
    GRAMMAR.map(lambda g: f"K*({g})/(s + 10)"),
    GRAMMAR.map(lambda g: f"K*(s + 1)/({g})"),
    EXPRESSIONS,
)

# -- values and documents ------------------------------------------------------------------

NUMBER_TEXT = st.sampled_from(
    [".nan", ".inf", "-.inf", "1e999", "1e31", "1e-31", "-0.0", "0x1F", "0o17", "1_000", "2024-05-01",
     "yes", "no", "~", "true", "9" * 70, "1e30", "1e-30", "0.1", "7"]
)  # fmt: skip
NUMBERS = st.one_of(
    st.integers(min_value=-(10**6), max_value=10**6),
    st.decimals(min_value=-1000, max_value=1000, allow_nan=False, places=4).map(float),
    st.floats(allow_nan=True, allow_infinity=True),
)
POSITIVE = st.one_of(
    st.integers(min_value=1, max_value=1000),
    st.decimals(min_value="0.001", max_value=1000, places=3).map(float),
)
STRINGS = st.one_of(
    st.text(max_size=20),
    st.sampled_from(ENUMS),
    st.sampled_from(
        ["FW-SYS-001", "H-1", "feed", "10%", "0.25 %", "%", "inf%", "K", "s", "2025-01-01"]
    ),
)
SCALARS = st.one_of(NUMBERS, STRINGS, EXPRESSIONS, st.booleans(), st.none())
KEY = st.one_of(st.sampled_from(KEYS), st.sampled_from(KEYS), st.text(max_size=8))
VALUES = st.recursive(
    SCALARS,
    lambda children: st.one_of(
        st.lists(children, max_size=4),
        st.dictionaries(KEY, children, max_size=5),
    ),
    max_leaves=20,
)
LIMITS = st.one_of(POSITIVE, POSITIVE, POSITIVE, NUMBERS, STRINGS)
_MARGINS = [
    "min_gain_margin_db",
    "min_phase_margin_deg",
    "min_delay_margin_s",
    "max_sensitivity_peak",
]
CRITERIA = st.one_of(
    st.fixed_dictionaries(
        {
            "reference": st.sampled_from(["step", "ramp", "parabola", "ramp", "jerk"]),
            "magnitude": LIMITS,
            "max_error": st.one_of(LIMITS, st.sampled_from(["10%", "0.5 %", "250%"])),
        }
    ).map(lambda c: ("tracking", c)),
    st.dictionaries(st.sampled_from(_MARGINS), LIMITS, min_size=1).map(lambda c: ("margins", c)),
    st.dictionaries(st.sampled_from(["min_kp", "min_kv", "min_ka"]), LIMITS, min_size=1).map(
        lambda c: ("error_constants", c)
    ),
    st.fixed_dictionaries({"magnitude": LIMITS, "max_error": LIMITS}).map(
        lambda c: ("disturbance", c)
    ),
    VALUES.map(lambda v: ("disturbance", v)),
)


def _dump(data: Any) -> str:
    return yaml.safe_dump(data, allow_unicode=True, sort_keys=False)


def _skeleton(
    plant: str,
    controller: str,
    loop_extra: dict[str, Any],
    criterion: tuple[str, Any],
    requirement_extra: dict[str, Any],
) -> str:
    loop: dict[str, Any] = {
        "plant": plant,
        "controller": controller,
        "gain": {"symbol": "K", "nominal": 1},
        "constants": {"k": 2, "J": 0.5},
    }
    loop.update(loop_extra)
    requirement: dict[str, Any] = {"id": "H-1", "loop": "feed", "origin": "fuzz"}
    requirement[criterion[0]] = criterion[1]
    requirement.update(requirement_extra)
    return _dump({"speclint": 1, "loops": {"feed": loop}, "requirements": [requirement]})


# Loop keys that change the analysis; no dead time, which makes some random loops slow.
LOOP_EXTRA = st.dictionaries(
    st.sampled_from(["feedback", "output_unit", "description", "gain", "plant"]),
    st.one_of(EXPRESSIONS, VALUES),
    max_size=2,
)
ANALYSED = st.builds(
    _skeleton,
    PLANTS,
    CONTROLLERS,
    st.one_of(st.just({}), st.just({}), LOOP_EXTRA),
    CRITERIA,
    st.one_of(st.just({}), st.just({}), st.dictionaries(KEY, VALUES, max_size=2)),
)
FREE = st.dictionaries(KEY, VALUES, max_size=6).map(lambda d: _dump({"speclint": 1, **d}))

_VALID = (Path(__file__).parent / "hostile" / "bom-start.yaml").read_bytes()[3:]


@st.composite
def mutated(draw: st.DrawFn) -> bytes:
    """A valid spec with a few bytes inserted, replaced or deleted."""
    raw = bytearray(_VALID)
    for _ in range(draw(st.integers(min_value=1, max_value=6))):
        at = draw(st.integers(min_value=0, max_value=len(raw)))
        action = draw(st.sampled_from(["insert", "replace", "delete"]))
        chunk = draw(
            st.one_of(
                st.binary(max_size=4),
                st.sampled_from(
                    [
                        b"[",
                        b"{",
                        b"&a ",
                        b"*a",
                        b"!!python/none ",
                        b"\t",
                        b"\r",
                        b"- ",
                        b"? ",
                        b": ",
                        b"'",
                        b'"',
                        b"\xef\xbb\xbf",
                        b"\xff",
                    ]
                ),
            )
        )
        if action == "insert":
            raw[at:at] = chunk
        elif action == "replace":
            raw[at : at + len(chunk)] = chunk
        else:
            del raw[at : at + draw(st.integers(min_value=1, max_value=8))]
    return bytes(raw)


def check(raw: bytes) -> dict[str, Any]:
    """speclint check on one file holding `raw`; asserts the property and returns the report."""
    with tempfile.TemporaryDirectory() as tmp:
        (Path(tmp) / "spec.yaml").write_bytes(raw)
        out, err = io.StringIO(), io.StringIO()
        cwd = Path.cwd()
        os.chdir(tmp)
        try:
            code = main(
                ["check", "spec.yaml", "--no-cache", "--jobs", "1", "--format", "json"], out, err
            )
        finally:
            os.chdir(cwd)
    assert err.getvalue() == "", err.getvalue()
    assert code in (0, 1)
    report: dict[str, Any] = json.loads(out.getvalue())
    for item in report["findings"]:
        assert item["rule"] != "SL001", item
        assert isinstance(item["line"], int) and isinstance(item["column"], int), item
        assert item["line"] >= 1 and item["column"] >= 1
    if code == 1:
        assert report["findings"]
    return report


@pytest.fixture
def quick_budget(monkeypatch: pytest.MonkeyPatch) -> None:
    # A random loop that happens to be slow is stopped (SL407, a located finding) quickly.
    import speclint.pipeline as pipeline

    monkeypatch.setattr(pipeline, "LOOP_BUDGET_S", 3.0)


@FUZZ
@given(ANALYSED)
def test_random_loops_and_criteria(quick_budget: None, text: str) -> None:
    check(text.encode())


@FUZZ
@given(FREE)
def test_random_documents_from_the_schema_vocabulary(quick_budget: None, text: str) -> None:
    check(text.encode())


@FUZZ
@given(mutated())
def test_mutated_bytes(quick_budget: None, raw: bytes) -> None:
    check(raw)


@FUZZ
@given(st.lists(st.tuples(KEY, NUMBER_TEXT), min_size=1, max_size=6))
def test_number_spellings_in_place_of_values(
    quick_budget: None, pairs: list[tuple[str, str]]
) -> None:
    body = "".join(f"{key if key.isidentifier() else repr(key)}: {value}\n" for key, value in pairs)
    check(("speclint: 1\n" + body).encode())


@settings(max_examples=(EXAMPLES or 100) * 3, deadline=None)
@given(EXPRESSIONS)
def test_random_expressions_read_or_refused_with_an_offset(text: str) -> None:
    result = parse_block(text, "K", {"k": 2, "J": 1})
    if not hasattr(result, "num"):
        assert 0 <= result.offset <= len(text)
        assert result.message
