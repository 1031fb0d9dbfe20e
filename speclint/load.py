"""Load stage: spec file bytes to plain data, with the line and column of every node.

Why not ``yaml.safe_load``: it silently keeps the last of two equal keys (lost data),
expands aliases (an alias bomb walks into minutes and gigabytes), reads ``no``/``on`` as
booleans and ``2024-05-01`` as a date (YAML 1.1), turns ``0.1`` into a float, recurses
into deep nesting until Python's stack gives out, and forgets where each value stood.
So we take the parser's *events* and compose the data ourselves, iteratively:

* scalars are resolved by the YAML 1.2 core schema (only ``true``/``false`` are booleans,
  no dates), decimals become exact ``Fraction``s, and the source text of every plain
  scalar that did not become a string is kept so that the schema stage can give a field
  that must be a string its text as written (``1.10`` stays ``"1.10"``);
* a duplicate key, an alias, a non-standard tag, a non-finite or overlong number, a
  control character are findings at their exact place;
* size, node count and nesting depth are capped before they can cost anything.

The C parser (libyaml) is used when the text is plainly shallow; it is fast but brings the
whole process down on some 25,000 nested brackets, so text whose nesting a cheap scan
cannot bound goes to the pure-Python parser, which keeps its own stack on the heap, and the
composer's depth cap then reports it.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import yaml

from speclint.findings import Finding, Location
from speclint.rules import finding

MAX_FILE_BYTES = 1_048_576
MAX_DEPTH = 32
MAX_NODES = 100_000
MAX_NUMBER_DIGITS = 60
MAX_DECIMAL_EXPONENT = 400
# Every number other than 0 lies within 10^±MAX_MAGNITUDE: the span of the SI prefixes
# (quecto to quetta) holds any measurement a loop spec needs, and keeps each number, and
# products of a few, well inside double precision (about 10^±308) where figures are shown.
MAX_MAGNITUDE = 30
# Above this bound the cheap nesting scan cannot vouch for libyaml.
_C_PARSER_SCAN_BOUND = 200

Path = tuple[str | int, ...]
Mark = tuple[int, int]  # 0-based line and column, as PyYAML gives them


@dataclass(slots=True)
class Document:
    """A spec file as plain data, and where each value and key stood in the text."""

    path: str
    text: str
    data: Any
    value_marks: dict[Path, Mark] = field(default_factory=dict)
    key_marks: dict[Path, Mark] = field(default_factory=dict)
    # Source text of plain scalars that resolved to a number, boolean or null.
    plain_text: dict[Path, str] = field(default_factory=dict)
    # Paths where loading already reported a problem; later stages stay quiet there.
    flagged: set[Path] = field(default_factory=set)
    _lines: list[str] | None = field(default=None, repr=False, compare=False)

    def line(self, index: int) -> str:
        """The text of a line (0-based), "" past the end; the text is split once."""
        if self._lines is None:
            self._lines = self.text.splitlines()
        return self._lines[index] if 0 <= index < len(self._lines) else ""

    def location(self, path: Path, key: bool = False) -> Location:
        """The place of the value at `path` (or of its key), else of its nearest parent."""
        marks = self.key_marks if key else self.value_marks
        probe = path
        while probe not in marks and probe:
            probe = probe[:-1]
            marks = self.value_marks
        line0, col0 = marks.get(probe, (0, 0))
        return Location.from_mark(self.path, line0, col0)


@dataclass(slots=True)
class LoadResult:
    document: Document | None
    findings: list[Finding]


def read_spec(path: str, raw: bytes) -> LoadResult:
    """Turn the bytes of one spec file into a Document, or findings saying why not."""
    where = Location(path, 1, 1)
    if len(raw) > MAX_FILE_BYTES:
        msg = f"file is {len(raw):,} bytes; spec files are limited to {MAX_FILE_BYTES:,} bytes"
        return LoadResult(None, [finding("SL107", msg, where)])
    try:
        text = spec_text(raw)
    except UnicodeDecodeError as exc:
        return LoadResult(None, [_encoding_finding(path, raw, exc)])
    problem = _control_character(path, text)
    if problem:
        return LoadResult(None, [problem])
    if not text.strip():
        return LoadResult(None, [finding("SL104", "file is empty", where)])
    return _Composer(path, text).run()


def spec_text(raw: bytes) -> str:
    """The text of a spec file's bytes (UTF-8; raises UnicodeDecodeError otherwise)."""
    text = raw.decode("utf-8")
    # A leading byte-order mark is legal and means nothing.
    return text[1:] if text.startswith("\ufeff") else text


def _encoding_finding(path: str, raw: bytes, exc: UnicodeDecodeError) -> Finding:
    good = raw[: exc.start].decode("utf-8", errors="replace")
    line0, col0 = _position(good, len(good))
    bad = raw[exc.start : exc.start + 1].hex()
    return finding(
        "SL102",
        f"byte 0x{bad} at offset {exc.start} is not valid UTF-8",
        Location.from_mark(path, line0, col0),
        hint="save the file as UTF-8",
    )


# C0 controls other than tab, LF and CR; DEL; C1 controls; a byte-order mark after the start;
# the bidirectional embeddings, overrides and isolates, which make text display in an order
# other than the one it is read in (a reviewer would see one spec, speclint another).
_CONTROL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\ufeff\u202a-\u202e\u2066-\u2069]")
# What a double-quoted scalar may not produce through its escapes (\e, \x1b, \u202e, ...):
# the same, and CR, which rewrites a terminal line. A key holds no control at all.
_VALUE_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\ufeff\u202a-\u202e\u2066-\u2069]")
_KEY_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\ufeff\u2028\u2029\u202a-\u202e\u2066-\u2069]")


def _describe_control(char: str) -> str:
    if char == "\ufeff":
        return "a byte-order mark (U+FEFF)"
    if "\u202a" <= char <= "\u202e" or "\u2066" <= char <= "\u2069":
        return f"bidirectional control U+{ord(char):04X}"
    return f"control character U+{ord(char):04X}"


def _control_character(path: str, text: str) -> Finding | None:
    match = _CONTROL.search(text)
    if match is None:
        return None
    line0, col0 = _position(text, match.start())
    return finding(
        "SL113",
        f"{_describe_control(match.group())} in the text; it would hide inside a key or a value",
        Location.from_mark(path, line0, col0),
        hint="delete it; a byte-order mark is allowed only as the very first character",
    )


_BREAK = re.compile("\r\n|[\r\n\x85\u2028\u2029]")


def _position(text: str, index: int) -> Mark:
    """0-based line and column of `index`, counting line breaks the way PyYAML does."""
    line, start = 0, 0
    for match in _BREAK.finditer(text, 0, index):
        line, start = line + 1, match.end()
    return line, index - start


# A block indicator (sequence entry, explicit key, value) followed by a blank or the end of
# the line: each may open one more level on the same line ("- - - x", "? ? ? x", "-\t-\tx").
_INDICATOR = re.compile(r"[-?:](?=[ \t]|$)", re.MULTILINE)


def _nesting_bound(text: str) -> int:
    """A cheap upper bound on nesting depth: net open brackets plus block indicators."""
    depth = worst = 0
    for char in text:
        if char in "[{":
            depth += 1
            worst = max(worst, depth)
        elif char in "]}" and depth:
            depth -= 1
    block = 0
    for line in text.splitlines():
        stripped = line.lstrip(" ")
        # Indentation, plus every indicator on the line (it overcounts, which is safe).
        block = max(block, len(line) - len(stripped) + len(_INDICATOR.findall(stripped)))
    return worst + block


def _parser(text: str) -> Iterator[yaml.Event]:
    loader_cls: type[Any] = yaml.SafeLoader
    if _nesting_bound(text) <= _C_PARSER_SCAN_BOUND:
        loader_cls = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    loader = loader_cls(text)
    try:
        while loader.check_event():
            yield loader.get_event()
    finally:
        loader.dispose()


# YAML 1.2 core schema, plain scalars only.
_NULL = re.compile(r"(?:null|Null|NULL|~|)\Z")
_BOOL = {"true": True, "True": True, "TRUE": True, "false": False, "False": False, "FALSE": False}
_INT = re.compile(r"[-+]?[0-9]+\Z")
_OCT = re.compile(r"0o[0-7]+\Z")
_HEX = re.compile(r"0x[0-9a-fA-F]+\Z")
_FLOAT = re.compile(r"([-+]?)(\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE]([-+]?[0-9]+))?\Z")
_NONFINITE = re.compile(r"[-+]?\.(?:inf|Inf|INF)\Z|\.(?:nan|NaN|NAN)\Z")

_SMALLEST = Fraction(1, 10**MAX_MAGNITUDE)
_LARGEST = Fraction(10**MAX_MAGNITUDE)

_STANDARD_TAGS = {
    "tag:yaml.org,2002:str",
    "tag:yaml.org,2002:map",
    "tag:yaml.org,2002:seq",
}


class _Refused(Exception):
    """A problem after which the rest of the document cannot be trusted."""

    def __init__(self, found: Finding) -> None:
        self.found = found


@dataclass(slots=True)
class _Frame:
    container: dict[str, Any] | list[Any]
    path: Path
    key: str | None = None  # a mapping frame's pending key, between key and value
    key_mark: Mark | None = None
    skip_value: bool = False  # the pending key was a duplicate or unusable


class _Composer:
    def __init__(self, path: str, text: str) -> None:
        self.doc = Document(path, text, None)
        self.findings: list[Finding] = []
        self.nodes = 0

    def run(self) -> LoadResult:
        try:
            self._compose()
        except _Refused as refused:
            self.findings.append(refused.found)
            return LoadResult(None, self.findings)
        except yaml.YAMLError as exc:
            self.findings.append(self._syntax_finding(exc))
            return LoadResult(None, self.findings)
        except RecursionError:  # not expected: the depth cap comes first; kept as a backstop
            self.findings.append(self._at("SL108", "nesting is too deep to read", (0, 0)))
            return LoadResult(None, self.findings)
        data = self.doc.data
        if data is None:
            self.findings.append(self._at("SL104", "file holds no YAML content", (0, 0)))
            return LoadResult(None, self.findings)
        if not isinstance(data, dict):
            kind = "a list" if isinstance(data, list) else "a single value"
            mark = self.doc.value_marks.get((), (0, 0))
            msg = f"the top level is {kind}; a spec file is a mapping with keys such as speclint, loops, requirements"
            self.findings.append(self._at("SL110", msg, mark))
            return LoadResult(None, self.findings)
        return LoadResult(self.doc, self.findings)

    def _at(self, code: str, message: str, mark: Mark, hint: str | None = None) -> Finding:
        return finding(code, message, Location.from_mark(self.doc.path, *mark), hint)

    def _syntax_finding(self, exc: yaml.YAMLError) -> Finding:
        mark = getattr(exc, "problem_mark", None) or getattr(exc, "context_mark", None)
        problem = getattr(exc, "problem", None) or str(exc)
        context = getattr(exc, "context", None)
        message = f"{context}, {problem}" if context else str(problem)
        hint = None
        if "\t" in message or "tab" in message:
            hint = "YAML indents with spaces only; replace the tab"
        where = (mark.line, mark.column) if mark is not None else (0, 0)
        return self._at("SL103", message, where, hint)

    def _compose(self) -> None:
        stack: list[_Frame] = []
        documents = 0
        root_set = False
        for event in _parser(self.doc.text):
            start = event.start_mark
            mark = (start.line, start.column) if start is not None else (0, 0)
            if isinstance(event, yaml.DocumentStartEvent):
                documents += 1
                if documents > 1:
                    msg = "a second YAML document; a spec file holds exactly one"
                    raise _Refused(self._at("SL115", msg, mark, hint="split it into two files"))
                continue
            if isinstance(event, yaml.MappingEndEvent | yaml.SequenceEndEvent):
                stack.pop()
                continue
            if not isinstance(event, yaml.NodeEvent):
                continue
            self.nodes += 1
            if self.nodes > MAX_NODES:
                msg = f"more than {MAX_NODES:,} YAML nodes; spec files are limited to that"
                raise _Refused(self._at("SL114", msg, mark))
            frame = stack[-1] if stack else None
            if frame is not None and isinstance(frame.container, dict) and frame.key is None:
                self._take_key(frame, event, mark)
                continue
            path: Path
            if frame is None:
                path = ()
            elif isinstance(frame.container, dict):
                path = (*frame.path, frame.key or "")
            else:
                path = (*frame.path, len(frame.container))
            value, child = self._node_value(event, path, mark)
            if frame is None:
                if not root_set:
                    self.doc.data, root_set = value, True
            elif isinstance(frame.container, dict):
                assert frame.key is not None
                if not frame.skip_value:
                    frame.container[frame.key] = value
                    self.doc.value_marks[path] = mark
                frame.key, frame.skip_value = None, False
            else:
                frame.container.append(value)
                self.doc.value_marks[path] = mark
            if frame is None:
                self.doc.value_marks[()] = mark
            if child is not None:
                if len(stack) >= MAX_DEPTH:
                    msg = f"collections nest deeper than {MAX_DEPTH} levels"
                    raise _Refused(self._at("SL108", msg, mark))
                stack.append(child)

    def _node_value(
        self, event: yaml.NodeEvent, path: Path, mark: Mark
    ) -> tuple[Any, _Frame | None]:
        if isinstance(event, yaml.AliasEvent):
            self.doc.flagged.add(path)
            msg = f"alias *{event.anchor} refers to another node; spec files do not accept aliases"
            self.findings.append(self._at("SL106", msg, mark, hint="write the value out in full"))
            return None, None
        tag = getattr(event, "tag", None)
        if tag not in (None, "!") and tag not in _STANDARD_TAGS:
            self.doc.flagged.add(path)
            self.findings.append(self._at("SL109", f"tag {tag} is not accepted", mark))
            if isinstance(event, yaml.ScalarEvent):
                return event.value, None
        if isinstance(event, yaml.MappingStartEvent):
            mapping: dict[str, Any] = {}
            return mapping, _Frame(mapping, path)
        if isinstance(event, yaml.SequenceStartEvent):
            sequence: list[Any] = []
            return sequence, _Frame(sequence, path)
        assert isinstance(event, yaml.ScalarEvent)
        plain = not event.style and tag is None
        if not plain:
            if event.style == '"':
                self._escaped_control(event.value, _VALUE_CONTROL, path, mark)
            return event.value, None
        value = self._resolve_plain(event.value, path, mark)
        if not isinstance(value, str):
            self.doc.plain_text[path] = event.value
        return value, None

    def _resolve_plain(self, text: str, path: Path, mark: Mark) -> Any:
        if _NULL.match(text):
            return None
        if text in _BOOL:
            return _BOOL[text]
        if _NONFINITE.match(text):
            self.doc.flagged.add(path)
            msg = f"{text} is not a finite number; speclint takes only finite values"
            self.findings.append(self._at("SL112", msg, mark))
            return None
        base = 8 if _OCT.match(text) else 16 if _HEX.match(text) else 10 if _INT.match(text) else 0
        if base:
            if len(text) > MAX_NUMBER_DIGITS:
                return self._too_long(text, path, mark)
            number = int(text if base == 10 else text[2:], base)
            return (
                number
                if abs(number) <= _LARGEST
                else self._in_range(Fraction(number), text, path, mark)
            )
        match = _FLOAT.match(text)
        if match:
            sign, mantissa, exponent = match.groups()
            digits = len(mantissa) - ("." in mantissa)
            exp_digits = (exponent or "0").lstrip("+-")
            if digits > MAX_NUMBER_DIGITS or len(exp_digits) > 6:
                return self._too_long(text, path, mark)
            power = int(exponent or 0)
            if abs(power) > MAX_DECIMAL_EXPONENT:
                return self._too_long(text, path, mark)
            # Exact: Fraction reads the decimal text itself, so 0.1 is 1/10 and no float forms.
            value = Fraction(f"{sign}{mantissa.rstrip('.') or '0'}e{power}")
            return self._in_range(value, text, path, mark)
        return text

    def _in_range(self, value: Fraction, text: str, path: Path, mark: Mark) -> Fraction | None:
        size = abs(value)
        if size == 0 or _SMALLEST <= size <= _LARGEST:
            return value
        self.doc.flagged.add(path)
        msg = (
            f"number {text} lies outside 1e-{MAX_MAGNITUDE} to 1e{MAX_MAGNITUDE} in magnitude; "
            "speclint takes measurements within that range (or 0)"
        )
        self.findings.append(self._at("SL112", msg, mark, hint="check the unit and the exponent"))
        return None

    def _too_long(self, text: str, path: Path, mark: Mark) -> None:
        self.doc.flagged.add(path)
        shown = text if len(text) <= 24 else text[:20] + "…"
        msg = (
            f"number {shown} has more than {MAX_NUMBER_DIGITS} digits or an exponent beyond "
            f"±{MAX_DECIMAL_EXPONENT}; speclint takes measurements, not such numbers"
        )
        self.findings.append(self._at("SL112", msg, mark))

    def _escaped_control(self, text: str, refused: re.Pattern[str], path: Path, mark: Mark) -> bool:
        """Report a control character that an escape put into a quoted scalar."""
        match = refused.search(text)
        if match is None:
            return False
        self.doc.flagged.add(path)
        msg = (
            f"{_describe_control(match.group())} in a quoted {'key' if refused is _KEY_CONTROL else 'value'}; "
            "it would reach terminals and logs"
        )
        self.findings.append(self._at("SL113", msg, mark, hint="delete the escape sequence"))
        return True

    def _take_key(self, frame: _Frame, event: yaml.NodeEvent, mark: Mark) -> None:
        if not isinstance(event, yaml.ScalarEvent) or getattr(event, "tag", None) not in (
            None,
            "!",
            "tag:yaml.org,2002:str",
        ):
            what = (
                "an alias" if isinstance(event, yaml.AliasEvent) else "a collection or tagged value"
            )
            msg = f"a mapping key is {what}; keys must be plain strings"
            raise _Refused(self._at("SL111", msg, mark))
        key = event.value  # the text as written: `1.10:` and `no:` stay strings
        assert isinstance(frame.container, dict)
        frame.key, frame.key_mark = key, mark
        if self._escaped_control(key, _KEY_CONTROL, (*frame.path, key), mark):
            frame.skip_value = True
            return
        if key in frame.container:
            first = self.doc.key_marks.get((*frame.path, key), mark)
            msg = f'duplicate key "{key}"; the first stands on line {first[0] + 1}'
            hint = "YAML keeps only one of the two values; merge them or rename one"
            self.findings.append(self._at("SL105", msg, mark, hint))
            self.doc.flagged.add((*frame.path, key))
            frame.skip_value = True
            return
        self.doc.key_marks[(*frame.path, key)] = mark
