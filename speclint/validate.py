"""Validate stage: the spec's structure against its JSON Schema, in plain words, located.

Every violation becomes a finding at the YAML node it concerns (an unknown key at the key,
a missing key at its mapping, a wrong value at the value), not only the first one; for a
value that may take several forms (a number or a percentage) the message names the forms.
Before validating, a plain scalar that the YAML reader resolved to a number, boolean or
null but that sits where the schema wants a string gets its source text back, so
``id: 1.10`` means the string "1.10", never the number 1.1.
"""

from __future__ import annotations

import difflib
import json
import re
from collections.abc import Iterator
from fractions import Fraction
from functools import cache
from importlib.resources import files
from typing import Any

from speclint.findings import Finding
from speclint.load import Document, Path
from speclint.rules import finding

SPEC_SCHEMA = "speclint-spec.schema.json"
FORMAT_VERSION = 1


def schema_text(name: str = SPEC_SCHEMA) -> str:
    """The text of one of the schemas shipped with speclint."""
    return (files("speclint") / "schemas" / name).read_text(encoding="utf-8")


@cache
def spec_schema() -> dict[str, Any]:
    schema: dict[str, Any] = json.loads(schema_text())
    return schema


@cache
def _validator() -> Any:
    from jsonschema import Draft202012Validator, validators

    checker = validators.extend(Draft202012Validator, {"pattern": _pattern})
    return checker(_inlined(spec_schema()))


def _inlined(schema: Any, defs: dict[str, Any] | None = None) -> Any:
    """The schema with every `$ref` replaced by the definition it names.

    Validates the same documents with the same errors (ours has no recursive reference), in
    about 60% of the time: jsonschema's reference lookups were a third of validating. An
    error met through a `$ref` carries the definition as its schema, so the annotations
    beside a `$ref` (title, description), which raise no error, are dropped with it.
    """
    if defs is None:
        defs = schema.get("$defs", {})
    if isinstance(schema, list):
        return [_inlined(item, defs) for item in schema]
    if not isinstance(schema, dict):
        return schema
    out = {key: _inlined(value, defs) for key, value in schema.items() if key != "$defs"}
    if "$ref" in out:
        target = _inlined(defs[out.pop("$ref").rsplit("/", 1)[-1]], defs)
        others = {key: value for key, value in out.items() if key not in _ANNOTATIONS}
        out = {**others, **target} if others else target
    return out


_ANNOTATIONS = frozenset({"title", "description", "examples", "default", "$comment"})


@cache
def _regex(pattern: str) -> re.Pattern[str]:
    # JSON Schema patterns are ECMA-262, where a final `$` matches only at the end of the
    # text; Python's `$` also matches before a final line break, so an ID written as a
    # block scalar ("R-1\n") would pass. `\Z` is ECMA's `$`.
    if pattern.endswith("$") and not pattern.endswith("\\$"):
        pattern = pattern[:-1] + r"\Z"
    return re.compile(pattern)


def _pattern(validator: Any, pattern: str, instance: Any, schema: dict[str, Any]) -> Iterator[Any]:
    from jsonschema.exceptions import ValidationError

    if validator.is_type(instance, "string") and _regex(pattern).search(instance) is None:
        yield ValidationError(f"does not match {pattern!r}")


def restore_strings(doc: Document) -> None:
    """Give plain scalars back their source text where the schema wants a string (the change
    validation makes to the data; a run that has the validation cached still needs it)."""
    _restore_strings(spec_schema(), doc.data, (), doc)


def validate(doc: Document) -> list[Finding]:
    """Findings for every way `doc` departs from the spec schema (none when it conforms)."""
    restore_strings(doc)
    found: dict[tuple[Path, str], Finding] = {}
    already = set(doc.flagged)  # reported by the load stage; a second message would be noise
    for error in _validator().iter_errors(doc.data):
        path: Path = tuple(error.absolute_path)
        if any(path[:i] in already for i in range(len(path) + 1)):
            continue
        for result in _to_findings(error, path, doc):
            found.setdefault((path, result.message), result)
        # The build stage leaves out the loop or requirement this error sits in.
        doc.flagged.add(path)
    return sorted(found.values(), key=lambda f: f.sort_key())


def _resolve(schema: dict[str, Any]) -> dict[str, Any]:
    while "$ref" in schema:
        name = schema["$ref"].rsplit("/", 1)[-1]
        schema = spec_schema()["$defs"][name]
    return schema


def _restore_strings(schema: dict[str, Any], data: Any, path: Path, doc: Document) -> Any:
    schema = _resolve(schema)
    if schema.get("type") == "string" and not isinstance(data, str) and path in doc.plain_text:
        return doc.plain_text[path]
    if isinstance(data, dict):
        props = schema.get("properties", {})
        extra = schema.get("additionalProperties")
        for key, value in data.items():
            sub = props.get(key, extra if isinstance(extra, dict) else None)
            if sub is not None:
                data[key] = _restore_strings(sub, value, (*path, key), doc)
    elif isinstance(data, list):
        prefix = schema.get("prefixItems", [])
        items = schema.get("items")
        for i, value in enumerate(data):
            sub = prefix[i] if i < len(prefix) else items
            if isinstance(sub, dict):
                data[i] = _restore_strings(sub, value, (*path, i), doc)
    return data


def dotted(path: Path) -> str:
    """`requirements[2].tracking.reference`: the path as a reader types it."""
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "(top level)"


def show(value: Any, path: Path | None = None, doc: Document | None = None) -> str:
    """A value as it appeared in the file, quoted when it is a string."""
    if doc is not None and path is not None and path in doc.plain_text:
        return doc.plain_text[path]
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, bool):
        return "true" if value else "false"
    if value is None:
        return "null"
    if isinstance(value, Fraction):
        return str(value.numerator) if value.denominator == 1 else str(float(value))
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    return str(value)


_TYPE_WORDS = {
    "string": "a string",
    "number": "a number",
    "integer": "a whole number",
    "object": "a mapping",
    "array": "a list",
    "boolean": "true or false",
    "null": "nothing",
}


def _kind_of(value: Any) -> str:
    if isinstance(value, str):
        return f"the string {json.dumps(value, ensure_ascii=False)}"
    if isinstance(value, bool):
        return f"the boolean {'true' if value else 'false'}"
    if value is None:
        return "nothing (null)"
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    return f"the number {show(value)}"


def _form_of(branch: dict[str, Any]) -> str:
    resolved = _resolve(branch)
    if "pattern" in resolved and resolved.get("examples"):
        return (
            f"{resolved.get('title', 'text').lower()} such as {json.dumps(resolved['examples'][0])}"
        )
    kind = resolved.get("type")
    words = _TYPE_WORDS.get(kind, "a value") if isinstance(kind, str) else "a value"
    if "minimum" in resolved:
        words += f" ≥ {resolved['minimum']}"
    return words


def _to_findings(error: Any, path: Path, doc: Document) -> list[Finding]:
    if error.validator == "additionalProperties":
        return _unknown_keys(error, path, doc)
    if error.validator in ("anyOf", "oneOf"):
        branch = _branch_of_same_kind(error)
        if branch is not None:
            # The value has the shape of one alternative (say, a mapping): what is wrong is
            # inside that alternative, so say that rather than list the alternatives.
            out: list[Finding] = []
            for sub in error.context:
                if sub.relative_schema_path[0] == branch:
                    out.extend(_to_findings(sub, tuple(sub.absolute_path), doc))
            return out
    return [_to_finding(error, path, doc)]


_PY_KIND: dict[type, str] = {dict: "object", list: "array", str: "string"}


def _branch_of_same_kind(error: Any) -> int | None:
    kind = _PY_KIND.get(type(error.instance))
    if kind is None:
        return None
    matching = [i for i, b in enumerate(error.validator_value) if _resolve(b).get("type") == kind]
    return matching[0] if len(matching) == 1 else None


def _unknown_keys(error: Any, path: Path, doc: Document) -> list[Finding]:
    known = sorted(_resolve(error.schema).get("properties", {}))
    out = []
    for key in sorted(set(error.instance) - set(known)):
        close = difflib.get_close_matches(key, known, n=1)
        hint = f'did you mean "{close[0]}"?' if close else f"known keys: {', '.join(known)}"
        location = doc.location((*path, key), key=True)
        out.append(finding("SL201", f'{dotted(path)}: unknown key "{key}"', location, hint))
    return out


def _to_finding(error: Any, path: Path, doc: Document) -> Finding:
    where = dotted(path)
    keyword = error.validator
    schema = error.schema if isinstance(error.schema, dict) else {}
    value = error.instance
    if "propertyNames" in error.schema_path:
        key_path = (*path, value)
        name = schema.get("title", "name").lower()
        msg = f'{where}: "{value}" is not a valid {name}: {schema.get("description", "")}'.rstrip(
            ": "
        )
        return finding("SL204", msg, doc.location(key_path, key=True))
    if keyword == "required":
        missing = error.message.split("'")[1] if "'" in error.message else "?"
        # At the mapping's own key (`feed:`) when it has one: a block mapping's first mark
        # is its first key, which is not where the missing key belongs.
        place = doc.location(path, key=True) if path in doc.key_marks else doc.location(path)
        return finding("SL202", f'{where}: missing required key "{missing}"', place)
    if keyword == "const" and path == ("speclint",):
        msg = f"format version {show(value, path, doc)} is not one this speclint reads (it reads {FORMAT_VERSION})"
        return finding("SL205", msg, doc.location(path))
    if keyword == "type":
        want = schema.get("type")
        words = (
            _TYPE_WORDS.get(want, str(want))
            if isinstance(want, str)
            else " or ".join(_TYPE_WORDS[w] for w in want or ())
        )
        msg = f"{where}: expected {words}, got {_kind_of(value)}"
        hint = "quote it" if want == "string" else None
        return finding("SL203", msg, doc.location(path), hint)
    if keyword == "enum":
        choices = ", ".join(str(c) for c in error.validator_value)
        return finding(
            "SL204",
            f"{where}: {show(value, path, doc)} is not one of {choices}",
            doc.location(path),
        )
    if keyword in ("anyOf", "oneOf"):
        forms = " or ".join(_form_of(b) for b in error.validator_value)
        return finding(
            "SL204", f"{where}: expected {forms}, got {_kind_of(value)}", doc.location(path)
        )
    if keyword in ("maxItems", "maxProperties") and "prefixItems" not in schema:
        # At the first entry over the limit, where the reader has to start cutting.
        limit = error.validator_value
        if isinstance(value, dict):
            place = doc.location((*path, list(value)[limit]), key=True)
        else:
            place = doc.location((*path, limit))
        what = "entries" if isinstance(value, dict) else "items"
        msg = f"{where}: has {len(value):,} {what}; at most {limit:,} are allowed in one file"
        return finding("SL204", msg, place, hint="split it into several spec files")
    return finding(
        "SL204",
        f"{where}: {_plain_words(keyword, error, value, schema, path, doc)}",
        doc.location(path),
    )


def _plain_words(
    keyword: str, error: Any, value: Any, schema: dict[str, Any], path: Path, doc: Document
) -> str:
    limit = error.validator_value
    shown = show(value, path, doc)
    if keyword == "minimum":
        return f"must be at least {limit}, got {shown}"
    if keyword == "exclusiveMinimum":
        return f"must be greater than {limit}, got {shown}"
    if keyword == "maximum":
        return f"must be at most {limit}, got {shown}"
    if keyword == "exclusiveMaximum":
        return f"must be less than {limit}, got {shown}"
    if keyword == "pattern":
        title = schema.get("title", "value").lower()
        return f"{shown} is not a valid {title}: {schema.get('description', 'see the schema')}"
    if keyword == "minLength":
        return "must not be empty" if limit == 1 else f"must be at least {limit} characters long"
    if keyword == "maxLength":
        return f"is {len(value)} characters long; the limit is {limit}"
    if keyword in ("minItems", "maxItems"):
        if "prefixItems" in schema:
            names = " and ".join(p.get("title", "?").lower() for p in schema["prefixItems"])
            return f"needs exactly {len(schema['prefixItems'])} values ({names}), got {len(value)}"
        return f"has {len(value)} items; {'at least' if keyword == 'minItems' else 'at most'} {limit} allowed"
    if keyword == "minProperties":
        return f"needs at least one of {', '.join(sorted(schema.get('properties', {})))}"
    if keyword == "uniqueItems":
        seen: set[str] = set()
        dup = next((v for v in value if (str(v) in seen) or seen.add(str(v))), "?")  # type: ignore[func-returns-value]
        return f"lists {show(dup)} more than once"
    if keyword == "const":
        return f"must be {error.validator_value}, got {shown}"
    # jsonschema's own words quote the whole value, which may be a megabyte of YAML.
    text = str(error.message)
    return text if len(text) <= 200 else text[:200] + "…"
