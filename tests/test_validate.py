"""The validate stage: every schema violation, in plain words, at its exact node."""

from __future__ import annotations

import yaml
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import REPO, findings_of

EXAMPLES = REPO / "examples"

SPEC = """\
speclint: 1
loops:
  feed:
    plant: "1/(s+1)"
    controller: "K"
    gain: {symbol: K, nominal: 2}
requirements:
  - id: R-1
    loop: feed
    tracking: {reference: step, magnitude: 1, max_error: 0.5}
  - id: R-2
    loop: feed
    tracking:
      reference: ramps
      magnitude: 1
      max_error: 0.5
"""


def test_enum_error_deep_in_the_document_has_exact_line_and_column(speclint):
    run = speclint({"s.yaml": SPEC})
    hits = [f for f in run.report["findings"] if f["rule"] == "SL204"]
    assert len(hits) == 1, findings_of(run)
    assert (
        hits[0]["message"]
        == 'requirements[1].tracking.reference: "ramps" is not one of step, ramp, parabola'
    )
    assert (hits[0]["line"], hits[0]["column"]) == (14, 18)


def test_all_violations_are_reported_not_only_the_first(speclint):
    text = """\
    speclint: 1
    loops:
      feed:
        plnt: "1/s"
        gain: {symbol: K, nominal: -1}
        delay: fast
    requirements:
      - id: R-1
        verification: {method: review}
      - title: no id
    """
    run = speclint({"s.yaml": text})
    got = sorted((f["line"], f["column"], f["rule"]) for f in run.report["findings"])
    assert got == [
        (3, 3, "SL202"),  # loops.feed lacks plant: reported at its key
        (4, 5, "SL201"),  # unknown key plnt, at the key
        (5, 32, "SL204"),  # nominal must be > 0
        (6, 12, "SL203"),  # delay must be a number
        (9, 28, "SL204"),  # method not one of the four
        (10, 5, "SL202"),  # requirement without id
    ], findings_of(run)
    typo = next(f for f in run.report["findings"] if f["rule"] == "SL201")
    assert typo["hint"] == 'did you mean "plant"?'


def test_version_like_value_where_a_string_belongs_keeps_its_text(speclint):
    text = """\
    speclint: 1
    requirements:
      - id: R-1
        title: 1.10
        origin: no
        traces_to: []
    """
    run = speclint({"s.yaml": text})
    assert run.code == 0, findings_of(run)


def test_number_written_as_a_string_is_a_type_error(speclint):
    text = """\
    speclint: 1
    loops:
      feed:
        plant: "1/s"
        delay: "0.01"
    """
    run = speclint({"s.yaml": text})
    assert run.codes == ["SL203"]
    assert (
        run.report["findings"][0]["message"]
        == 'loops.feed.delay: expected a number, got the string "0.01"'
    )


def test_boolean_where_a_number_belongs_is_refused(speclint):
    text = """\
    speclint: 1
    loops:
      feed:
        plant: "1/s"
        gain: {symbol: K, nominal: true}
    """
    run = speclint({"s.yaml": text})
    assert run.codes == ["SL203"], findings_of(run)


def test_unsupported_format_version(speclint):
    run = speclint({"s.yaml": "speclint: 2\n"})
    assert run.codes == ["SL205"]
    assert (run.report["findings"][0]["line"], run.report["findings"][0]["column"]) == (1, 11)


def test_percentage_or_number_alternatives_are_named(speclint):
    text = """\
    speclint: 1
    requirements:
      - id: R-1
        tracking: {reference: step, magnitude: 1, max_error: [1]}
    """
    run = speclint({"s.yaml": text})
    (f,) = run.report["findings"]
    assert f["message"] == (
        'requirements[0].tracking.max_error: expected a number ≥ 0 or percentage such as "0.25%", got a list'
    )


def test_valid_file_has_no_findings(speclint):
    text = """\
    speclint: 1
    title: valid
    requirements:
      - id: SYS-1
        origin: customer list, item 1
        text: The line runs.
        verification: {method: inspection}
    """
    run = speclint({"s.yaml": text})
    assert run.code == 0 and run.report["findings"] == []


def test_an_error_in_one_requirement_leaves_the_others_checked(speclint):
    text = """\
    speclint: 1
    requirements:
      - id: R-1
        loop: feed
        tracking: {reference: ramps, magnitude: 1, max_error: 1}
      - id: R-2
        origin: customer list, item 2
        loop: nowhere
    """
    run = speclint({"s.yaml": text})
    assert sorted(run.codes) == ["SL204", "SL311"], findings_of(run)
    statuses = {r["id"]: r["status"] for r in run.report["requirements"]}
    assert statuses["R-1"] == "invalid"


# -- the validator's form of the schema ---------------------------------------------------


def _errors(validator, doc):
    """What speclint's messages are made of: place, keyword, jsonschema's words, and the
    title and description of the schema the error was raised in."""
    return sorted(
        (
            list(e.absolute_path),
            e.validator,
            e.message,
            e.schema.get("title") if isinstance(e.schema, dict) else None,
            e.schema.get("description") if isinstance(e.schema, dict) else None,
        )
        for e in validator.iter_errors(doc)
    )


@settings(max_examples=80, deadline=None)
@given(data=st.data())
def test_the_inlined_schema_judges_as_the_schema_as_written(data):
    # speclint validates against its schema with every $ref replaced by its definition
    # (faster); jsonschema's Draft 2020-12 validator resolving the $refs of the schema as
    # written (with speclint's own `pattern` keyword) is the reference. Both must raise the
    # same errors on documents broken in random ways (the demo's documents with keys
    # dropped, added or retyped).
    from jsonschema import Draft202012Validator, validators

    from speclint.validate import _pattern, _validator, spec_schema

    name = data.draw(st.sampled_from(sorted(p.name for p in EXAMPLES.glob("*.yaml"))))
    doc = yaml.safe_load((EXAMPLES / name).read_text(encoding="utf-8"))
    for _ in range(data.draw(st.integers(1, 4))):
        slots = list(_slots(doc))
        if not slots:
            break
        parent, key = data.draw(st.sampled_from(slots))
        change = data.draw(st.sampled_from(["drop", "retype", "add"]))
        if change == "drop" and isinstance(parent, dict):
            del parent[key]
        elif change == "retype":
            parent[key] = data.draw(st.sampled_from([None, 7, -1.5, "x", [], {}, True]))
        elif isinstance(parent[key], dict):
            parent[key]["unknown_key"] = 1
    as_written = validators.extend(Draft202012Validator, {"pattern": _pattern})(spec_schema())
    assert _errors(_validator(), doc) == _errors(as_written, doc)


def _slots(node):
    """Every (container, key or index) in a parsed document."""
    if isinstance(node, dict):
        for key, value in node.items():
            yield node, key
            yield from _slots(value)
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield node, i
            yield from _slots(value)
