"""Review fingerprints: blind to formatting, sensitive to every normative edit, and the
stale-review finding (SL611) that names what changed.

The hash itself is checked against hashlib's SHA-256 (FIPS 180-4) over the canonical
forms documented in speclint/fingerprint.py; canonical JSON with sorted keys and no
spaces is common practice for hashing structured data.
"""

from __future__ import annotations

import hashlib
import json
import random

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import findings_of
from speclint import fingerprint, trace
from speclint.build import build
from speclint.load import read_spec
from speclint.validate import validate

BASE = """\
speclint: 1
loops:
  feed:
    description: Feed roller speed.
    output_unit: rad/s
    plant: "kt / (J*s + b)"
    controller: "K*(s + 12)/s"
    gain: {symbol: K, nominal: 0.35, limits: [0.01, 50]}
    delay: 0.0003
    constants:
      kt: 0.9
      J: {value: 0.0021, tolerance: "10%", unit: kg m^2}
      b: 0.004
requirements:
  - id: R-1
    title: Feed follows ramps
    text: The roller shall lag a ramp by at most 0.5 rad/s.
    rationale: Print registration.
    traces_to: [SYS-1]
    loop: feed
    tracking: {reference: ramp, magnitude: 200, max_error: 0.5}
    margins: {min_phase_margin_deg: 45}
    verification: {method: analysis}
"""

# The same content, written differently: block style, comments, other key order, other
# quoting, other spellings of the same numbers, other spacing inside expressions.
REFORMATTED = """\
# a comment
speclint: 1
requirements:
- loop: 'feed'   # the loop
  margins:
    min_phase_margin_deg: 45.0
  tracking:
    max_error: 5e-1
    reference: "ramp"
    magnitude: 2.0e2
  verification:
    method: test
  text: >-
    The roller shall lag a ramp
    by at most 0.5 rad/s.
  id: R-1
loops:
  feed:
    constants:
      b: 0.0040
      J:
        unit: kg m^2
        tolerance: 10%
        value: .0021
      kt: 9e-1
    delay: 3e-4
    gain:
      limits: [0.010, 5e1]
      nominal: 0.350
      symbol: K
    controller: K * ( s+12 ) / s
    plant: kt/(J*s+b)
    output_unit: "rad/s"
"""


def fp(text: str, rid: str = "R-1") -> str:
    doc = read_spec("a.yaml", text.encode()).document
    assert doc is not None
    assert validate(doc) == []
    spec, _ = build(doc)
    found = trace.index([spec], [])
    req = next(r for r in found.requirements if r.id == rid)
    now = trace.current_fingerprint(req, found)
    assert now is not None
    return now


def test_shape_three_parts_of_eight_hex_digits():
    value = fp(BASE)
    assert len(value) == 24 and int(value, 16) >= 0


def test_the_text_part_is_sha256_of_the_documented_canonical_form():
    canonical = json.dumps("The roller shall lag a ramp by at most 0.5 rad/s.")
    digest = hashlib.sha256(f"speclint-fingerprint-1\ntext\n{canonical}".encode()).hexdigest()
    assert fp(BASE)[:8] == digest[:8]


def test_criteria_are_canonical_with_exact_fractions():
    canonical = json.dumps(
        [
            {"kind": "tracking", "magnitude": "200", "max_error": "1/2", "reference": "ramp"},
            {"kind": "margins", "min_phase_margin_deg": "45"},
        ],
        sort_keys=True,
        separators=(",", ":"),
    )
    digest = hashlib.sha256(f"speclint-fingerprint-1\ncriteria\n{canonical}".encode()).hexdigest()
    assert fp(BASE)[8:16] == digest[:8]


def test_formatting_comments_key_order_and_number_spelling_do_not_change_it():
    assert fp(REFORMATTED) == fp(BASE)


def test_non_normative_keys_do_not_change_it():
    edited = (
        BASE.replace("title: Feed follows ramps", "title: Another title")
        .replace("Print registration.", "Because.")
        .replace("traces_to: [SYS-1]", "traces_to: [SYS-2, SYS-3]")
        .replace("{method: analysis}", "{method: test, evidence: [x.csv]}")
        .replace("Feed roller speed.", "Renamed description.")
    )
    assert fp(edited) == fp(BASE)


def test_an_absent_controller_is_the_same_as_one():
    a = BASE.replace('"K*(s + 12)/s"', '"1"').replace('plant: "kt', 'plant: "K*kt')
    b = a.replace('    controller: "1"\n', "")
    assert a != b and fp(a) == fp(b)


@pytest.mark.parametrize(
    ("old", "new", "part"),
    [
        ("at most 0.5 rad/s.", "at most 0.4 rad/s.", "text"),
        ("The roller shall", "The roller should", "text"),
        ("magnitude: 200", "magnitude: 201", "criteria"),
        ("max_error: 0.5}", "max_error: 0.51}", "criteria"),
        ("max_error: 0.5}", 'max_error: "0.5%"}', "criteria"),
        ("reference: ramp", "reference: step", "criteria"),
        (
            "min_phase_margin_deg: 45}",
            "min_phase_margin_deg: 45, min_gain_margin_db: 6}",
            "criteria",
        ),
        ('plant: "kt / (J*s + b)"', 'plant: "kt / (J*s + 2*b)"', "loop model"),
        ('controller: "K*(s + 12)/s"', 'controller: "K*(s + 13)/s"', "loop model"),
        (
            "    delay: 0.0003\n",
            '    delay: 0.0003\n    feedback: "1/(0.001*s + 1)"\n',
            "loop model",
        ),
        ("nominal: 0.35", "nominal: 0.36", "loop model"),
        ("limits: [0.01, 50]", "limits: [0.01, 60]", "loop model"),
        ("delay: 0.0003", "delay: 0.0004", "loop model"),
        ("kt: 0.9", "kt: 0.91", "loop model"),
        ('tolerance: "10%"', 'tolerance: "20%"', "loop model"),
        ("unit: kg m^2", "unit: g m^2", "loop model"),
        ("output_unit: rad/s", "output_unit: rpm", "loop model"),
    ],
)
def test_every_normative_edit_changes_its_part_and_only_that(old, new, part):
    assert old in BASE
    before, after = fp(BASE), fp(BASE.replace(old, new))
    assert after != before
    assert fingerprint.changed_parts(before, after) == (part,)


def test_renaming_the_loop_changes_the_loop_part():
    renamed = BASE.replace("  feed:\n", "  feeder:\n").replace("loop: feed", "loop: feeder")
    assert fingerprint.changed_parts(fp(BASE), fp(renamed)) == ("loop model",)


def test_a_legacy_fingerprint_cannot_tell_which_part():
    assert fingerprint.changed_parts("0123456789abcdef", fp(BASE)) is None


@settings(max_examples=50, deadline=None)
@given(st.randoms(use_true_random=False))
def test_any_order_of_the_requirement_keys_gives_the_same_fingerprint(rng: random.Random):
    head, _, body = BASE.partition("  - id: R-1\n")
    lines = ["    id: R-1\n", *body.splitlines(keepends=True)]
    rng.shuffle(lines)
    shuffled = head + "  -" + lines[0][3:] + "".join(lines[1:])
    assert fp(shuffled) == fp(BASE)


# -- the stale-review finding


def _reviewed(text: str, value: str) -> str:
    record = f'    reviewed: {{fingerprint: "{value}", by: Ana Ruiz, date: "2025-03-04"}}\n'
    return text + record


def test_a_current_review_is_quiet(speclint):
    root = "  - id: SYS-1\n    origin: customer list\n"
    run = speclint({"a.yaml": _reviewed(BASE, fp(BASE)) + root})
    assert run.codes == [], findings_of(run)


@pytest.mark.parametrize(
    ("old", "new", "said"),
    [
        ("at most 0.5 rad/s.", "at most 0.4 rad/s.", "changed: text since"),
        ("magnitude: 200", "magnitude: 100", "changed: criteria since"),
        ("nominal: 0.35", "nominal: 0.5", "changed: loop model since"),
    ],
)
def test_a_stale_review_names_what_changed(speclint, old, new, said):
    root = "  - id: SYS-1\n    origin: customer list\n"
    text = _reviewed(BASE.replace(old, new), fp(BASE)) + root
    run = speclint({"a.yaml": text})
    stale = [f for f in run.report["findings"] if f["rule"] == "SL611"]
    assert len(stale) == 1, findings_of(run)
    assert said in stale[0]["message"] and "Ana Ruiz on 2025-03-04" in stale[0]["message"]
    line = text.count("\n", 0, text.index("reviewed:")) + 1
    assert (stale[0]["line"], stale[0]["column"]) == (line, 5)
    assert "speclint stamp R-1" in stale[0]["hint"]


def test_a_foreign_fingerprint_is_stale_without_naming_a_part(speclint):
    root = "  - id: SYS-1\n    origin: customer list\n"
    run = speclint({"a.yaml": _reviewed(BASE, "0123456789abcdef") + root})
    stale = [f["message"] for f in run.report["findings"] if f["rule"] == "SL611"]
    assert len(stale) == 1 and "cannot be told" in stale[0], findings_of(run)
